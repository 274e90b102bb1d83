//! sluice: plans a queue of A/B tests onto finite traffic.
//!
//! Load a portfolio (YAML; docs/portfolio.md lists every key), plan it,
//! and render the plan in any output format:
//!
//! ```
//! use sluice::{Format, Planner, Portfolio, RenderOptions};
//!
//! # fn main() -> Result<(), sluice::Error> {
//! let p = Portfolio::load("portfolios/quickstart.yaml")?;
//! let plan = Planner::new(&p).plan()?;
//! let html = plan.render(Format::Html, &RenderOptions::for_file())?;
//! assert!(html.starts_with(b"<!DOCTYPE html>"));
//! # Ok(())
//! # }
//! ```
//!
//! [`Planner`] takes the options of `sluice plan` (`today`, `time_limit`,
//! `backend`); [`Replanner`] re-plans from a progress file as `sluice
//! replan` does; [`Error`] is every way the steps fail.
//!
//! Data flows one way (see DEVELOPERS.md):
//! `portfolio` (YAML to a validated model) -> `sizing` (statistics) ->
//! `forecast` (pool traffic per day) -> `schedule` (options, LP, greedy,
//! verifier) -> `plan` (the result) -> `render` (one module per format).
//! `check` is the first report on a loaded portfolio (sizes, solo fit,
//! pool supply against demand); `diagnostic` renders positioned errors in
//! files users write. The binary in `main.rs` is a thin shell over the
//! crate's command line.

#![warn(missing_docs)]

pub mod advice;
pub mod board;
pub mod check;
pub(crate) mod cli;
pub(crate) mod csv_file;
pub mod day;
pub mod diagnostic;
pub mod diff;
pub mod fit;
pub mod forecast;
pub(crate) mod output;
pub mod plan;
mod planner;
pub mod portfolio;
pub mod reason;
pub mod render;
pub mod replan;
pub mod scenario;
pub mod schedule;
pub mod share;
pub mod sizing;
pub(crate) mod words;

pub use plan::Plan;
pub use planner::{Error, Planner, Replanner};
pub use portfolio::Portfolio;
pub use render::{Format, RenderOptions};
pub use schedule::Backend;

/// The `sluice` binary's entry point: parses the arguments, runs the
/// command, prints its output or error, and returns the exit code. Not
/// part of the library's interface.
#[doc(hidden)]
pub fn cli_main() -> std::process::ExitCode {
    cli::main()
}
