//! The scheduler: turns a validated [`Portfolio`] into a [`Plan`].
//!
//! [`plan`] enumerates each test's candidate runs (`options`), builds the
//! greedy baseline (`greedy`), splits the portfolio into independent
//! components (pools linked by no `not_with` or `after`), and optimises
//! each (`search`, over the LP relaxation in `lp`) on its own from the
//! greedy calendar: components run in parallel on rayon's threads and
//! their results are taken in component order, so the plan is the same
//! bytes on any number of threads. `reasons` explains every test left
//! out. [`verify`] is an independent checker that re-derives every
//! constraint from the portfolio and the forecast; the search never uses
//! it, and [`plan`] runs it once on the finished plan as a guard (falling
//! back to the greedy calendar should it ever fail). A [`PlanRequest`]
//! carries what a re-plan knows: today, the running tests that hold their
//! traffic, and the tests that left the queue.
//! `synthetic` makes seeded random portfolios for tests and the benchmark.

mod backend;
mod confidence;
mod deadline;
mod greedy;
mod lagrange;
mod lp;
mod millionths;
mod options;
mod reasons;
mod request;
mod search;
mod state;
pub mod statistics;
#[cfg(any(test, feature = "bench"))]
pub mod synthetic;
#[cfg(test)]
mod tests;
mod verify;

pub use backend::Backend;
pub use confidence::at_confidence;
pub use request::{Excluded, FixedRun, Pin, PlanRequest, DEFAULT_TIME_LIMIT};
pub use verify::verify;

use crate::forecast::test_units_on;
use crate::plan::{
    Plan, PlanBlackout, PlanWindow, PlannedExperiment, PoolDay, PoolPlan, RampDays, Run,
    SolverStatus, SolverSummary, Status,
};
use crate::portfolio::Portfolio;
use crate::reason::Said;
use crate::share::Share;
use chrono::{Duration, NaiveDate};
use options::Role;
pub(crate) use options::{on_grid, Instance};
use rayon::prelude::*;
use std::sync::atomic::AtomicBool;
use std::sync::{Mutex, PoisonError};
use std::time::Instant;

/// Pools linked through `not_with` or `after` fall in one component; each
/// component lists its free tests in portfolio order.
fn components(inst: &Instance) -> Vec<Vec<usize>> {
    let p = inst.portfolio;
    let np = p.pools.len();
    let mut parent: Vec<usize> = (0..np).collect();
    fn find(parent: &mut [usize], mut x: usize) -> usize {
        while parent[x] != x {
            parent[x] = parent[parent[x]];
            x = parent[x];
        }
        x
    }
    let mut join = |a: usize, b: usize| {
        let (ra, rb) = (find(&mut parent, a), find(&mut parent, b));
        if ra != rb {
            parent[ra.max(rb)] = ra.min(rb);
        }
    };
    for e in inst.free() {
        let a = p.experiments[e].pools[0];
        // A multi-pool test joins its pools.
        for &other_pool in &p.experiments[e].pools[1..] {
            join(a, other_pool);
        }
        let links = p.experiments[e]
            .not_with
            .iter()
            .chain(&p.experiments[e].apart_traffic)
            .copied()
            .chain(inst.preds[e].iter().map(|&(x, _)| x));
        for other in links {
            if inst.roles[other] != Role::Free {
                continue;
            }
            join(a, p.experiments[other].pools[0]);
        }
    }
    let mut groups: Vec<Vec<usize>> = vec![Vec::new(); np];
    for e in inst.free() {
        let r = find(&mut parent, p.experiments[e].pools[0]);
        groups[r].push(e);
    }
    groups.retain(|g| !g.is_empty());
    groups.sort_by_key(|g| g[0]);
    groups
}

/// `f` of every component (by its index), in component order.
///
/// Components run on the rayon pool, handed out largest (by options)
/// first so that a large one is not left to start last; with HiGHS one
/// after another, since HiGHS instances solving at once on several
/// threads have crashed (ERGO-Code/HiGHS issues 810 and 1005). Each
/// result depends on its component alone, so the order in which threads
/// finish changes nothing.
fn each_component<T: Send>(
    inst: &Instance,
    comps: &[Vec<usize>],
    backend: Backend,
    f: impl Fn(usize) -> T + Sync,
) -> Vec<T> {
    if !backend.runs_on_threads() {
        return (0..comps.len()).map(f).collect();
    }
    let mut order: Vec<usize> = (0..comps.len()).collect();
    order.sort_by(|&a, &b| {
        options_of(inst, &comps[b])
            .total_cmp(&options_of(inst, &comps[a]))
            .then(a.cmp(&b))
    });
    let mut out: Vec<(usize, T)> = order
        .into_par_iter()
        .with_max_len(1)
        .map(|i| (i, f(i)))
        .collect();
    out.sort_by_key(|&(i, _)| i);
    out.into_iter().map(|(_, t)| t).collect()
}

/// The options of a component's tests, at least one: the weight by which
/// components share a time limit.
fn options_of(inst: &Instance, comp: &[usize]) -> f64 {
    comp.iter()
        .map(|&e| inst.options[e].len() as f64)
        .sum::<f64>()
        .max(1.0)
}

/// Plans the portfolio. Always returns a plan: when the solver fails or the
/// time limit runs out, the best calendar found so far (at worst the greedy
/// one), with the bound and gap that could be proved. With
/// `planning.confidence`, the plan is made against a lower quantile of the
/// forecast and confirmed by simulation (docs/planning.md, "Planning to a
/// confidence").
pub fn plan(portfolio: &Portfolio, request: &PlanRequest) -> Plan {
    match portfolio.planning.confidence {
        Some(c) => confidence::plan(portfolio, request, c),
        None => plan_once(portfolio, request),
    }
}

/// Plans the portfolio on its forecast as it is.
fn plan_once(portfolio: &Portfolio, request: &PlanRequest) -> Plan {
    let clock = Instant::now();
    let cut = AtomicBool::new(false);
    let deadline = deadline::Deadline::new(
        clock + std::time::Duration::from_secs_f64(request.time_limit.max(0.0)),
        &cut,
    );
    let inst = Instance::new(portfolio, request);
    let greedy_state = greedy::greedy(&inst);
    let comps = components(&inst);
    let backend = request.backend;
    // Every bound first, then the searches. Components share no pool and
    // no link, so each is bounded and searched on its own, from the greedy
    // calendar, on whichever thread is free; the results are taken in
    // component order, so the plan is the same on any number of threads.
    let relaxed: Vec<Option<lp::Solved>> = each_component(&inst, &comps, backend, |i| {
        let floor = search::comp_value(&inst, &comps[i], &greedy_state);
        search::relax(&inst, &comps[i], backend, floor, deadline)
    });
    // Each search, as it starts, may take a share of the time left in
    // proportion to its options among those of the searches not yet
    // started (only a safety net: the searches stop on their work budgets
    // long before on a machine of ordinary speed).
    let not_started = Mutex::new(comps.iter().map(|c| options_of(&inst, c)).sum::<f64>());
    let searched: Vec<(state::State, search::Outcome)> =
        each_component(&inst, &comps, backend, |i| {
            let comp = &comps[i];
            let share = {
                let mut left = not_started.lock().unwrap_or_else(PoisonError::into_inner);
                let share = options_of(&inst, comp) / left.max(1.0);
                *left -= options_of(&inst, comp);
                share
            };
            let mut own = greedy_state.clone();
            let out = search::solve_component(
                &inst,
                comp,
                &mut own,
                relaxed[i].as_ref(),
                backend,
                deadline.share(share),
                request.effort.max(1),
            );
            (own, out)
        });
    let mut state = greedy_state.clone();
    let mut bound = 0.0;
    let mut all_proved = true;
    let mut lp_ok = true;
    let mut improved = false;
    for (comp, (own, out)) in comps.iter().zip(&searched) {
        search::copy_choices(&inst, comp, &mut state, own);
        bound += out.bound;
        all_proved &= out.proved;
        lp_ok &= out.lp_ok;
        improved |= out.improved;
    }
    drop(searched);
    let fixed_value = inst.fixed_value();
    let value = fixed_value + state.value;
    let bound = (fixed_value + bound).max(value);
    let status = if all_proved {
        SolverStatus::Optimal
    } else if !lp_ok && !improved {
        SolverStatus::Greedy
    } else {
        SolverStatus::Feasible
    };
    let gap = if bound.abs() > 1e-12 {
        ((bound - value) / bound.abs()).max(0.0)
    } else {
        0.0
    };
    let solver = SolverSummary {
        backend: request.backend.name().to_string(),
        status,
        seconds: clock.elapsed().as_secs_f64(),
        value,
        bound,
        gap: if all_proved { 0.0 } else { gap },
        cut_short: deadline.was_cut(),
    };
    let greedy_value = fixed_value + greedy_state.value;
    let plan = assemble(&inst, &state, solver.clone(), greedy_value, request);
    // A last guard, after planning: should the optimised calendar ever
    // fail the independent check, fall back to the greedy one.
    if verify(portfolio, request, &plan).is_ok() {
        return plan;
    }
    let fallback = SolverSummary {
        status: SolverStatus::Greedy,
        value: greedy_value,
        gap: if solver.bound.abs() > 1e-12 {
            ((solver.bound - greedy_value) / solver.bound.abs()).max(0.0)
        } else {
            0.0
        },
        ..solver
    };
    assemble(&inst, &greedy_state, fallback, greedy_value, request)
}

/// The exact optimum of the 0-1 model, component by component, with the
/// backend's MILP (practical with HiGHS; the benchmark uses it to prove
/// optima). `None` when any component is not proved within `seconds`.
pub fn exact_value(portfolio: &Portfolio, request: &PlanRequest, seconds: f64) -> Option<f64> {
    let clock = Instant::now();
    let inst = Instance::new(portfolio, request);
    let mut total = inst.fixed_value();
    for comp in components(&inst) {
        let sub = lp::Sub::all(&inst, &comp);
        let left = seconds - clock.elapsed().as_secs_f64();
        if left <= 0.0 {
            return None;
        }
        let solved = lp::solve(&inst, &sub, request.backend, true, left, None).ok()?;
        if !solved.optimal {
            return None;
        }
        total += solved.value;
    }
    Some(total)
}

/// An upper bound on the 0-1 optimum that HiGHS proves within about
/// `seconds`, component by component (each gets time in proportion to its
/// options): its MIP dual bound, which its cuts and branching bring below
/// the LP relaxation the planner's own bound reaches. For the benchmark's
/// reference column; `None` when HiGHS fails on a component or has no
/// finite bound for it yet (its root LP unfinished in the time given).
#[cfg(feature = "highs")]
pub fn proved_bound(portfolio: &Portfolio, request: &PlanRequest, seconds: f64) -> Option<f64> {
    let inst = Instance::new(portfolio, request);
    let comps = components(&inst);
    let options = |comp: &Vec<usize>| options_of(&inst, comp);
    let all: f64 = comps.iter().map(options).sum();
    let mut total = inst.fixed_value();
    for comp in &comps {
        let sub = lp::Sub::all(&inst, comp);
        total += lp::proved_bound(&inst, &sub, seconds * options(comp) / all)?;
    }
    Some(total)
}

/// Units a run of test `e` from `start` to `end` at `share` collects,
/// summed over its pools (each through its entering fraction): its ramp's
/// days at their shares when they count, none of them when they do not.
fn units_between(
    portfolio: &Portfolio,
    e: usize,
    start: NaiveDate,
    end: NaiveDate,
    share: Share,
) -> f64 {
    let ex = &portfolio.experiments[e];
    let ramp_end = start + Duration::days(i64::from(ex.ramp_days()));
    let mut total = 0.0;
    let mut d = start;
    while d <= end {
        let on_ramp = d < ramp_end;
        if !on_ramp || ex.ramp_counts {
            let s = ex.share_on_day((d - start).num_days() as u32, share);
            for &pool in &ex.pools {
                total += test_units_on(ex, &portfolio.pools[pool], d, s.fraction());
            }
        }
        d += Duration::days(1);
    }
    total
}

/// The dates and shares of test `e`'s ramp steps on a run from `start`.
fn ramp_days(portfolio: &Portfolio, e: usize, start: NaiveDate) -> Vec<RampDays> {
    let mut d = start;
    portfolio.experiments[e]
        .ramp
        .iter()
        .map(|s| {
            let step = RampDays {
                start: d,
                end: d + Duration::days(i64::from(s.days) - 1),
                share: s.share,
            };
            d = step.end + Duration::days(1);
            step
        })
        .collect()
}

/// The last [`crate::plan::HISTORY_SHOWN`] days of `pool`'s history, if
/// it has one.
fn history_shown(pool: &crate::portfolio::Pool) -> Vec<crate::plan::HistoryDay> {
    let Some(h) = &pool.forecast.history else {
        return Vec::new();
    };
    let from = h.units.len().saturating_sub(crate::plan::HISTORY_SHOWN);
    h.units[from..]
        .iter()
        .enumerate()
        .map(|(i, &units)| crate::plan::HistoryDay {
            date: h.start + Duration::days((from + i) as i64),
            units,
        })
        .collect()
}

fn backtest_shown(pool: &crate::portfolio::Pool) -> Vec<crate::forecast::backtest::OriginRange> {
    let Some(h) = &pool.forecast.history else {
        return Vec::new();
    };
    let first =
        h.start + Duration::days(h.units.len().saturating_sub(crate::plan::HISTORY_SHOWN) as i64);
    h.fit
        .backtest
        .as_ref()
        .map_or(Vec::new(), |b| crate::forecast::backtest::shown(b, first))
}

fn assemble(
    inst: &Instance,
    state: &state::State,
    solver: SolverSummary,
    greedy_value: f64,
    request: &PlanRequest,
) -> Plan {
    let p = inst.portfolio;
    let w = p.window;
    let why = reasons::explain(inst, state);
    let today = request.today.unwrap_or(w.start);
    let mut experiments: Vec<PlannedExperiment> = p
        .experiments
        .iter()
        .enumerate()
        .map(|(e, ex)| {
            let run = match &inst.roles[e] {
                Role::Fixed { start, end, share } => Some((w.date(*start), w.date(*end), *share)),
                Role::Free => state
                    .opt(inst, e)
                    .map(|o| (w.date(o.start as i64), w.date(o.end as i64), o.share)),
                Role::Excluded { .. } => None,
            };
            let mut out = PlannedExperiment {
                id: ex.id.clone(),
                title: ex.title.clone(),
                owner: ex.owner.clone(),
                pools: ex.pools.iter().map(|&i| p.pools[i].id.clone()).collect(),
                priority: ex.priority,
                units_needed: ex.need.total,
                sample_size_given: ex.sample_size_given,
                eligible: ex.eligible,
                ..PlannedExperiment::default()
            };
            match run {
                Some((start, end, share)) => {
                    out.status = match inst.roles[e] {
                        Role::Fixed { .. } => Status::Running,
                        _ => Status::Scheduled,
                    };
                    out.run = Some(Run {
                        start,
                        end,
                        result_date: end + Duration::days(1),
                        share,
                        days: ((end - start).num_days() + 1) as u32,
                        units_expected: units_between(p, e, start, end, share),
                    });
                    out.ramp = ramp_days(p, e, start);
                }
                None => {
                    out.reason = why[e].clone().map(Said::new);
                    out.ran = request
                        .excluded
                        .iter()
                        .find(|x| x.experiment == e)
                        .and_then(|x| x.ran.clone());
                    // What it ran, its ramp included, as it ran.
                    if let Some(r) = &out.ran {
                        out.ramp = ramp_days(p, e, r.start)
                            .into_iter()
                            .filter(|s| s.start <= r.end)
                            .map(|s| RampDays {
                                end: s.end.min(r.end),
                                ..s
                            })
                            .collect();
                    }
                    if let Role::Excluded { ended, .. } = &inst.roles[e] {
                        out.status = if ended.is_some() {
                            Status::Finished
                        } else {
                            Status::Cancelled
                        };
                    }
                }
            }
            out
        })
        .collect();
    let so_far: Vec<_> = request
        .fixed
        .iter()
        .filter_map(|f| f.so_far.map(|s| (f.experiment, s)))
        .collect();
    crate::forecast::uncertainty::fill_ranges(p, &mut experiments, &so_far, today);
    let first_start: Vec<NaiveDate> = (0..p.experiments.len())
        .map(|e| w.date(inst.lo_start[e].clamp(0, inst.days as i64)))
        .collect();
    let pools: Vec<PoolPlan> = p
        .pools
        .iter()
        .enumerate()
        .map(|(pi, pool)| {
            let days = (0..inst.days)
                .map(|d| {
                    let date = w.date(d as i64);
                    // Summed in whole millionths, so the JSON prints 0.35, not float noise.
                    let mut used: u64 = 0;
                    let mut running = 0;
                    for (e, pe) in experiments.iter().enumerate() {
                        if !p.experiments[e].uses(pi) {
                            continue;
                        }
                        if let Some(r) = &pe.run {
                            if r.start <= date && date <= r.end {
                                // A re-shared running test at its old share
                                // before today; a ramp at its steps' shares.
                                let ramped = pe.share_on(date).unwrap_or(r.share);
                                let share = request
                                    .fixed
                                    .iter()
                                    .find(|f| f.experiment == e)
                                    .map_or(ramped, |f| {
                                        if f.share != f.share_before && date >= today {
                                            f.share
                                        } else if pe.full_from().is_some_and(|d| date < d) {
                                            ramped
                                        } else {
                                            f.share_on(date, today)
                                        }
                                    });
                                used += u64::from(share.millionths());
                                running += 1;
                            }
                        } else if let Some(r) = &pe.ran {
                            // The past as it ran: finished and cancelled
                            // tests, their ramps at the steps' shares.
                            if r.start <= date && date <= r.end {
                                used += pe
                                    .ran_share_on(date)
                                    .map_or(0, |s| u64::from(s.millionths()));
                                running += 1;
                            }
                        }
                    }
                    PoolDay {
                        date,
                        forecast: inst.series[pi].units[d],
                        share_used: Share::from_millionths(used as u32),
                        running,
                    }
                })
                .collect();
            PoolPlan {
                id: pool.id.clone(),
                label: pool.label.clone(),
                sharing: pool.sharing,
                max_concurrent: pool.max_concurrent,
                holdout: pool.holdout,
                days,
                history: history_shown(pool),
                backtest: backtest_shown(pool),
            }
        })
        .collect();
    // What a test left out could detect counts only the room the plan leaves.
    statistics::fill(p, &mut experiments, &first_start, &pools);
    let blackouts = p
        .blackouts
        .iter()
        .map(|b| PlanBlackout {
            from: b.from,
            to: b.to,
            kind: b.kind,
            note: b.note.clone(),
            pools: b.pools.iter().map(|&i| p.pools[i].id.clone()).collect(),
        })
        .collect();
    Plan {
        portfolio: p.name.clone(),
        id: p.id.clone(),
        window: PlanWindow {
            start: w.start,
            end: w.end,
            week_start: (p.planning.grid == crate::portfolio::StartGrid::Weekly)
                .then_some(p.planning.start_weekday),
        },
        solver,
        greedy_value,
        experiments,
        pools,
        blackouts,
        today,
        running: Vec::new(),
        traffic: Vec::new(),
        missing_progress: Vec::new(),
        changes: None,
        calendar: None,
    }
}
