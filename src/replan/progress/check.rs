//! The semantic checks of one progress file against a validated
//! portfolio and the re-plan's `today`: every problem at once, each at
//! its line and key with a hint.

use super::*;

/// The checks of one progress file against a portfolio and the re-plan's
/// `today`, recorded by the shared [`Checker`].
pub(super) struct ProgressCheck<'a> {
    pub(super) ck: Checker<'a>,
    pub(super) p: &'a Portfolio,
    pub(super) today: NaiveDate,
    /// The `counts` file's sums, by experiment (empty without one).
    pub(super) counts: crate::replan::counts::Counts,
    /// The `counts` file's path, for messages.
    pub(super) counts_name: String,
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

    pub(super) fn validate(&mut self, raw: RawProgress) -> Progress {
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
        let mut unlisted: Vec<(&usize, &crate::replan::counts::Counted)> = self
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
        match crate::replan::counts::parse(&text, &self.counts_name, self.p, as_of) {
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
                        * crate::portfolio::entering(exp, &p.pools[k])
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
