//! The plan: the one result every renderer reads.
//!
//! The scheduler fills a [`Plan`]; renderers (text, JSON, CSV, iCalendar,
//! HTML, Markdown) only format it and never compute schedule facts of their
//! own. Field order is the JSON key order; `docs/plan-json.md` documents it.

use crate::diff::PlanDiff;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

/// The planning window, both ends inclusive.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct PlanWindow {
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
}

/// How the optimiser did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SolverSummary {
    /// The LP/MILP backend, e.g. `microlp` or `highs`.
    pub backend: String,
    /// `optimal` (proved), `feasible` (a plan, gap open), `greedy` (fallback).
    pub status: String,
    /// Wall-clock seconds spent planning.
    pub seconds: f64,
    /// Objective value of the plan.
    pub value: f64,
    /// Best upper bound on any plan's value (the LP relaxation or better).
    pub bound: f64,
    /// (bound - value) / bound; 0 when proved optimal.
    pub gap: f64,
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlannedExperiment {
    /// The experiment's id.
    pub id: String,
    /// Its title.
    pub title: String,
    /// Who owns it.
    pub owner: String,
    /// The pool's id.
    pub pool: String,
    /// Its weight in the objective.
    pub priority: f64,
    /// Whether it got a place in the calendar.
    pub status: Status,
    /// First day of the run (scheduled only).
    pub start: Option<NaiveDate>,
    /// Last day of data (scheduled only); the result is due the day after.
    pub end: Option<NaiveDate>,
    /// The day the result is due: the day after `end` (scheduled only).
    pub result_date: Option<NaiveDate>,
    /// Constant share of the pool, in (0, 1] (scheduled only).
    pub share: Option<f64>,
    /// Days from start to end inclusive (scheduled only).
    pub days: Option<u32>,
    /// Units over all arms the test needs.
    pub units_needed: u64,
    /// Units the forecast delivers to it from start to end (scheduled only).
    pub units_expected: Option<f64>,
    /// Why it is not scheduled, in words a planner can act on.
    pub reason: Option<String>,
}

/// One day of one pool.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolDay {
    /// The day.
    pub date: NaiveDate,
    /// Forecast eligible units.
    pub forecast: f64,
    /// Sum of the shares of the tests running (may exceed 1 on overlap pools).
    pub share_used: f64,
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
    /// `split` or `overlap`.
    pub sharing: String,
    /// Most tests running at once.
    pub max_concurrent: u32,
    /// Every day of the window, in order.
    pub days: Vec<PoolDay>,
}

/// A blackout span, as the renderers show it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanBlackout {
    /// First day.
    pub from: NaiveDate,
    /// Last day.
    pub to: NaiveDate,
    /// `no_starts` or `no_running`.
    pub kind: String,
    /// Why, in the portfolio's words.
    pub note: String,
    /// Pool ids; empty for every pool.
    pub pools: Vec<String>,
}

/// The whole plan.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plan {
    /// The portfolio's name.
    pub portfolio: String,
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
    /// Re-plans with `--previous` only: what moved since the previous plan.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub changes: Option<PlanDiff>,
}

/// Re-plans only: where a running test stands and when it will finish.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunningOutlook {
    /// The experiment's id.
    pub id: String,
    /// Its first day.
    pub started: NaiveDate,
    /// The share it runs at from today.
    pub share: f64,
    /// Units collected when the counts were read, over all arms.
    pub collected: u64,
    /// Units it needs over all arms.
    pub units_needed: u64,
    /// Its last day of data from the forecast; `None` beyond ten years.
    pub end: Option<NaiveDate>,
    /// Whether `end` falls inside the window.
    pub fits_window: bool,
    /// The smallest share level that would finish it inside the window.
    pub rescue_share: Option<f64>,
    /// The effect (in its MDE's kind) the units in hand by the window's end
    /// can detect at the planned power.
    pub detectable_effect: Option<f64>,
    /// The outlook in words, when it cannot finish as it runs.
    pub advice: Option<String>,
}
