//! The progress file: where each test stands mid-quarter (running with the
//! units collected so far, finished, or cancelled), read for a re-plan.
//!
//! Same three passes and the same quality of errors as the portfolio
//! loader (unknown keys with the closest allowed one, serde's type errors
//! with their position, then every semantic problem at once), checked
//! against an already validated [`Portfolio`] and the re-plan's `today`.
//! Counts that the forecast could not have delivered are flagged as
//! warnings, not refused: forecasts err, counts are facts.
//! docs/progress.md documents every key.

use crate::diagnostic::{self, Diagnostic};
use crate::forecast;
use crate::portfolio::raw::{fields_of, RawEvent, Text};
use crate::portfolio::{prepare, read_text, read_yaml, Checker, Event, LoadError, Portfolio};
use crate::share::Share;
use chrono::{Duration, NaiveDate};
use serde::Deserialize;
use std::path::Path;

mod check;
#[cfg(test)]
mod tests;

use check::ProgressCheck;

/// Where one experiment stands.
#[derive(Debug, Clone, PartialEq)]
pub enum State {
    /// Started on `started` at `share` and still collecting.
    Running {
        /// Its first day.
        started: NaiveDate,
        /// Its share of the pool.
        share: Share,
        /// Units collected so far over all arms.
        units: u64,
        /// Per arm, control first, when the file gives them.
        units_per_arm: Option<Vec<u64>>,
    },
    /// Done: it holds no traffic any more.
    Finished {
        /// Its first day, when the file gives it.
        started: Option<NaiveDate>,
        /// Its last day of data, when the file gives it.
        ended: Option<NaiveDate>,
        /// The share of its pool it ran at, when the file gives it.
        share: Option<Share>,
        /// The interim look that stopped it early, from 1.
        stopped_at_look: Option<u32>,
        /// What it found, when the file says.
        outcome: Option<crate::plan::Outcome>,
        /// Per arm, control first, when the file gives them.
        units_per_arm: Option<Vec<u64>>,
    },
    /// Stopped for good: it holds no traffic any more.
    Cancelled {
        /// Why, in the file's words.
        note: String,
        /// Its first day, when it had started and the file gives it.
        started: Option<NaiveDate>,
        /// Its last day of data, when the file gives it.
        ended: Option<NaiveDate>,
        /// The share of its pool it ran at, when the file gives it.
        share: Option<Share>,
    },
}

/// One line of the progress file, resolved.
#[derive(Debug, Clone, PartialEq)]
pub struct Entry {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    /// Where it stands.
    pub state: State,
}

/// The whole progress file, validated.
#[derive(Debug, Clone, PartialEq)]
pub struct Progress {
    /// The day the counts were read: units up to the end of the day before.
    /// Defaults to the re-plan's `today`.
    pub as_of: NaiveDate,
    /// In file order, one per experiment named.
    pub entries: Vec<Entry>,
    /// The daily units each pool actually had so far (`traffic`), one per
    /// pool named, in file order.
    pub traffic: Vec<Observed>,
    /// Problems worth a look that do not stop the re-plan.
    pub warnings: Vec<Diagnostic>,
}

/// A pool's actual daily units so far, as the progress file gives them.
#[derive(Debug, Clone, PartialEq)]
pub struct Observed {
    /// Index into `Portfolio::pools`.
    pub pool: usize,
    /// The first day.
    pub start: NaiveDate,
    /// Units per day from `start`, without gaps, up to the day before
    /// `as_of` at the latest.
    pub units: Vec<f64>,
    /// Known events in these days (`events`), left out of the refit.
    pub events: Vec<Event>,
}

impl Observed {
    /// The last day.
    pub fn end(&self) -> NaiveDate {
        self.start + Duration::days(self.units.len() as i64 - 1)
    }
}

impl Progress {
    /// The entry for an experiment, if the file has one.
    pub fn entry(&self, experiment: usize) -> Option<&Entry> {
        self.entries.iter().find(|e| e.experiment == experiment)
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProgress {
    as_of: Option<Text>,
    experiments: Option<Vec<RawEntry>>,
    traffic: Option<Vec<RawTraffic>>,
    counts: Option<Text>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTraffic {
    pool: Option<Text>,
    history: Option<Text>,
    days: Option<Vec<RawDay>>,
    events: Option<Vec<RawEvent>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDay {
    date: Option<Text>,
    units: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEntry {
    id: Option<Text>,
    state: Option<Text>,
    started: Option<Text>,
    ended: Option<Text>,
    share: Option<f64>,
    units: Option<f64>,
    units_per_arm: Option<Vec<f64>>,
    note: Option<Text>,
    stopped_at_look: Option<f64>,
    outcome: Option<Text>,
}

fn allowed_keys(shape: &str) -> Option<&'static [&'static str]> {
    Some(match shape {
        "" => fields_of::<RawProgress>(),
        "experiments[]" => fields_of::<RawEntry>(),
        "traffic[]" => fields_of::<RawTraffic>(),
        "traffic[].days[]" => fields_of::<RawDay>(),
        "traffic[].events[]" => fields_of::<RawEvent>(),
        _ => return None,
    })
}

/// Reads and validates the progress file at `path` against `portfolio`.
pub fn load_progress(
    path: &Path,
    portfolio: &Portfolio,
    today: NaiveDate,
) -> Result<Progress, LoadError> {
    let name = path.display().to_string();
    let text = read_text(path, "the progress file", "save the progress file as UTF-8")?;
    load_progress_str(&text, &name, portfolio, today)
}

/// Validates progress text; `file_name` is used in messages only.
pub fn load_progress_str(
    text: &str,
    file_name: &str,
    portfolio: &Portfolio,
    today: NaiveDate,
) -> Result<Progress, LoadError> {
    let fail = |diagnostics: Vec<Diagnostic>| Err(LoadError { diagnostics });
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    let body = prepare(
        body,
        file_name,
        "remove it; save the progress file as plain text",
    )?;
    let body = body.as_ref();
    if body
        .lines()
        .all(|l| l.trim().is_empty() || l.trim_start().starts_with('#'))
    {
        return fail(vec![Diagnostic::new(file_name, "", "the progress file is empty")
            .with_hint("list the tests that started: `experiments: [{id: ..., state: running, started: YYYY-MM-DD, share: 0.5, units: 1234}]`")]);
    }
    let (raw, index): (RawProgress, _) = match read_yaml(
        body,
        file_name,
        "the progress file",
        "docs/progress.md",
        allowed_keys,
    ) {
        Ok(read) => read,
        Err(d) => return fail(d),
    };
    let mut cx = ProgressCheck {
        ck: Checker::new(file_name, body, index.as_ref()),
        p: portfolio,
        today,
        counts: super::counts::Counts::new(),
        counts_name: String::new(),
    };
    let progress = cx.validate(raw);
    if cx.ck.errors.is_empty() {
        Ok(Progress {
            warnings: cx.ck.warnings,
            ..progress
        })
    } else {
        fail(cx.ck.errors)
    }
}
