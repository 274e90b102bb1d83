//! Helpers shared by the renderers: number and date wording, the week grid
//! used for display, and the cautions text.
//!
//! Nothing here computes a schedule fact: runs, shares and result dates are
//! read from the plan as they are.

use crate::plan::{Plan, PlanBlackout, PlannedExperiment, PoolPlan, Sharing, SolverStatus, Status};
pub(crate) use crate::words::{percent, thousands, units};
use chrono::{Duration, NaiveDate};

/// How to name an experiment with no run in this plan: "does not fit", or
/// (in re-plans) "finished" / "cancelled".
pub fn out_word(e: &PlannedExperiment) -> &'static str {
    match e.status {
        Status::Finished => "finished",
        Status::Cancelled => "cancelled",
        _ => "does not fit",
    }
}

/// How many experiments left the queue (finished or cancelled; re-plans).
pub fn closed_count(plan: &Plan) -> usize {
    plan.experiments
        .iter()
        .filter(|e| matches!(e.status, Status::Finished | Status::Cancelled))
        .count()
}

/// "do not" or, for one test, "does not".
pub fn do_not(n: usize) -> &'static str {
    crate::words::agree("does not", "do not", n)
}

/// ", 3 finished or cancelled" when any did, else "".
pub fn closed_note(plan: &Plan) -> String {
    match closed_count(plan) {
        0 => String::new(),
        n => format!(", {n} finished or cancelled"),
    }
}

/// Counts of experiments in the calendar (scheduled or running) and of
/// those left out; finished and cancelled ones (re-plans) count in neither.
pub fn counts(plan: &Plan) -> (usize, usize) {
    let count =
        |f: &dyn Fn(Status) -> bool| plan.experiments.iter().filter(|e| f(e.status)).count();
    (
        count(&|s| s.in_calendar()),
        count(&|s| s == Status::Unscheduled),
    )
}

/// The experiments of `pool`, in plan order.
pub fn experiments_in<'a>(
    plan: &'a Plan,
    pool: &'a str,
) -> impl Iterator<Item = &'a PlannedExperiment> + 'a {
    plan.experiments.iter().filter(move |e| e.pool == pool)
}

/// Experiments whose pool is not among the plan's pools (should not happen,
/// but a renderer must not silently drop them).
pub fn orphans(plan: &Plan) -> Vec<&PlannedExperiment> {
    plan.experiments
        .iter()
        .filter(|e| !plan.pools.iter().any(|p| p.id == e.pool))
        .collect()
}

/// The pool's label, or its id when the plan does not know it.
pub fn pool_label<'a>(plan: &'a Plan, pool: &'a str) -> &'a str {
    plan.pools
        .iter()
        .find(|p| p.id == pool)
        .map(|p| p.label.as_str())
        .unwrap_or(pool)
}

/// Whether a blackout covers `pool` (an empty pool list covers every pool).
pub fn blackout_covers(b: &PlanBlackout, pool: &str) -> bool {
    b.pools.is_empty() || b.pools.iter().any(|p| p == pool)
}

/// Whether the pool's capacity is a share (split) rather than a count.
pub fn is_split(pool: &PoolPlan) -> bool {
    pool.sharing == Sharing::Split
}

/// One display week of the window: seven days from `start`, the last one
/// cut at the window's end.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Week {
    pub start: NaiveDate,
    pub end: NaiveDate,
}

/// The window cut into weeks from its first day.
pub fn weeks(plan: &Plan) -> Vec<Week> {
    let mut out = Vec::new();
    let mut start = plan.window.start;
    while start <= plan.window.end {
        let end = (start + Duration::days(6)).min(plan.window.end);
        out.push(Week { start, end });
        start += Duration::days(7);
    }
    out
}

/// A date as `Mon 4 Jan 2027`.
pub fn long_date(d: NaiveDate) -> String {
    d.format("%a %-d %b %Y").to_string()
}

/// A date as `4 Jan`.
pub fn short_date(d: NaiveDate) -> String {
    d.format("%-d %b").to_string()
}

/// What every format says of a plan the time limit cut short
/// (`solver.cut_short`); `None` for a plan the work budget decided.
pub fn cut_short_note(plan: &Plan) -> Option<&'static str> {
    plan.solver.cut_short.then_some(
        "The time limit cut the search short before its work budget was spent, so this plan \
         may differ from run to run on a busy machine; plan again with a larger `--time-limit`.",
    )
}

/// The solver's numbers in one sentence (two when the search was cut short).
pub fn solver_sentence(plan: &Plan) -> String {
    let s = &plan.solver;
    let status = match s.status {
        SolverStatus::Optimal => "proved optimal",
        SolverStatus::Feasible => "a feasible plan, not proved optimal",
        SolverStatus::Greedy => "the greedy fallback (the solver gave no plan)",
    };
    let sentence = format!(
        "solver `{}`: {status}; plan value {:.1} against a bound of {:.1} (gap {:.1}%); greedy baseline {:.1}.",
        s.backend,
        s.value,
        s.bound,
        s.gap * 100.0,
        plan.greedy_value
    );
    match cut_short_note(plan) {
        Some(note) => format!("{sentence} {note}"),
        None => sentence,
    }
}

/// The cautions every output carries, as one paragraph.
pub const CAUTION: &str = "This calendar is an estimate. The sample sizes assume independent \
randomisation units and a fixed horizon: each result is read once, at its planned end, not \
checked daily. The dates assume the traffic forecast holds, and real traffic always differs \
from a forecast, so leave a margin and re-plan when traffic moves. Tests that touch pricing, \
health or vulnerable users go through your organisation's own review, whatever this plan \
says fits.";

/// Lays `t` out to fit `width` columns (comfy-table's dynamic arrangement),
/// or at its natural width when there is no width to fit.
pub fn fit_table(t: &mut comfy_table::Table, width: Option<usize>) {
    use comfy_table::ContentArrangement;
    match width {
        Some(w) => {
            t.set_content_arrangement(ContentArrangement::Dynamic)
                .set_width(u16::try_from(w).unwrap_or(u16::MAX));
        }
        None => {
            t.set_content_arrangement(ContentArrangement::Disabled);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn weeks_cover_the_window_exactly() {
        let plan = fixture::plan();
        let w = weeks(&plan);
        assert_eq!(w.len(), 13);
        assert_eq!(w[0].start, plan.window.start);
        assert_eq!(w[12].end, plan.window.end);
        for pair in w.windows(2) {
            assert_eq!(pair[0].end + Duration::days(1), pair[1].start);
        }
    }
}
