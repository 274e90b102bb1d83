//! Loading a portfolio file: text -> raw serde structs -> validated model.
//!
//! Three passes, each reporting with file, line, column, key and hint:
//!
//! 1. keys: every mapping's keys against the keys its raw struct accepts
//!    (all misspelt keys at once, with the closest allowed key);
//! 2. types: serde_yaml into [`raw`](super::raw) (a YAML syntax or type
//!    error stops here, with serde's position);
//! 3. meaning: [`validate`](super::validate) checks ids, references,
//!    cycles, dates and ranges, and sizes every experiment, collecting
//!    every problem before giving up.
//!
//! Positions for pass 3 come from [`position`](super::position). This
//! module and its siblings are the only code that touches the YAML crates.

use super::model::Portfolio;
use super::position::{self, PositionIndex, Scan, MAX_DEPTH};
use super::raw::{self, RawPortfolio};
use crate::diagnostic::{self, Diagnostic};
use std::fmt;
use std::path::Path;

/// Why a portfolio file could not be loaded: every problem found.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadError {
    /// In file order; never empty.
    pub diagnostics: Vec<Diagnostic>,
}

impl fmt::Display for LoadError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&diagnostic::render_all(&self.diagnostics))
    }
}

impl std::error::Error for LoadError {}

/// Reads and validates the portfolio file at `path`.
pub fn load(path: &Path) -> Result<Portfolio, LoadError> {
    let name = path.display().to_string();
    let text = read_text(path, "the file", "save the portfolio as UTF-8")?;
    load_str(&text, &name)
}

/// Reads a YAML file as UTF-8 text; an unreadable file or one that is not
/// UTF-8 is an error naming the file (and the line and column of the first
/// byte that is not UTF-8). `what` names the file in the message.
pub(crate) fn read_text(path: &Path, what: &str, utf8_hint: &str) -> Result<String, LoadError> {
    let name = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| LoadError {
        diagnostics: vec![
            Diagnostic::new(&name, "", format!("cannot read {what}: {e}"))
                .with_hint("check the path and that the file is readable"),
        ],
    })?;
    String::from_utf8(bytes).map_err(|e| {
        let offset = e.utf8_error().valid_up_to();
        let before = String::from_utf8_lossy(&e.into_bytes()[..offset]).into_owned();
        let (line, column) = line_column(&before, before.len());
        let mut d =
            Diagnostic::new(&name, "", format!("{what} is not UTF-8 text")).with_hint(utf8_hint);
        d.line = Some(line);
        d.column = Some(column);
        LoadError {
            diagnostics: vec![d],
        }
    })
}

/// The 1-based line and column (in characters) of byte `offset` of `text`,
/// counting LF, CR LF and a lone CR each as one line break, as YAML does.
fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset];
    let mut line = 1;
    let mut column = 1;
    let mut chars = before.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\r' if chars.peek() == Some(&'\n') => {}
            '\r' | '\n' => {
                line += 1;
                column = 1;
            }
            _ => column += 1,
        }
    }
    (line, column)
}

/// What every YAML loader checks before parsing, on text without its BOM:
/// a control character YAML does not allow (reported at its own line and
/// column), and old Mac line ends (a CR alone), which are read as line
/// breaks. Returns the text to parse, with each lone CR made an LF so that
/// every line-based step agrees with the YAML parser on the line numbers.
pub(crate) fn prepare<'t>(
    body: &'t str,
    file_name: &str,
    hint: &str,
) -> Result<std::borrow::Cow<'t, str>, LoadError> {
    // YAML 1.2 §5.1: printable characters, plus tab, LF, CR and NEL.
    let bad = body
        .char_indices()
        .find(|&(_, c)| c.is_control() && !matches!(c, '\t' | '\n' | '\r' | '\u{85}'));
    if let Some((offset, c)) = bad {
        let (line, column) = line_column(body, offset);
        // The source line is shown with each such character as U+FFFD, so
        // the terminal does not act on it and the caret stays in place.
        let normal: String = body
            .replace("\r\n", "\n")
            .replace('\r', "\n")
            .chars()
            .map(|c| {
                if c.is_control() && !matches!(c, '\t' | '\n') {
                    '\u{fffd}'
                } else {
                    c
                }
            })
            .collect();
        let name = match c {
            '\0' => "a NUL byte".to_string(),
            c => format!("the control character U+{:04X}", c as u32),
        };
        return Err(LoadError {
            diagnostics: vec![Diagnostic::new(
                file_name,
                "",
                format!("the file holds {name}, which YAML does not allow"),
            )
            .with_hint(hint)
            .at(&normal, line, column, 1)],
        });
    }
    if body.contains('\r') {
        let mut out = String::with_capacity(body.len());
        let mut chars = body.chars().peekable();
        while let Some(c) = chars.next() {
            match c {
                '\r' if chars.peek() == Some(&'\n') => {}
                '\r' => out.push('\n'),
                c => out.push(c),
            }
        }
        return Ok(std::borrow::Cow::Owned(out));
    }
    Ok(std::borrow::Cow::Borrowed(body))
}

/// The line of the `---` that starts a second YAML document, if any: a
/// line that is `---` or starts with `--- `, after the first document's
/// content or marker (a `---` before any content opens the first one).
pub(crate) fn second_document(body: &str) -> Option<usize> {
    let mut opened = false;
    for (i, line) in body.lines().enumerate() {
        let marker = line == "---" || line.starts_with("--- ") || line.starts_with("---\t");
        if marker {
            if opened {
                return Some(i + 1);
            }
            opened = true;
            continue;
        }
        let t = line.trim();
        if !t.is_empty() && !t.starts_with('#') && !line.starts_with('%') && line != "..." {
            opened = true;
        }
    }
    None
}

/// The diagnostic for a file with more than one YAML document, at the
/// second document's `---`.
pub(crate) fn two_documents(body: &str, file_name: &str, what: &str) -> Option<Diagnostic> {
    let line = second_document(body)?;
    Some(
        Diagnostic::new(
            file_name,
            "",
            format!("{what} holds a second YAML document; only one is read"),
        )
        .with_hint("remove this `---` and what follows it, or merge it into the first document")
        .at(body, line, 1, 3),
    )
}

/// Validates portfolio text; `file_name` is used in messages only.
pub fn load_str(text: &str, file_name: &str) -> Result<Portfolio, LoadError> {
    let fail = |diagnostics: Vec<Diagnostic>| Err(LoadError { diagnostics });
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    let body = prepare(
        body,
        file_name,
        "remove it; save the portfolio as plain text",
    )?;
    let body = body.as_ref();
    if body
        .lines()
        .all(|l| l.trim().is_empty() || l.trim_start().starts_with('#'))
    {
        return fail(vec![Diagnostic::new(file_name, "", "the file is empty")
            .with_hint(
                "start from `portfolios/quickstart.yaml`; docs/portfolio.md lists every key",
            )]);
    }
    let index = match index_of(body, file_name) {
        Ok(index) => index,
        Err(d) => return fail(d),
    };
    if let Some(ix) = &index {
        let unknown = unknown_keys(ix, body, file_name, raw::allowed_keys, raw::trade_word_hint);
        if !unknown.is_empty() {
            return fail(unknown);
        }
    }
    if let Some(d) = two_documents(body, file_name, "the file") {
        return fail(vec![d]);
    }
    let raw: RawPortfolio = match serde_yaml::from_str(body) {
        Ok(raw) => raw,
        Err(e) => return fail(vec![from_serde(&e, body, file_name, index.as_ref())]),
    };
    super::validate::validate(raw, body, file_name, index.as_ref())
        .map_err(|diagnostics| LoadError { diagnostics })
}

/// The position index of `body`: `None` when the YAML parser rejects it
/// (serde then reports the syntax error), an error when it nests too deep.
/// The first passes every YAML loader of a small file shares: the
/// position index, unknown keys (against `allowed_keys`, with their
/// closest allowed one), a second document, then serde's type errors at
/// their position, whose hints point at `doc` (docs/progress.md, ...).
/// `what` names the file in messages ("the progress file").
pub(crate) fn read_yaml<T: serde::de::DeserializeOwned>(
    body: &str,
    file_name: &str,
    what: &str,
    doc: &str,
    allowed_keys: fn(&str) -> Option<&'static [&'static str]>,
) -> Result<(T, Option<PositionIndex>), Vec<Diagnostic>> {
    let index = index_of(body, file_name)?;
    if let Some(ix) = &index {
        let unknown = unknown_keys(ix, body, file_name, allowed_keys, |_, _| None);
        if !unknown.is_empty() {
            return Err(unknown);
        }
    }
    if let Some(d) = two_documents(body, file_name, what) {
        return Err(vec![d]);
    }
    match serde_yaml::from_str(body) {
        Ok(raw) => Ok((raw, index)),
        Err(e) => {
            let mut d = from_serde(&e, body, file_name, index.as_ref());
            d.hint = d.hint.map(|h| h.replace("docs/portfolio.md", doc));
            Err(vec![d])
        }
    }
}

pub(crate) fn index_of(
    body: &str,
    file_name: &str,
) -> Result<Option<PositionIndex>, Vec<Diagnostic>> {
    match PositionIndex::scan(body) {
        Scan::Indexed(ix) => Ok(Some(ix)),
        Scan::Unparsable => Ok(None),
        Scan::TooDeep(at) => Err(vec![Diagnostic::new(
            file_name,
            "",
            format!("the file nests lists and mappings more than {MAX_DEPTH} levels deep"),
        )
        .with_hint("a portfolio needs five levels at most; check for runaway brackets")
        .at(body, at.line, at.column, 1)]),
    }
}

/// Pass 1: keys no raw struct accepts, all of them. `allowed_keys` maps a
/// path shape (`pools[].adjustments[]`) to the keys its struct accepts;
/// `trade_words` gives the hint for a shape's unknown key that is a common
/// word of the trade for one of the file's keys.
pub(crate) fn unknown_keys(
    ix: &PositionIndex,
    text: &str,
    file: &str,
    allowed_keys: fn(&str) -> Option<&'static [&'static str]>,
    trade_words: fn(&str, &str) -> Option<&'static str>,
) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    for (path, keys) in ix.mappings() {
        let Some(allowed) = allowed_keys(&position::shape(path)) else {
            continue;
        };
        for (n, (key, span)) in keys.iter().enumerate() {
            let full = if path.is_empty() {
                key.clone()
            } else {
                format!("{path}.{key}")
            };
            if let Some((_, first)) = keys[..n].iter().find(|(k, _)| k == key) {
                out.push(
                    Diagnostic::new(file, full.clone(), format!("key `{key}` appears twice"))
                        .with_hint(format!(
                            "it is first given on line {}; keep one",
                            first.line
                        ))
                        .at(text, span.line, span.column, span.width),
                );
                continue;
            }
            if allowed.contains(&key.as_str()) {
                continue;
            }
            let place = if path.is_empty() {
                "at the top level".to_string()
            } else {
                format!("in `{path}`")
            };
            let trade = trade_words(&position::shape(path), key);
            let hint = match (trade, diagnostic::suggestion(key, allowed)) {
                (Some(t), _) => format!("{t}; allowed keys: {}", diagnostic::list(allowed)),
                (None, Some(s)) => format!(
                    "did you mean `{s}`? allowed keys: {}",
                    diagnostic::list(allowed)
                ),
                (None, None) => format!("allowed keys: {}", diagnostic::list(allowed)),
            };
            out.push(
                Diagnostic::new(file, full, format!("unknown key `{key}` {place}"))
                    .with_hint(hint)
                    .at(text, span.line, span.column, span.width),
            );
        }
    }
    out.sort_by_key(|d| (d.line, d.column));
    out
}

/// Pass 2: a serde_yaml error as a diagnostic.
pub(crate) fn from_serde(
    e: &serde_yaml::Error,
    text: &str,
    file: &str,
    ix: Option<&PositionIndex>,
) -> Diagnostic {
    // Positions go in the diagnostic, not the message; a syntax error may
    // name a second one, where the enclosing structure began.
    let (msg, context) = strip_positions(&e.to_string());
    // serde_yaml prefixes data errors with the path: `experiments[0].arms: ...`.
    let (key, body) = match msg.split_once(": ") {
        Some((p, rest))
            if !p.is_empty()
                && !p.contains(' ')
                && (p
                    .chars()
                    .next()
                    .is_some_and(|c| c.is_alphanumeric() || c == '_')) =>
        {
            (p.to_string(), rest.to_string())
        }
        _ => (String::new(), msg.clone()),
    };
    let mut body = body
        .replace("expected f64", "expected a number")
        .replace("expected text", "expected text (a single value)");
    let mut hint = "docs/portfolio.md lists every key with its type".to_string();
    let too_big = body
        .strip_prefix("invalid type: string \"")
        .and_then(|rest| rest.strip_suffix("\", expected a number"))
        .filter(|n| n.parse::<f64>().is_ok_and(|x| x.is_infinite()))
        .map(str::to_string);
    if let Some(n) = too_big {
        body = format!("{n} is too large to be a number");
        hint = "numbers must stay below about 1.8e308; check for a typo in the exponent".into();
    } else if let Some(i) = body.find("expected struct Raw") {
        body.truncate(i);
        body.push_str("expected a mapping of keys");
        hint = if key.is_empty() {
            "the file must be a mapping such as `name: ...`, `window: ...`, `pools: ...`, `experiments: ...`".into()
        } else {
            format!("`{key}` holds `key: value` lines; docs/portfolio.md lists them")
        };
    } else if body.contains("expected a number") {
        let percent = body
            .split('"')
            .nth(1)
            .and_then(|v| v.trim().strip_suffix('%'))
            .and_then(|v| v.trim().parse::<f64>().ok());
        hint = if let Some(x) = percent {
            format!("write percentages as fractions: {x}% is `{}`", x / 100.0)
        } else {
            "write a plain number such as `0.05` or `12000`".into()
        };
    } else if body.contains("expected a boolean") {
        hint = "write `true` or `false`".into();
    } else if body.contains("expected a sequence") {
        hint = "write a list: `[a, b]`, or one `- item` per line".into();
    } else if body.contains("duplicate") {
        hint = "each key may appear once per mapping; remove one".into();
    } else if key.is_empty() && e.location().is_some() {
        let tab = e
            .location()
            .and_then(|l| text.lines().nth(l.line().saturating_sub(1)))
            .is_some_and(|l| l.contains('\t'));
        hint = if tab {
            "YAML indents with spaces, not tabs".into()
        } else {
            "this is not valid YAML here; check the indentation, colons and brackets".into()
        };
        if let Some((line, column)) = context {
            hint.push_str(&format!(
                " (the enclosing structure starts at line {line}, column {column})"
            ));
        }
    }
    let message = if key.is_empty() {
        body
    } else {
        format!("`{key}`: {body}")
    };
    let d = Diagnostic::new(file, key.clone(), message).with_hint(hint);
    // Prefer serde's own position; widen the caret from the index when the
    // key is known there.
    match e.location() {
        Some(loc) => {
            let width = ix
                .and_then(|ix| ix.get(&key))
                .filter(|n| n.value.line == loc.line() && n.value.column == loc.column())
                .map_or(1, |n| n.value.width);
            d.at(text, loc.line(), loc.column(), width)
        }
        None => match ix.and_then(|ix| ix.locate(&key)) {
            Some(s) => d.at(text, s.line, s.column, s.width),
            None => d,
        },
    }
}

/// Removes every ` at line L column C` from a serde_yaml message; returns
/// the message and the last such position that is not the error's own
/// (libyaml names where the enclosing structure began there).
fn strip_positions(msg: &str) -> (String, Option<(usize, usize)>) {
    let mut out = String::new();
    let mut positions = Vec::new();
    let mut rest = msg;
    while let Some(i) = rest.find(" at line ") {
        out.push_str(&rest[..i]);
        let after = &rest[i + " at line ".len()..];
        let digits = |t: &str| t.chars().take_while(char::is_ascii_digit).count();
        let nl = digits(after);
        let parsed = after[nl..].strip_prefix(" column ").and_then(|t| {
            let nc = digits(t);
            Some((after[..nl].parse().ok()?, t[..nc].parse().ok()?, &t[nc..]))
        });
        match parsed {
            Some((line, column, tail)) => {
                positions.push((line, column));
                rest = tail;
            }
            None => {
                out.push_str(" at line ");
                rest = after;
            }
        }
    }
    out.push_str(rest);
    let context = if positions.len() > 1 {
        positions.last().copied()
    } else {
        None
    };
    (out, context)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::model::*;
    use crate::portfolio::DEFAULT_SHARE_LEVELS;
    use crate::share::{Share, ShareLevels};
    use crate::sizing::{self, Correction, Effect, Method, Metric, Sides};
    use chrono::{NaiveDate, Weekday};
    use proptest::prelude::*;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    const SMALL: &str = "\
name: small
window: {start: 2027-01-04, end: 2027-04-04}
pools:
  - {id: home, daily: 20000, max_concurrent: 2}
  - id: basket
    label: Basket
    daily: 3000
    weekday_pattern: [1, 1, 1, 1, 1, 0.5, 0.5]
    adjustments:
      - {from: 2027-02-01, to: 2027-02-07, multiply: 0.5, note: dip}
      - {from: 2027-02-03, to: 2027-02-03, level: 10}
    sharing: overlap
    max_concurrent: 3
experiments:
  - id: a
    pool: home
    baseline: 0.04
    mde: 0.1
    not_with: [c, c]
  - id: b
    title: Bee
    owner: Team B
    pool: basket
    metric: mean
    baseline: 38.5
    sd: 61
    mde_abs: 2
    arms: 3
    ratio: 2
    rho: 0.4
    alpha: 0.1
    power: 0.9
    sides: one
    method: z
    correction: sidak
    priority: 2.5
    earliest_start: 2027-01-11
    deadline: 2027-03-28
    max_share: 0.5
    min_days: 7
    whole_weeks: false
    after: [a, {id: c, gap_days: 5}]
  - id: c
    pool: home
    baseline: 0.2
    mde: 0.05
    not_with: [b]
blackouts:
  - {from: 2027-03-15, to: 2027-03-21, kind: no_starts, note: freeze}
  - {from: 2027-02-15, to: 2027-02-16, kind: no_running, pools: [basket, basket]}
";

    fn small() -> Portfolio {
        load_str(SMALL, "small.yaml").unwrap_or_else(|e| panic!("{e}"))
    }

    #[test]
    fn defaults_fill_what_the_file_leaves_out() {
        let p = small();
        assert_eq!(p.name, "small");
        assert_eq!(p.window.start, d("2027-01-04"));
        assert_eq!(p.defaults.alpha, 0.05);
        assert_eq!(p.defaults.power, 0.8);
        assert_eq!(p.defaults.sides, Sides::Two);
        assert_eq!(p.defaults.rate_method, Method::Pooled);
        assert_eq!(p.defaults.mean_method, Method::T);
        assert_eq!(p.defaults.correction, Correction::Bonferroni);
        assert_eq!(p.defaults.min_days, 14);
        assert!(p.defaults.whole_weeks);
        assert_eq!(
            p.share_levels,
            ShareLevels::from_fractions(&DEFAULT_SHARE_LEVELS)
        );
        assert_eq!(p.planning.grid, StartGrid::Weekly);
        assert_eq!(p.planning.start_weekday, Weekday::Mon);
        assert_eq!(p.planning.lateness_weight, 0.5);
        assert!(!p.planning.reshare_running);
        let home = &p.pools[0];
        assert_eq!(home.label, "home");
        assert_eq!(home.forecast.weekday, [1.0; 7]);
        assert_eq!(home.sharing, Sharing::Split);
        let a = &p.experiments[0];
        assert_eq!(a.title, "a");
        assert_eq!(a.priority, 1.0);
        assert_eq!(a.max_share, Share::WHOLE);
        assert_eq!((a.min_days, a.whole_weeks), (14, true));
        assert_eq!(a.design.arms, 2);
        assert_eq!(a.design.method, Method::Pooled);
        assert_eq!(a.earliest_start, None);
    }

    #[test]
    fn overrides_reach_the_design_and_the_size_comes_from_sizing() {
        let p = small();
        let b = &p.experiments[1];
        assert_eq!((b.title.as_str(), b.owner.as_str()), ("Bee", "Team B"));
        assert_eq!(b.pools, vec![1]);
        assert_eq!(
            b.design.metric,
            Metric::Mean {
                mean: 38.5,
                sd: 61.0
            }
        );
        assert_eq!(b.design.effect, Effect::Absolute(2.0));
        assert_eq!((b.design.arms, b.design.ratio, b.design.rho), (3, 2.0, 0.4));
        assert_eq!((b.design.alpha, b.design.power), (0.1, 0.9));
        assert_eq!(b.design.sides, Sides::One);
        assert_eq!(b.design.method, Method::Z);
        assert_eq!(b.design.correction, Correction::Sidak);
        assert_eq!(b.need, sizing::sample_size(&b.design).unwrap());
        assert_eq!(b.priority, 2.5);
        assert_eq!(b.earliest_start, Some(d("2027-01-11")));
        assert_eq!(b.deadline, Some(d("2027-03-28")));
        assert_eq!(b.max_share.fraction(), 0.5);
        assert_eq!((b.min_days, b.whole_weeks), (7, false));
        let basket = &p.pools[1];
        assert_eq!(basket.label, "Basket");
        assert_eq!(basket.sharing, Sharing::Overlap);
        assert_eq!(basket.max_concurrent, 3);
        assert_eq!(basket.forecast.weekday[5], 0.5);
        assert_eq!(basket.forecast.adjustments.len(), 2);
        assert_eq!(basket.forecast.adjustments[1].change, Change::Level(10.0));
        assert_eq!(basket.forecast.adjustments[0].note, "dip");
    }

    #[test]
    fn after_keeps_gaps_and_not_with_is_symmetric_sorted_unique() {
        let p = small();
        assert_eq!(
            p.experiments[1].after,
            vec![
                Prerequisite {
                    experiment: 0,
                    gap_days: 0
                },
                Prerequisite {
                    experiment: 2,
                    gap_days: 5
                }
            ]
        );
        assert_eq!(p.experiments[0].not_with, vec![2]);
        assert_eq!(p.experiments[1].not_with, vec![2]);
        assert_eq!(p.experiments[2].not_with, vec![0, 1]);
    }

    #[test]
    fn blackouts_resolve_pools() {
        let p = small();
        assert_eq!(p.blackouts[0].kind, BlackoutKind::NoStarts);
        assert!(p.blackouts[0].pools.is_empty());
        assert_eq!(p.blackouts[1].kind, BlackoutKind::NoRunning);
        assert_eq!(p.blackouts[1].pools, vec![1]);
        assert_eq!(p.blackouts[1].note, "");
    }

    #[test]
    fn grid_follows_whole_weeks_and_share_levels_are_sorted() {
        let text = SMALL.replace(
            "name: small\n",
            "name: small\ndefaults: {whole_weeks: false}\nshare_levels: [1, 0.5, 0.25, 0.5]\nplanning: {start_weekday: Wednesday}\n",
        );
        let p = load_str(&text, "x.yaml").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(p.planning.grid, StartGrid::Daily);
        assert_eq!(p.planning.start_weekday, Weekday::Wed);
        assert_eq!(
            p.share_levels,
            ShareLevels::from_fractions(&[0.25, 0.5, 1.0])
        );
        assert!(!p.experiments[0].whole_weeks);
    }

    #[test]
    fn the_name_defaults_to_the_file_stem() {
        let text = SMALL.replace("name: small\n", "");
        let p = load_str(&text, "dir/spring.yaml").unwrap();
        assert_eq!(p.name, "spring");
    }

    #[test]
    fn every_unknown_key_is_reported_with_the_closest_allowed_one() {
        let text = SMALL
            .replace("    sharing: overlap", "    shareing: overlap")
            .replace("    title: Bee", "    titel: Bee");
        let e = load_str(&text, "x.yaml").unwrap_err();
        assert_eq!(e.diagnostics.len(), 2);
        let s = &e.diagnostics[0];
        assert_eq!(s.key, "pools[1].shareing");
        assert_eq!((s.line, s.column), (Some(12), Some(5)));
        assert!(s
            .hint
            .as_deref()
            .unwrap()
            .starts_with("did you mean `sharing`?"));
        assert_eq!(e.diagnostics[1].key, "experiments[1].titel");
        assert!(e.to_string().ends_with("2 problems in `x.yaml`\n"));
    }

    #[test]
    fn unknown_ids_list_the_defined_ones_closest_first() {
        let text = SMALL.replace("after: [a, {id: c", "after: [a, {id: cc");
        let e = load_str(&text, "x.yaml").unwrap_err();
        assert_eq!(e.diagnostics.len(), 1);
        let d = &e.diagnostics[0];
        assert_eq!(d.key, "experiments[1].after[1].id");
        assert_eq!(d.message, "experiment `b`: experiment `cc` is not defined");
        assert_eq!(
            d.hint.as_deref(),
            Some("defined experiments, closest first: `c`, `a`, `b`")
        );
    }

    #[test]
    fn a_longer_cycle_is_printed_in_full() {
        let text = SMALL.replace("    not_with: [b]\n", "    not_with: [b]\n    after: [b]\n");
        let e = load_str(&text, "x.yaml").unwrap_err();
        let msgs: Vec<&str> = e.diagnostics.iter().map(|d| d.message.as_str()).collect();
        assert_eq!(msgs, vec!["`after` forms a cycle: b -> c -> b"]);
    }

    #[test]
    fn a_huge_mean_test_is_sized_by_the_method_it_names() {
        // About 9.9 million units per arm, where the t and z sizes differ by
        // about a unit: each method's own size is stored.
        let text = SMALL.replace("mde_abs: 2", "mde_abs: 0.077");
        let p = load_str(&text, "x.yaml").unwrap_or_else(|e| panic!("{e}"));
        let z = &p.experiments[1];
        assert_eq!(z.design.method, Method::Z, "the file asked for z here");
        assert_eq!(z.need, sizing::sample_size(&z.design).unwrap());
        let text = text.replace("method: z", "method: t");
        let p = load_str(&text, "x.yaml").unwrap_or_else(|e| panic!("{e}"));
        let t = &p.experiments[1];
        assert_eq!(t.design.method, Method::T);
        assert_eq!(t.need, sizing::sample_size(&t.design).unwrap());
        assert!(t.need.control_exact > 1e6);
        assert!((t.need.control_exact - z.need.control_exact).abs() < 5.0);
    }

    #[test]
    fn a_max_share_below_every_level_is_refused() {
        let text = SMALL.replace("max_share: 0.5", "max_share: 0.05");
        let e = load_str(&text, "x.yaml").unwrap_err();
        assert!(e.diagnostics[0]
            .message
            .contains("below the smallest share level 0.1"));
    }

    #[test]
    fn method_must_suit_the_metric() {
        let text = SMALL.replace("method: z", "method: pooled");
        let e = load_str(&text, "x.yaml").unwrap_err();
        assert_eq!(e.diagnostics[0].key, "experiments[1].method");
        assert!(e.diagnostics[0]
            .message
            .contains("does not apply to a mean metric"));
    }

    #[test]
    fn odd_inputs_are_errors_not_panics() {
        for (text, part) in [
            ("", "the file is empty"),
            ("   \n# only a comment\n", "the file is empty"),
            ("just a sentence", "expected a mapping"),
            ("[1, 2, 3]", "expected a mapping"),
            ("42", "expected a mapping"),
            ("name: [unclosed", "`name`"),
            (
                "window: {start: 2027-01-04\npools: []",
                "did not find expected",
            ),
            ("name: x\n---\nname: y\n", "t.yaml:2:1"),
            ("\u{feff}name: x\n", "has no `window`"),
            (
                "window: {start: 0001-01-01, end: 9999-12-31}",
                "three years",
            ),
            ("window: 12", "expected a mapping"),
            (
                &format!("name: {}{}", "[".repeat(100_000), "]".repeat(100_000)),
                "more than 64 levels deep",
            ),
            ("pools: {id: x}", "expected a sequence"),
            (
                "window: {start: 2027-01-04, end: 2027-04-04}\nexperiments: [{id: 名前, pool: 池}]",
                "pool `池` is not defined",
            ),
        ] {
            let e = load_str(text, "t.yaml").expect_err(text);
            assert!(e.to_string().contains(part), "{text:?}: {e}");
        }
    }

    #[test]
    fn a_file_that_is_not_utf8_is_reported_with_its_line() {
        let dir = std::env::temp_dir().join(format!("sluice-load-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let f = dir.join("latin1.yaml");
        std::fs::write(&f, b"name: ok\nowner: Jos\xe9\n").unwrap();
        let e = load(&f).unwrap_err();
        assert_eq!(e.diagnostics[0].line, Some(2));
        assert!(e.diagnostics[0].message.contains("not UTF-8"));
        std::fs::remove_dir_all(&dir).unwrap();
    }

    /// A YAML-ish tree: mappings whose keys mostly come from the schema,
    /// sequences, and scalars chosen to hit range checks.
    fn tree() -> impl Strategy<Value = serde_yaml::Value> {
        use serde_yaml::Value;
        let keys = prop::sample::select(vec![
            "name",
            "window",
            "start",
            "end",
            "defaults",
            "alpha",
            "power",
            "sides",
            "pools",
            "experiments",
            "blackouts",
            "id",
            "pool",
            "daily",
            "weekday_pattern",
            "adjustments",
            "from",
            "to",
            "multiply",
            "level",
            "sharing",
            "max_concurrent",
            "baseline",
            "sd",
            "mde",
            "mde_abs",
            "arms",
            "ratio",
            "rho",
            "metric",
            "after",
            "not_with",
            "gap_days",
            "kind",
            "share_levels",
            "max_share",
            "priority",
            "earliest_start",
            "deadline",
            "planning",
            "start_grid",
            "min_days",
            "zz",
        ]);
        let leaf = prop_oneof![
            Just(Value::Null),
            any::<bool>().prop_map(Value::Bool),
            any::<f64>().prop_map(|x| Value::Number(x.into())),
            any::<i64>().prop_map(|x| Value::Number(x.into())),
            prop::sample::select(vec![
                "2027-01-04",
                "2027-04-04",
                "2028-02-29",
                "2027-02-30",
                "home",
                "a",
                "b",
                "rate",
                "mean",
                "split",
                "overlap",
                "no_starts",
                "no_running",
                "weekly",
                "0.05",
                "",
                "ünï",
                "1e400",
                ".nan",
            ])
            .prop_map(|s| Value::String(s.to_string())),
            (0.0..1.0f64).prop_map(|x| Value::Number(x.into())),
        ];
        leaf.prop_recursive(5, 64, 8, move |inner| {
            prop_oneof![
                prop::collection::vec(inner.clone(), 0..6).prop_map(Value::Sequence),
                prop::collection::vec((keys.clone(), inner), 0..8).prop_map(|kv| {
                    let mut m = serde_yaml::Mapping::new();
                    for (k, v) in kv {
                        m.insert(Value::String(k.to_string()), v);
                    }
                    Value::Mapping(m)
                }),
            ]
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(256))]

        #[test]
        fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..512)) {
            let text = String::from_utf8_lossy(&bytes);
            let _ = load_str(&text, "fuzz.yaml").map_err(|e| e.to_string());
        }

        #[test]
        fn random_trees_never_panic(v in tree()) {
            let text = serde_yaml::to_string(&v).unwrap_or_default();
            let _ = load_str(&text, "fuzz.yaml").map_err(|e| e.to_string());
        }

        #[test]
        fn comments_and_blank_lines_change_nothing(
            at in prop::collection::vec((0usize..60, prop::sample::select(vec![
                "", "# a note", "    # indented note", "#",
            ])), 1..8)
        ) {
            let mut lines: Vec<&str> = SMALL.lines().collect();
            for (i, line) in at {
                let i = i % (lines.len() + 1);
                lines.insert(i, line);
            }
            match load_str(&lines.join("\n"), "small.yaml") {
                Ok(p) => prop_assert_eq!(p, small()),
                Err(e) => prop_assert!(false, "{}", e),
            }
        }

        #[test]
        fn mutated_portfolios_never_panic(
            edits in prop::collection::vec((0usize..60, prop::sample::select(vec![
                "", "  - id: a", "    after: [b]", "    pool: x", "  baseline: 2", "- ",
                ":", "    mde: .nan", "    arms: 1e30", "[", "    not_with: [a, a, b]",
                "    deadline: 2027-01-01", "experiments: 3", "      multiply: -1",
            ])), 1..6)
        ) {
            let mut lines: Vec<String> = SMALL.lines().map(str::to_string).collect();
            for (at, line) in edits {
                let at = at % (lines.len() + 1);
                if line.is_empty() && at < lines.len() {
                    lines.remove(at);
                } else {
                    lines.insert(at, line.to_string());
                }
            }
            let text = lines.join("\n");
            match load_str(&text, "fuzz.yaml") {
                Ok(p) => {
                    // Whatever loads keeps the model's invariants.
                    for e in &p.experiments {
                        prop_assert!(e.pools.iter().all(|&k| k < p.pools.len()));
                        prop_assert!(e.need.total > 0);
                        prop_assert!(e.not_with.windows(2).all(|w| w[0] < w[1]));
                    }
                }
                Err(e) => {
                    prop_assert!(!e.diagnostics.is_empty());
                    let _ = e.to_string();
                }
            }
        }
    }

    #[test]
    fn positions_leave_the_message() {
        let (m, c) = strip_positions(
            "did not find expected ',' or '}' at line 4 column 6, while parsing a flow mapping at line 3 column 9",
        );
        assert_eq!(
            m,
            "did not find expected ',' or '}', while parsing a flow mapping"
        );
        assert_eq!(c, Some((3, 9)));
        let (m, c) = strip_positions("x: invalid type at line 2 column 1");
        assert_eq!((m.as_str(), c), ("x: invalid type", None));
    }
}
