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
use crate::reason::{Reason, Said};

/// How many times the portfolio is planned at most.
pub const ROUNDS: usize = 6;

/// How much more than its need each test is first asked for at
/// `confidence`: one over its pool's lower-quantile factor (on several
/// pools, the most lowered forecast among them).
fn first_ask(portfolio: &Portfolio, confidence: f64) -> Vec<f64> {
    let factors: Vec<f64> = portfolio
        .pools
        .iter()
        .map(|p| lower_quantile_factor(p.forecast.uncertainty(), confidence))
        .collect();
    portfolio
        .experiments
        .iter()
        .map(|ex| 1.0 / ex.pools.iter().map(|&k| factors[k]).fold(1.0, f64::min))
        .collect()
}

/// `portfolio` with each test's need times its `ask`, rounded up.
fn asking(portfolio: &Portfolio, ask: &[f64]) -> Portfolio {
    let mut asked = portfolio.clone();
    for (ex, a) in asked.experiments.iter_mut().zip(ask) {
        ex.need.total = (ex.need.total as f64 * a).ceil() as u64;
    }
    asked
}

/// `portfolio` as the plan's first round at `confidence` sees it: each
/// test asking for the units that reach its need on the lower quantile of
/// its pools' forecast. `check` sizes solo runs on it, so it and `plan`
/// agree on which tests fit.
pub fn at_confidence(portfolio: &Portfolio, confidence: f64) -> Portfolio {
    asking(portfolio, &first_ask(portfolio, confidence))
}

/// Plans `portfolio` so that each scheduled test ends by its planned end
/// on at least a share `confidence` of the simulated paths, where a few
/// rounds of tightening can reach it; the plan's ranges say what each
/// test achieved.
pub(super) fn plan(portfolio: &Portfolio, request: &PlanRequest, confidence: f64) -> Plan {
    let mut ask = first_ask(portfolio, confidence);
    let today = request.today.unwrap_or(portfolio.window.start);
    let so_far: Vec<_> = request
        .fixed
        .iter()
        .filter_map(|f| f.so_far.map(|s| (f.experiment, s)))
        .collect();
    let mut round = 1;
    loop {
        let asked = asking(portfolio, &ask);
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
            if pe.status == Status::Unscheduled && more.need.total > ex.need.total {
                pe.reason = pe
                    .reason
                    .take()
                    .map(|r| Said::new(r.into_facts().at_confidence(confidence, more.need.total)));
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
            margin_facts(portfolio, &asked, &mut plan, confidence);
            return plan;
        }
        // Ask a short test for more: a step that grows with its shortfall.
        for (e, got) in short {
            ask[e] *= 1.03 + 0.5 * (confidence - got);
        }
        round += 1;
    }
}

/// For each left-out test the plan asked more units of: what it could
/// detect is counted on the traffic at `confidence` (its units times its
/// true need over the units asked), and a test the room left would hold
/// on the expected forecast is told that the margin is the cause.
fn margin_facts(portfolio: &Portfolio, asked: &Portfolio, plan: &mut Plan, confidence: f64) {
    for ((pe, ex), more) in plan
        .experiments
        .iter_mut()
        .zip(&portfolio.experiments)
        .zip(&asked.experiments)
    {
        if pe.status != Status::Unscheduled || more.need.total <= ex.need.total {
            continue;
        }
        let Some(d) = pe.detectable.take() else {
            continue;
        };
        let factor = ex.need.total as f64 / more.need.total as f64;
        if d.units >= ex.need.total as f64 {
            pe.reason = Some(Said::new(Reason::Margin {
                share: d.share,
                from: d.from,
                to: d.to,
                units: d.units.floor() as u64,
                need: ex.need.total,
                confidence,
                asked: more.need.total,
            }));
        }
        pe.detectable = Some(super::statistics::at_confidence(ex, &d, factor, confidence));
    }
}
