//! What a re-plan adds to a plan: the calendar's history, the running
//! tests' outlooks, and what moved since the previous plan.

use super::*;

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

impl Plan {
    /// The SEQUENCE of experiment `id`'s run and result events in this
    /// plan's calendar: 0 unless a re-plan's calendar history raised it.
    pub fn event_sequence(&self, id: &str) -> u32 {
        self.calendar.as_ref().map_or(0, |c| {
            c.sequences
                .iter()
                .find(|s| s.id == id)
                .map(|s| s.sequence)
                .or_else(|| c.kept.iter().find(|k| k.id == id).map(|k| k.sequence))
                .unwrap_or(0)
        })
    }

    /// The SEQUENCE of experiment `id`'s interim look `look` in this
    /// plan's calendar: 0 unless a re-plan's calendar history raised it.
    pub fn look_sequence(&self, id: &str, look: u32) -> u32 {
        self.calendar.as_ref().map_or(0, |c| {
            c.looks
                .iter()
                .find(|s| s.id == id && s.look == look)
                .map_or(0, |s| s.sequence)
        })
    }
}

impl PlannedExperiment {
    /// The interim looks its calendar publishes: `None` when it publishes
    /// none (no looks, or none with a day of its own).
    pub fn published_looks(&self) -> Option<&LookDates> {
        self.looks.as_ref().filter(|l| l.interim().next().is_some())
    }
}
