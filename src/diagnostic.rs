//! Diagnostics: problems found in a file the user wrote, each pointing at
//! the file, line, column and key, with a hint, and rendered like a
//! compiler error (the source line with a caret under the offending value).
//! A diagnostic's [`Severity`] decides the word it opens with: `error` for
//! a problem that stops the command, `warning` for one that does not.
//!
//! This module knows nothing about YAML or portfolios: loaders (the
//! portfolio loader, later the progress loader) build [`Diagnostic`]s and
//! this module renders them. It also ranks "closest" names for
//! did-you-mean hints.

use serde::Serialize;
use std::fmt;

/// Whether a diagnostic stops the command; decides the word it prints with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// The file cannot be used: the command stops with exit code 2.
    Error,
    /// The file is used as it is; the problem is worth a look.
    Warning,
}

impl Severity {
    /// The word a diagnostic of this severity opens with.
    pub fn word(self) -> &'static str {
        match self {
            Severity::Error => "error",
            Severity::Warning => "warning",
        }
    }
}

/// One problem in a file.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Diagnostic {
    /// An error (the default) or a warning.
    pub severity: Severity,
    /// The file as the user named it.
    pub file: String,
    /// 1-based line, when known.
    pub line: Option<usize>,
    /// 1-based column (in characters), when known.
    pub column: Option<usize>,
    /// The key the problem is about, as a path: `experiments[2].pool`;
    /// empty for the file as a whole.
    pub key: String,
    /// What is wrong, in lower case, names in backticks.
    pub message: String,
    /// What to do about it.
    pub hint: Option<String>,
    /// The text of the source line, when known (for the caret display).
    pub source_line: Option<String>,
    /// How many characters the caret underlines (at least 1).
    pub width: usize,
}

impl Diagnostic {
    /// A problem with no position yet.
    pub fn new(file: &str, key: impl Into<String>, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Error,
            file: file.to_string(),
            line: None,
            column: None,
            key: key.into(),
            message: message.into(),
            hint: None,
            source_line: None,
            width: 1,
        }
    }

    /// The same problem as a warning: it prints with `warning:`.
    pub fn warning(mut self) -> Diagnostic {
        self.severity = Severity::Warning;
        self
    }

    /// Adds a hint.
    pub fn with_hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hint = Some(hint.into());
        self
    }

    /// Points the diagnostic at `line`:`column` (both 1-based) of `source`,
    /// underlining `width` characters.
    pub fn at(self, source: &str, line: usize, column: usize, width: usize) -> Diagnostic {
        let text = line.checked_sub(1).and_then(|i| source.lines().nth(i));
        self.at_line(text, line, column, width)
    }

    /// As [`Diagnostic::at`] with the source line already found (for
    /// loaders that report many problems in a long file).
    pub fn at_line(
        mut self,
        text: Option<&str>,
        line: usize,
        column: usize,
        width: usize,
    ) -> Diagnostic {
        self.line = Some(line);
        self.column = Some(column);
        self.width = width.max(1);
        self.source_line = text.map(str::to_string);
        self
    }

    /// `file:line:column`, as far as known.
    pub fn location(&self) -> String {
        match (self.line, self.column) {
            (Some(l), Some(c)) => format!("{}:{l}:{c}", self.file),
            (Some(l), None) => format!("{}:{l}", self.file),
            _ => self.file.clone(),
        }
    }
}

impl fmt::Display for Diagnostic {
    /// ```text
    /// error: pool `checkout` is not defined
    ///   --> demo.yaml:12:11
    ///    |
    /// 12 |     pool: checkout
    ///    |           ^^^^^^^^
    ///    = key: experiments[3].pool
    ///    = hint: defined pools, closest first: check-out, home
    /// ```
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "{}: {}", self.severity.word(), self.message)?;
        let gutter = self.line.map(|l| l.to_string().len()).unwrap_or(1);
        let pad = " ".repeat(gutter);
        writeln!(f, "{pad}--> {}", self.location())?;
        if let (Some(line), Some(text)) = (self.line, &self.source_line) {
            let text = text.replace('\t', " ");
            writeln!(f, "{pad} |")?;
            writeln!(f, "{line} | {text}")?;
            if let Some(col) = self.column {
                let len = text.chars().count();
                let start = col.saturating_sub(1).min(len);
                let width = self.width.min(len.saturating_sub(start)).max(1);
                writeln!(f, "{pad} | {}{}", " ".repeat(start), "^".repeat(width))?;
            }
        }
        if !self.key.is_empty() {
            writeln!(f, "{pad} = key: {}", self.key)?;
        }
        if let Some(hint) = &self.hint {
            writeln!(f, "{pad} = hint: {hint}")?;
        }
        Ok(())
    }
}

/// Renders several diagnostics one after the other, blank lines between,
/// and a closing count.
pub fn render_all(diagnostics: &[Diagnostic]) -> String {
    let mut out = String::new();
    for d in diagnostics {
        out.push_str(&d.to_string());
        out.push('\n');
    }
    let n = diagnostics.len();
    let file = diagnostics.first().map(|d| d.file.as_str()).unwrap_or("");
    out.push_str(&format!(
        "{n} {} in `{file}`\n",
        crate::words::Count("problem", n)
    ));
    out
}

/// The candidates ordered by similarity to `word`, closest first (ties in
/// the candidates' own order). Similarity is Jaro-Winkler on lower case.
pub fn closest_first<'a>(word: &str, candidates: &[&'a str]) -> Vec<&'a str> {
    let w = word.to_lowercase();
    let mut scored: Vec<(usize, f64, &str)> = candidates
        .iter()
        .enumerate()
        .map(|(i, c)| (i, strsim::jaro_winkler(&w, &c.to_lowercase()), *c))
        .collect();
    scored.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    scored.into_iter().map(|(_, _, c)| c).collect()
}

/// The candidate closest to `word` if it is plausibly a misspelling
/// (Jaro-Winkler similarity of at least 0.8, or an edit distance of at
/// most 2).
pub fn suggestion<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    let w = word.to_lowercase();
    closest_first(word, candidates)
        .into_iter()
        .next()
        .filter(|c| {
            let c = c.to_lowercase();
            strsim::jaro_winkler(&w, &c) >= 0.8 || strsim::levenshtein(&w, &c) <= 2
        })
}

/// `a`, `b`, `c` (names in backticks, comma separated).
pub fn list(names: &[&str]) -> String {
    names
        .iter()
        .map(|n| format!("`{n}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn renders_source_line_and_caret_under_the_value() {
        let src = "name: x\npool: chekout\n";
        let d = Diagnostic::new("a.yaml", "pool", "pool `chekout` is not defined")
            .with_hint("did you mean `checkout`?")
            .at(src, 2, 7, 7);
        let text = d.to_string();
        assert_eq!(
            text,
            "error: pool `chekout` is not defined\n \
             --> a.yaml:2:7\n  \
             |\n\
             2 | pool: chekout\n  \
             |       ^^^^^^^\n  \
             = key: pool\n  \
             = hint: did you mean `checkout`?\n"
        );
    }

    #[test]
    fn caret_is_clamped_to_the_line() {
        let d = Diagnostic::new("f", "k", "m").at("ab\n", 1, 9, 40);
        let text = d.to_string();
        assert!(text.contains("1 | ab\n  |   ^\n"), "{text}");
    }

    #[test]
    fn without_position_names_the_file_only() {
        let d = Diagnostic::new("f.yaml", "", "the file is empty");
        assert_eq!(d.to_string(), "error: the file is empty\n --> f.yaml\n");
    }

    #[test]
    fn a_warning_opens_with_its_word() {
        let d = Diagnostic::new("f.yaml", "", "the count looks high").warning();
        assert_eq!(
            d.to_string(),
            "warning: the count looks high\n --> f.yaml\n"
        );
    }

    #[test]
    fn closest_first_ranks_by_similarity() {
        let c = ["home", "search", "checkout", "cart"];
        assert_eq!(closest_first("chekout", &c)[0], "checkout");
        assert_eq!(suggestion("serch", &c), Some("search"));
        assert_eq!(suggestion("zzzzzz", &c), None);
    }

    #[test]
    fn render_all_counts() {
        let a = Diagnostic::new("f.yaml", "", "one");
        let b = Diagnostic::new("f.yaml", "", "two");
        let text = render_all(&[a, b]);
        assert!(text.ends_with("2 problems in `f.yaml`\n"), "{text}");
    }
}
