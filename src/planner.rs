//! The path for library users: load a portfolio, plan it (or re-plan it
//! from a progress file), render the plan, with one error type. Thin
//! wrappers over [`crate::portfolio::load`], [`crate::schedule::plan`],
//! [`crate::replan`] and [`crate::render::render`]; the `sluice plan` and
//! `sluice replan` commands run the same pipelines with flags.

use crate::plan::Plan;
use crate::portfolio::{self, LoadError, Portfolio};
use crate::render::{self, Format, RenderError, RenderOptions};
use crate::replan::{self, Progress, ReplanError};
use crate::scenario::{Applied, Edit};
use crate::schedule::{self, Backend, PlanRequest};
use chrono::NaiveDate;
use std::fmt;
use std::path::Path;

/// Why loading, planning or rendering failed.
#[derive(Debug)]
pub enum Error {
    /// The portfolio file does not load; every problem found, with its
    /// file, line, key and hint.
    Load(LoadError),
    /// The time limit is not a positive number of seconds.
    TimeLimit(f64),
    /// The day to plan from lies outside the portfolio's window.
    TodayOutsideWindow {
        /// The day asked for.
        today: NaiveDate,
        /// The window's first day.
        start: NaiveDate,
        /// The window's last day.
        end: NaiveDate,
    },
    /// The plan cannot be rendered in the format asked for.
    Render(RenderError),
    /// The re-plan's what-ifs do not apply to the portfolio.
    Replan(ReplanError),
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Load(e) => write!(f, "{e}"),
            Error::TimeLimit(seconds) => write!(
                f,
                "the time limit must be a positive number of seconds, not {seconds}"
            ),
            Error::TodayOutsideWindow { today, start, end } => {
                write!(f, "today {today} lies outside the window {start} to {end}")
            }
            Error::Render(e) => write!(f, "cannot render the plan: {e}"),
            Error::Replan(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for Error {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            Error::Load(e) => Some(e),
            Error::Render(e) => Some(e),
            Error::Replan(e) => Some(e),
            Error::TimeLimit(_) | Error::TodayOutsideWindow { .. } => None,
        }
    }
}

impl From<LoadError> for Error {
    fn from(e: LoadError) -> Error {
        Error::Load(e)
    }
}

impl From<ReplanError> for Error {
    fn from(e: ReplanError) -> Error {
        Error::Replan(e)
    }
}

impl From<RenderError> for Error {
    fn from(e: RenderError) -> Error {
        Error::Render(e)
    }
}

impl Portfolio {
    /// Reads and validates the portfolio file at `path` (YAML;
    /// docs/portfolio.md lists every key).
    pub fn load(path: impl AsRef<Path>) -> Result<Portfolio, Error> {
        Ok(portfolio::load(path.as_ref())?)
    }
}

/// Plans a portfolio: a start, share and end for every test that fits.
/// The options are those of `sluice plan`; the defaults are its defaults.
#[derive(Debug, Clone)]
pub struct Planner<'p> {
    portfolio: &'p Portfolio,
    request: PlanRequest,
}

impl<'p> Planner<'p> {
    /// A planner for `portfolio` with the default options.
    pub fn new(portfolio: &'p Portfolio) -> Planner<'p> {
        Planner {
            portfolio,
            request: PlanRequest::default(),
        }
    }

    /// Plan as of this day: no test starts before it (default: the
    /// window's first day). It must lie inside the window.
    pub fn today(mut self, today: NaiveDate) -> Planner<'p> {
        self.request.today = Some(today);
        self
    }

    /// Most seconds to spend (default [`schedule::DEFAULT_TIME_LIMIT`],
    /// 300); the best verified plan so far
    /// is returned. The search is otherwise bounded by a fixed amount of
    /// work, so the same portfolio gives the same plan.
    pub fn time_limit(mut self, seconds: f64) -> Planner<'p> {
        self.request.time_limit = seconds;
        self
    }

    /// The LP backend (default [`Backend::Microlp`]).
    pub fn backend(mut self, backend: Backend) -> Planner<'p> {
        self.request.backend = backend;
        self
    }

    /// The plan.
    pub fn plan(&self) -> Result<Plan, Error> {
        checked(self.portfolio, &self.request)?;
        Ok(schedule::plan(self.portfolio, &self.request))
    }
}

/// `request`'s time limit and day, checked against `portfolio`.
fn checked(portfolio: &Portfolio, request: &PlanRequest) -> Result<(), Error> {
    if !(request.time_limit.is_finite() && request.time_limit > 0.0) {
        return Err(Error::TimeLimit(request.time_limit));
    }
    let window = portfolio.window;
    match request.today.filter(|&t| !window.contains(t)) {
        Some(today) => Err(Error::TodayOutsideWindow {
            today,
            start: window.start,
            end: window.end,
        }),
        None => Ok(()),
    }
}

/// Re-plans a portfolio mid-window around what happened: running tests
/// keep their start and share, finished and cancelled ones free their
/// pools, pools with counts so far get forecasts refitted from them, and
/// every other test is planned again from `today`. Given the previous plan,
/// it also says what moved, which tests the progress file leaves out, and
/// how each calendar event changed. The pipeline of `sluice replan`.
///
/// ```
/// use chrono::NaiveDate;
/// use sluice::replan::load_progress_str;
/// use sluice::{Planner, Portfolio, Replanner};
///
/// # fn main() -> Result<(), sluice::Error> {
/// let p = Portfolio::load("portfolios/quickstart.yaml")?;
/// let first = Planner::new(&p).plan()?;
/// let today = NaiveDate::from_ymd_opt(2027, 2, 1).unwrap();
/// let progress = load_progress_str(
///     "as_of: 2027-02-01\nexperiments:\n  - id: bigger-photos\n    state: cancelled\n",
///     "progress.yaml",
///     &p,
///     today,
/// )?;
/// let plan = Replanner::new(&p, &progress, today).previous(&first).replan()?;
/// let photos = plan.experiments.iter().find(|e| e.id == "bigger-photos").unwrap();
/// assert_eq!(photos.status, sluice::plan::Status::Cancelled);
/// assert!(plan.changes.is_some() && plan.calendar.is_some());
/// # Ok(())
/// # }
/// ```
#[derive(Debug, Clone)]
pub struct Replanner<'p> {
    portfolio: &'p Portfolio,
    progress: &'p Progress,
    today: NaiveDate,
    request: PlanRequest,
    edits: &'p [Edit],
    previous: Option<&'p Plan>,
}

impl<'p> Replanner<'p> {
    /// A re-plan of `portfolio` from `today` given `progress`, with the
    /// default options.
    pub fn new(portfolio: &'p Portfolio, progress: &'p Progress, today: NaiveDate) -> Self {
        Replanner {
            portfolio,
            progress,
            today,
            request: PlanRequest::default(),
            edits: &[],
            previous: None,
        }
    }

    /// Most seconds to spend, as [`Planner::time_limit`].
    pub fn time_limit(mut self, seconds: f64) -> Self {
        self.request.time_limit = seconds;
        self
    }

    /// The LP backend, as [`Planner::backend`].
    pub fn backend(mut self, backend: Backend) -> Self {
        self.request.backend = backend;
        self
    }

    /// Every option of the plan at once (its `today` is the re-plan's).
    pub fn request(mut self, request: PlanRequest) -> Self {
        self.request = request;
        self
    }

    /// A scenario's edits (docs/scenario.md), applied before re-planning.
    pub fn scenario(mut self, edits: &'p [Edit]) -> Self {
        self.edits = edits;
        self
    }

    /// The plan this one follows: the re-plan then carries what moved
    /// (`changes`), the tests the progress file leaves out
    /// (`missing_progress`) and the calendar's history (`calendar`).
    pub fn previous(mut self, plan: &'p Plan) -> Self {
        self.previous = Some(plan);
        self
    }

    /// The re-plan.
    pub fn replan(&self) -> Result<Plan, Error> {
        let request = PlanRequest {
            today: Some(self.today),
            ..self.request.clone()
        };
        checked(self.portfolio, &request)?;
        let applied = Applied::new(self.portfolio, &request, self.edits);
        let progress = applied.progress(self.progress, self.today);
        let (mut plan, _) =
            replan::replan(&applied.portfolio, &progress, self.today, &applied.request);
        applied.finish(&mut plan);
        if let Some(previous) = self.previous {
            plan.missing_progress =
                replan::missing_progress(previous, &progress, &applied.portfolio, self.today);
            plan.changes = Some(crate::diff::diff(previous, &plan));
            plan.calendar = Some(crate::diff::calendar_history(
                &render::ics::Shown,
                previous,
                &plan,
            ));
        }
        Ok(plan)
    }
}

impl Plan {
    /// The plan in `format`; `opts` lays out the text format (see
    /// [`RenderOptions::for_stdout`] and [`RenderOptions::for_file`]).
    pub fn render(&self, format: Format, opts: &RenderOptions) -> Result<Vec<u8>, Error> {
        Ok(render::render(self, format, opts)?)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn quickstart() -> Portfolio {
        Portfolio::load(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/portfolios/quickstart.yaml"
        ))
        .expect("the quick start loads")
    }

    #[test]
    fn the_planner_gives_what_the_plan_command_gives() {
        let p = quickstart();
        let via_planner = Planner::new(&p).plan().unwrap();
        let direct = schedule::plan(&p, &PlanRequest::default());
        let opts = RenderOptions::default();
        let mut a = via_planner.render(Format::Json, &opts).unwrap();
        let mut b = render::render(&direct, Format::Json, &opts).unwrap();
        // The solver's seconds are the one measured value.
        let seconds = |bytes: &mut Vec<u8>| {
            let mut v: serde_json::Value = serde_json::from_slice(bytes).unwrap();
            v["solver"]["seconds"] = 0.into();
            *bytes = serde_json::to_vec(&v).unwrap();
        };
        seconds(&mut a);
        seconds(&mut b);
        assert_eq!(a, b);
    }

    #[test]
    fn bad_options_are_errors() {
        let p = quickstart();
        let e = Planner::new(&p).time_limit(0.0).plan().unwrap_err();
        assert_eq!(
            e.to_string(),
            "the time limit must be a positive number of seconds, not 0"
        );
        let day = NaiveDate::from_ymd_opt(2030, 1, 1).unwrap();
        let e = Planner::new(&p).today(day).plan().unwrap_err();
        assert!(matches!(e, Error::TodayOutsideWindow { today, .. } if today == day));
        let inside = p.window.start + chrono::Duration::days(14);
        let plan = Planner::new(&p).today(inside).plan().unwrap();
        assert!(plan
            .experiments
            .iter()
            .filter_map(|e| e.run.map(|r| r.start))
            .all(|s| s >= inside));
    }

    #[test]
    fn a_missing_file_is_a_load_error() {
        let e = Portfolio::load("no/such/portfolio.yaml").unwrap_err();
        assert!(matches!(e, Error::Load(_)));
        assert!(e.to_string().contains("cannot read the file"), "{e}");
    }
}
