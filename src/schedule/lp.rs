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
    each_linking_row(inst, sub, &mut |terms, rhs, _| rows.le.push((terms, rhs)));
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
/// way never holds them all twice, with its family: a pool's count rows,
/// its first and second cover cuts and its share rows are four families
/// (numbers `4 p` to `4 p + 3` for the `p`-th pool of the component, in
/// that order), each `not_with` pair, each pair apart and each `after`
/// link one family of its own, numbered on from there. A family's rows
/// come in order (segment by segment, or threshold by threshold for a
/// link), and only the pool families of one pool are made interleaved, so
/// an option's equal coefficients on successive rows of a family (a run's
/// share over its segments) can be stored as one range
/// (`lagrange::Columns`).
pub(crate) fn each_linking_row(inst: &Instance, sub: &Sub, sink: &mut dyn FnMut(Terms, f64, u32)) {
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
    let mut family = 0u32;
    for &pool in &pools {
        let base = family;
        family += 4;
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
                sink(
                    c.iter().map(|&(i, j, _)| (i, j, 1.0)).collect(),
                    count_left,
                    base,
                );
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
                        sink(big, k as f64, base + k as u32);
                    }
                }
                sink(c, share_left, base + 3);
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
                    sink(c, 1.0, family);
                }
            }
            family += 1;
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
                    sink(c, 1.0, family);
                }
            }
            family += 1;
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
                sink(row, 0.0, family);
            }
            family += 1;
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

/// A solved LP relaxation that the branch and bound edits and re-solves
/// from its last basis: microlp's dual simplex after an added row, so a
/// node's LP costs a few pivots instead of a solve from scratch. The
/// variables are those of the root's `Sub`, one per allowed option; a
/// branch forbids options by a row `sum x <= 0` and makes a test run by
/// `sum x >= 1`, so the rows of every node are the root's (valid for its
/// narrower model too: a node only drops terms) plus its branchings.
#[derive(Clone)]
pub(crate) struct Warm {
    sol: microlp::Solution,
    /// Per test of the component, its variable per option (by the
    /// option's index; `None` for an option the root does not allow).
    vars: Vec<Vec<Option<microlp::Variable>>>,
}

impl Warm {
    /// The LP relaxation of the model of `sub`, solved within `seconds`
    /// (the limit of every later re-solve too).
    pub fn root(inst: &Instance, sub: &Sub, seconds: f64) -> Result<Warm, Failed> {
        let rows = build_rows(inst, sub);
        let mut problem = microlp::Problem::new(microlp::OptimizationDirection::Maximize);
        let mut vars: Vec<Vec<Option<microlp::Variable>>> = Vec::with_capacity(sub.exps.len());
        let mut at: Vec<Vec<microlp::Variable>> = Vec::with_capacity(sub.exps.len());
        for (i, &e) in sub.exps.iter().enumerate() {
            let mut by_option = vec![None; inst.options[e].len()];
            let mut here = Vec::with_capacity(sub.allowed[i].len());
            // As in `model`: x <= 1 follows from the test's row, which a
            // test with one option does not have.
            let max = if sub.allowed[i].len() == 1 {
                1.0
            } else {
                f64::INFINITY
            };
            for &k in &sub.allowed[i] {
                let v = problem.add_var(inst.options[e][k].value, (0.0, max));
                by_option[k] = Some(v);
                here.push(v);
            }
            vars.push(by_option);
            at.push(here);
        }
        for (terms, rhs) in &rows.le {
            let mut ex = microlp::LinearExpr::empty();
            for &(i, j, c) in terms {
                ex.add(at[i][j], c);
            }
            problem.add_constraint(ex, microlp::ComparisonOp::Le, *rhs);
        }
        let mut options = microlp::SolveOptions::default();
        options.time_limit = Some(std::time::Duration::from_secs_f64(seconds.max(0.01)));
        let outcome = problem.solve_with(options).map_err(warm_failed)?;
        Warm::from_outcome(outcome, vars)
    }

    fn from_outcome(
        outcome: microlp::SolveOutcome,
        vars: Vec<Vec<Option<microlp::Variable>>>,
    ) -> Result<Warm, Failed> {
        let sol = outcome.into_solution().map_err(|_| Failed::Other)?;
        // Only a proved LP optimum is a bound.
        if !matches!(sol.status(), microlp::SolutionStatus::Optimal) {
            return Err(Failed::Other);
        }
        Ok(Warm { sol, vars })
    }

    /// The LP's value.
    pub fn value(&self) -> f64 {
        self.sol.objective()
    }

    /// The LP's values of the options `sub` allows, in its order.
    pub fn x(&self, sub: &Sub) -> Vec<Vec<f64>> {
        sub.allowed
            .iter()
            .enumerate()
            .map(|(i, ks)| {
                ks.iter()
                    .map(|&k| {
                        self.vars[i][k].map_or(0.0, |v| self.sol.var_value_raw(v).clamp(0.0, 1.0))
                    })
                    .collect()
            })
            .collect()
    }

    /// Re-solved with the options `ks` of test `i` forbidden.
    pub fn forbid(self, i: usize, ks: &[usize]) -> Result<Warm, Failed> {
        self.edit(i, ks, microlp::ComparisonOp::Le, 0.0)
    }

    /// Re-solved with test `i` running one of the options `ks`.
    pub fn force(self, i: usize, ks: &[usize]) -> Result<Warm, Failed> {
        self.edit(i, ks, microlp::ComparisonOp::Ge, 1.0)
    }

    fn edit(
        self,
        i: usize,
        ks: &[usize],
        op: microlp::ComparisonOp,
        rhs: f64,
    ) -> Result<Warm, Failed> {
        let mut ex = microlp::LinearExpr::empty();
        let mut any = false;
        for &k in ks {
            if let Some(v) = self.vars[i][k] {
                ex.add(v, 1.0);
                any = true;
            }
        }
        if !any {
            // Nothing to forbid; nothing to run on.
            return match op {
                microlp::ComparisonOp::Ge => Err(Failed::Infeasible),
                _ => Ok(self),
            };
        }
        let Warm { sol, vars } = self;
        let outcome = sol.add_constraint(ex, op, rhs).map_err(warm_failed)?;
        Warm::from_outcome(outcome, vars)
    }
}

fn warm_failed(e: microlp::Error) -> Failed {
    match e {
        microlp::Error::Infeasible => Failed::Infeasible,
        _ => Failed::Other,
    }
}

/// What reduced-cost fixing proved of a model: a bound on its value, and
/// the model narrowed to the options and runs that could still beat the
/// calendar it was given.
pub(crate) struct Fixed<'s> {
    /// An upper bound on the model's value.
    pub bound: f64,
    /// The model with every option that cannot beat `floor` forbidden and
    /// every test that must run to beat it forced; `None` when nothing can.
    pub sub: Option<Sub<'s>>,
}

/// Reduced-cost fixing (Dantzig, Fulkerson & Johnson 1954, "Solution of a
/// large-scale traveling-salesman problem", Operations Research 2;
/// Nemhauser & Wolsey 1988, "Integer and Combinatorial Optimization",
/// Wiley, on fixing variables by their reduced costs; cited from memory).
///
/// The prices `y >= 0` of the rows linking tests come from the dual of the
/// LP relaxation of `sub`, solved by microlp. Whatever their accuracy,
/// for any `y >= 0` every calendar is worth at most
/// `L = y . b + sum over tests of max(0, best reduced value)`, where an
/// option's reduced value is its value less `y` times its column
/// (Lagrangian weak duality; Geoffrion 1974, as in `lagrange`). The same
/// sum with one option chosen for its test bounds every calendar that
/// runs it; when that is no more than `floor + tol` the option cannot
/// beat `floor` and is forbidden. When leaving a test out is bounded so,
/// it must run. Sound for the proof of `floor`: what is cut is worth no
/// more than `floor` within `tol`. `None` when the dual is not solved.
pub(crate) fn fix_by_reduced_costs<'s>(
    inst: &Instance,
    sub: &Sub<'s>,
    floor: f64,
    tol: f64,
    seconds: f64,
) -> Option<Fixed<'s>> {
    let mut rows: Vec<(Terms, f64)> = Vec::new();
    each_linking_row(inst, sub, &mut |terms, rhs, _| rows.push((terms, rhs)));
    // The dual: min b . y + sum_t u_t, with y . A_o + u_t >= c_o per
    // option o of test t; u_t is the price of the test's own row (x <= 1
    // for a single option), y >= 0 and u >= 0. A forced test's row is
    // `sum x >= 1` instead, whose price may be of either sign.
    let mut problem = microlp::Problem::new(microlp::OptimizationDirection::Minimize);
    let y: Vec<microlp::Variable> = rows
        .iter()
        .map(|(_, rhs)| problem.add_var(*rhs, (0.0, f64::INFINITY)))
        .collect();
    let u: Vec<microlp::Variable> = (0..sub.exps.len())
        .map(|i| {
            let lo = if sub.forced[i] {
                f64::NEG_INFINITY
            } else {
                0.0
            };
            problem.add_var(1.0, (lo, f64::INFINITY))
        })
        .collect();
    // Each option's column: the rows it is on.
    let mut column: Vec<Vec<Vec<(usize, f64)>>> = sub
        .allowed
        .iter()
        .map(|ks| vec![Vec::new(); ks.len()])
        .collect();
    for (r, (terms, _)) in rows.iter().enumerate() {
        for &(i, j, c) in terms {
            column[i][j].push((r, c));
        }
    }
    for (i, &e) in sub.exps.iter().enumerate() {
        for (j, &k) in sub.allowed[i].iter().enumerate() {
            let mut ex = microlp::LinearExpr::empty();
            for &(r, c) in &column[i][j] {
                ex.add(y[r], c);
            }
            ex.add(u[i], 1.0);
            problem.add_constraint(ex, microlp::ComparisonOp::Ge, inst.options[e][k].value);
        }
    }
    let mut options = microlp::SolveOptions::default();
    options.time_limit = Some(std::time::Duration::from_secs_f64(seconds.max(0.01)));
    let sol = problem.solve_with(options).ok()?.into_solution().ok()?;
    let prices: Vec<f64> = y.iter().map(|&v| sol.var_value_raw(v).max(0.0)).collect();
    // The bound and the reduced values, from the prices alone.
    let mut bound: f64 = prices.iter().zip(&rows).map(|(p, (_, b))| p * b).sum();
    let reduced: Vec<Vec<f64>> = sub
        .exps
        .iter()
        .enumerate()
        .map(|(i, &e)| {
            sub.allowed[i]
                .iter()
                .enumerate()
                .map(|(j, &k)| {
                    let used: f64 = column[i][j].iter().map(|&(r, c)| prices[r] * c).sum();
                    inst.options[e][k].value - used
                })
                .collect()
        })
        .collect();
    // A forced test takes its best option even when it is worth less
    // than nothing; any other test may take none.
    let top: Vec<f64> = reduced
        .iter()
        .enumerate()
        .map(|(i, rs)| {
            let best = rs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            if sub.forced[i] {
                best
            } else {
                best.max(0.0)
            }
        })
        .collect();
    bound += top.iter().sum::<f64>();
    if !bound.is_finite() {
        return None;
    }
    let beats = |v: f64| v > floor + tol;
    if !beats(bound) {
        return Some(Fixed { bound, sub: None });
    }
    let mut narrowed = sub.clone();
    for i in 0..sub.exps.len() {
        let others = bound - top[i];
        narrowed.allowed[i] = sub.allowed[i]
            .iter()
            .zip(&reduced[i])
            .filter(|&(_, &r)| beats(others + r))
            .map(|(&k, _)| k)
            .collect();
        if !sub.forced[i] && !beats(others) {
            narrowed.forced[i] = true;
        }
        if narrowed.forced[i] && narrowed.allowed[i].is_empty() {
            return Some(Fixed { bound, sub: None });
        }
    }
    Some(Fixed {
        bound,
        sub: Some(narrowed),
    })
}
