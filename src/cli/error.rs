//! The command line's one error type: every way a command can fail, the
//! words it prints and the exit code it ends with. Commands return these;
//! only [`super::main`] prints them. The layers' own errors (loading,
//! sizing, rendering, writing) are wrapped as they are and worded here.
//!
//! Exit codes: 2 for input the user can fix (bad flags or files), 1 for
//! anything else. A closed pipe on stdout is not an error.

use crate::output::OutputError;
use crate::portfolio::LoadError;
use crate::render::RenderError;
use crate::replan::ReplanError;
use crate::schedule::Backend;
use crate::sizing::report::ReportError;
use crate::sizing::{Effect, SizingError};
use chrono::NaiveDate;
use std::fmt;
use std::path::PathBuf;

/// Exit code for input the user can fix (bad flags, invalid files).
pub(crate) const EXIT_INVALID: u8 = 2;
/// Exit code for any other failure.
pub(crate) const EXIT_FAILURE: u8 = 1;

/// A failure that ends a command.
#[derive(Debug)]
pub(crate) enum Error {
    /// A portfolio or progress file that does not load: every problem in it.
    Load { error: LoadError },
    /// `--time-limit` is not a positive number of seconds.
    TimeLimit { seconds: f64 },
    /// `--backend` names a solver this build does not have.
    UnknownBackend { name: String },
    /// `plan --today` lies outside the portfolio's window.
    TodayOutsideWindow {
        today: NaiveDate,
        start: NaiveDate,
        end: NaiveDate,
    },
    /// `replan --today` is after the window's end.
    TodayAfterWindow { today: NaiveDate, end: NaiveDate },
    /// The re-plan cannot be made (for example a `--scale` of an unknown pool).
    Replan { error: ReplanError },
    /// The `--previous` plan cannot be read.
    PreviousRead {
        path: PathBuf,
        io_error: std::io::Error,
    },
    /// The `--previous` file is not a plan in JSON.
    PreviousParse {
        path: PathBuf,
        json_error: serde_json::Error,
    },
    /// With `--strict`: the progress file leaves out tests the previous
    /// plan ended before today.
    MissingProgress {
        /// The progress file.
        progress: PathBuf,
        /// The tests it leaves out.
        ids: Vec<String>,
    },
    /// `size` was given no metric (or half of one).
    SizeMetric,
    /// `size` was given no effect (or both kinds).
    SizeEffect,
    /// The design the `size` flags describe is refused by sizing.
    Design { error: SizingError, effect: Effect },
    /// The power at the rounded sizes cannot be computed.
    Power { error: SizingError },
    /// `--daily` and `--share` give no duration.
    Duration { error: SizingError },
    /// The plan cannot be rendered in the chosen format.
    Render { error: RenderError },
    /// `--out` cannot be written.
    Output { error: OutputError },
    /// A report cannot be written as JSON.
    Json { error: serde_json::Error },
    /// Standard output cannot be written (other than a closed pipe).
    Stdout { io_error: std::io::Error },
    /// `forecast --pool` names a pool the portfolio does not define.
    UnknownPool { id: String, defined: Vec<String> },
    /// The planning board cannot start (its port is taken, no token).
    Board {
        error: crate::board::server::StartError,
    },
}

impl Error {
    /// The failure of a `size` or `detect` report of a design with `effect`.
    pub(crate) fn from_report(e: ReportError, effect: Effect) -> Error {
        match e {
            ReportError::Design(error) => Error::Design { error, effect },
            ReportError::Power(error) => Error::Power { error },
            ReportError::Duration(error) => Error::Duration { error },
        }
    }

    /// The exit code this failure ends the process with.
    pub(crate) fn exit_code(&self) -> u8 {
        match self {
            Error::Output { .. }
            | Error::Json { .. }
            | Error::Stdout { .. }
            | Error::Board { .. } => EXIT_FAILURE,
            Error::Load { .. }
            | Error::TimeLimit { .. }
            | Error::UnknownBackend { .. }
            | Error::TodayOutsideWindow { .. }
            | Error::TodayAfterWindow { .. }
            | Error::Replan { .. }
            | Error::PreviousRead { .. }
            | Error::PreviousParse { .. }
            | Error::MissingProgress { .. }
            | Error::SizeMetric
            | Error::SizeEffect
            | Error::Design { .. }
            | Error::Power { .. }
            | Error::Duration { .. }
            | Error::Render { .. }
            | Error::UnknownPool { .. } => EXIT_INVALID,
        }
    }
}

/// A field as the command line names it: `mde_abs` is `` `--mde-abs` ``.
fn flag(field: &'static str) -> String {
    format!("`--{}`", field.replace('_', "-"))
}

/// The library's message for a design built from flags, its field worded
/// as its flag; an effect that moves the rate outside (0, 1) is put down to
/// the flag that set it.
fn design_words(error: &SizingError, effect: Effect) -> String {
    let text = error.worded(&flag);
    match (error, effect) {
        (SizingError::TreatmentRateOutside { .. }, Effect::Relative(_)) => {
            format!("{}: {text}", flag("mde"))
        }
        (SizingError::TreatmentRateOutside { .. }, Effect::Absolute(_)) => {
            format!("{}: {text}", flag("mde_abs"))
        }
        _ => text,
    }
}

impl From<LoadError> for Error {
    fn from(error: LoadError) -> Error {
        Error::Load { error }
    }
}

impl From<crate::Error> for Error {
    fn from(error: crate::Error) -> Error {
        match error {
            crate::Error::Load(error) => Error::Load { error },
            crate::Error::TimeLimit(seconds) => Error::TimeLimit { seconds },
            crate::Error::TodayOutsideWindow { today, start, end } => {
                Error::TodayOutsideWindow { today, start, end }
            }
            crate::Error::Render(error) => error.into(),
            crate::Error::Replan(error) => Error::Replan { error },
        }
    }
}

impl From<ReplanError> for Error {
    fn from(error: ReplanError) -> Error {
        Error::Replan { error }
    }
}

impl From<RenderError> for Error {
    fn from(error: RenderError) -> Error {
        Error::Render { error }
    }
}

impl From<OutputError> for Error {
    fn from(error: OutputError) -> Error {
        Error::Output { error }
    }
}

impl fmt::Display for Error {
    /// What stderr shows, without the closing newline. A file that does
    /// not load shows its diagnostics, each opening with its own severity;
    /// every other failure is one `error: ` line.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Error::Load { error } = self {
            let text = error.to_string();
            return f.write_str(text.strip_suffix('\n').unwrap_or(&text));
        }
        f.write_str("error: ")?;
        match self {
            Error::Load { .. } => Ok(()),
            Error::UnknownPool { id, defined } => {
                let ranked = crate::diagnostic::closest_first(
                    id,
                    &defined.iter().map(String::as_str).collect::<Vec<_>>(),
                );
                write!(
                    f,
                    "`--pool` {id} is not a pool of the portfolio; defined pools, closest first: {}",
                    crate::diagnostic::list(&ranked)
                )
            }
            Error::Board { error } => write!(
                f,
                "the planning board cannot start: {error}; try another `--port`, or `--port 0` for a free one"
            ),
            Error::TimeLimit { seconds } => write!(
                f,
                "`--time-limit` must be a positive number of seconds, not {seconds}"
            ),
            Error::UnknownBackend { name } => {
                let names: Vec<&str> = Backend::available().iter().map(|b| b.name()).collect();
                write!(
                    f,
                    "backend `{name}` is not in this build; available: {}",
                    names.join(", ")
                )?;
                if name == "highs" {
                    f.write_str(" (build with `--features highs` for HiGHS)")?;
                }
                Ok(())
            }
            Error::TodayOutsideWindow { today, start, end } => write!(
                f,
                "`--today` {today} lies outside the window {start} to {end}"
            ),
            Error::TodayAfterWindow { today, end } => write!(
                f,
                "`--today` {today} is after the window's end {end}; there is nothing left to plan (give the portfolio a new window to plan the next quarter)"
            ),
            Error::Replan { error } => write!(f, "{error}"),
            Error::PreviousRead { path, io_error } => write!(
                f,
                "cannot read the previous plan `{}`: {io_error}",
                path.display()
            ),
            Error::PreviousParse { path, json_error } => write!(
                f,
                "`{}` is not a plan in JSON ({json_error}); write one with `sluice plan FILE --format json --out {}`",
                path.display(),
                path.display()
            ),
            Error::MissingProgress { progress, ids } => {
                let names: Vec<String> = ids.iter().map(|id| format!("`{id}`")).collect();
                write!(
                    f,
                    "the previous plan ended {} before today, but `{}` does not mention {}; {} planned again from today as if never run; add {} with `state: finished` (or `cancelled`)",
                    names.join(", "),
                    progress.display(),
                    crate::words::agree("it", "them", ids.len()),
                    crate::words::agree("it is", "they are", ids.len()),
                    crate::words::agree("it", "each", ids.len()),
                )
            }
            Error::SizeMetric => f.write_str(
                "give the metric: `--baseline P` for a rate, or `--mean M --sd S` for a mean",
            ),
            Error::SizeEffect => f.write_str(
                "give the effect: `--mde X` for a relative lift (0.05 = 5%), or `--mde-abs X` for an absolute difference (for a guardrail: `--margin X` or `--margin-abs X`)",
            ),
            Error::Design { error, effect } => f.write_str(&design_words(error, *effect)),
            Error::Power { error } => write!(f, "{error}"),
            Error::Duration { error } => f.write_str(&error.worded(&flag)),
            Error::Render { error } => write!(f, "cannot render the plan: {error}"),
            Error::Output { error } => write!(f, "{error}"),
            Error::Json { error } => write!(f, "cannot write JSON: {error}"),
            Error::Stdout { io_error } => write!(f, "cannot write the output: {io_error}"),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diagnostic::Diagnostic;

    #[test]
    fn diagnostics_print_as_rendered_and_exit_2() {
        let error = LoadError {
            diagnostics: vec![Diagnostic::new("f.yaml", "", "the file is empty")],
        };
        let e = Error::from(error);
        assert_eq!(
            e.to_string(),
            "error: the file is empty\n --> f.yaml\n\n1 problem in `f.yaml`"
        );
        assert_eq!(e.exit_code(), EXIT_INVALID);
    }

    #[test]
    fn flags_are_input_and_writing_is_not() {
        let e = Error::TimeLimit { seconds: 0.0 };
        assert_eq!(
            e.to_string(),
            "error: `--time-limit` must be a positive number of seconds, not 0"
        );
        assert_eq!(e.exit_code(), EXIT_INVALID);
        let io_error = std::io::Error::other("disk full");
        let e = Error::Stdout { io_error };
        assert_eq!(e.to_string(), "error: cannot write the output: disk full");
        assert_eq!(e.exit_code(), EXIT_FAILURE);
    }

    #[test]
    fn an_unknown_backend_lists_the_ones_built_in() {
        let e = Error::UnknownBackend {
            name: "simplex-9000".into(),
        };
        let text = e.to_string();
        assert!(
            text.starts_with(
                "error: backend `simplex-9000` is not in this build; available: microlp"
            ),
            "{text}"
        );
        assert!(!text.contains("--features highs"), "{text}");
    }
}
