//! The option-selection model of one component, handed to an LP/MILP
//! backend through good_lp. This is the one place that names a solver.
//!
//! Variables: x[o] in [0, 1] per option (binary for the exact model). Rows:
//! at most one option per test; per pool and per segment of days on which
//! the set of options running is constant, shares <= the share left by
//! fixed runs (split pools) and runs <= the cap left; per `not_with` pair
//! and segment, at most one of the two running; per `after` link and start
//! threshold t, the successor's options starting by t are bounded by the
//! predecessor's options ending by t - 1 - gap. On the weekly grid with
//! whole weeks the segments are the weeks themselves, which keeps the
//! model small.

pub use super::backend::Backend;
use super::millionths::{room, WHOLE};
use super::options::{Instance, Opt};
use crate::portfolio::Sharing;
use good_lp::{
    variable, Constraint, Expression, ProblemVariables, Solution, SolutionStatus, SolverModel,
    Variable, WithTimeLimit,
};


/// The part of the model the solver sees: for each test of the component,
/// the indices of its options still allowed and whether it must run.
#[derive(Debug, Clone)]
pub(crate) struct Sub<'s> {
    pub exps: &'s [usize],
    pub allowed: Vec<Vec<usize>>,
    /// Tests fixed to run (their allowed options sum to exactly 1).
    pub forced: Vec<bool>,
}

impl<'s> Sub<'s> {
    /// The whole model of the tests `exps`: every option allowed, none
    /// forced (the root a branch and bound narrows).
    pub fn all(inst: &Instance, exps: &'s [usize]) -> Sub<'s> {
        Sub {
            exps,
            allowed: exps
                .iter()
                .map(|&e| (0..inst.options[e].len()).collect())
                .collect(),
            forced: vec![false; exps.len()],
        }
    }
}

/// A solved model.
pub(crate) struct Solved {
    pub value: f64,
    /// Per test of the component, the value of each allowed option.
    pub x: Vec<Vec<f64>>,
    /// Whether the backend proved it optimal (always for an LP solved to the end).
    pub optimal: bool,
}

/// A row's coefficients: (test position, allowed position, coefficient).
pub(crate) type Terms = Vec<(usize, usize, f64)>;

/// Rows of the model.
struct Rows {
    /// (terms, right-hand side): sum coef x <= rhs.
    le: Vec<(Terms, f64)>,
}

/// A run's phase: first day, last day, share.
type Phase = (usize, usize, crate::share::Share);

/// The segments of days on which the options of the tests at positions
/// `members` are constant (ramp steps included), and per segment the
/// options covering it with their share there: (breakpoints, cover), or
/// `None` when there is no option.
fn covering(inst: &Instance, sub: &Sub, members: &[usize]) -> Option<(Vec<usize>, Vec<Terms>)> {
    let opt = |i: usize, j: usize| -> &Opt { &inst.options[sub.exps[i]][sub.allowed[i][j]] };
    let phases: Vec<(usize, usize, Vec<Phase>)> = members
        .iter()
        .flat_map(|&i| (0..sub.allowed[i].len()).map(move |j| (i, j)))
        .map(|(i, j)| (i, j, inst.phases(sub.exps[i], opt(i, j))))
        .collect();
    let pts = breakpoints(
        phases
            .iter()
            .flat_map(|(_, _, ph)| ph.iter().map(|&(s, e, _)| (s, e))),
    );
    if pts.len() < 2 {
        return None;
    }
    let mut cover: Vec<Terms> = vec![Vec::new(); pts.len() - 1];
    for (i, j, ph) in &phases {
        for &(first, last, share) in ph {
            let mut s = pts.partition_point(|&b| b < first);
            while s + 1 < pts.len() && pts[s] <= last {
                cover[s].push((*i, *j, share.fraction()));
                s += 1;
            }
        }
    }
    Some((pts, cover))
}

/// Sorted distinct breakpoints of a set of day spans: every start and every
/// end + 1.
fn breakpoints(spans: impl Iterator<Item = (usize, usize)>) -> Vec<usize> {
    let mut pts: Vec<usize> = spans.flat_map(|(s, e)| [s, e + 1]).collect();
    pts.sort_unstable();
    pts.dedup();
    pts
}

/// Every row of the model of `sub`.
fn build_rows(inst: &Instance, sub: &Sub) -> Rows {
    let mut rows = test_rows(sub);
    each_linking_row(inst, sub, &mut |terms, rhs| rows.le.push((terms, rhs)));
    rows
}

/// The rows of each test alone: at most one option (exactly one when
/// forced).
fn test_rows(sub: &Sub) -> Rows {
    let mut le = Vec::new();
    for i in 0..sub.exps.len() {
        if sub.allowed[i].len() > 1 {
            le.push((
                (0..sub.allowed[i].len()).map(|j| (i, j, 1.0)).collect(),
                1.0,
            ));
        }
        if sub.forced[i] {
            le.push((
                (0..sub.allowed[i].len()).map(|j| (i, j, -1.0)).collect(),
                -1.0,
            ));
        }
    }
    Rows { le }
}

/// Hands each row that links tests (pool capacity, `not_with`, `apart`,
/// `after`) to `sink` as it is made, so a caller that stores rows its own
/// way never holds them all twice.
pub(crate) fn each_linking_row(inst: &Instance, sub: &Sub, sink: &mut dyn FnMut(Terms, f64)) {
    let p = inst.portfolio;
    let opt = |i: usize, j: usize| -> &Opt { &inst.options[sub.exps[i]][sub.allowed[i][j]] };
    // Pool capacity per segment.
    let mut pools: Vec<usize> = sub
        .exps
        .iter()
        .flat_map(|&e| p.experiments[e].pools.iter().copied())
        .collect();
    pools.sort_unstable();
    pools.dedup();
    for &pool in &pools {
        let members: Vec<usize> = (0..sub.exps.len())
            .filter(|&i| p.experiments[sub.exps[i]].uses(pool))
            .collect();
        let Some((pts, cover)) = covering(inst, sub, &members) else {
            continue;
        };
        let pool_def = &p.pools[pool];
        let split = pool_def.sharing == Sharing::Split;
        let capacity = room(pool_def);
        let mut last: Option<Vec<(usize, usize, u64)>> = None;
        for (s, c) in cover.into_iter().enumerate() {
            // Ramps change a run's share inside it: the same runs at other
            // shares make another row.
            let ids: Vec<(usize, usize, u64)> =
                c.iter().map(|&(i, j, sh)| (i, j, sh.to_bits())).collect();
            if last.as_ref() == Some(&ids) || c.is_empty() {
                continue;
            }
            last = Some(ids);
            let days = pts[s]..pts[s + 1];
            let count_left = days
                .clone()
                .map(|d| {
                    pool_def
                        .max_concurrent
                        .saturating_sub(inst.base_count[pool][d])
                })
                .min()
                .unwrap_or(0) as f64;
            let share_left = days
                .map(|d| capacity - inst.base_share[pool][d])
                .min()
                .unwrap_or(0) as f64
                / WHOLE as f64;
            // Per test, its largest coefficient here: rows that cannot bind are left out.
            let mut distinct = 0usize;
            let mut max_share_sum = 0.0;
            let mut prev = usize::MAX;
            let mut cur_max = 0.0f64;
            for &(i, _, sh) in &c {
                if i != prev {
                    max_share_sum += cur_max;
                    cur_max = 0.0;
                    distinct += 1;
                    prev = i;
                }
                cur_max = cur_max.max(sh);
            }
            max_share_sum += cur_max;
            if distinct as f64 > count_left {
                sink(c.iter().map(|&(i, j, _)| (i, j, 1.0)).collect(), count_left);
            }
            if split && max_share_sum > share_left + 1e-9 {
                // Valid cuts the share row alone misses: at most k runs
                // with shares above share_left / (k + 1) fit together.
                for k in 1..=2usize {
                    let above = share_left / (k + 1) as f64 + 1e-9;
                    let big: Terms = c
                        .iter()
                        .filter(|&&(_, _, sh)| sh > above)
                        .map(|&(i, j, _)| (i, j, 1.0))
                        .collect();
                    let mut tests: Vec<usize> = big.iter().map(|&(i, _, _)| i).collect();
                    tests.dedup();
                    if tests.len() > k && (k as f64) < count_left {
                        sink(big, k as f64);
                    }
                }
                sink(c, share_left);
            }
        }
    }
    // not_with pairs inside the component.
    let pos = |e: usize| sub.exps.iter().position(|&x| x == e);
    for (a_pos, &a) in sub.exps.iter().enumerate() {
        for &b in &p.experiments[a].not_with {
            let Some(b_pos) = pos(b) else { continue };
            if b <= a {
                continue;
            }
            let both = [a_pos, b_pos];
            let pts = breakpoints(
                both.iter()
                    .flat_map(|&i| (0..sub.allowed[i].len()).map(move |j| (i, j)))
                    .map(|(i, j)| {
                        let o = opt(i, j);
                        (o.start, o.end)
                    }),
            );
            if pts.len() < 2 {
                continue;
            }
            let mut cover: Vec<Terms> = vec![Vec::new(); pts.len() - 1];
            let mut has = vec![[false; 2]; pts.len() - 1];
            for (side, &i) in both.iter().enumerate() {
                for j in 0..sub.allowed[i].len() {
                    let o = opt(i, j);
                    let mut s = pts.partition_point(|&b| b < o.start);
                    while s + 1 < pts.len() && pts[s] <= o.end {
                        cover[s].push((i, j, 1.0));
                        has[s][side] = true;
                        s += 1;
                    }
                }
            }
            for (s, c) in cover.into_iter().enumerate() {
                if has[s][0] && has[s][1] {
                    sink(c, 1.0);
                }
            }
        }
    }
    // Pairs apart on traffic inside the component: on each overlap pool
    // they share, their shares add up to at most 1 wherever both may run
    // (on a split pool the pool's own row already says so).
    for (a_pos, &a) in sub.exps.iter().enumerate() {
        for &b in &p.experiments[a].apart_traffic {
            let Some(b_pos) = pos(b) else { continue };
            if b <= a {
                continue;
            }
            let shared_overlap = p.experiments[a].pools.iter().any(|&pool| {
                p.experiments[b].uses(pool) && p.pools[pool].sharing == Sharing::Overlap
            });
            if !shared_overlap {
                continue;
            }
            let Some((_, cover)) = covering(inst, sub, &[a_pos, b_pos]) else {
                continue;
            };
            for c in cover {
                let has_a = c.iter().any(|&(i, _, _)| i == a_pos);
                let has_b = c.iter().any(|&(i, _, _)| i == b_pos);
                let most: f64 = [a_pos, b_pos]
                    .iter()
                    .map(|&t| {
                        c.iter()
                            .filter(|&&(i, _, _)| i == t)
                            .map(|&(_, _, sh)| sh)
                            .fold(0.0, f64::max)
                    })
                    .sum();
                if has_a && has_b && most > 1.0 + 1e-9 {
                    sink(c, 1.0);
                }
            }
        }
    }
    // after links inside the component.
    for (b_pos, &b) in sub.exps.iter().enumerate() {
        for &(a, gap) in &inst.preds[b] {
            let Some(a_pos) = pos(a) else { continue };
            let mut starts: Vec<usize> = (0..sub.allowed[b_pos].len())
                .map(|j| opt(b_pos, j).start)
                .collect();
            starts.sort_unstable();
            starts.dedup();
            for &t in &starts {
                let mut row: Terms = (0..sub.allowed[b_pos].len())
                    .filter(|&j| opt(b_pos, j).start <= t)
                    .map(|j| (b_pos, j, 1.0))
                    .collect();
                row.extend(
                    (0..sub.allowed[a_pos].len())
                        .filter(|&j| opt(a_pos, j).end + 1 + gap as usize <= t)
                        .map(|j| (a_pos, j, -1.0)),
                );
                sink(row, 0.0);
            }
        }
    }
}

/// Why a model has no solution.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Failed {
    /// Proved infeasible.
    Infeasible,
    /// Out of time, or the backend failed.
    Other,
}

fn failed(e: good_lp::ResolutionError) -> Failed {
    match e {
        good_lp::ResolutionError::Infeasible => Failed::Infeasible,
        _ => Failed::Other,
    }
}

/// The variables, objective, variables per test and rows of the model of
/// `sub` in good_lp's terms.
fn model(
    inst: &Instance,
    sub: &Sub,
    integer: bool,
    start: Option<&[Option<usize>]>,
) -> (
    ProblemVariables,
    Expression,
    Vec<Vec<Variable>>,
    Vec<Constraint>,
) {
    let rows = build_rows(inst, sub);
    let mut vars = ProblemVariables::new();
    let mut xs: Vec<Vec<Variable>> = Vec::with_capacity(sub.exps.len());
    let mut objective = Expression::with_capacity(64);
    for (i, &e) in sub.exps.iter().enumerate() {
        let mut v = Vec::with_capacity(sub.allowed[i].len());
        for (j, &k) in sub.allowed[i].iter().enumerate() {
            // x <= 1 follows from the test's row; an explicit bound only slows
            // the simplex down. The exact model needs binaries.
            let mut def = variable().min(0.0);
            if integer {
                def = def.binary();
            } else if sub.allowed[i].len() == 1 {
                def = def.max(1.0);
            }
            if let Some(init) = start {
                def = def.initial(if init[i] == Some(j) { 1.0 } else { 0.0 });
            }
            let x = vars.add(def);
            objective.add_mul(inst.options[e][k].value, x);
            v.push(x);
        }
        xs.push(v);
    }
    let constraints: Vec<Constraint> = rows
        .le
        .iter()
        .map(|(coefs, rhs)| {
            let mut ex = Expression::with_capacity(coefs.len());
            for &(i, j, c) in coefs {
                ex.add_mul(c, xs[i][j]);
            }
            ex.leq(*rhs)
        })
        .collect();
    (vars, objective, xs, constraints)
}

/// The bound HiGHS proves on the exact 0-1 model of `sub` within
/// `seconds` (presolve and cuts on, one thread): its MIP dual bound, or
/// the optimum when it finishes. A reference for the benchmark, far too
/// slow for planning; `None` when HiGHS fails or has no finite bound yet.
#[cfg(feature = "highs")]
pub(crate) fn proved_bound(inst: &Instance, sub: &Sub, seconds: f64) -> Option<f64> {
    let (vars, objective, _, constraints) = model(inst, sub, true, None);
    let mut m = vars
        .maximise(objective)
        .using(good_lp::solvers::highs::highs);
    for c in constraints {
        m.add_constraint(c);
    }
    let mut highs = m.try_into_inner().ok()?;
    highs.set_option("output_flag", false);
    highs.set_option("threads", 1);
    highs.set_option("time_limit", seconds.max(0.01));
    highs.set_option("mip_rel_gap", 1e-6);
    let solved = highs.try_solve().ok()?;
    let bound = solved.double_info_value(c"mip_dual_bound").ok()?;
    bound.is_finite().then_some(bound)
}

/// Solves the model of `sub`: the LP relaxation, or the exact 0-1 model
/// when `integer`.
pub(crate) fn solve(
    inst: &Instance,
    sub: &Sub,
    backend: Backend,
    integer: bool,
    seconds: f64,
    start: Option<&[Option<usize>]>,
) -> Result<Solved, Failed> {
    let (vars, objective, xs, constraints) = model(inst, sub, integer, start);
    let problem = vars.maximise(objective.clone());
    let seconds = seconds.max(0.01);
    let (value, x, optimal) = match backend {
        Backend::Microlp => {
            let mut m = problem
                .using(good_lp::solvers::microlp::microlp)
                .with_time_limit(seconds);
            for c in constraints {
                m.add_constraint(c);
            }
            let sol = m.solve().map_err(failed)?;
            read(&sol, &objective, &xs)
        }
        #[cfg(feature = "highs")]
        Backend::Highs => {
            use good_lp::solvers::highs::HighsPresolveType;
            // Presolve off: HiGHS does not watch its time limit inside presolve.
            let mut m = problem
                .using(good_lp::solvers::highs::highs)
                .set_presolve(HighsPresolveType::Off)
                .set_threads(1)
                .set_time_limit(seconds);
            if integer {
                m = m.set_mip_rel_gap(1e-6).map_err(|_| Failed::Other)?;
            }
            for c in constraints {
                m.add_constraint(c);
            }
            let sol = m.solve().map_err(failed)?;
            read(&sol, &objective, &xs)
        }
    };
    Ok(Solved { value, x, optimal })
}

fn read<S: Solution>(
    sol: &S,
    objective: &Expression,
    xs: &[Vec<Variable>],
) -> (f64, Vec<Vec<f64>>, bool) {
    let x = xs
        .iter()
        .map(|v| v.iter().map(|&x| sol.value(x).clamp(0.0, 1.0)).collect())
        .collect();
    (
        sol.eval(objective),
        x,
        matches!(sol.status(), SolutionStatus::Optimal),
    )
}
