//! Renderers: turn one [`Plan`] into the bytes of one output format.
//!
//! Every format (terminal text, JSON, CSV, iCalendar, HTML report, Markdown)
//! lives in its own module behind the [`Renderer`] trait and reads nothing
//! but the plan and the [`RenderOptions`]. Renderers only lay out facts the
//! scheduler already put in the plan: they never recompute starts, ends,
//! shares or result dates. Grouping days into weeks for display is the only
//! arithmetic they do. Output is deterministic: the same plan and options
//! give the same bytes. Writing the bytes to a file is `crate::output`'s job.
//!
//! A re-plan's changes (`Plan::changes`) and running tests' advice
//! (`Plan::running`) are part of the plan: text, Markdown and HTML draw
//! them first, in the words of `moved`; JSON carries them as they are.
//! `markup` lays out a table once for Markdown and HTML.

pub(crate) mod common;
pub mod csv;
pub mod html;
pub mod ics;
pub mod json;
pub mod markdown;
mod markup;
pub(crate) mod moved;
pub mod numbers;
pub mod reports;
pub mod text;
pub mod words;

use crate::plan::Plan;
use std::fmt;
use std::io::IsTerminal;

/// Columns used for the terminal text when the width is not known
/// (output is not a terminal, or the terminal does not say).
pub const FALLBACK_WIDTH: u16 = 100;

/// Columns of the text written to a file (`--out`): a fixed width, so a
/// file is the same wherever and however it is written, wide enough for
/// the table's key columns (result range and pool included).
pub const FILE_WIDTH: u16 = 120;

/// Narrowest width the text renderer lays out for; anything smaller is
/// treated as this.
pub const MIN_WIDTH: u16 = 40;

/// The output formats of `sluice plan`.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash, clap::ValueEnum)]
pub enum Format {
    /// Terminal table, timeline and weekly pool share.
    Text,
    /// The whole plan as JSON (documented in docs/plan-json.md).
    Json,
    /// One row per experiment.
    Csv,
    /// An iCalendar file: run spans and result-due days.
    Ics,
    /// A self-contained HTML report with SVG charts.
    Html,
    /// A short Markdown summary.
    Md,
}

impl Format {
    /// Every format, in the order the help text lists them.
    pub const ALL: [Format; 6] = [
        Format::Text,
        Format::Json,
        Format::Csv,
        Format::Ics,
        Format::Html,
        Format::Md,
    ];

    /// The name used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Format::Text => "text",
            Format::Json => "json",
            Format::Csv => "csv",
            Format::Ics => "ics",
            Format::Html => "html",
            Format::Md => "md",
        }
    }

    /// The usual file extension, without the dot.
    pub fn extension(self) -> &'static str {
        match self {
            Format::Text => "txt",
            other => other.name(),
        }
    }

    /// The renderer for this format.
    pub fn renderer(self) -> &'static dyn Renderer {
        match self {
            Format::Text => &text::Text,
            Format::Json => &json::Json,
            Format::Csv => &csv::Csv,
            Format::Ics => &ics::Ics,
            Format::Html => &html::Html,
            Format::Md => &markdown::Markdown,
        }
    }
}

impl fmt::Display for Format {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl std::str::FromStr for Format {
    type Err = RenderError;

    fn from_str(s: &str) -> Result<Format, RenderError> {
        Format::ALL
            .into_iter()
            .find(|f| f.name() == s)
            .ok_or_else(|| RenderError::UnknownFormat(s.to_string()))
    }
}

/// How to lay out output that depends on where it goes. Only the text
/// format reads these; the file formats ignore them.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct RenderOptions {
    /// Width in columns (the terminal's, or `COLUMNS`); `None` uses
    /// [`FALLBACK_WIDTH`].
    pub width: Option<u16>,
    /// Whether to use ANSI colour in the text format.
    pub colour: bool,
}

impl Default for RenderOptions {
    /// No colour, fallback width: what a file or a pipe gets.
    fn default() -> Self {
        RenderOptions {
            width: None,
            colour: false,
        }
    }
}

impl RenderOptions {
    /// The options for writing to this process's standard output: colour
    /// only on a terminal and never when `NO_COLOR` is set; the terminal's
    /// width, else the `COLUMNS` environment variable when it holds a sane
    /// number, else [`FALLBACK_WIDTH`].
    pub fn for_stdout() -> RenderOptions {
        let stdout = std::io::stdout();
        let is_tty = stdout.is_terminal();
        let width = terminal_size::terminal_size_of(&stdout).map(|(w, _)| w.0);
        let no_color = std::env::var_os("NO_COLOR");
        let columns = std::env::var_os("COLUMNS");
        RenderOptions::decide(is_tty, no_color.as_deref(), width, columns.as_deref())
    }

    /// The options for writing to a file (`--out`): no colour, and
    /// [`FILE_WIDTH`] columns. `COLUMNS` is not read, so a file is the same
    /// wherever it is written from.
    pub fn for_file() -> RenderOptions {
        RenderOptions {
            width: Some(FILE_WIDTH),
            colour: false,
        }
    }

    /// The decision behind [`RenderOptions::for_stdout`], kept pure for tests.
    ///
    /// `NO_COLOR` follows its convention (no-color.org): colour is off when
    /// the variable is present and not empty, whatever its value.
    ///
    /// The width: on a terminal, the width the terminal reports. Otherwise
    /// (a pipe, a file, or a terminal that does not say) the `COLUMNS`
    /// environment variable, the usual way to tell a command-line tool how
    /// wide its output may be when it cannot ask a terminal, if it is a
    /// sane number (see [`parse_columns`]); else `None`, the fallback.
    pub fn decide(
        is_tty: bool,
        no_color: Option<&std::ffi::OsStr>,
        terminal_width: Option<u16>,
        columns: Option<&std::ffi::OsStr>,
    ) -> RenderOptions {
        let no_color = no_color.is_some_and(|v| !v.is_empty());
        let from_terminal = if is_tty { terminal_width } else { None };
        RenderOptions {
            width: from_terminal.or_else(|| columns.and_then(parse_columns)),
            colour: is_tty && !no_color,
        }
    }

    /// The width to lay out for: the given width (at least [`MIN_WIDTH`]),
    /// or [`FALLBACK_WIDTH`].
    pub fn effective_width(&self) -> usize {
        usize::from(self.width.unwrap_or(FALLBACK_WIDTH).max(MIN_WIDTH))
    }
}

/// Widest `COLUMNS` value taken at its word; anything wider is more likely
/// a mistake than a screen.
pub const MAX_COLUMNS: u16 = 1000;

/// The width a `COLUMNS` value asks for: a whole number from 1 to
/// [`MAX_COLUMNS`] (surrounding spaces allowed). Empty, zero, negative,
/// fractional, non-numeric and huge values give `None`, so the fallback
/// applies. Values under [`MIN_WIDTH`] are kept here and raised to it by
/// [`RenderOptions::effective_width`], as a narrow terminal would be.
pub fn parse_columns(value: &std::ffi::OsStr) -> Option<u16> {
    let n: u16 = value.to_str()?.trim().parse().ok()?;
    (1..=MAX_COLUMNS).contains(&n).then_some(n)
}

/// A failure to render a plan.
#[derive(Debug)]
pub enum RenderError {
    /// A format name that is not one of [`Format::ALL`].
    UnknownFormat(String),
    /// JSON serialisation failed.
    Json(serde_json::Error),
    /// CSV writing failed.
    Csv(::csv::Error),
}

impl fmt::Display for RenderError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RenderError::UnknownFormat(name) => {
                let names: Vec<String> = Format::ALL
                    .iter()
                    .map(|f| format!("`{}`", f.name()))
                    .collect();
                write!(
                    f,
                    "unknown output format `{name}`; known formats: {}",
                    names.join(", ")
                )
            }
            RenderError::Json(e) => write!(f, "cannot write the plan as json: {e}"),
            RenderError::Csv(e) => write!(f, "cannot write the plan as csv: {e}"),
        }
    }
}

impl std::error::Error for RenderError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            RenderError::Json(e) => Some(e),
            RenderError::Csv(e) => Some(e),
            _ => None,
        }
    }
}

/// One output format.
pub trait Renderer {
    /// The bytes of `plan` in this format.
    fn render(&self, plan: &Plan, opts: &RenderOptions) -> Result<Vec<u8>, RenderError>;
}

/// Renders `plan` in `format`.
pub fn render(plan: &Plan, format: Format, opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
    format.renderer().render(plan, opts)
}

#[cfg(test)]
pub(crate) mod fixture {
    //! The small fixture plan shared by the renderer unit tests, and a
    //! re-plan of it.
    use crate::plan::{Plan, Run, RunningOutlook, Status};
    use crate::share::Share;
    use chrono::Duration;

    /// The invented plan in tests/fixtures/plan-small.json.
    pub fn plan() -> Plan {
        serde_json::from_str(include_str!("../../tests/fixtures/plan-small.json"))
            .expect("tests/fixtures/plan-small.json is a valid plan")
    }

    /// The fixture plan re-made: `hero-copy` finished, `trust-badges` a
    /// week later, `search-synonyms` running at a new share, `recipe-cards`
    /// in, `search-freshness` out, and the storefront's forecast 30% down.
    pub fn replanned() -> Plan {
        let old = plan();
        let mut new = old.clone();
        for e in &mut new.experiments {
            match e.id.as_str() {
                "hero-copy" => {
                    e.status = Status::Finished;
                    e.run = None;
                }
                "trust-badges" => {
                    if let Some(r) = &mut e.run {
                        r.result_date += Duration::days(7);
                    }
                }
                "search-synonyms" => {
                    e.status = Status::Running;
                    if let Some(r) = &mut e.run {
                        r.share = Share::from_fraction(0.5);
                    }
                }
                "recipe-cards" => {
                    e.status = Status::Scheduled;
                    e.run = old.experiments[3].run.map(|r| Run {
                        share: Share::from_fraction(0.2),
                        ..r
                    });
                }
                "search-freshness" => {
                    e.status = Status::Unscheduled;
                    e.run = None;
                }
                _ => {}
            }
        }
        for day in &mut new.pools[0].days {
            day.forecast *= 0.7;
        }
        new.changes = Some(crate::diff::diff(&old, &new));
        new
    }

    /// The order the "what moved" table lists [`replanned`]'s experiments in.
    pub const MOVED_ORDER: [&str; 7] = [
        "search-freshness",
        "trust-badges",
        "search-synonyms",
        "recipe-cards",
        "free-shipping-bar",
        "gift-wrap-upsell",
        "hero-copy",
    ];

    /// The fixture plan with two running tests' advice: one re-shared so
    /// that it fits, one that cannot reach its sample.
    pub fn with_advice() -> Plan {
        let mut plan = plan();
        let outlook = |id: &str, fits: bool, advice: &str| RunningOutlook {
            id: id.into(),
            started: plan.window.start,
            share: Share::from_fraction(0.5),
            collected: 10,
            units_needed: 100,
            end: None,
            fits_window: fits,
            rescue_share: None,
            detectable_effect: None,
            advice: Some(advice.into()),
            share_before: Some(Share::from_fraction(if fits { 0.1 } else { 0.5 })),
            flags: if fits {
                Vec::new()
            } else {
                vec![crate::plan::RunningFlag::CannotFinish]
            },
            no_running: None,
            sample_ratio: None,
        };
        plan.running = vec![
            outlook("search-synonyms", true, "re-shared from 10% to 50%"),
            outlook("hero-copy", false, "cannot reach its sample"),
        ];
        plan
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::ffi::OsStr;

    #[test]
    fn colour_only_on_a_terminal_without_no_color() {
        assert!(RenderOptions::decide(true, None, Some(120), None).colour);
        assert!(!RenderOptions::decide(false, None, Some(120), None).colour);
        assert!(!RenderOptions::decide(true, Some(OsStr::new("1")), None, None).colour);
        // no-color.org: an empty NO_COLOR does not switch colour off.
        assert!(RenderOptions::decide(true, Some(OsStr::new("")), None, None).colour);
        // COLUMNS sets a width, never colour.
        let piped = RenderOptions::decide(false, None, None, Some(OsStr::new("160")));
        assert!(!piped.colour);
    }

    #[test]
    fn width_follows_the_terminal_and_falls_back_otherwise() {
        let tty = RenderOptions::decide(true, None, Some(132), None);
        assert_eq!(tty.effective_width(), 132);
        let pipe = RenderOptions::decide(false, None, Some(132), None);
        assert_eq!(pipe.width, None);
        assert_eq!(pipe.effective_width(), usize::from(FALLBACK_WIDTH));
        let tiny = RenderOptions::decide(true, None, Some(10), None);
        assert_eq!(tiny.effective_width(), usize::from(MIN_WIDTH));
    }

    #[test]
    fn columns_sets_the_width_when_no_terminal_says() {
        fn cols(v: &str) -> Option<&OsStr> {
            Some(OsStr::new(v))
        }
        // A pipe: COLUMNS decides.
        let narrow = RenderOptions::decide(false, None, None, cols("60"));
        assert_eq!(narrow.width, Some(60));
        assert_eq!(narrow.effective_width(), 60);
        let wide = RenderOptions::decide(false, None, Some(80), cols("160"));
        assert_eq!(wide.effective_width(), 160);
        // A terminal that reports its width wins over a stale COLUMNS.
        let tty = RenderOptions::decide(true, None, Some(132), cols("60"));
        assert_eq!(tty.effective_width(), 132);
        // A terminal that does not say: COLUMNS again.
        let mute = RenderOptions::decide(true, None, None, cols("90"));
        assert_eq!(mute.effective_width(), 90);
        // Below the narrowest layout: raised to it, like a tiny terminal.
        let tiny = RenderOptions::decide(false, None, None, cols("12"));
        assert_eq!(tiny.effective_width(), usize::from(MIN_WIDTH));
    }

    #[test]
    fn columns_that_are_not_a_sane_width_fall_back() {
        for bad in ["", "0", "-80", "80.5", "wide", "1001", "70000", "99999999"] {
            assert_eq!(parse_columns(OsStr::new(bad)), None, "COLUMNS={bad:?}");
            let o = RenderOptions::decide(false, None, None, Some(OsStr::new(bad)));
            assert_eq!(
                o.effective_width(),
                usize::from(FALLBACK_WIDTH),
                "COLUMNS={bad:?}"
            );
        }
        assert_eq!(parse_columns(OsStr::new(" 72 ")), Some(72));
        assert_eq!(parse_columns(OsStr::new("1000")), Some(1000));
        assert_eq!(parse_columns(OsStr::new("1")), Some(1));
    }

    #[test]
    fn format_names_round_trip_and_unknown_names_are_listed() {
        for f in Format::ALL {
            assert_eq!(f.name().parse::<Format>().unwrap(), f);
        }
        let err = "pdf".parse::<Format>().unwrap_err().to_string();
        assert!(err.contains("`pdf`") && err.contains("`html`"), "{err}");
    }

    #[test]
    fn every_format_renders_the_same_bytes_twice() {
        let plan = fixture::plan();
        for f in Format::ALL {
            let opts = RenderOptions::default();
            let a = render(&plan, f, &opts).unwrap();
            let b = render(&plan, f, &opts).unwrap();
            assert!(!a.is_empty(), "{f} is empty");
            assert_eq!(a, b, "{f} differs between two renders");
        }
    }
}
