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
use super::position::{self, PositionIndex};
use super::raw::{self, RawPortfolio};
use crate::diagnostic::{self, Diagnostic};
use std::fmt;
use std::path::Path;

/// Why a portfolio file could not be loaded: every problem found.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadError {
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
    let bytes = std::fs::read(path).map_err(|e| LoadError {
        diagnostics: vec![
            Diagnostic::new(&name, "", format!("cannot read the file: {e}"))
                .with_hint("check the path and that the file is readable"),
        ],
    })?;
    let text = String::from_utf8(bytes).map_err(|e| {
        let offset = e.utf8_error().valid_up_to();
        let before = String::from_utf8_lossy(&e.into_bytes()[..offset]).into_owned();
        let line = before.matches('\n').count() + 1;
        let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
        let mut d = Diagnostic::new(&name, "", "the file is not UTF-8 text")
            .with_hint("save the portfolio as UTF-8");
        d.line = Some(line);
        d.column = Some(column);
        LoadError {
            diagnostics: vec![d],
        }
    })?;
    load_str(&text, &name)
}

/// Validates portfolio text; `file_name` is used in messages only.
pub fn load_str(text: &str, file_name: &str) -> Result<Portfolio, LoadError> {
    let fail = |diagnostics: Vec<Diagnostic>| Err(LoadError { diagnostics });
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    if body
        .lines()
        .all(|l| l.trim().is_empty() || l.trim_start().starts_with('#'))
    {
        return fail(vec![Diagnostic::new(file_name, "", "the file is empty")
            .with_hint(
                "start from `portfolios/quickstart.yaml`; docs/portfolio.md lists every key",
            )]);
    }
    let index = PositionIndex::build(body);
    if let Some(ix) = &index {
        let unknown = unknown_keys(ix, body, file_name);
        if !unknown.is_empty() {
            return fail(unknown);
        }
    }
    let raw: RawPortfolio = match serde_yaml::from_str(body) {
        Ok(raw) => raw,
        Err(e) => return fail(vec![from_serde(&e, body, file_name, index.as_ref())]),
    };
    super::validate::validate(raw, body, file_name, index.as_ref())
        .map_err(|diagnostics| LoadError { diagnostics })
}

/// Pass 1: keys no raw struct accepts, all of them.
fn unknown_keys(ix: &PositionIndex, text: &str, file: &str) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    for (path, keys) in ix.mappings() {
        let Some(allowed) = raw::allowed_keys(&position::shape(path)) else {
            continue;
        };
        for (key, span) in keys {
            if allowed.contains(&key.as_str()) {
                continue;
            }
            let place = if path.is_empty() {
                "at the top level".to_string()
            } else {
                format!("in `{path}`")
            };
            let full = if path.is_empty() {
                key.clone()
            } else {
                format!("{path}.{key}")
            };
            let hint = match diagnostic::suggestion(key, allowed) {
                Some(s) => format!(
                    "did you mean `{s}`? allowed keys: {}",
                    diagnostic::list(allowed)
                ),
                None => format!("allowed keys: {}", diagnostic::list(allowed)),
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
fn from_serde(
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
        hint = "write a plain number such as `0.05` or `12000`".into();
    } else if body.contains("expected a boolean") {
        hint = "write `true` or `false`".into();
    } else if body.contains("expected a sequence") {
        hint = "write a list: `[a, b]`, or one `- item` per line".into();
    } else if body.contains("duplicate") {
        hint = "each key may appear once per mapping; remove one".into();
    } else if key.is_empty() && e.location().is_some() {
        hint = "this is not valid YAML here; check the indentation, colons and brackets".into();
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
