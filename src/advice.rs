//! What a re-plan tells about a running test, as facts: re-shared, ready
//! to read, held to its minimum run, unable to reach its sample by the
//! window's end (with the rescue and the effect it can still detect), a
//! `no_running` span in its way, or a pool the running tests already
//! overload. `replan::outlook` builds these values; the only place that
//! puts them into words is [`crate::render::words::advice`]. A plan
//! carries the advice as a [`crate::reason::Said`]: a string in JSON, read
//! back as [`Advice::Worded`].

use crate::share::Share;
use chrono::NaiveDate;

/// The advice for one running test (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub enum Advice {
    /// Advice already in words: read back from a plan's JSON.
    Worded(String),
    /// Its notes, in order.
    Notes(Vec<Note>),
}

/// One thing to tell about a running test.
#[derive(Debug, Clone, PartialEq)]
pub enum Note {
    /// Re-shared from today so it finishes in the window.
    Reshared {
        /// Its share before.
        from: Share,
        /// Its share from today.
        to: Share,
        /// Today.
        today: NaiveDate,
    },
    /// It has its sample and has run its minimum: read it now.
    ReadyToRead {
        /// Units in, over all arms.
        collected: u64,
        /// Units it needs.
        needed: u64,
        /// Its last day of data.
        last_day: NaiveDate,
        /// Its share, free from today.
        share: Share,
        /// Its pools' ids.
        pools: Vec<String>,
    },
    /// It has its sample but runs to its minimum.
    RunsToMinimum {
        /// Units in, over all arms.
        collected: u64,
        /// Units it needs.
        needed: u64,
        /// Its minimum run in days.
        min_days: u32,
        /// Its last day.
        end: NaiveDate,
    },
    /// It cannot reach its sample by the window's end.
    CannotFinish {
        /// The window's last day.
        window_end: NaiveDate,
        /// Its share from today.
        share: Share,
        /// Units it needs.
        need: u64,
        /// The day it would reach them; `None` beyond ten years.
        end: Option<NaiveDate>,
        /// What the joint pass over its pool found.
        rescue: Rescue,
        /// What it can detect if stopped at the window's end.
        detect: Detect,
    },
    /// Its run reaches a `no_running` span of its pool.
    NoRunning {
        /// The span's first day.
        from: NaiveDate,
        /// Its last day.
        to: NaiveDate,
        /// The span's note; may be empty.
        note: String,
        /// Its pools' ids.
        pools: Vec<String>,
        /// Its last day if stopped before the span.
        stop_end: NaiveDate,
        /// What it can detect if stopped then.
        detect: Detect,
        /// Its end with the span's days left out; `None` beyond ten years.
        end: Option<NaiveDate>,
    },
    /// The running tests alone already overload its pool.
    Overload {
        /// Its pools' ids.
        pools: Vec<String>,
        /// The first day over.
        from: NaiveDate,
        /// The largest sum of shares on a day.
        peak_share: f64,
        /// The most tests on a day.
        peak_count: u32,
        /// How many may run at once.
        max_concurrent: u32,
    },
}

/// What would finish a running test in time.
#[derive(Debug, Clone, PartialEq)]
pub enum Rescue {
    /// Nothing is said.
    Unsaid,
    /// This share from today, for which its pool has room.
    Share(Share),
    /// This share, for which its pool has no room: the running tests
    /// holding it from today, with their shares.
    NoRoom {
        /// The share that would finish it.
        needed: Share,
        /// Its pools' ids.
        pools: Vec<String>,
        /// Who holds them.
        holders: Vec<(String, Share)>,
    },
    /// No share up to its maximum finishes it in time.
    Nothing {
        /// Its `max_share`.
        max_share: Share,
    },
}

/// What a running test can detect with the units it will have.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Detect {
    /// Its sample size was given, so no effect is worked out.
    SampleGiven,
    /// This effect (in the kind of its MDE), against its planned MDE.
    Effect {
        /// The effect it can detect.
        effect: f64,
        /// Its planned MDE.
        planned: crate::sizing::Effect,
    },
    /// Too few units for any effect at the planned power.
    TooFew,
}
