//! What a plan is asked for beyond the portfolio: a [`PlanRequest`]
//! carries what a re-plan knows (today, the running tests that hold their
//! traffic as [`FixedRun`]s, the tests that left the queue as
//! [`Excluded`]), the time limit, the backend and the search's effort.
//!
//! It sits apart from `schedule`'s entry point so that the candidate runs
//! (`options`) and the verifier read it without importing the planner.

use super::backend::Backend;
use crate::share::Share;
use chrono::NaiveDate;

/// A running test that keeps its traffic exactly as given.
#[derive(Debug, Clone, PartialEq)]
pub struct FixedRun {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    /// Its first day.
    pub start: NaiveDate,
    /// Its share of the pool from today on.
    pub share: Share,
    /// Its share before today, as the progress file gives it; differs
    /// from `share` only when a re-plan re-shared it.
    pub share_before: Share,
    /// Last day of data, as the caller computed it (it may lie past the
    /// window, or before today for a test ready to read).
    pub end: NaiveDate,
    /// What it had collected when its counts were read: its result range
    /// is simulated from then; `None` gives it no range.
    pub so_far: Option<crate::forecast::uncertainty::SoFar>,
}

impl FixedRun {
    /// Its share on `day`, given the plan's `today`.
    pub fn share_on(&self, day: NaiveDate, today: NaiveDate) -> Share {
        if day < today {
            self.share_before
        } else {
            self.share
        }
    }
}

/// A test that left the queue (finished or cancelled).
#[derive(Debug, Clone, PartialEq)]
pub struct Excluded {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    /// The last day of data of a finished test; its successors may start
    /// after it (plus their gap). `None` for a cancelled test: its
    /// successors cannot run.
    pub ended: Option<NaiveDate>,
    /// Shown as the test's reason in the plan.
    pub reason: crate::reason::Reason,
    /// What it ran before today, when known; kept in the plan as history
    /// and drawn in the pool's past days.
    pub ran: Option<crate::plan::Ran>,
}

/// A test held to one start day.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Pin {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    /// The only day it may start.
    pub start: NaiveDate,
}

/// The default wall-clock safety net in seconds: twenty times the largest
/// benchmark case measured on a loaded two-core machine (the large
/// portfolio, 15 s; docs/planning.md), so that in ordinary use the work
/// budgets, not the clock, end every search and decide the plan.
pub const DEFAULT_TIME_LIMIT: f64 = 300.0;

/// What to plan, beyond the portfolio.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanRequest {
    /// No new starts before this day (a re-plan's today); `None` for the
    /// window's first day.
    pub today: Option<NaiveDate>,
    /// Running tests, held as given.
    pub fixed: Vec<FixedRun>,
    /// Tests left out of this plan.
    pub excluded: Vec<Excluded>,
    /// Tests held to one start day (a scenario's `start` edit): each may
    /// start only on its day, or not at all.
    pub pinned: Vec<Pin>,
    /// Wall-clock safety net in seconds; the search is otherwise bounded
    /// by iteration counts, so results do not depend on timing.
    pub time_limit: f64,
    /// The LP backend.
    pub backend: Backend,
    /// Multiplier of the search's iteration budget (1 = default).
    pub effort: u32,
}

impl Default for PlanRequest {
    fn default() -> PlanRequest {
        PlanRequest {
            today: None,
            fixed: Vec::new(),
            excluded: Vec::new(),
            pinned: Vec::new(),
            time_limit: DEFAULT_TIME_LIMIT,
            backend: Backend::default(),
            effort: 1,
        }
    }
}
