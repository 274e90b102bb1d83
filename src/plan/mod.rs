//! The plan: the one result every renderer reads.
//!
//! The scheduler fills a [`Plan`]; renderers (text, JSON, CSV, iCalendar,
//! HTML, Markdown) only format it and never compute schedule facts of their
//! own. Field order is the JSON key order; `docs/plan-json.md` documents it.
//!
//! It also holds [`PlanDiff`], what moved since a previous plan, which a
//! re-plan carries; `crate::diff` computes it from two plans.

pub use crate::advice::Advice;
pub use crate::fit::LevelRule;
pub use crate::portfolio::{BlackoutKind, Sharing};
pub use crate::reason::{Reason, Said};
use crate::share::Share;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

mod experiment;
mod replanned;

pub use experiment::*;
pub use replanned::*;

/// The planning window, both ends inclusive.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct PlanWindow {
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
    /// The weekday tests start on when they start on a weekly grid
    /// (`planning.start_weekday`); reports begin their weeks on it. Absent
    /// with a daily grid and in older plans: weeks then begin on `start`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub week_start: Option<chrono::Weekday>,
}

/// How the optimiser did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SolverSummary {
    /// The LP/MILP backend, e.g. `microlp` or `highs`.
    pub backend: String,
    /// Whether the plan is proved optimal, feasible, or the greedy fallback.
    pub status: SolverStatus,
    /// Wall-clock seconds spent planning.
    pub seconds: f64,
    /// Objective value of the plan.
    pub value: f64,
    /// Best upper bound on any plan's value (the LP relaxation or better).
    pub bound: f64,
    /// (bound - value) / bound; 0 when proved optimal.
    pub gap: f64,
    /// Whether the time limit stopped the search before its work budget
    /// was spent: then, and only then, the plan may depend on the
    /// machine's speed and load. Absent in older plans (read as `false`).
    #[serde(default)]
    pub cut_short: bool,
}

/// How far the optimiser got; in JSON `optimal`, `feasible` or `greedy`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SolverStatus {
    /// Proved optimal.
    Optimal,
    /// A verified plan, the gap to the bound still open.
    Feasible,
    /// The greedy fallback: the solver gave no plan, or none that verified.
    Greedy,
}

impl SolverStatus {
    /// The name in JSON.
    pub fn name(self) -> &'static str {
        match self {
            SolverStatus::Optimal => "optimal",
            SolverStatus::Feasible => "feasible",
            SolverStatus::Greedy => "greedy",
        }
    }
}

/// Whether an experiment got a place in the calendar.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Has a place in the calendar.
    Scheduled,
    /// Left out; `reason` says why (the default, before a place is found).
    #[default]
    Unscheduled,
    /// Re-plans only: started before today and still collecting units.
    Running,
    /// Re-plans only: finished before today; it no longer holds traffic.
    Finished,
    /// Re-plans only: stopped for good; it no longer holds traffic.
    Cancelled,
}

impl Status {
    /// The name in JSON and CSV.
    pub fn name(self) -> &'static str {
        match self {
            Status::Scheduled => "scheduled",
            Status::Unscheduled => "unscheduled",
            Status::Running => "running",
            Status::Finished => "finished",
            Status::Cancelled => "cancelled",
        }
    }

    /// Whether it holds a run in this plan's calendar (scheduled or running).
    pub fn in_calendar(self) -> bool {
        matches!(self, Status::Scheduled | Status::Running)
    }
}

impl PoolPlan {
    /// The most its tests' shares may add up to on a day (see
    /// [`crate::portfolio::capacity`]).
    pub fn capacity(&self) -> Share {
        crate::portfolio::capacity(self.sharing, self.holdout)
    }

    /// Whether `day` holds more than the pool allows: more tests than
    /// `max_concurrent`, or on a split pool shares beyond its capacity.
    /// A plan never does; a renderer marks it should one arrive.
    pub fn over(&self, day: &PoolDay) -> bool {
        crate::portfolio::beyond_room(
            self.sharing,
            self.holdout,
            self.max_concurrent,
            day.share_used,
            day.running,
        )
    }
}

/// One day of one pool.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolDay {
    /// The day.
    pub date: NaiveDate,
    /// Forecast eligible units.
    pub forecast: f64,
    /// Sum of the shares of the tests running (may exceed 1 on overlap pools).
    pub share_used: Share,
    /// Number of tests running.
    pub running: u32,
}

/// One pool over the window.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolPlan {
    /// The pool's id.
    pub id: String,
    /// Its label.
    pub label: String,
    /// `split` or `overlap` in JSON.
    pub sharing: Sharing,
    /// Most tests running at once.
    pub max_concurrent: u32,
    /// The fraction of its units no test may receive, in [0, 1): a split
    /// pool's shares add up to at most `1 - holdout` on a day; an overlap
    /// pool's tests get `1 - holdout` of the units under their share.
    #[serde(default)]
    pub holdout: f64,
    /// Every day of the window, in order.
    pub days: Vec<PoolDay>,
    /// Pools with a `history` (or a re-plan's traffic): its last
    /// [`HISTORY_SHOWN`] days, in order, for the report's forecast chart;
    /// empty (and left out of JSON) otherwise.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub history: Vec<HistoryDay>,
    /// Pools with a `history`: the backtest's four-week forecasts from
    /// earlier origins that lie within `history`, four weeks apart (each
    /// total's forecast, P10-P90 range and actual), for the chart; empty
    /// (and left out of JSON) otherwise.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub backtest: Vec<crate::fit::backtest::OriginRange>,
}

/// How many of a pool's last history days a plan carries.
pub const HISTORY_SHOWN: usize = 84;

/// One day of a pool's history.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HistoryDay {
    /// The day.
    pub date: NaiveDate,
    /// Its units.
    pub units: f64,
}

/// A blackout span, as the renderers show it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanBlackout {
    /// First day.
    pub from: NaiveDate,
    /// Last day.
    pub to: NaiveDate,
    /// `no_starts` or `no_running` in JSON.
    pub kind: BlackoutKind,
    /// Why, in the portfolio's words.
    pub note: String,
    /// Pool ids; empty for every pool.
    pub pools: Vec<String>,
}

/// A pool's actual traffic so far against its forecast (re-plans).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrafficSoFar {
    /// The pool's id.
    pub pool: String,
    /// The first day of the actual traffic.
    pub from: NaiveDate,
    /// Its last day.
    pub to: NaiveDate,
    /// Units the pool had over those days.
    pub units: f64,
    /// Units the portfolio's forecast gave those days.
    pub forecast: f64,
    /// `units / forecast − 1`: −0.12 ran 12% below the forecast; 0 when
    /// the forecast gave no units.
    pub difference: f64,
    /// How the re-plan's forecast of the pool was made from it.
    pub refit: Refit,
    /// `units / forecast − 1` over the traffic's last 14 days (all of
    /// them when fewer): the news a whole-quarter average hides.
    #[serde(default)]
    pub last_14_days: f64,
    /// A lasting change of the pool's level found in its recent days
    /// (history and traffic); `null` when none.
    #[serde(default)]
    pub shift: Option<TrafficShift>,
    /// Which days the new level was taken from.
    #[serde(default = "recent_rule")]
    pub level: LevelRule,
}

fn recent_rule() -> LevelRule {
    LevelRule::Recent
}

/// A lasting change of a pool's level.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TrafficShift {
    /// The first day at the new level.
    pub date: NaiveDate,
    /// The relative change: −0.3 is a 30% drop.
    pub change: f64,
}

/// How a re-plan turned a pool's actual traffic into its forecast.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Refit {
    /// Fitted again from the pool's history followed by the traffic.
    HistoryAndTraffic,
    /// Fitted from the traffic alone (no history joins it; four weeks or more).
    Traffic,
    /// Too short to fit: the forecast's level scaled by actual / forecast.
    Level,
}

/// The whole plan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// The portfolio's name.
    pub portfolio: String,
    /// The portfolio's `id` (its file's stem unless the file sets one):
    /// with the experiment ids, the key of every calendar event's UID.
    /// Absent in older plans (read as empty).
    #[serde(default)]
    pub id: String,
    /// The planning window.
    pub window: PlanWindow,
    /// How the optimiser did.
    pub solver: SolverSummary,
    /// Value of the greedy baseline on the same portfolio.
    pub greedy_value: f64,
    /// In portfolio order.
    pub experiments: Vec<PlannedExperiment>,
    /// In portfolio order.
    pub pools: Vec<PoolPlan>,
    /// In portfolio order.
    pub blackouts: Vec<PlanBlackout>,
    /// The date the plan was made for (`--today`, or the window's start);
    /// renderers draw it as today's line.
    pub today: NaiveDate,
    /// Re-plans only: each running test's outlook.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub running: Vec<RunningOutlook>,
    /// Re-plans whose progress file gives pools' actual traffic: how far
    /// each ran from its forecast, and how its forecast was refitted.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub traffic: Vec<TrafficSoFar>,
    /// Re-plans with `--previous` only: the tests the previous plan ended
    /// before today that the progress file does not mention, so they are
    /// planned again as if they had never run (ids, in the previous
    /// plan's order).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub missing_progress: Vec<String>,
    /// Re-plans with `--previous` only: what moved since the previous plan.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub changes: Option<PlanDiff>,
    /// Re-plans with `--previous` only: the versions of the calendar
    /// events that earlier plans published, so that a re-imported
    /// calendar updates them (`crate::diff::calendar_history`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calendar: Option<CalendarHistory>,
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A plan written before `eligible`, `sample_size_given` and
    /// `holdout` existed reads as every unit admitted, sized here, and no
    /// holdout.
    #[test]
    fn an_older_plan_reads_with_every_unit_eligible_and_no_holdout() {
        let mut v: serde_json::Value =
            serde_json::from_str(include_str!("../../tests/fixtures/plan-small.json")).unwrap();
        for e in v["experiments"].as_array_mut().unwrap() {
            let e = e.as_object_mut().unwrap();
            e.remove("eligible");
            e.remove("sample_size_given");
        }
        for p in v["pools"].as_array_mut().unwrap() {
            p.as_object_mut().unwrap().remove("holdout");
        }
        let plan: Plan = serde_json::from_value(v).unwrap();
        assert!(plan.experiments.iter().all(|e| e.eligible == 1.0));
        assert!(plan.experiments.iter().all(|e| !e.sample_size_given));
        assert!(plan.pools.iter().all(|p| p.holdout == 0.0));
    }
}
