//! The checker every loader of a file users write shares (the portfolio's
//! validation and the re-plan's progress file): it records each problem at
//! its key, placed by the file's [`PositionIndex`] (line, column and the
//! source line for the caret), errors and warnings apart, so one pass can
//! report every problem at once.

use super::position::PositionIndex;
use super::raw::Text;
use crate::diagnostic::Diagnostic;
use chrono::NaiveDate;

pub(crate) struct Checker<'a> {
    pub file: &'a str,
    /// The source, line by line.
    lines: Vec<&'a str>,
    pub index: Option<&'a PositionIndex>,
    /// Problems that refuse the file.
    pub errors: Vec<Diagnostic>,
    /// Problems worth a look that do not refuse it.
    pub warnings: Vec<Diagnostic>,
}

impl<'a> Checker<'a> {
    /// A checker of `text` (the file's body as parsed) named `file` in
    /// messages.
    pub fn new(file: &'a str, text: &'a str, index: Option<&'a PositionIndex>) -> Checker<'a> {
        Checker {
            file,
            lines: text.lines().collect(),
            index,
            errors: Vec::new(),
            warnings: Vec::new(),
        }
    }

    /// A problem at `key`: the caret under its value, or under the key
    /// itself when `at_key` (for a key that is missing from its mapping).
    fn diagnostic(
        &self,
        key: &str,
        message: String,
        hint: Option<String>,
        at_key: bool,
    ) -> Diagnostic {
        let mut d = Diagnostic::new(self.file, key, message);
        if let Some(h) = hint {
            d = d.with_hint(h);
        }
        let span = self.index.and_then(|ix| {
            if at_key {
                ix.locate_key(key)
            } else {
                ix.locate(key)
            }
        });
        if let Some(s) = span {
            let text = s.line.checked_sub(1).and_then(|i| self.lines.get(i));
            d = d.at_line(text.copied(), s.line, s.column, s.width);
        }
        d
    }

    /// Records an error at `key` (see [`Checker::diagnostic`]).
    pub fn push(&mut self, key: &str, message: String, hint: Option<String>, at_key: bool) {
        let d = self.diagnostic(key, message, hint, at_key);
        self.errors.push(d);
    }

    /// An error in the value at `key`.
    pub fn err(&mut self, key: &str, message: impl Into<String>, hint: impl Into<String>) {
        self.push(key, message.into(), Some(hint.into()), false);
    }

    /// A warning about the value at `key`.
    pub fn warn(&mut self, key: &str, message: impl Into<String>, hint: impl Into<String>) {
        let d = self
            .diagnostic(key, message.into(), Some(hint.into()), false)
            .warning();
        self.warnings.push(d);
    }

    /// Whether a number is `ok`; when not, an error at `key` saying it
    /// must be `expected`. `who` opens the message (`` test `x`: ``).
    pub fn number(
        &mut self,
        key: &str,
        who: &str,
        value: f64,
        ok: bool,
        expected: &str,
        hint: &str,
    ) -> bool {
        if !ok {
            let leaf = key.rsplit('.').next().unwrap_or(key);
            self.err(
                key,
                format!("{who}`{leaf}` is {}; it must be {expected}", show(value)),
                hint,
            );
        }
        ok
    }

    /// The date at `key`, if given; an error when it is not YYYY-MM-DD.
    /// `name` opens the message (`` `as_of` ``), `example` ends the hint.
    pub fn date(
        &mut self,
        key: &str,
        name: &str,
        v: &Option<Text>,
        example: &str,
    ) -> Option<NaiveDate> {
        let t = v.as_ref()?;
        match NaiveDate::parse_from_str(t.as_str().trim(), "%Y-%m-%d") {
            Ok(d) => Some(d),
            Err(_) => {
                self.err(
                    key,
                    format!("{name} is `{}`, not a date", t.as_str()),
                    format!("write dates as YYYY-MM-DD, e.g. {example}"),
                );
                None
            }
        }
    }
}

/// A number as the user would write it.
pub(crate) fn show(x: f64) -> String {
    if x.is_nan() {
        "not a number (NaN)".into()
    } else if x.is_infinite() {
        if x > 0.0 {
            "infinite".into()
        } else {
            "minus infinite".into()
        }
    } else {
        format!("{x}")
    }
}
