//! Reading a scenario file (YAML) or one of the board's edits (JSON) into
//! checked [`Edit`]s, against the validated portfolio.
//!
//! The file goes through the portfolio loader's passes (control bytes,
//! unknown keys with the closest allowed one, serde's type errors at their
//! position) and then [`check_edit`] on every entry, so every problem is
//! reported at once at its line and column, an unknown id with the closest
//! defined ones. The board's JSON edits take the same raw shape and the
//! same checks, without positions.

use super::{Edit, TestChange};
use crate::diagnostic::{self, Diagnostic};
use crate::portfolio::raw::{fields_of, Text};
use crate::portfolio::{prepare, read_text, read_yaml, Checker, LoadError, Portfolio, StartGrid};
use crate::share::Share;
use crate::sizing::Effect;
use chrono::{Datelike, NaiveDate};
use serde::Deserialize;
use std::path::Path;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawScenario {
    edits: Option<Vec<RawEdit>>,
}

/// One edit as a scenario file or the board writes it: a `test` or a
/// `pool` (or neither, for `confidence`) and the keys that change it.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawEdit {
    test: Option<Text>,
    pool: Option<Text>,
    leave_out: Option<bool>,
    priority: Option<f64>,
    mde: Option<f64>,
    max_share: Option<f64>,
    start: Option<Text>,
    earliest_start: Option<Text>,
    deadline: Option<Text>,
    scale: Option<f64>,
    from: Option<Text>,
    confidence: Option<Text>,
}

fn allowed_keys(shape: &str) -> Option<&'static [&'static str]> {
    Some(match shape {
        "" => fields_of::<RawScenario>(),
        "edits[]" => fields_of::<RawEdit>(),
        _ => return None,
    })
}

/// Reads and checks the scenario file at `path` against `portfolio`.
pub fn load(path: &Path, portfolio: &Portfolio) -> Result<Vec<Edit>, LoadError> {
    let name = path.display().to_string();
    let text = read_text(path, "the scenario file", "save the scenario as UTF-8")?;
    load_str(&text, &name, portfolio)
}

/// Checks scenario text; `file_name` is used in messages only.
pub fn load_str(
    text: &str,
    file_name: &str,
    portfolio: &Portfolio,
) -> Result<Vec<Edit>, LoadError> {
    let fail = |diagnostics: Vec<Diagnostic>| Err(LoadError { diagnostics });
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    let body = prepare(
        body,
        file_name,
        "remove it; save the scenario as plain text",
    )?;
    let body = body.as_ref();
    if body
        .lines()
        .all(|l| l.trim().is_empty() || l.trim_start().starts_with('#'))
    {
        return fail(vec![Diagnostic::new(
            file_name,
            "",
            "the scenario file is empty",
        )
        .with_hint(
            "list the edits: `edits: [{test: ID, leave_out: true}]` (docs/scenario.md)",
        )]);
    }
    let (raw, index): (RawScenario, _) = match read_yaml(
        body,
        file_name,
        "the scenario file",
        "docs/scenario.md",
        allowed_keys,
    ) {
        Ok(read) => read,
        Err(d) => return fail(d),
    };
    let mut ck = Checker::new(file_name, body, index.as_ref());
    let Some(list) = raw.edits else {
        ck.push(
            "edits",
            "the scenario has no `edits` list".to_string(),
            Some(
                "list the edits: `edits: [{test: ID, leave_out: true}]` (docs/scenario.md)".into(),
            ),
            true,
        );
        return fail(ck.errors);
    };
    let mut edits = Vec::new();
    for (i, raw) in list.iter().enumerate() {
        edits.extend(checked(&mut ck, &format!("edits[{i}]"), raw, portfolio));
    }
    if ck.errors.is_empty() {
        Ok(edits)
    } else {
        fail(ck.errors)
    }
}

/// One of the board's edits (the raw shape of a scenario file's entry, as
/// JSON) checked against `portfolio`: the edits it makes, or every problem
/// in words (without positions).
pub fn check_edit(raw: &RawEdit, portfolio: &Portfolio) -> Result<Vec<Edit>, Vec<Diagnostic>> {
    let mut ck = Checker::new("edit", "", None);
    let edits = checked(&mut ck, "edit", raw, portfolio);
    if ck.errors.is_empty() {
        Ok(edits)
    } else {
        Err(ck.errors)
    }
}

/// A date key: a date inside the window, or `none` where `none_ok`.
/// `Err(())` after recording the problem.
fn day(
    ck: &mut Checker,
    p: &Portfolio,
    key: &str,
    name: &str,
    v: &Option<Text>,
) -> Result<Option<Option<NaiveDate>>, ()> {
    let Some(t) = v else { return Ok(None) };
    if t.as_str().trim() == "none" {
        return Ok(Some(None));
    }
    let before = ck.errors.len();
    let d = ck.date(
        key,
        &format!("`{name}`"),
        v,
        "2027-02-01, or `none` to lift it",
    );
    match d {
        Some(d) if p.window.contains(d) => Ok(Some(Some(d))),
        Some(d) => {
            ck.err(
                key,
                format!(
                    "`{name}` {d} lies outside the window {} to {}",
                    p.window.start, p.window.end
                ),
                "give a day inside the portfolio's window",
            );
            Err(())
        }
        None if ck.errors.len() > before => Err(()),
        None => Ok(None),
    }
}

/// A weekday's full English name.
fn weekday_name(w: chrono::Weekday) -> &'static str {
    use chrono::Weekday::*;
    match w {
        Mon => "Monday",
        Tue => "Tuesday",
        Wed => "Wednesday",
        Thu => "Thursday",
        Fri => "Friday",
        Sat => "Saturday",
        Sun => "Sunday",
    }
}

/// The edits one raw entry at `at` makes, its problems recorded in `ck`.
fn checked(ck: &mut Checker, at: &str, raw: &RawEdit, p: &Portfolio) -> Vec<Edit> {
    let key = |k: &str| format!("{at}.{k}");
    let before = ck.errors.len();
    let test_keys: [(&str, bool); 7] = [
        ("leave_out", raw.leave_out.is_some()),
        ("priority", raw.priority.is_some()),
        ("mde", raw.mde.is_some()),
        ("max_share", raw.max_share.is_some()),
        ("start", raw.start.is_some()),
        ("earliest_start", raw.earliest_start.is_some()),
        ("deadline", raw.deadline.is_some()),
    ];
    let pool_keys: [(&str, bool); 2] =
        [("scale", raw.scale.is_some()), ("from", raw.from.is_some())];
    let given = |keys: &[(&'static str, bool)]| -> Vec<&'static str> {
        keys.iter().filter(|(_, g)| *g).map(|(k, _)| *k).collect()
    };
    let mut out = Vec::new();
    if let Some(c) = &raw.confidence {
        let text = c.as_str().trim();
        let value = if text == "none" {
            Some(None)
        } else {
            match text.parse::<f64>() {
                Ok(v) if (0.5..1.0).contains(&v) => Some(Some(v)),
                _ => None,
            }
        };
        match value {
            Some(v) => out.push(Edit::Confidence(v)),
            None => ck.err(
                &key("confidence"),
                format!("`confidence` is `{text}`, not a number in [0.5, 1) or `none`"),
                "0.8 plans every test so that its result comes by its planned date on 80% of simulated traffic paths; `none` plans on the forecast as it is",
            ),
        }
    }
    match (&raw.test, &raw.pool) {
        (Some(_), Some(_)) => {
            ck.err(
                &key("pool"),
                "an edit names both a `test` and a `pool`",
                "give each its own entry in `edits`",
            );
        }
        (Some(t), None) => {
            if let Some(k) = given(&pool_keys).first() {
                ck.err(
                    &key(k),
                    format!("`{k}` changes a pool, but this edit names the test `{}`", t.as_str()),
                    "give the pool's change its own entry: `{pool: ID, scale: 0.7, from: YYYY-MM-DD}`",
                );
            }
            let id = t.as_str().trim();
            let Some(i) = p.experiment_index(id) else {
                let ids: Vec<&str> = p.experiments.iter().map(|e| e.id.as_str()).collect();
                let close = diagnostic::closest_first(id, &ids);
                ck.err(
                    &key("test"),
                    format!("test `{id}` is not in the portfolio"),
                    format!(
                        "{}defined tests, closest first: {}",
                        match diagnostic::suggestion(id, &ids) {
                            Some(s) => format!("did you mean `{s}`? "),
                            None => String::new(),
                        },
                        diagnostic::list(&close[..close.len().min(8)])
                    ),
                );
                return Vec::new();
            };
            let ex = &p.experiments[i];
            let who = format!("test `{id}`: ");
            let mut change = |c: TestChange| {
                out.push(Edit::Test {
                    id: id.to_string(),
                    change: c,
                })
            };
            if let Some(b) = raw.leave_out {
                change(TestChange::LeaveOut(b));
            }
            if let Some(v) = raw.priority {
                if ck.number(
                    &key("priority"),
                    &who,
                    v,
                    v > 0.0 && v.is_finite() && v <= 1e9,
                    "a positive weight",
                    "higher means more valuable; 1 is the default",
                ) {
                    change(TestChange::Priority(v));
                }
            }
            if let Some(m) = raw.mde {
                if ex.sample_size_given || ex.metrics.is_empty() {
                    ck.err(
                        &key("mde"),
                        format!(
                            "{who}its size is given (`sample_size`), so it has no MDE to change"
                        ),
                        "change its `sample_size` in the portfolio, or leave this edit out",
                    );
                } else if ck.number(
                    &key("mde"),
                    &who,
                    m,
                    m > 0.0 && m.is_finite(),
                    "a relative lift > 0",
                    "0.05 is a 5% lift",
                ) {
                    match crate::portfolio::resize(ex, Effect::Relative(m)) {
                        Ok(_) => change(TestChange::Mde(m)),
                        Err(e) => ck.err(
                            &key("mde"),
                            format!("{who}an MDE of {m} cannot be sized: {e}"),
                            "give a smaller lift, e.g. 0.05 for 5%",
                        ),
                    }
                }
            }
            if let Some(s) = raw.max_share {
                if ck.number(
                    &key("max_share"),
                    &who,
                    s,
                    s > 0.0 && s <= 1.0,
                    "a share in (0, 1]",
                    "the largest fraction of the pool this test may take; 1 for no limit",
                ) {
                    let share = Share::from_fraction(s);
                    match p.share_levels.lowest() {
                        Some(lowest) if share < lowest => ck.err(
                            &key("max_share"),
                            format!("{who}`max_share` {s} is below the smallest share level {}; the planner could never run it", lowest.fraction()),
                            format!("give at least {}", lowest.fraction()),
                        ),
                        _ => change(TestChange::MaxShare(share)),
                    }
                }
            }
            if let Ok(Some(d)) = day(ck, p, &key("start"), "start", &raw.start) {
                let grid = p.planning.grid == StartGrid::Weekly;
                match d {
                    Some(d) if grid && d.weekday() != p.planning.start_weekday => {
                        let back = (7 + d.weekday().num_days_from_monday()
                            - p.planning.start_weekday.num_days_from_monday())
                            % 7;
                        let before = d - chrono::Duration::days(i64::from(back));
                        let after = before + chrono::Duration::days(7);
                        ck.err(
                            &key("start"),
                            format!(
                                "{who}`start` {d} is a {}, but tests start on {}s (the weekly grid)",
                                weekday_name(d.weekday()),
                                weekday_name(p.planning.start_weekday)
                            ),
                            format!("pin it to {before} or {after}"),
                        );
                    }
                    d => change(TestChange::Start(d)),
                }
            }
            if let Ok(Some(d)) = day(
                ck,
                p,
                &key("earliest_start"),
                "earliest_start",
                &raw.earliest_start,
            ) {
                change(TestChange::EarliestStart(d));
            }
            if let Ok(Some(d)) = day(ck, p, &key("deadline"), "deadline", &raw.deadline) {
                change(TestChange::Deadline(d));
            }
            if raw.leave_out.is_none() && given(&test_keys).is_empty() && ck.errors.len() == before
            {
                ck.push(
                    &key("test"),
                    format!("the edit of test `{id}` changes nothing"),
                    Some("add what changes: `leave_out`, `priority`, `mde`, `max_share`, `start`, `earliest_start` or `deadline`".into()),
                    false,
                );
            }
        }
        (None, Some(pool)) => {
            if let Some(k) = given(&test_keys).first() {
                ck.err(
                    &key(k),
                    format!(
                        "`{k}` changes a test, but this edit names the pool `{}`",
                        pool.as_str()
                    ),
                    "give the test's change its own entry: `{test: ID, ...}`",
                );
            }
            let id = pool.as_str().trim();
            if p.pool_index(id).is_none() {
                let ids: Vec<&str> = p.pools.iter().map(|p| p.id.as_str()).collect();
                let close = diagnostic::closest_first(id, &ids);
                ck.err(
                    &key("pool"),
                    format!("pool `{id}` is not defined"),
                    format!("defined pools, closest first: {}", diagnostic::list(&close)),
                );
                return Vec::new();
            }
            let from = match day(ck, p, &key("from"), "from", &raw.from) {
                Ok(Some(d)) => d,
                Ok(None) => None,
                Err(()) => return Vec::new(),
            };
            match raw.scale {
                Some(f) => {
                    if ck.number(
                        &key("scale"),
                        &format!("pool `{id}`: "),
                        f,
                        f.is_finite() && f >= 0.0,
                        "a number >= 0",
                        "the multiplier of its traffic: 0.7 for a 30% drop",
                    ) {
                        out.push(Edit::Pool {
                            id: id.to_string(),
                            factor: f,
                            from,
                        });
                    }
                }
                None => ck.push(
                    &key("pool"),
                    format!("the edit of pool `{id}` gives no `scale`"),
                    Some("add the multiplier: `scale: 0.7` for a 30% drop".into()),
                    false,
                ),
            }
        }
        (None, None) => {
            let stray = given(&test_keys)
                .into_iter()
                .chain(given(&pool_keys))
                .next();
            if let Some(k) = stray {
                ck.err(
                    &key(k),
                    format!("`{k}` needs a `test` or `pool` to change"),
                    "name it: `{test: ID, ...}` or `{pool: ID, scale: 0.7}`",
                );
            } else if raw.confidence.is_none() {
                ck.push(
                    at,
                    "an edit names no `test`, `pool` or `confidence`".to_string(),
                    Some("e.g. `{test: ID, leave_out: true}`, `{pool: ID, scale: 0.7}` or `{confidence: 0.8}`".into()),
                    false,
                );
            }
        }
    }
    out
}
