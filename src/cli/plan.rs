//! `sluice plan FILE`: load a portfolio, plan it, and write the plan in
//! the chosen format (terminal table and timeline, JSON, CSV, iCalendar,
//! HTML, Markdown) to stdout or, atomically, to `--out`. Planning is
//! [`crate::schedule`], formatting is [`crate::render`]; this file parses
//! flags and wires them together. `replan` shares its output flags.

use super::Error;
use crate::output;
use crate::plan::Plan;
use crate::portfolio;
use crate::render::{self, Format, RenderOptions};
use crate::replan::{self, ScaleArg};
use crate::scenario;
use crate::schedule::{self, Backend, PlanRequest};
use chrono::NaiveDate;
use clap::Args;
use std::path::{Path, PathBuf};

/// Flags every command that writes a plan shares.
#[derive(Args, Debug)]
pub struct OutputArgs {
    /// Output format
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Write to this file (atomically) instead of stdout; never over a file the command reads. Text goes at a fixed 120 columns
    #[arg(long, value_name = "PATH")]
    pub out: Option<PathBuf>,
    /// Write 0 as the solver's seconds, so outputs compare byte for byte
    #[arg(long)]
    pub no_timing: bool,
}

/// Flags of the solver.
#[derive(Args, Debug)]
pub struct SolverArgs {
    /// A safety net in seconds: the search ends on its fixed work budget; if the clock
    /// stops it first, the plan says it was cut short
    #[arg(long, value_name = "SECONDS", default_value_t = crate::schedule::DEFAULT_TIME_LIMIT)]
    pub time_limit: f64,
    /// The LP backend (`microlp`; `highs` in builds with the `highs` feature)
    #[arg(long, value_name = "NAME", default_value = "microlp")]
    pub backend: String,
}

impl SolverArgs {
    /// The request these flags describe (no re-plan facts yet).
    pub fn request(&self) -> Result<PlanRequest, Error> {
        if !(self.time_limit.is_finite() && self.time_limit > 0.0) {
            return Err(Error::TimeLimit {
                seconds: self.time_limit,
            });
        }
        let backend = Backend::from_name(&self.backend).ok_or_else(|| Error::UnknownBackend {
            name: self.backend.clone(),
        })?;
        Ok(PlanRequest {
            time_limit: self.time_limit,
            backend,
            ..PlanRequest::default()
        })
    }
}

/// Loads a portfolio, turning its problems into an exit-2 failure.
pub fn load_portfolio(path: &Path) -> Result<portfolio::Portfolio, Error> {
    Ok(portfolio::load(path)?)
}

/// Renders `plan` and sends it where `out` says: the bytes for stdout, or
/// an atomic write to `--out` (then a one-line note for stdout). A
/// re-plan's changes are part of the plan, so every renderer draws them.
pub fn emit(mut plan: Plan, out: &OutputArgs, inputs: &[&Path]) -> Result<Vec<u8>, Error> {
    if out.no_timing {
        plan.solver.seconds = 0.0;
    }
    // Said on stderr too, for formats with no place for prose (CSV).
    if let Some(note) = crate::render::common::cut_short_note(&plan) {
        eprintln!("warning: {}", note.replace('`', ""));
    }
    for line in crate::render::common::idle_look_lines(&plan) {
        eprintln!("warning: {line}");
    }
    let opts = if out.out.is_some() {
        RenderOptions::for_file()
    } else {
        RenderOptions::for_stdout()
    };
    let bytes = render::render(&plan, out.format, &opts)?;
    match &out.out {
        None => Ok(bytes),
        Some(path) => {
            output::write_output(path, &bytes, inputs)?;
            eprintln!(
                "wrote the plan ({}) to {}",
                out.format.name(),
                path.display()
            );
            Ok(Vec::new())
        }
    }
}

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice plan portfolios/demo.yaml\n  \
    sluice plan portfolios/demo.yaml --format html --out plan.html\n  \
    sluice plan portfolios/demo.yaml --format ics --out results.ics\n  \
    sluice plan portfolios/demo.yaml --format json --no-timing --out plan.json\n  \
    sluice plan portfolios/demo.yaml --scale product=0.8 --scale search=0.9@2027-02-01\n  \
    sluice plan portfolios/demo.yaml --scenario demo/meeting.yaml\n\n\
    --scale multiplies a pool's forecast from a day on (the window's first day \
    when none is given): a what-if before the quarter starts. \
    The search runs a fixed amount of work, so the same file gives the same \
    plan; --time-limit only cuts it short on a slow machine.")]
pub struct PlanArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Plan as of this day: no test starts before it (default: the window's first day)
    #[arg(long, value_name = "YYYY-MM-DD")]
    pub today: Option<NaiveDate>,
    /// A traffic what-if, repeatable: POOL=FACTOR[@FROM], e.g. product=0.8@2027-02-01
    #[arg(long, value_name = "POOL=FACTOR[@DATE]")]
    pub scale: Vec<ScaleArg>,
    /// A scenario: edits applied to the portfolio before planning (docs/scenario.md)
    #[arg(long, value_name = "FILE")]
    pub scenario: Option<PathBuf>,
    #[command(flatten)]
    pub output: OutputArgs,
    #[command(flatten)]
    pub solver: SolverArgs,
}

/// The edits of `--scenario`, checked against `portfolio` (none without it).
pub fn scenario_edits(
    path: Option<&Path>,
    portfolio: &portfolio::Portfolio,
) -> Result<Vec<scenario::Edit>, Error> {
    match path {
        Some(path) => Ok(scenario::load(path, portfolio)?),
        None => Ok(Vec::new()),
    }
}

/// `sluice plan`.
pub fn run(a: &PlanArgs) -> Result<Vec<u8>, Error> {
    let mut request = a.solver.request()?;
    let p = load_portfolio(&a.file)?;
    if let Some(today) = a.today {
        if !p.window.contains(today) {
            return Err(Error::TodayOutsideWindow {
                today,
                start: p.window.start,
                end: p.window.end,
            });
        }
        request.today = Some(today);
    }
    let p = if a.scale.is_empty() {
        p
    } else {
        replan::with_scales(&p, &a.scale, a.today.unwrap_or(p.window.start))?
    };
    let edits = scenario_edits(a.scenario.as_deref(), &p)?;
    let applied = scenario::Applied::new(&p, &request, &edits);
    let mut plan = schedule::plan(&applied.portfolio, &applied.request);
    applied.finish(&mut plan);
    let mut inputs = vec![a.file.as_path()];
    inputs.extend(a.scenario.as_deref());
    emit(plan, &a.output, &inputs)
}
