//! Why a test is out of the calendar, as facts: the tests in its way with
//! their priorities, the spans of dates, shares, day and unit counts and
//! the confidence behind each cause. The scheduler's `reasons`, planning to
//! a confidence and the `check` report build these values; the only place
//! that puts them into words is [`crate::render::words::reason`], which
//! also gives the string a plan's JSON (and `check --format json`) writes
//! under `reason`. A reason read back from JSON, or given in words by a
//! request, is [`Reason::Worded`]. A plan carries a reason as a [`Said`]: the facts,
//! worded the first time they are read as text.

use crate::share::Share;
use chrono::NaiveDate;
use serde::{Deserialize, Deserializer, Serialize, Serializer};
use std::fmt;
use std::ops::Deref;
use std::sync::OnceLock;

/// Why a test is not in the calendar (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub enum Reason {
    /// A reason already in words: read back from a plan's JSON, or given
    /// by the request (a finished, cancelled or left-out test).
    Worded(String),
    /// A running test's advice, which a re-plan gives as its reason.
    Running(crate::advice::Advice),
    /// It finished before the re-plan: on `ended` when the progress file
    /// says so.
    Finished {
        /// Its last day of data, as the progress file gives it.
        ended: Option<NaiveDate>,
    },
    /// It was cancelled, with the progress file's note (may be empty).
    Cancelled {
        /// Why, in the progress file's words.
        note: String,
    },
    /// A scenario left it out.
    LeftOut,
    /// A prerequisite (`after`) left the queue without finishing.
    PrerequisiteLeft {
        /// The prerequisite's id.
        prerequisite: String,
    },
    /// A prerequisite (`after`) is not scheduled.
    PrerequisiteUnscheduled {
        /// The prerequisite's id.
        prerequisite: String,
    },
    /// No share level is at or below the test's `max_share`.
    NoShareLevel {
        /// Its `max_share`.
        max_share: Share,
    },
    /// Its earliest possible start is past the window.
    EarliestStartPastWindow {
        /// That start.
        earliest: NaiveDate,
    },
    /// No start day on the grid is left after `after`.
    NoStartDayAfter {
        /// Its earliest possible start.
        after: NaiveDate,
    },
    /// The forecast does not deliver its units within three years.
    NeverDelivers {
        /// Units it needs over all arms.
        units: u64,
        /// At its largest share.
        at: ShareOf,
    },
    /// Its deadline cannot be met even from the window's first day.
    DeadlineFromFirstDay {
        /// Its deadline.
        deadline: NaiveDate,
        /// At its largest share.
        at: ShareOf,
        /// The earliest end.
        end: NaiveDate,
    },
    /// Its deadline cannot be met from its earliest start.
    DeadlineTooClose {
        /// Its deadline.
        deadline: NaiveDate,
        /// Days it needs at `at`.
        days: i64,
        /// At its largest share.
        at: ShareOf,
        /// Its earliest start.
        start: NaiveDate,
        /// Days from that start to the deadline.
        left: i64,
    },
    /// It needs more days than the window has (from its earliest start
    /// when that is not the window's first day).
    LongerThanWindow {
        /// Days it needs at `at`.
        days: i64,
        /// At its largest share.
        at: ShareOf,
        /// Its earliest start, when not the window's first day.
        from: Option<NaiveDate>,
        /// Days the window has from there.
        left: i64,
    },
    /// It fits alone, but a pool is full of tests the plan preferred.
    PoolFull {
        /// The pool's id.
        pool: String,
        /// The first day the pool cannot take it.
        from: NaiveDate,
        /// The last.
        to: NaiveDate,
        /// Whether days between them are free but too few for it.
        gaps: bool,
        /// Whether every holder has a priority at least its own.
        higher: bool,
        /// The tests holding the pool, highest priority first.
        holders: Vec<Held>,
        /// The `not_with` partners the plan keeps beside it.
        apart: Vec<String>,
    },
    /// It fits alone, but must not run alongside tests the plan keeps.
    KeptApartInTime {
        /// Those tests and their runs.
        partners: Vec<Span>,
    },
    /// It fits alone, but is kept apart on traffic from tests the plan
    /// keeps, and no share level fits beside them.
    KeptApartOnTraffic {
        /// Those tests and their runs.
        partners: Vec<Span>,
    },
    /// Its prerequisites end too late to leave it time.
    WaitsFor {
        /// Each prerequisite's id and last day.
        prerequisites: Vec<(String, NaiveDate)>,
    },
    /// Nothing more particular: no run fits beside the scheduled tests.
    NoRunFits,
    /// The running tests hold its pools.
    RunningHold {
        /// Its pools' ids.
        pools: Vec<String>,
        /// The running tests on them; may be empty.
        holders: Vec<String>,
        /// The last day they hold the pools.
        until: Option<NaiveDate>,
        /// Whether `until` is past the window's end.
        past_window: bool,
        /// When it could start alone.
        alone_from: NaiveDate,
    },
    /// Every run that ends by `limit` meets a no-running blackout.
    BlackoutInTheWay {
        /// Its deadline or the window's end.
        limit: Limit,
        /// The no-running blackouts on its pools.
        spans: Vec<BlackoutSpan>,
        /// What could help.
        helps: Helps,
    },
    /// No start day from `from` is free of the no-starts blackouts in time.
    NoFreeStartDay {
        /// Its first start day.
        from: NaiveDate,
        /// The no-starts blackouts on its pools.
        spans: Vec<BlackoutSpan>,
        /// Its deadline or the window's end.
        limit: Limit,
    },
    /// No run from an allowed start ends by `limit` at its largest share.
    NoRunByLimit {
        /// Its deadline or the window's end.
        limit: Limit,
        /// Its largest share.
        share: Share,
        /// What could help.
        helps: Helps,
    },
    /// Planning to a confidence: the room left holds it on the expected
    /// forecast, but not with the margin.
    Margin {
        /// The share it could run at.
        share: Share,
        /// First day of that room.
        from: NaiveDate,
        /// Last day.
        to: NaiveDate,
        /// Units the room holds (whole units).
        units: u64,
        /// Units it needs.
        need: u64,
        /// `planning.confidence`.
        confidence: f64,
        /// Units it is planned as at that confidence.
        asked: u64,
    },
    /// Another reason, for a test planned at a confidence as more units
    /// than it needs.
    AtConfidence {
        /// The reason.
        reason: Box<Reason>,
        /// `planning.confidence`.
        confidence: f64,
        /// Units it is planned as.
        units: u64,
    },
    /// `check`: a prerequisite cannot fit even alone.
    PrerequisiteMisfit {
        /// The prerequisite's id.
        prerequisite: String,
    },
    /// `check`: it may start only after `until`.
    StartsTooLate {
        /// Its first possible start.
        first: NaiveDate,
        /// The prerequisite whose end (and gap) sets it.
        after: Option<String>,
        /// Its deadline or the window's end.
        until: Limit,
    },
    /// `check`: no start day between `from` and `to` (start grid, freezes).
    NoAllowedStart {
        /// Its first possible start.
        from: NaiveDate,
        /// Its last day.
        to: NaiveDate,
    },
    /// `check`: every run at `share` that ends by `until` crosses a
    /// no-running blackout.
    SoloCrossesBlackout {
        /// Its largest share.
        share: Share,
        /// Its deadline or the window's end.
        until: Limit,
    },
    /// `check`: at `share` it runs too long from its first start day.
    SoloTooLong {
        /// Its largest share.
        share: Share,
        /// How long it needs.
        needs: Needs,
        /// Where the count starts.
        from: SoloFrom,
        /// Its deadline or the window's end.
        until: Limit,
    },
    /// `check`: no run at `share` ends by `until`.
    NoSoloRun {
        /// Its largest share.
        share: Share,
        /// Its deadline or the window's end.
        until: Limit,
    },
}

/// A test at a share of its pools, and what limits its units beside the
/// share.
#[derive(Debug, Clone, PartialEq)]
pub struct ShareOf {
    /// The share.
    pub share: Share,
    /// Its pools' ids.
    pub pools: Vec<String>,
    /// The fraction of its units its targeting admits.
    pub eligible: f64,
    /// The largest holdout among its pools.
    pub held_out: f64,
}

/// A test that holds a pool, with its priority.
#[derive(Debug, Clone, PartialEq)]
pub struct Held {
    /// Its id.
    pub id: String,
    /// Its priority.
    pub priority: f64,
}

/// A test the plan keeps, with its run's first and last day.
#[derive(Debug, Clone, PartialEq)]
pub struct Span {
    /// Its id.
    pub id: String,
    /// First day.
    pub from: NaiveDate,
    /// Last day.
    pub to: NaiveDate,
}

/// A blackout's days and note.
#[derive(Debug, Clone, PartialEq)]
pub struct BlackoutSpan {
    /// First day.
    pub from: NaiveDate,
    /// Last day.
    pub to: NaiveDate,
    /// Its note; may be empty.
    pub note: String,
}

/// The last day a test may end on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Limit {
    /// Its deadline.
    Deadline(NaiveDate),
    /// The window's end.
    WindowEnd(NaiveDate),
}

/// Changes that could help, only those not already at their limit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Helps {
    /// A larger `max_share` than this one is available.
    pub larger_than: Option<Share>,
    /// It has a deadline that could be later.
    pub later_deadline: bool,
}

/// How long a solo run needs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Needs {
    /// This many days, ending on `end`.
    Days {
        /// Days.
        days: usize,
        /// Its last day.
        end: NaiveDate,
    },
    /// More than this many years.
    Years(i64),
}

/// Where a `check` solo run's days are counted from.
#[derive(Debug, Clone, PartialEq)]
pub enum SoloFrom {
    /// The window's first day.
    WindowStart,
    /// The first start day (later than the window's first day).
    FirstStartDay(NaiveDate),
    /// Its earliest start.
    EarliestStart(NaiveDate),
    /// This day, after a prerequisite ends.
    AfterPrerequisite(NaiveDate, String),
}

impl Reason {
    /// This reason for a test planned at `confidence` as `units` units.
    pub fn at_confidence(self, confidence: f64, units: u64) -> Reason {
        Reason::AtConfidence {
            reason: Box::new(self),
            confidence,
            units,
        }
    }
}

/// Facts that have words: [`crate::render::words`] gives them, and reads
/// words back as facts already worded (from a plan's JSON).
pub trait Words: Sized {
    /// The facts in words.
    fn words(&self) -> String;
    /// Words read back (from a plan's JSON) as facts already in words.
    fn read(words: String) -> Self;
}

/// Facts as a plan or report carries them: worded by [`Words`] the first
/// time they are read as text (`&*said`, `Display`, JSON), never before.
/// Two are equal when they read the same, so a plan read back from its
/// JSON equals the plan written.
#[derive(Clone)]
pub struct Said<T> {
    facts: T,
    words: OnceLock<String>,
}

impl<T> Said<T> {
    /// The facts, not yet in words.
    pub fn new(facts: T) -> Said<T> {
        Said {
            facts,
            words: OnceLock::new(),
        }
    }

    /// The facts.
    pub fn facts(&self) -> &T {
        &self.facts
    }

    /// The facts, taken out.
    pub fn into_facts(self) -> T {
        self.facts
    }
}

impl<T: Words> Deref for Said<T> {
    type Target = str;

    fn deref(&self) -> &str {
        self.words.get_or_init(|| self.facts.words())
    }
}

impl<T: Words> fmt::Display for Said<T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self)
    }
}

impl<T: fmt::Debug> fmt::Debug for Said<T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.facts.fmt(f)
    }
}

impl<T: Words> PartialEq for Said<T> {
    fn eq(&self, other: &Said<T>) -> bool {
        **self == **other
    }
}

impl From<crate::advice::Advice> for Said<crate::advice::Advice> {
    fn from(a: crate::advice::Advice) -> Said<crate::advice::Advice> {
        Said::new(a)
    }
}

impl From<Reason> for Said<Reason> {
    fn from(r: Reason) -> Said<Reason> {
        Said::new(r)
    }
}

impl<T: Words> From<String> for Said<T> {
    fn from(s: String) -> Said<T> {
        Said::new(T::read(s))
    }
}

impl<T: Words> From<&str> for Said<T> {
    fn from(s: &str) -> Said<T> {
        Said::new(T::read(s.to_string()))
    }
}

impl<T: Words> Serialize for Said<T> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self)
    }
}

impl<'de, T: Words> Deserialize<'de> for Said<T> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Said<T>, D::Error> {
        String::deserialize(d).map(Said::from)
    }
}
