//! The wall-clock safety net of a plan: the moment the search must stop
//! by, and the flag that records whether it ever stopped for it.
//!
//! The work budgets (iterations, nodes, subgradient steps) decide every
//! plan that finishes them; only a plan this flag marks may depend on the
//! machine's speed (`SolverSummary::cut_short`). `search` and `lagrange`
//! both read it, so it lives apart from either. Components searched on
//! several threads share one flag, hence an atomic one.

use super::lp;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// The moment to stop by, and the flag that records a stop.
#[derive(Clone, Copy)]
pub(crate) struct Deadline<'a> {
    at: Instant,
    cut: &'a AtomicBool,
}

impl<'a> Deadline<'a> {
    /// Stops at `at`; marks `cut` when it does.
    pub(crate) fn new(at: Instant, cut: &'a AtomicBool) -> Deadline<'a> {
        Deadline { at, cut }
    }

    /// The same flag, stopping after `fraction` of the time left from now.
    pub(crate) fn share(self, fraction: f64) -> Deadline<'a> {
        let left = self.seconds_left() * fraction.clamp(0.0, 1.0);
        Deadline {
            at: Instant::now() + Duration::from_secs_f64(left),
            cut: self.cut,
        }
    }

    /// Whether any search under this flag stopped for the clock.
    pub(crate) fn was_cut(self) -> bool {
        self.cut.load(Ordering::Relaxed)
    }

    /// Whether the time is up; if so, the search is marked cut short.
    pub(crate) fn passed(self) -> bool {
        let passed = Instant::now() >= self.at;
        if passed {
            self.cut.store(true, Ordering::Relaxed);
        }
        passed
    }

    /// Seconds left, for a solver's own time limit.
    pub(crate) fn seconds_left(self) -> f64 {
        self.at
            .saturating_duration_since(Instant::now())
            .as_secs_f64()
    }

    /// Records an LP solve that failed or stopped short of optimal once the
    /// time was up: the solver's time limit, not the model, ended it.
    pub(crate) fn after_lp(self, solved: &Result<lp::Solved, lp::Failed>) {
        let short = match solved {
            Ok(s) => !s.optimal,
            Err(lp::Failed::Infeasible) => false,
            Err(_) => true,
        };
        if short {
            self.passed();
        }
    }
}
