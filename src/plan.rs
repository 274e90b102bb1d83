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
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Status {
    /// Has a place in the calendar.
    Scheduled,
    /// Left out; `reason` says why.
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

/// One experiment's outcome.
///
/// In JSON the run is not nested: its six facts are keys of the experiment
/// (`start`, `end`, `result_date`, `share`, `days` before `units_needed`,
/// `units_expected` after it), each `null` when there is no run. A private
/// wire struct keeps that layout (`#[serde(flatten)]` could not put
/// `units_needed` between them). Reading a plan refuses half a run, and a
/// run that disagrees with the status.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(into = "ExperimentJson", try_from = "ExperimentJson")]
pub struct PlannedExperiment {
    /// The experiment's id.
    pub id: String,
    /// Its title.
    pub title: String,
    /// Who owns it.
    pub owner: String,
    /// The ids of every pool it runs on (one for most tests), in the
    /// portfolio's order for the test: the same dates and share on each.
    pub pools: Vec<String>,
    /// Its weight in the objective.
    pub priority: f64,
    /// Whether it got a place in the calendar.
    pub status: Status,
    /// Its place in the calendar: present exactly when the status is
    /// scheduled or running ([`Status::in_calendar`]).
    pub run: Option<Run>,
    /// Its run's ramp: each step's dates and share, in order, before the
    /// run holds its share; empty without a ramp or a run.
    pub ramp: Vec<RampDays>,
    /// Units over all arms the test needs.
    pub units_needed: u64,
    /// Whether the portfolio gave its control arm's units (`sample_size`)
    /// rather than sizing it from a baseline and an MDE.
    pub sample_size_given: bool,
    /// The fraction of its pool's units its targeting admits, in (0, 1];
    /// it still holds its whole share of a split pool.
    pub eligible: f64,
    /// Why it is not scheduled, as facts ([`Reason`]); in JSON the
    /// string of `render::words::reason`.
    pub reason: Option<Said<Reason>>,
    /// Re-plans only: what a finished or cancelled test ran, as the
    /// progress file gives it; `None` for every other test, and for a
    /// finished or cancelled test whose `started` the file does not give.
    pub ran: Option<Ran>,
    /// Scheduled tests on a pool with an uncertain forecast: when the
    /// result may come, over simulated traffic; `None` otherwise.
    pub result_range: Option<ResultRange>,
    /// The statistics behind its size (see [`TestStatistics`]); `None`
    /// only in plans written before they were recorded.
    pub statistics: Option<TestStatistics>,
    /// Tests with interim looks that hold a run: each look's date and the
    /// earliest, expected and latest result dates; `None` otherwise.
    pub looks: Option<LookDates>,
    /// Unscheduled tests only: what the traffic left by the window's end
    /// could detect at its maximum share; `None` otherwise, and when no
    /// day is left.
    pub detectable: Option<Detectable>,
}

/// The statistics behind a test's size, from its first primary metric,
/// as every format shows them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TestStatistics {
    /// The primary metric's name (`primary` for the short form).
    pub metric: String,
    /// `rate` or `mean`.
    pub kind: String,
    /// The control's rate or mean.
    pub baseline: f64,
    /// A mean's standard deviation per unit; `None` for a rate.
    pub sd: Option<f64>,
    /// The MDE as a relative change (0.04 = 4%); `None` for an absolute
    /// MDE of a zero baseline.
    pub mde: Option<f64>,
    /// The MDE in the metric's own units.
    pub mde_abs: f64,
    /// The primary's alpha (its share of the test's alpha when several
    /// primaries split it), before the multi-arm correction.
    pub alpha: f64,
    /// The planned power.
    pub power: f64,
    /// `one` or `two`.
    pub sides: crate::sizing::Sides,
    /// Control plus treatments.
    pub arms: u32,
    /// Treatment units per control unit.
    pub ratio: f64,
    /// With more than two arms: the alpha of each treatment-versus-control
    /// comparison after the multi-arm correction, and the correction
    /// (`bonferroni`, `sidak` or `none`); left out of JSON otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub per_comparison: Option<PerComparison>,
    /// Planned looks; 1 for a single read at the end.
    pub looks: u32,
    /// The boundary of a test with looks; `None` for one look.
    pub boundary: Option<crate::sizing::sequential::Boundary>,
    /// The metric whose need sizes the test.
    pub driver: String,
    /// Each secondary metric with the effect it can detect at the test's
    /// sample, in file order.
    pub secondary: Vec<SecondaryEffect>,
}

/// A several-armed test's alpha per treatment-versus-control comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PerComparison {
    /// The corrected alpha of one comparison.
    pub alpha: f64,
    /// The correction's name.
    pub correction: String,
}

/// A secondary metric and the effect the test's sample can detect on it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SecondaryEffect {
    /// The metric's name.
    pub name: String,
    /// Detectable relative change; `None` for a zero baseline.
    pub mde: Option<f64>,
    /// Detectable change in the metric's units; `None` when the sample is
    /// too small for any at the planned power.
    pub mde_abs: Option<f64>,
}

/// The dates of a test read at planned interim looks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LookDates {
    /// Every look in order, the last at the run's end.
    pub dates: Vec<LookDate>,
    /// The earliest possible result: the first look's date.
    pub earliest: NaiveDate,
    /// The result date expected under the planned effect: the day after
    /// the expected sample is collected.
    pub expected: NaiveDate,
    /// The latest result date: the run's `result_date`.
    pub latest: NaiveDate,
    /// The interim looks that cannot stop the test early: each falls on
    /// the day of a later look or of the result, so it has no read of its
    /// own (a run too short for the looks planned). Empty when every look
    /// has a day of its own.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub idle: Vec<u32>,
    /// With idle looks, the sample all the looks add over a single read
    /// at the end, as a fraction (the group-sequential inflation factor
    /// less 1): what fewer looks would save.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub added_sample: Option<f64>,
}

impl LookDates {
    /// The interim looks that can stop the test early: every look but the
    /// last, which is the result, and but those with no day of their own
    /// ([`LookDates::idle`]).
    pub fn interim(&self) -> impl Iterator<Item = &LookDate> {
        let last = self.dates.len().saturating_sub(1);
        self.dates[..last]
            .iter()
            .filter(|l| !self.idle.contains(&l.look))
    }

    /// Every interim look of the design, those with no day of their own
    /// included: every look but the last.
    pub fn all_interim(&self) -> &[LookDate] {
        &self.dates[..self.dates.len().saturating_sub(1)]
    }

    /// The reads the run holds on days of their own, the result included.
    pub fn held(&self) -> usize {
        self.dates.len() - self.idle.len()
    }
}

/// One planned look.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LookDate {
    /// 1 to the number of looks.
    pub look: u32,
    /// The information fraction it reads at (k / K).
    pub information: f64,
    /// The day its data is in and it can be read: the day after the run
    /// has collected that fraction of its maximum sample.
    pub date: NaiveDate,
    /// Under the planned effect, the probability that the test stops for
    /// efficacy at this look.
    pub stop_probability: f64,
}

/// What an unscheduled test could detect with the traffic left.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Detectable {
    /// The first day it could run.
    pub from: NaiveDate,
    /// The last day of data: its deadline or the window's end.
    pub to: NaiveDate,
    /// The share it assumes: its largest share level.
    pub share: Share,
    /// Units over all arms the forecast gives it from `from` to `to`.
    pub units: f64,
    /// The detectable relative effect; `None` for a zero baseline, or too
    /// few units for any.
    pub mde: Option<f64>,
    /// The detectable effect in the metric's units; `None` when too few
    /// units for any at the planned power.
    pub mde_abs: Option<f64>,
    /// With `planning.confidence`: `units` are what the traffic delivers
    /// on that share of its simulated paths (the plan's margin taken off),
    /// not the expected forecast.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub confidence: Option<f64>,
}

/// When a scheduled test's result may come, over simulated traffic paths
/// (see [`crate::forecast::uncertainty`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResultRange {
    /// The result date (the day after the last day of data) by which 10%
    /// of paths have it; `None` when that falls past the simulated span.
    pub p10: Option<NaiveDate>,
    /// The median result date.
    pub p50: Option<NaiveDate>,
    /// The result date by which 90% of paths have it.
    pub p90: Option<NaiveDate>,
    /// The share of paths whose run ends by its deadline, or by the
    /// window's last day without one.
    pub on_time: f64,
    /// With `planning.confidence`: the share of paths whose run ends by
    /// its planned end, so its result comes by its planned result date.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub on_plan: Option<f64>,
}

/// What a finished or cancelled test ran before today: kept in a re-plan
/// so every format can still show it, marked by its status.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Ran {
    /// Its first day of data.
    pub start: NaiveDate,
    /// Its last day of data.
    pub end: NaiveDate,
    /// The share of its pool it ran at, when the progress file gives it.
    pub share: Option<Share>,
    /// A finished test that an interim look stopped early: that look,
    /// from 1 (`stopped_at_look` in the progress file).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stopped_at_look: Option<u32>,
    /// The looks its design planned, the final read included, when it
    /// has interim looks; with `stopped_at_look` it says "look 2 of 3".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub looks: Option<u32>,
    /// What a finished test found, when the progress file says.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub outcome: Option<Outcome>,
    /// The sample-ratio check of its per-arm counts against its design's
    /// split, when the progress file gives `units_per_arm`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_ratio: Option<crate::sizing::srm::SampleRatio>,
    /// Whether that check fell below `planning.srm_alpha`.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub sample_ratio_mismatch: bool,
}

impl Ran {
    /// A run from `start` to `end` at `share`, with nothing more known.
    pub fn new(start: NaiveDate, end: NaiveDate, share: Option<Share>) -> Ran {
        Ran {
            start,
            end,
            share,
            stopped_at_look: None,
            looks: None,
            outcome: None,
            sample_ratio: None,
            sample_ratio_mismatch: false,
        }
    }

    /// The day its result came: the day after its last day of data.
    pub fn result_date(&self) -> NaiveDate {
        self.end.succ_opt().unwrap_or(self.end)
    }
}

/// What a finished test found, in the trade's plain words.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// The treatment did better than control on the primary metric.
    Better,
    /// The treatment did worse than control on the primary metric.
    Worse,
    /// No difference the test could tell.
    NoDifference,
    /// A guardrail showed harm.
    Harm,
    /// The data settled nothing.
    Inconclusive,
}

impl Outcome {
    /// Every outcome, in the order the docs list them.
    pub const ALL: [Outcome; 5] = [
        Outcome::Better,
        Outcome::Worse,
        Outcome::NoDifference,
        Outcome::Harm,
        Outcome::Inconclusive,
    ];

    /// The name in the progress file and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Better => "better",
            Outcome::Worse => "worse",
            Outcome::NoDifference => "no_difference",
            Outcome::Harm => "harm",
            Outcome::Inconclusive => "inconclusive",
        }
    }
}

/// The facts of one run in the calendar, as the scheduler fixed them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Run {
    /// First day of the run.
    pub start: NaiveDate,
    /// Last day of data; the result is due the day after.
    pub end: NaiveDate,
    /// The day the result is due: the day after `end`.
    pub result_date: NaiveDate,
    /// Constant share of the pool, in (0, 1].
    pub share: Share,
    /// Days from start to end inclusive.
    pub days: u32,
    /// Units the forecast delivers to it from start to end, summed over
    /// its pools (ramp days only when they count).
    pub units_expected: f64,
}

/// One ramp step of a run: from `start` to `end` it holds `share` of each
/// of its pools.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RampDays {
    /// The step's first day.
    pub start: NaiveDate,
    /// The step's last day.
    pub end: NaiveDate,
    /// Its share of each pool.
    pub share: Share,
}

impl PlannedExperiment {
    /// Its run's share on `date`: a ramp step's share on the step's days,
    /// else the run's share (callers check the run's span); `None`
    /// without a run.
    pub fn share_on(&self, date: NaiveDate) -> Option<Share> {
        let r = self.run?;
        Some(
            self.ramp
                .iter()
                .find(|s| s.start <= date && date <= s.end)
                .map_or(r.share, |s| s.share),
        )
    }

    /// A finished or cancelled test's share on `date` as it ran: a ramp
    /// step's share on the step's days, else the share the progress file
    /// gives; `None` outside what it ran or when the share is unknown.
    pub fn ran_share_on(&self, date: NaiveDate) -> Option<Share> {
        let r = self
            .ran
            .as_ref()
            .filter(|r| r.start <= date && date <= r.end)?;
        self.ramp
            .iter()
            .find(|s| s.start <= date && date <= s.end)
            .map(|s| s.share)
            .or(r.share)
    }

    /// The first day its run holds its planned share (its start without a
    /// ramp); `None` without a run.
    pub fn full_from(&self) -> Option<NaiveDate> {
        let r = self.run?;
        Some(
            self.ramp
                .last()
                .map_or(r.start, |s| s.end + chrono::Duration::days(1)),
        )
    }
}

/// [`PlannedExperiment`] as it stands in JSON: the run's facts one key
/// each, in the documented key order.
#[derive(Serialize, Deserialize)]
struct ExperimentJson {
    id: String,
    title: String,
    owner: String,
    /// Plans written before multi-pool tests name one `pool`; read only.
    #[serde(default, skip_serializing)]
    pool: Option<String>,
    #[serde(default)]
    pools: Vec<String>,
    priority: f64,
    status: Status,
    start: Option<NaiveDate>,
    end: Option<NaiveDate>,
    result_date: Option<NaiveDate>,
    share: Option<Share>,
    #[serde(default)]
    ramp: Vec<RampDays>,
    days: Option<u32>,
    units_needed: u64,
    units_expected: Option<f64>,
    #[serde(default)]
    sample_size_given: bool,
    #[serde(default = "whole_pool")]
    eligible: f64,
    reason: Option<Said<Reason>>,
    #[serde(default)]
    ran: Option<Ran>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    result_range: Option<ResultRange>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    statistics: Option<TestStatistics>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    looks: Option<LookDates>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    detectable: Option<Detectable>,
}

/// What a plan without `eligible` means: every unit is admitted.
fn whole_pool() -> f64 {
    1.0
}

impl From<PlannedExperiment> for ExperimentJson {
    fn from(e: PlannedExperiment) -> ExperimentJson {
        let r = e.run;
        ExperimentJson {
            id: e.id,
            title: e.title,
            owner: e.owner,
            pool: None,
            pools: e.pools,
            priority: e.priority,
            status: e.status,
            start: r.map(|r| r.start),
            end: r.map(|r| r.end),
            result_date: r.map(|r| r.result_date),
            share: r.map(|r| r.share),
            ramp: e.ramp,
            days: r.map(|r| r.days),
            units_needed: e.units_needed,
            units_expected: r.map(|r| r.units_expected),
            sample_size_given: e.sample_size_given,
            eligible: e.eligible,
            reason: e.reason,
            ran: e.ran,
            result_range: e.result_range,
            statistics: e.statistics,
            looks: e.looks,
            detectable: e.detectable,
        }
    }
}

impl TryFrom<ExperimentJson> for PlannedExperiment {
    type Error = String;

    fn try_from(j: ExperimentJson) -> Result<PlannedExperiment, String> {
        let facts = [
            ("start", j.start.is_some()),
            ("end", j.end.is_some()),
            ("result_date", j.result_date.is_some()),
            ("share", j.share.is_some()),
            ("days", j.days.is_some()),
            ("units_expected", j.units_expected.is_some()),
        ];
        let run = match (
            j.start,
            j.end,
            j.result_date,
            j.share,
            j.days,
            j.units_expected,
        ) {
            (
                Some(start),
                Some(end),
                Some(result_date),
                Some(share),
                Some(days),
                Some(units_expected),
            ) => Some(Run {
                start,
                end,
                result_date,
                share,
                days,
                units_expected,
            }),
            _ => None,
        };
        let status = j.status.name();
        match (j.status.in_calendar(), run.is_some()) {
            (true, false) => {
                let missing = facts.iter().find(|(_, has)| !has).map_or("start", |f| f.0);
                return Err(format!(
                    "experiment `{}` is {status} but has no `{missing}`",
                    j.id
                ));
            }
            (false, _) => {
                if let Some((given, _)) = facts.iter().find(|(_, has)| *has) {
                    return Err(format!(
                        "experiment `{}` is {status} but has a `{given}`; only scheduled and running experiments have a run",
                        j.id
                    ));
                }
            }
            (true, true) => {}
        }
        Ok(PlannedExperiment {
            id: j.id,
            title: j.title,
            owner: j.owner,
            pools: if j.pools.is_empty() {
                j.pool.into_iter().collect()
            } else {
                j.pools
            },
            priority: j.priority,
            status: j.status,
            run,
            ramp: j.ramp,
            units_needed: j.units_needed,
            sample_size_given: j.sample_size_given,
            eligible: j.eligible,
            reason: j.reason,
            ran: j.ran,
            result_range: j.result_range,
            statistics: j.statistics,
            looks: j.looks,
            detectable: j.detectable,
        })
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
    /// calendar updates them (`crate::render::ics::calendar_history`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calendar: Option<CalendarHistory>,
}

/// The calendar events earlier plans published and how often each changed,
/// carried from plan to plan through `--previous`.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct CalendarHistory {
    /// The SEQUENCE (RFC 5545 §3.8.7.4) of each experiment's events in
    /// this plan's calendar, in plan order; experiments not listed are at 0.
    pub sequences: Vec<EventSequence>,
    /// Experiments an earlier plan put in the calendar that this plan does
    /// not: their events as last published, kept in the calendar, and
    /// cancelled unless the test finished as planned.
    pub kept: Vec<KeptEvents>,
    /// The SEQUENCE of each interim look's event in this plan's calendar,
    /// in plan order; looks not listed are at 0.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub looks: Vec<LookSequence>,
    /// The interim looks an earlier plan published for tests that have
    /// since finished or been cancelled, so that the calendar keeps those
    /// that took place and cancels those that will not come.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub past_looks: Vec<PastLooks>,
    /// Interim looks an earlier plan published that this plan's calendar
    /// no longer holds, for tests it still shows (their run grew too
    /// short for the look to have a day of its own): published cancelled.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub dropped_looks: Vec<DroppedLook>,
}

/// A published interim look that will not take place though its test
/// still runs.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct DroppedLook {
    /// The experiment's id.
    pub id: String,
    /// The look, from 1.
    pub look: u32,
    /// The test's looks, the final read included.
    pub looks: u32,
    /// Its date as last published.
    pub date: NaiveDate,
}

/// The interim looks published for a test that has closed.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct PastLooks {
    /// The experiment's id.
    pub id: String,
    /// Its looks, the final read included.
    pub looks: u32,
    /// The dates of its interim looks as last published, look 1 first.
    pub dates: Vec<NaiveDate>,
    /// Looks among `dates` that had no day of their own, so were never
    /// published (see [`LookDates::idle`]): no event.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub idle: Vec<u32>,
}

/// One interim look's event version.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct LookSequence {
    /// The experiment's id.
    pub id: String,
    /// The look, from 1.
    pub look: u32,
    /// The SEQUENCE of its event.
    pub sequence: u32,
}

/// One experiment's event version.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct EventSequence {
    /// The experiment's id.
    pub id: String,
    /// The SEQUENCE of its run and result events.
    pub sequence: u32,
}

/// The events of an experiment that left the calendar, as last published.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct KeptEvents {
    /// The experiment's id.
    pub id: String,
    /// Its title.
    pub title: String,
    /// Why it left: `finished` (as planned: its result date had come),
    /// `finished_early`, `cancelled`, `unscheduled` or `dropped` (no
    /// longer in the portfolio).
    pub why: String,
    /// Whether its events are published as cancelled (every reason but
    /// `finished`).
    pub cancelled: bool,
    /// The first day of the run last published.
    pub start: NaiveDate,
    /// Its last day.
    pub end: NaiveDate,
    /// Its result date.
    pub result_date: NaiveDate,
    /// The SEQUENCE the cancelled events carry.
    pub sequence: u32,
    /// The dates of its interim looks as last published (their events
    /// are kept with the run's); empty without looks.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub looks: Vec<NaiveDate>,
    /// Looks among `looks` that had no day of their own, so were never
    /// published: no event.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub idle: Vec<u32>,
}

/// Re-plans only: where a running test stands and when it will finish.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunningOutlook {
    /// The experiment's id.
    pub id: String,
    /// Its first day.
    pub started: NaiveDate,
    /// The share it runs at from today.
    pub share: Share,
    /// Units collected when the counts were read, over all arms.
    pub collected: u64,
    /// Units it needs over all arms.
    pub units_needed: u64,
    /// Its last day of data from the forecast; `None` beyond ten years.
    pub end: Option<NaiveDate>,
    /// Whether `end` falls inside the window.
    pub fits_window: bool,
    /// The smallest share level that would finish it inside the window.
    pub rescue_share: Option<Share>,
    /// The effect (in its MDE's kind) the units in hand by the window's end
    /// can detect at the planned power.
    pub detectable_effect: Option<f64>,
    /// The outlook in words, when it cannot finish as it runs, needs a
    /// decision, was re-shared or is ready to read.
    pub advice: Option<Said<Advice>>,
    /// The share it ran at before today, as the progress file gives it
    /// (differs from `share` only when the re-plan re-shared it).
    #[serde(default)]
    pub share_before: Option<Share>,
    /// What stands out about it, in the order of [`RunningFlag`].
    #[serde(default)]
    pub flags: Vec<RunningFlag>,
    /// The first `no_running` span of its pool its run reaches, with the
    /// choice it leaves; `None` when its run reaches none.
    #[serde(default)]
    pub no_running: Option<NoRunningChoice>,
    /// The sample-ratio check of its per-arm counts against its design's
    /// split, when the progress file gives `units_per_arm`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_ratio: Option<crate::sizing::srm::SampleRatio>,
}

impl RunningOutlook {
    /// Whether the planner has to decide something about it: it cannot
    /// finish inside the window, or its run reaches a `no_running` span.
    pub fn needs_decision(&self) -> bool {
        self.flags
            .iter()
            .any(|f| matches!(f, RunningFlag::CannotFinish | RunningFlag::CrossesNoRunning))
    }

    /// Whether it has collected its sample.
    pub fn past_need(&self) -> bool {
        self.flags.contains(&RunningFlag::PastNeed)
    }
}

/// What stands out about a running test; in JSON the snake_case code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RunningFlag {
    /// No end inside the window as it runs.
    CannotFinish,
    /// Its run reaches a `no_running` span of its pool.
    CrossesNoRunning,
    /// It has collected its sample.
    PastNeed,
    /// The running tests alone already overload its pool at the shares
    /// the progress file gives them.
    InputOverload,
    /// Its per-arm counts miss its design's split (a p-value below
    /// `planning.srm_alpha`; see [`RunningOutlook::sample_ratio`]).
    SampleRatioMismatch,
}

impl RunningFlag {
    /// The code in JSON.
    pub fn code(self) -> &'static str {
        match self {
            RunningFlag::CannotFinish => "cannot_finish",
            RunningFlag::CrossesNoRunning => "crosses_no_running",
            RunningFlag::PastNeed => "past_need",
            RunningFlag::InputOverload => "input_overload",
            RunningFlag::SampleRatioMismatch => "sample_ratio_mismatch",
        }
    }
}

/// A running test whose run reaches a `no_running` span: stop before it,
/// or leave its days out and end later.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NoRunningChoice {
    /// The span's first day.
    pub from: NaiveDate,
    /// The span's last day.
    pub to: NaiveDate,
    /// Why, in the portfolio's words.
    pub note: String,
    /// Its last day of data if it stops at the span's start.
    pub stop_end: NaiveDate,
    /// The effect (in its MDE's kind) it can detect at the planned power if
    /// it stops then; `None` when too few units for any.
    pub stop_effect: Option<f64>,
}

/// How one experiment's outcome changed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Movement {
    /// Same result date and share.
    Unchanged,
    /// Its result arrives later.
    Later,
    /// Its result arrives earlier.
    Earlier,
    /// Same result date, another share.
    Reshared,
    /// It was in the calendar and is not any more.
    NoLongerFits,
    /// It was out and now has a place.
    NowFits,
    /// Out before and out now.
    StillOut,
    /// Finished or cancelled since the previous plan.
    Closed,
    /// Not in the previous plan.
    Added,
    /// Running, and needs a decision: it cannot finish inside the window,
    /// or its run reaches a `no_running` span.
    NeedsDecision,
    /// In the previous plan only.
    Dropped,
}

/// One experiment, before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExperimentDiff {
    /// The experiment's id.
    pub id: String,
    /// Its pools' ids (in the new plan, else the old): more than one for
    /// a test on several pools.
    #[serde(default)]
    pub pools: Vec<String>,
    /// How it moved.
    pub movement: Movement,
    /// Its status in the old plan; `None` when it was not in it.
    pub old_status: Option<Status>,
    /// Its status in the new plan; `None` when it is not in it.
    pub new_status: Option<Status>,
    /// The old plan's result date.
    pub old_result_date: Option<NaiveDate>,
    /// The new plan's result date.
    pub new_result_date: Option<NaiveDate>,
    /// New result date minus old, in days (+ later, - earlier); both scheduled only.
    pub slip_days: Option<i64>,
    /// The old plan's share.
    pub old_share: Option<Share>,
    /// The new plan's share.
    pub new_share: Option<Share>,
}

/// A pool's totals in one plan.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
pub struct PoolTotals {
    /// Experiments in the calendar (scheduled or running).
    pub scheduled: u32,
    /// Experiments out of the calendar.
    pub unscheduled: u32,
    /// Experiments finished or cancelled (re-plans only).
    #[serde(default)]
    pub closed: u32,
    /// Units the scheduled experiments need, summed.
    pub units_needed: u64,
    /// Forecast units of the pool over the window.
    pub forecast_units: f64,
}

/// A pool before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolDiff {
    /// The pool's id.
    pub id: String,
    /// Its totals in the old plan.
    pub before: PoolTotals,
    /// Its totals in the new plan.
    pub after: PoolTotals,
}

/// Everything that moved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanDiff {
    /// In the new plan's order, then experiments only the old plan had.
    pub experiments: Vec<ExperimentDiff>,
    /// Ids that were scheduled and are not any more.
    pub no_longer_fit: Vec<String>,
    /// Ids that were unscheduled and now are.
    pub now_fit: Vec<String>,
    /// Ids scheduled in both with another share.
    pub share_changed: Vec<String>,
    /// Running ids that need a decision (see [`Movement::NeedsDecision`]).
    #[serde(default)]
    pub needs_decision: Vec<String>,
    /// Each pool's totals before and after, in the new plan's order.
    pub pools: Vec<PoolDiff>,
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
            serde_json::from_str(include_str!("../tests/fixtures/plan-small.json")).unwrap();
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
