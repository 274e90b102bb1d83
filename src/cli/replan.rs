//! `sluice replan FILE --progress PROGRESS --today DATE`: plan again
//! mid-quarter around the running tests, with optional `--scale` what-ifs,
//! and (with `--previous`) show what moved first. The rules live in
//! [`crate::replan`]; this file parses flags and wires them together.

use super::plan::{load_portfolio, OutputArgs, SolverArgs};
use super::Error;
use crate::plan::Plan;
use crate::replan::{self, progress, ScaleArg};
use crate::scenario;
use crate::schedule::PlanRequest;
use crate::Replanner;
use chrono::NaiveDate;
use clap::Args;
use std::path::PathBuf;

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice replan portfolios/demo.yaml --progress progress.yaml --today 2027-02-03\n  \
    sluice replan portfolios/demo.yaml --progress progress.yaml --today 2027-02-03 \\\n      \
    --scale home=0.7 --previous plan.json\n  \
    sluice replan portfolios/demo.yaml --progress progress.yaml --today 2027-02-03 \\\n      \
    --scale search=0.8@2027-03-01 --format html --out replan.html\n\n\
    Running tests keep their start and share (never paused); finished and \
    cancelled tests free their pool; every other test is planned again from \
    --today. docs/progress.md describes the progress file.")]
pub struct ReplanArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Where each test stands: running (with units so far), finished, cancelled
    #[arg(long, value_name = "FILE")]
    pub progress: PathBuf,
    /// The day of the re-plan: no new test starts before it
    #[arg(long, value_name = "YYYY-MM-DD")]
    pub today: NaiveDate,
    /// A traffic what-if, repeatable: POOL=FACTOR[@FROM], e.g. checkout=0.7@2027-02-01
    #[arg(long, value_name = "POOL=FACTOR[@DATE]")]
    pub scale: Vec<ScaleArg>,
    /// The earlier plan (`sluice plan --format json`) to compare against
    #[arg(long, value_name = "PLAN.json")]
    pub previous: Option<PathBuf>,
    /// A scenario: edits applied to the portfolio before re-planning (docs/scenario.md)
    #[arg(long, value_name = "FILE")]
    pub scenario: Option<PathBuf>,
    /// Refuse (exit 2) when the progress file leaves out a test that the
    /// --previous plan ended before today, instead of warning
    #[arg(long, requires = "previous")]
    pub strict: bool,
    #[command(flatten)]
    pub output: OutputArgs,
    #[command(flatten)]
    pub solver: SolverArgs,
}

fn read_previous(path: &PathBuf) -> Result<Plan, Error> {
    let text = std::fs::read_to_string(path).map_err(|io_error| Error::PreviousRead {
        path: path.clone(),
        io_error,
    })?;
    serde_json::from_str(&text).map_err(|json_error| Error::PreviousParse {
        path: path.clone(),
        json_error,
    })
}

/// `sluice replan`.
pub fn run(a: &ReplanArgs) -> Result<Vec<u8>, Error> {
    let base = a.solver.request()?;
    let portfolio = load_portfolio(&a.file)?;
    let w = portfolio.window;
    if a.today > w.end {
        return Err(Error::TodayAfterWindow {
            today: a.today,
            end: w.end,
        });
    }
    // Before the window there is nothing to re-plan: an error, as for `plan`.
    if a.today < w.start {
        return Err(Error::TodayOutsideWindow {
            today: a.today,
            start: w.start,
            end: w.end,
        });
    }
    let today = a.today;
    let portfolio = replan::with_scales(&portfolio, &a.scale, today)?;
    let edits = super::plan::scenario_edits(a.scenario.as_deref(), &portfolio)?;
    let base = PlanRequest {
        today: Some(today),
        ..base
    };
    // The progress file is read against the portfolio as the scenario
    // leaves it (its shares within the edited limits).
    let edited = scenario::Applied::new(&portfolio, &base, &edits).portfolio;
    let progress = progress::load_progress(&a.progress, &edited, a.today)?;
    for w in &progress.warnings {
        eprint!("{w}");
    }
    let previous = a.previous.as_ref().map(read_previous).transpose()?;
    let mut replanner = Replanner::new(&portfolio, &progress, today)
        .request(base)
        .scenario(&edits);
    if let Some(prev) = &previous {
        replanner = replanner.previous(prev);
    }
    let plan = replanner.replan()?;
    if !plan.missing_progress.is_empty() {
        let e = Error::MissingProgress {
            progress: a.progress.clone(),
            ids: plan.missing_progress.clone(),
        };
        if a.strict {
            return Err(e);
        }
        // The same words as the error, as a warning.
        let words = e.to_string();
        eprintln!(
            "warning: {}",
            words.strip_prefix("error: ").unwrap_or(&words)
        );
    }
    let mut inputs = vec![a.file.as_path(), a.progress.as_path()];
    inputs.extend(a.previous.as_deref());
    inputs.extend(a.scenario.as_deref());
    super::plan::emit(plan, &a.output, &inputs)
}
