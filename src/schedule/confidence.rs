//! Planning to a confidence (`planning.confidence: c`): every scheduled
//! test's planned end is at least the `c`-quantile of its simulated ends,
//! so its result comes by its planned date on a share `c` of the traffic
//! paths of [`crate::forecast::uncertainty`].
//!
//! The plan is made against a lower quantile of each pool's forecast
//! ([`lower_quantile_factor`]): a run at share `s` on forecast `f·F`
//! reaches `n` units exactly when it reaches `n / f` on `F`, so each test
//! asks the planner for `n / f` units and the forecast itself stays as
//! the portfolio gives it (the plan's pool days and expected units are the
//! forecast's). The plan is then confirmed by simulation on the true need
//! and forecast; a test that falls short asks for more, and the portfolio
//! is planned again, for at most [`ROUNDS`] rounds. Each range reports the
//! achieved share as `on_plan`.

use super::plan_once;
use super::request::PlanRequest;
use crate::forecast::uncertainty::{fill_ranges, lower_quantile_factor};
use crate::plan::{Plan, Status};
use crate::portfolio::Portfolio;
use crate::words::{percent, thousands};

/// How many times the portfolio is planned at most.
pub const ROUNDS: usize = 6;

/// Plans `portfolio` so that each scheduled test ends by its planned end
/// on at least a share `confidence` of the simulated paths, where a few
/// rounds of tightening can reach it; the plan's ranges say what each
/// test achieved.
pub(super) fn plan(portfolio: &Portfolio, request: &PlanRequest, confidence: f64) -> Plan {
    let factors: Vec<f64> = portfolio
        .pools
        .iter()
        .map(|p| lower_quantile_factor(p.forecast.uncertainty(), confidence))
        .collect();
    let mut ask: Vec<f64> = portfolio
        .experiments
        .iter()
        // On several pools, the most lowered forecast among them.
        .map(|ex| 1.0 / ex.pools.iter().map(|&k| factors[k]).fold(1.0, f64::min))
        .collect();
    let today = request.today.unwrap_or(portfolio.window.start);
    let so_far: Vec<_> = request
        .fixed
        .iter()
        .filter_map(|f| f.so_far.map(|s| (f.experiment, s)))
        .collect();
    let mut round = 1;
    loop {
        let mut asked = portfolio.clone();
        for (ex, a) in asked.experiments.iter_mut().zip(&ask) {
            ex.need.total = (ex.need.total as f64 * a).ceil() as u64;
        }
        let mut plan = plan_once(&asked, request);
        // Back to what each test truly needs, confirmed on the true forecast.
        for ((pe, ex), more) in plan
            .experiments
            .iter_mut()
            .zip(&portfolio.experiments)
            .zip(&asked.experiments)
        {
            pe.units_needed = ex.need.total;
            pe.result_range = None;
            // A reason speaks of the units the planner was asked for.
            if let (Status::Unscheduled, Some(reason)) = (pe.status, &mut pe.reason) {
                if more.need.total > ex.need.total {
                    reason.push_str(&format!(
                        " (planned at {} confidence as {} units)",
                        percent(confidence),
                        thousands(more.need.total)
                    ));
                }
            }
        }
        fill_ranges(portfolio, &mut plan.experiments, &so_far, today);
        let short: Vec<(usize, f64)> = plan
            .experiments
            .iter()
            .enumerate()
            .filter(|(_, pe)| pe.status == Status::Scheduled)
            .filter_map(|(e, pe)| {
                let got = pe.result_range?.on_plan?;
                (got < confidence).then_some((e, got))
            })
            .collect();
        if short.is_empty() || round == ROUNDS {
            return plan;
        }
        // Ask a short test for more: a step that grows with its shortfall.
        for (e, got) in short {
            ask[e] *= 1.03 + 0.5 * (confidence - got);
        }
        round += 1;
    }
}
