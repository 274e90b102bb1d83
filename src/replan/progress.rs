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

/// The checks of one progress file against a portfolio and the re-plan's
/// `today`, recorded by the shared [`Checker`].
struct ProgressCheck<'a> {
    ck: Checker<'a>,
    p: &'a Portfolio,
    today: NaiveDate,
    /// The `counts` file's sums, by experiment (empty without one).
    counts: super::counts::Counts,
    /// The `counts` file's path, for messages.
    counts_name: String,
}

/// One entry under check: its key (`experiments[2]`), its id, its index
/// in the portfolio, and the day its counts were read.
struct At<'e> {
    at: &'e str,
    id: &'e str,
    index: usize,
    as_of: NaiveDate,
}

impl ProgressCheck<'_> {
    fn date(&mut self, key: &str, v: &Option<Text>) -> Option<NaiveDate> {
        self.ck.date(key, &format!("`{key}`"), v, "2027-02-01")
    }

    fn validate(&mut self, raw: RawProgress) -> Progress {
        let (p, today) = (self.p, self.today);
        let as_of = match self.date("as_of", &raw.as_of) {
            Some(d) if d > today => {
                self.ck.err(
                    "as_of",
                    format!("`as_of` is {d}, after today ({today})"),
                    "counts cannot be read in the future; use the day you read them",
                );
                today
            }
            Some(d) => d,
            None => today,
        };
        if let Some(file) = &raw.counts {
            self.read_counts(file, as_of);
        }
        let ids: Vec<&str> = p.experiments.iter().map(|e| e.id.as_str()).collect();
        let mut entries: Vec<Entry> = Vec::new();
        let mut seen: Vec<(String, String)> = Vec::new();
        for (i, e) in raw.experiments.unwrap_or_default().into_iter().enumerate() {
            let at = format!("experiments[{i}]");
            let Some(id) = e.id.as_ref().map(|t| t.as_str().trim().to_string()) else {
                self.ck.err(
                    &at,
                    format!("`{at}` has no `id`"),
                    "name the experiment as in the portfolio: `id: ...`",
                );
                continue;
            };
            let id_key = format!("{at}.id");
            let Some(index) = p.experiment_index(&id) else {
                let closest = diagnostic::closest_first(&id, &ids);
                let shown: Vec<&str> = closest.into_iter().take(8).collect();
                self.ck.err(
                    &id_key,
                    format!("experiment `{id}` is not in the portfolio"),
                    format!(
                        "defined experiments, closest first: {}",
                        diagnostic::list(&shown)
                    ),
                );
                continue;
            };
            if let Some((_, first)) = seen.iter().find(|(s, _)| *s == id) {
                self.ck.err(
                    &id_key,
                    format!("experiment `{id}` appears twice (first at `{first}`)"),
                    "keep one entry per experiment",
                );
                continue;
            }
            seen.push((id.clone(), at.clone()));
            let entry = At {
                at: &at,
                id: &id,
                index,
                as_of,
            };
            if let Some(state) = self.state(&entry, e) {
                entries.push(Entry {
                    experiment: index,
                    state,
                });
            }
        }
        // Counts of tests the file does not list are left out: say so.
        let mut unlisted: Vec<(&usize, &super::counts::Counted)> = self
            .counts
            .iter()
            .filter(|(k, _)| !entries.iter().any(|e| e.experiment == **k))
            .collect();
        unlisted.sort_by_key(|(_, c)| c.line);
        for (k, c) in unlisted {
            self.ck.warn(
                "counts",
                format!(
                    "`counts` has rows of `{}` (from line {}), which `experiments` does not list; they are left out",
                    p.experiments[*k].id, c.line
                ),
                "list it under `experiments` with its `state` and `share` to use its counts",
            );
        }
        let traffic = self.traffic(raw.traffic.unwrap_or_default(), as_of);
        Progress {
            as_of,
            entries,
            traffic,
            warnings: Vec::new(),
        }
    }

    /// Reads the `counts` CSV (relative to the progress file) into
    /// `self.counts`; its problems are recorded at their lines.
    fn read_counts(&mut self, file: &Text, as_of: NaiveDate) {
        let path = crate::portfolio::history::resolve(self.ck.file, file.as_str());
        let text = match std::fs::read_to_string(&path) {
            Ok(t) => t,
            Err(e) => {
                self.ck.err(
                    "counts",
                    format!("cannot read the counts `{}`: {e}", path.display()),
                    "the path is relative to the progress file's folder; columns `date,experiment,arm,units`",
                );
                return;
            }
        };
        self.counts_name = path.display().to_string();
        match super::counts::parse(&text, &self.counts_name, self.p, as_of) {
            Ok(c) => self.counts = c,
            Err(problems) => self.ck.errors.extend(problems),
        }
    }

    /// The `traffic` entries: each names a pool once and gives either a
    /// `history` file (a `date,units` CSV, relative to the progress file)
    /// or `days` (`date`, `units` rows), days without gaps or repeats,
    /// before `as_of`.
    fn traffic(&mut self, raw: Vec<RawTraffic>, as_of: NaiveDate) -> Vec<Observed> {
        let p = self.p;
        let ids: Vec<&str> = p.pools.iter().map(|x| x.id.as_str()).collect();
        let mut out: Vec<Observed> = Vec::new();
        for (i, t) in raw.into_iter().enumerate() {
            let at = format!("traffic[{i}]");
            let Some(id) = t.pool.as_ref().map(|x| x.as_str().trim().to_string()) else {
                self.ck.err(
                    &at,
                    format!("`{at}` has no `pool`"),
                    "name the pool as in the portfolio: `pool: ...`",
                );
                continue;
            };
            let pool_key = format!("{at}.pool");
            let Some(pool) = p.pools.iter().position(|x| x.id == id) else {
                let closest = diagnostic::closest_first(&id, &ids);
                self.ck.err(
                    &pool_key,
                    format!("pool `{id}` is not in the portfolio"),
                    format!(
                        "defined pools, closest first: {}",
                        diagnostic::list(&closest)
                    ),
                );
                continue;
            };
            if out.iter().any(|o| o.pool == pool) {
                self.ck.err(
                    &pool_key,
                    format!("pool `{id}` has traffic twice"),
                    "give each pool's days in one entry",
                );
                continue;
            }
            let daily = match (&t.history, t.days) {
                (Some(_), Some(_)) | (None, None) => {
                    self.ck.err(
                        &at,
                        format!("the traffic of pool `{id}` needs either `history` or `days`"),
                        "give `history: FILE.csv` (columns `date,units`) or `days: [{date: 2027-01-04, units: 61200}, ...]`, not both",
                    );
                    continue;
                }
                (Some(file), None) => self.traffic_file(&format!("{at}.history"), file),
                (None, Some(days)) => self.traffic_days(&at, &days),
            };
            let Some((start, units)) = daily else {
                continue;
            };
            let end = start + Duration::days(units.len() as i64 - 1);
            if end >= as_of {
                self.ck.err(
                    &at,
                    format!(
                        "the traffic of pool `{id}` runs to {end}, on or after `as_of` ({as_of})"
                    ),
                    "give the days before the counts were read; later days have not happened",
                );
                continue;
            }
            let Some(events) = crate::portfolio::history::checked_events(
                &mut self.ck,
                &at,
                &format!("the traffic of pool `{id}`: "),
                t.events.as_deref(),
                start,
                end,
            ) else {
                continue;
            };
            out.push(Observed {
                pool,
                start,
                units,
                events,
            });
        }
        out
    }

    /// A traffic `history` file, read like a pool's history (its problems
    /// at their lines in the CSV file).
    fn traffic_file(&mut self, key: &str, file: &Text) -> Option<(NaiveDate, Vec<f64>)> {
        use crate::portfolio::history::{read, resolve, HistoryError};
        let path = resolve(self.ck.file, file.as_str());
        match read(&path) {
            Ok(d) => Some((d.start, d.units)),
            Err(HistoryError::Unreadable { path, reason }) => {
                self.ck.err(
                    key,
                    format!("cannot read the traffic `{}`: {reason}", path.display()),
                    "the path is relative to the progress file's folder",
                );
                None
            }
            Err(HistoryError::Rows(problems)) => {
                self.ck.errors.extend(problems);
                None
            }
        }
    }

    /// Inline traffic `days`: dates one day apart, units >= 0.
    fn traffic_days(&mut self, at: &str, days: &[RawDay]) -> Option<(NaiveDate, Vec<f64>)> {
        if days.is_empty() {
            self.ck.err(
                &format!("{at}.days"),
                "`days` is empty",
                "give one row per day: `{date: 2027-01-04, units: 61200}`",
            );
            return None;
        }
        let mut start = None;
        let mut units = Vec::with_capacity(days.len());
        let mut ok = true;
        for (j, day) in days.iter().enumerate() {
            let key = format!("{at}.days[{j}]");
            let date = self.date(&format!("{key}.date"), &day.date);
            let n = day.units;
            match n {
                Some(n) if n.is_finite() && n >= 0.0 => {}
                Some(n) => {
                    self.ck.err(
                        &format!("{key}.units"),
                        format!("`units` is {n}; it must be a number >= 0"),
                        "the units the pool had that day",
                    );
                    ok = false;
                }
                None => {
                    self.ck.err(
                        &key,
                        format!("`{key}` has no `units`"),
                        "give the units the pool had that day: `units: 61200`",
                    );
                    ok = false;
                }
            }
            let Some(date) = date else {
                ok = false;
                continue;
            };
            let first = *start.get_or_insert(date);
            let expected = first + Duration::days(j as i64);
            if ok && date != expected {
                let what = if date < expected {
                    "repeats or goes back"
                } else {
                    "leaves a gap"
                };
                self.ck.err(
                    &format!("{key}.date"),
                    format!("{date} {what}: the day after the row before is {expected}"),
                    "give one row per day, in order, without gaps",
                );
                ok = false;
            }
            units.push(n.unwrap_or(0.0));
        }
        (ok).then(|| (start.expect("a first day"), units))
    }

    fn state(&mut self, entry: &At, e: RawEntry) -> Option<State> {
        let (at, id, today) = (entry.at, entry.id, self.today);
        let state_key = format!("{at}.state");
        let kind = match e.state.as_ref().map(|t| t.as_str().trim().to_lowercase()) {
            Some(k) if ["running", "finished", "cancelled"].contains(&k.as_str()) => k,
            Some(other) => {
                let hint =
                    match diagnostic::suggestion(&other, &["running", "finished", "cancelled"]) {
                        Some(s) => {
                            format!("did you mean `{s}`? one of `running`, `finished`, `cancelled`")
                        }
                        None => "one of `running`, `finished`, `cancelled`".to_string(),
                    };
                self.ck.err(
                    &state_key,
                    format!("state `{other}` of `{id}` is not known"),
                    hint,
                );
                return None;
            }
            None => {
                self.ck.err(
                    at,
                    format!("`{id}` has no `state`"),
                    "add `state: running`, `state: finished` or `state: cancelled`",
                );
                return None;
            }
        };
        let started = self.date(&format!("{at}.started"), &e.started);
        let ended = self.date(&format!("{at}.ended"), &e.ended);
        if let Some(s) = started {
            if s >= today && kind == "running" {
                self.ck.err(
                    &format!("{at}.started"),
                    format!("`{id}` is marked running but starts on {s}, not before today ({today})"),
                    "a running test started before today; leave tests that have not started out of the progress file",
                );
                return None;
            }
            if s > today {
                self.ck.err(
                    &format!("{at}.started"),
                    format!("`{id}` starts on {s}, after today ({today})"),
                    "a test that has not started yet does not belong in the progress file",
                );
                return None;
            }
        }
        if let Some(end) = ended {
            if end >= today {
                self.ck.err(
                    &format!("{at}.ended"),
                    format!("`{id}` ended on {end}, not before today ({today})"),
                    "a test still collecting today is `running`",
                );
            }
            if started.is_some_and(|s| end < s) {
                self.ck.err(
                    &format!("{at}.ended"),
                    format!("`{id}` ends on {end}, before it started"),
                    "check the two dates",
                );
            }
        }
        if kind != "finished" {
            for (key, given) in [
                ("stopped_at_look", e.stopped_at_look.is_some()),
                ("outcome", e.outcome.is_some()),
            ] {
                if given {
                    self.ck.err(
                        &format!("{at}.{key}"),
                        format!("`{id}` is `{kind}`, but `{key}` is for a finished test"),
                        format!("leave `{key}` out, or mark the test `state: finished`"),
                    );
                }
            }
        }
        match kind.as_str() {
            "finished" | "cancelled" => {
                let share = match e.share {
                    None => None,
                    Some(s) if s > 0.0 && s <= 1.0 && !Share::from_fraction(s).is_zero() => {
                        Some(Share::from_fraction(s))
                    }
                    Some(s) => {
                        self.ck.err(
                            &format!("{at}.share"),
                            format!("`{id}`: `share` is {s}; it must be in (0, 1]"),
                            "the share of the pool it ran at: 0.5 for half",
                        );
                        return None;
                    }
                };
                Some(if kind == "finished" {
                    let (stopped_at_look, outcome) = self.result(entry, &e)?;
                    let Ok(given) = self.per_arm(entry, e.units_per_arm) else {
                        return None;
                    };
                    let counted = self.counts.get(&entry.index).map(|c| c.per_arm.clone());
                    State::Finished {
                        started: started.or(self.counts.get(&entry.index).map(|c| c.first)),
                        ended,
                        share,
                        stopped_at_look,
                        outcome,
                        units_per_arm: given.or(counted),
                    }
                } else {
                    State::Cancelled {
                        note: e.note.map(|t| t.0).unwrap_or_default(),
                        started,
                        ended,
                        share,
                    }
                })
            }
            _ => self.running(entry, e, started),
        }
    }

    /// A finished entry's `stopped_at_look` (an interim look of its
    /// design) and `outcome`; `None` after reporting a problem.
    #[allow(clippy::type_complexity)]
    fn result(
        &mut self,
        entry: &At,
        e: &RawEntry,
    ) -> Option<(Option<u32>, Option<crate::plan::Outcome>)> {
        let (at, id) = (entry.at, entry.id);
        let looks = self.p.experiments[entry.index]
            .looks
            .as_ref()
            .map_or(1, |l| l.design.information.len() as u32);
        let mut ok = true;
        let stopped = match e.stopped_at_look {
            None => None,
            Some(k) if looks < 2 => {
                self.ck.err(
                    &format!("{at}.stopped_at_look"),
                    format!("`{id}` has no interim looks, so it cannot have stopped at look {k}"),
                    "leave `stopped_at_look` out; give the test's `looks` in the portfolio if it had them",
                );
                ok = false;
                None
            }
            Some(k) if k.fract() != 0.0 || k < 1.0 || k >= f64::from(looks) => {
                self.ck.err(
                    &format!("{at}.stopped_at_look"),
                    format!(
                        "`{id}`: `stopped_at_look` is {k}; its interim looks are 1 to {}",
                        looks - 1
                    ),
                    format!(
                        "the interim look that stopped it, 1 to {}; look {looks} is its final read: then leave `stopped_at_look` out",
                        looks - 1
                    ),
                );
                ok = false;
                None
            }
            Some(k) => Some(k as u32),
        };
        let outcome = match &e.outcome {
            None => None,
            Some(t) => {
                let word = t.as_str().trim().to_lowercase().replace([' ', '-'], "_");
                let names: Vec<&str> = crate::plan::Outcome::ALL.iter().map(|o| o.name()).collect();
                match crate::plan::Outcome::ALL
                    .into_iter()
                    .find(|o| o.name() == word)
                {
                    Some(o) => Some(o),
                    None => {
                        let all = names
                            .iter()
                            .map(|n| format!("`{n}`"))
                            .collect::<Vec<_>>()
                            .join(", ");
                        let hint = match diagnostic::suggestion(&word, &names) {
                            Some(s) => format!("did you mean `{s}`? one of {all}"),
                            None => format!("one of {all}"),
                        };
                        self.ck.err(
                            &format!("{at}.outcome"),
                            format!("outcome `{}` of `{id}` is not known", t.as_str()),
                            hint,
                        );
                        ok = false;
                        None
                    }
                }
            }
        };
        ok.then_some((stopped, outcome))
    }

    /// The entry's `units_per_arm`, checked against its design's arms;
    /// `Err` after reporting a problem.
    fn per_arm(&mut self, entry: &At, given: Option<Vec<f64>>) -> Result<Option<Vec<u64>>, ()> {
        let (at, id) = (entry.at, entry.id);
        let arms = self.p.experiments[entry.index].design.arms as usize;
        let Some(v) = given else { return Ok(None) };
        let key = format!("{at}.units_per_arm");
        if v.len() != arms {
            self.ck.err(
                &key,
                format!(
                    "`{id}` has {arms} arms but `units_per_arm` lists {}",
                    v.len()
                ),
                "one count per arm, control first",
            );
            return Err(());
        }
        if v.iter()
            .any(|u| !(u.is_finite() && *u >= 0.0 && u.fract() == 0.0 && *u < 1e15))
        {
            self.ck.err(
                &key,
                format!("`{id}`: `units_per_arm` must hold whole numbers >= 0"),
                "counts of units, e.g. [20510, 20488]",
            );
            return Err(());
        }
        Ok(Some(v.iter().map(|u| *u as u64).collect()))
    }

    fn running(&mut self, entry: &At, e: RawEntry, started: Option<NaiveDate>) -> Option<State> {
        let (at, id, p) = (entry.at, entry.id, self.p);
        let exp = &p.experiments[entry.index];
        let counted = self.counts.get(&entry.index).cloned();
        let started = started.or(counted.as_ref().map(|c| c.first));
        let Some(started) = started else {
            self.ck.err(
                at,
                format!("running test `{id}` has no `started` date"),
                "add `started: YYYY-MM-DD`, the first day of its data",
            );
            return None;
        };
        let share = match e.share {
            Some(s) if s > 0.0 && s <= 1.0 && !Share::from_fraction(s).is_zero() => {
                Share::from_fraction(s)
            }
            Some(s) => {
                self.ck.err(
                    &format!("{at}.share"),
                    format!("`{id}`: `share` is {s}; it must be in (0, 1]"),
                    "the share of the pool it runs at: 0.5 for half",
                );
                return None;
            }
            None => {
                self.ck.err(
                    at,
                    format!("running test `{id}` has no `share`"),
                    "add `share: ...`, the share of the pool it runs at (0.5 for half)",
                );
                return None;
            }
        };
        let Ok(per_arm) = self.per_arm(entry, e.units_per_arm) else {
            return None;
        };
        let units = match (e.units, &per_arm) {
            (Some(u), _) if !(0.0..1e15).contains(&u) || u.fract() != 0.0 => {
                self.ck.err(
                    &format!("{at}.units"),
                    format!("`{id}`: `units` is {u}; it must be a whole number >= 0"),
                    "the units collected so far over all arms",
                );
                return None;
            }
            (Some(u), Some(v)) => {
                let sum: u64 = v.iter().sum();
                if sum != u.round() as u64 {
                    self.ck.err(
                        &format!("{at}.units"),
                        format!("`{id}`: `units` is {u} but `units_per_arm` adds up to {sum}"),
                        "give the total over all arms, or leave `units` out",
                    );
                    return None;
                }
                sum
            }
            (Some(u), None) => u.round() as u64,
            (None, Some(v)) => v.iter().sum(),
            (None, None) if counted.is_some() => 0,
            (None, None) => {
                self.ck.err(
                    at,
                    format!("running test `{id}` has no `units`"),
                    "add `units: ...`, the units collected so far over all arms (0 if unknown)",
                );
                return None;
            }
        };
        // The counts file's sums fill what the entry leaves out, and must
        // agree with what it gives.
        let (units, per_arm) = match &counted {
            None => (units, per_arm),
            Some(c) => {
                let sum: u64 = c.per_arm.iter().sum();
                let given = match (&per_arm, e.units) {
                    (Some(v), _) => Some(("units_per_arm", format!("{v:?}"), v != &c.per_arm)),
                    (None, Some(_)) => Some(("units", units.to_string(), units != sum)),
                    (None, None) => None,
                };
                if let Some((key, value, differs)) = given {
                    if differs {
                        let csv = format!("{:?} (units {sum})", c.per_arm);
                        self.ck.err(
                            &format!("{at}.{key}"),
                            format!("`{id}`: `{key}` is {value}, but `counts` adds up to {csv} from line {}", c.line),
                            "give the counts in one place, or make them agree",
                        );
                        self.ck.errors.push(
                            Diagnostic::new(
                                &self.counts_name,
                                "",
                                format!("`{id}`: these rows add up to {csv}, but the progress file's `{at}.{key}` is {value}"),
                            )
                            .with_hint("give the counts in one place, or make them agree")
                            .at_line(None, c.line, 1, 1),
                        );
                        return None;
                    }
                }
                (sum, Some(c.per_arm.clone()))
            }
        };
        // Flag counts the forecast could not have delivered (5% slack).
        let pool = &p.pools[exp.pools[0]];
        let last = entry.as_of - Duration::days(1);
        if last >= started {
            let could: f64 = exp
                .pools
                .iter()
                .map(|&k| {
                    let series = forecast::Series::new(&p.pools[k], started, last);
                    series.total(0, series.len() - 1)
                        * forecast::entering(exp, &p.pools[k])
                        * share.fraction()
                })
                .sum();
            if units as f64 > could * 1.05 + 1.0 {
                self.ck.warn(
                    &format!("{at}.units"),
                    format!(
                        "`{id}` reports {units} units, more than the forecast of `{}` could deliver at {share} from {started} to {last} ({:.0})",
                        pool.id,
                        could
                    ),
                    "the count is kept; check it, or raise the pool's forecast if traffic runs above it",
                );
            }
        }
        Some(State::Running {
            started,
            share,
            units,
            units_per_arm: per_arm,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn quickstart() -> Portfolio {
        let text = include_str!("../../portfolios/quickstart.yaml");
        crate::portfolio::load_str(text, "quickstart.yaml").unwrap()
    }

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn load(text: &str) -> Result<Progress, LoadError> {
        load_progress_str(text, "progress.yaml", &quickstart(), d("2027-02-03"))
    }

    fn messages(r: Result<Progress, LoadError>) -> String {
        r.unwrap_err()
            .diagnostics
            .iter()
            .map(|d| format!("{}:{} {}", d.line.unwrap_or(0), d.key, d.message))
            .collect::<Vec<_>>()
            .join("\n")
    }

    #[test]
    fn reads_inline_traffic_days() {
        let p = load(
            "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-05, units: 120.5}\n",
        )
        .unwrap();
        assert_eq!(
            p.traffic,
            vec![Observed {
                pool: 0,
                start: d("2027-01-04"),
                units: vec![100.0, 120.5],
                events: Vec::new(),
            }]
        );
        assert_eq!(p.traffic[0].end(), d("2027-01-05"));
    }

    #[test]
    fn traffic_events_are_read_and_checked_against_its_days() {
        let p = load(
            "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-05, units: 900}\n    events:\n      - {from: 2027-01-05, to: 2027-01-05, note: flash sale}\n",
        )
        .unwrap();
        assert_eq!(
            p.traffic[0].events,
            vec![Event {
                from: d("2027-01-05"),
                to: d("2027-01-05"),
                note: "flash sale".into()
            }]
        );
        let outside = messages(load(
            "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n    events:\n      - {from: 2027-01-03, to: 2027-01-04}\n",
        ));
        assert!(
            outside.contains("6:traffic[0].events[0].from the traffic of pool `product`: event `from` 2027-01-03 is outside the days given, which run from 2027-01-04 to 2027-01-04"),
            "{outside}"
        );
    }

    #[test]
    fn traffic_problems_are_errors_at_their_keys() {
        let gap = messages(load(
            "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-06, units: 120}\n",
        ));
        assert!(
            gap.contains("5:traffic[0].days[1].date 2027-01-06 leaves a gap"),
            "{gap}"
        );
        let unknown = messages(load(
            "traffic:\n  - pool: prodct\n    days: [{date: 2027-01-04, units: 1}]\n",
        ));
        assert!(
            unknown.contains("pool `prodct` is not in the portfolio"),
            "{unknown}"
        );
        let both = messages(load(
            "traffic:\n  - pool: product\n    history: t.csv\n    days: [{date: 2027-01-04, units: 1}]\n",
        ));
        assert!(both.contains("needs either `history` or `days`"), "{both}");
        let future = messages(load(
            "as_of: 2027-01-05\ntraffic:\n  - pool: product\n    days: [{date: 2027-01-04, units: 1}, {date: 2027-01-05, units: 1}]\n",
        ));
        assert!(
            future.contains("on or after `as_of` (2027-01-05)"),
            "{future}"
        );
        let negative = messages(load(
            "traffic:\n  - pool: product\n    days: [{date: 2027-01-04, units: -3}]\n",
        ));
        assert!(negative.contains("`units` is -3"), "{negative}");
        let unread = messages(load(
            "traffic:\n  - pool: product\n    history: nowhere.csv\n",
        ));
        assert!(
            unread.contains("cannot read the traffic `nowhere.csv`"),
            "{unread}"
        );
    }

    #[test]
    fn reads_every_state() {
        let p = load(
            "as_of: 2027-02-02\nexperiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units_per_arm: [40000, 40100]\n  - id: one-page-checkout\n    state: finished\n    started: 2027-01-04\n    ended: 2027-01-31\n  - id: delivery-dates\n    state: cancelled\n    note: legal review\n",
        )
        .unwrap();
        assert_eq!(p.as_of, d("2027-02-02"));
        assert_eq!(p.entries.len(), 3);
        assert_eq!(
            p.entries[0].state,
            State::Running {
                started: d("2027-01-04"),
                share: Share::from_fraction(0.5),
                units: 80100,
                units_per_arm: Some(vec![40000, 40100]),
            }
        );
        assert!(matches!(p.entries[1].state, State::Finished { .. }));
        assert_eq!(
            p.entries[2].state,
            State::Cancelled {
                note: "legal review".into(),
                started: None,
                ended: None,
                share: None,
            }
        );
        assert!(p.warnings.is_empty());
    }

    #[test]
    fn unknown_id_lists_the_closest_first_with_its_line() {
        let e = load("experiments:\n  - id: biger-photos\n    state: finished\n").unwrap_err();
        let d = &e.diagnostics[0];
        assert_eq!(d.line, Some(2));
        assert_eq!(d.key, "experiments[0].id");
        assert!(d.message.contains("`biger-photos` is not in the portfolio"));
        assert!(d
            .hint
            .as_deref()
            .unwrap()
            .contains("closest first: `bigger-photos`"));
    }

    #[test]
    fn running_after_today_is_an_error() {
        let e = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-02-10\n    share: 0.5\n    units: 0\n").unwrap_err();
        let d = &e.diagnostics[0];
        assert_eq!(d.line, Some(4));
        assert!(
            d.message
                .contains("marked running but starts on 2027-02-10"),
            "{}",
            d.message
        );
    }

    #[test]
    fn too_many_units_is_a_warning_not_an_error() {
        // The product pool offers about 9,000 a day; at 50% for 30 days that
        // is about 135,000, far below 900,000.
        let p = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units: 900000\n").unwrap();
        assert_eq!(p.warnings.len(), 1);
        assert_eq!(p.warnings[0].line, Some(6));
        assert!(p.warnings[0].message.contains("more than the forecast"));
    }

    #[test]
    fn misspelt_key_names_the_closest_allowed_one() {
        let e = load("experiments:\n  - id: bigger-photos\n    stat: running\n").unwrap_err();
        let d = &e.diagnostics[0];
        assert_eq!(d.line, Some(3));
        assert!(
            d.hint.as_deref().unwrap().contains("did you mean `state`?"),
            "{d:?}"
        );
    }

    #[test]
    fn every_problem_is_reported_at_once() {
        let e = load("experiments:\n  - id: nope\n    state: finished\n  - id: bigger-photos\n    state: runing\n  - id: one-page-checkout\n    state: running\n    started: 2027-01-04\n    share: 1.5\n    units: 10\n").unwrap_err();
        assert_eq!(e.diagnostics.len(), 3, "{e}");
    }

    #[test]
    fn arm_counts_must_match_the_design() {
        let e = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units_per_arm: [1, 2, 3]\n").unwrap_err();
        assert!(e.diagnostics[0].message.contains("has 2 arms"));
    }

    #[test]
    fn garbage_is_an_error_not_a_panic() {
        for text in [
            "",
            "[1, 2",
            "experiments: 3",
            "- a\n- b",
            "as_of: tomorrow",
            "\u{0}\u{1}",
        ] {
            assert!(load(text).is_err(), "{text:?}");
        }
    }
}
