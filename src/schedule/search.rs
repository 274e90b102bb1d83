//! The optimiser of one component (tests linked by pools, `not_with` or
//! `after`): the LP relaxation for the bound (the Lagrangian bound of
//! `lagrange` past 8,000 options), LP-guided rounding for the starting
//! calendar, then a seeded large neighbourhood search (remove the tests
//! around a pool and span, around a left-out test's option, or a few at
//! random, and re-insert everything that fits, best value first with a
//! little noise) that keeps the best; then, on small components,
//! reduced-cost fixing from the LP's dual and a branch and bound over LP
//! relaxations of what is left, and with HiGHS the exact MILP. A
//! component is proved optimal only when its calendar's value meets one
//! of those bounds (within `tol`).
//!
//! Every step is counted in iterations, not seconds, so the same input
//! gives the same plan; the wall clock only cuts the search short when the
//! time limit runs out.

use super::deadline::Deadline;
use super::lp::Backend;
use super::lp::{self, Sub};
use super::options::Instance;
use super::state::State;

/// A small seeded generator (splitmix64; Steele, Lea & Flood 2014,
/// "Fast splittable pseudorandom number generators").
#[derive(Debug, Clone)]
pub struct SplitMix64(u64);

impl SplitMix64 {
    pub fn new(seed: u64) -> SplitMix64 {
        SplitMix64(seed)
    }

    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Uniform in 0..n (n > 0).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n as u64) as usize
    }
}

/// What the search of one component achieved.
pub(crate) struct Outcome {
    /// Upper bound on the component's value.
    pub bound: f64,
    /// The LP relaxation solved (otherwise the bound is the trivial one).
    pub lp_ok: bool,
    /// The calendar is proved optimal.
    pub proved: bool,
    /// The search improved on the greedy calendar.
    pub improved: bool,
}

/// Tolerance on values for "no worse" and "proved".
fn tol(v: f64) -> f64 {
    1e-7 * v.abs().max(1.0)
}

fn remaining(deadline: Deadline) -> f64 {
    deadline.seconds_left()
}

/// The LP relaxation of one component, or, when it is very large, its
/// Lagrangian bound (`lagrange`), with `floor` the value of a calendar
/// already known. `None` when the backend fails or runs out of time.
pub(crate) fn relax(
    inst: &Instance,
    exps: &[usize],
    backend: Backend,
    floor: f64,
    deadline: Deadline,
) -> Option<lp::Solved> {
    let nopt: usize = exps.iter().map(|&e| inst.options[e].len()).sum();
    if nopt > LAGRANGE_OPTIONS {
        let sub = Sub::all(inst, exps);
        return super::lagrange::bound(inst, &sub, floor, super::lagrange::STEPS, deadline);
    }
    let solved = lp::solve(
        inst,
        &Sub::all(inst, exps),
        backend,
        false,
        remaining(deadline),
        None,
    );
    deadline.after_lp(&solved);
    solved.ok()
}

/// Optimises the tests `exps` of one component in `state` (which holds the
/// greedy calendar on entry), from its LP relaxation `relaxed`, until its
/// work budget is spent or `deadline`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn solve_component(
    inst: &Instance,
    exps: &[usize],
    state: &mut State,
    relaxed: Option<&lp::Solved>,
    backend: Backend,
    deadline: Deadline,
    effort: u32,
) -> Outcome {
    let comp = Comp {
        inst,
        exps,
        backend,
        deadline,
    };
    let greedy_value = comp_value(inst, exps, state);
    let trivial: f64 = exps
        .iter()
        .map(|&e| inst.options[e].first().map_or(0.0, |o| o.value))
        .sum();
    let nopt: usize = exps.iter().map(|&e| inst.options[e].len()).sum();
    let bound = relaxed.as_ref().map_or(trivial, |s| s.value.min(trivial));
    let mut rng = SplitMix64::new(0x5EED ^ exps[0] as u64);
    let iters = (effort as usize) * (1000 * exps.len()).min(LNS_MAX_ITERS);

    // Start from the better of greedy and the LP rounding, then search;
    // from the rounding of a Lagrangian bound's average choices even when
    // greedy is worth more, since the search ends higher from there (about
    // 1% on the large benchmark portfolios; docs/planning.md). A search
    // that ends below greedy keeps greedy.
    let lagrangian = nopt > LAGRANGE_OPTIONS;
    let mut best = state.clone();
    if let Some(lpx) = relaxed {
        let mut cand = state.clone();
        round(inst, &Sub::all(inst, exps), &lpx.x, &mut cand);
        if lagrangian {
            copy_choices(inst, exps, &mut best, &cand);
        } else {
            adopt(inst, exps, &mut best, &cand);
        }
    }
    if !proved(&best, inst, exps, bound) {
        lns(inst, exps, &mut best, iters, &mut rng, deadline);
    }
    adopt(inst, exps, &mut best, state);
    let mut bound = bound;
    if relaxed.is_some() && !proved(&best, inst, exps, bound) && nopt <= BNB_MAX_OPTIONS {
        bound = bound.min(fix_and_branch(comp, &mut best, effort));
    }
    if backend.solves_milp() && !proved(&best, inst, exps, bound) && nopt <= MILP_MAX_OPTIONS {
        if let Some((v, exact)) = exact_milp(comp, &mut best, 1) {
            if exact {
                bound = bound.min(v);
            }
        }
    }
    let value = comp_value(inst, exps, &best);
    copy_choices(inst, exps, state, &best);
    Outcome {
        bound: bound.max(value),
        lp_ok: relaxed.is_some(),
        proved: value >= bound - tol(bound),
        improved: value > greedy_value + tol(greedy_value),
    }
}

/// Components with more options than this get their bound, and the
/// rounding that starts their search, from the Lagrangian dual
/// (`lagrange`) rather than one LP: the same bound once the prices
/// converge, within half a percent of it in a fraction of the time
/// (docs/planning.md).
const LAGRANGE_OPTIONS: usize = 8000;

/// Most iterations of the neighbourhood search per component (1,000 per
/// test below that).
const LNS_MAX_ITERS: usize = 25_000;

/// Components with at most this many options go to the exact MILP, where
/// the backend is good at it.
const MILP_MAX_OPTIONS: usize = 8000;

/// One component's proof work: the instance, the component's tests, the
/// LP backend and the clock.
#[derive(Clone, Copy)]
struct Comp<'a, 'p, 'd> {
    inst: &'a Instance<'p>,
    exps: &'a [usize],
    backend: Backend,
    deadline: Deadline<'d>,
}

/// Hands the component's exact 0-1 model to the backend, warm-started from
/// `best`, with a fair share of the time left. Adopts a better calendar;
/// returns its value and whether the backend proved it optimal.
fn exact_milp(c: Comp, best: &mut State, comps_left: usize) -> Option<(f64, bool)> {
    let (inst, exps, backend, deadline) = (c.inst, c.exps, c.backend, c.deadline);
    let sub = Sub::all(inst, exps);
    let start: Vec<Option<usize>> = exps.iter().map(|&e| best.choice[e]).collect();
    let seconds = remaining(deadline) / comps_left.max(1) as f64;
    let solved = lp::solve(inst, &sub, backend, true, seconds, Some(&start));
    deadline.after_lp(&solved);
    let solved = solved.ok()?;
    let order = after_places(inst, exps);
    let cand = place_chosen(inst, &sub, &solved.x, |x| x > 0.5, &order, best)?;
    adopt(inst, exps, best, &cand);
    let v = comp_value(inst, exps, &cand);
    Some((v, solved.optimal))
}

/// The places in `exps` of the component's tests, in the portfolio's
/// `after` order (a predecessor before its successors).
fn after_places(inst: &Instance, exps: &[usize]) -> Vec<usize> {
    let mut rank = vec![0usize; inst.roles.len()];
    for (r, &e) in inst.portfolio.after_order.iter().enumerate() {
        rank[e] = r;
    }
    let mut places: Vec<usize> = (0..exps.len()).collect();
    places.sort_by_key(|&i| rank[exps[i]]);
    places
}

/// A copy of `best` with the tests of `sub` cleared, then each test whose
/// solution `x` (of `sub`) gives one option a weight that `chosen` accepts
/// placed on that option, tests taken at their places `order`. `None`
/// when one does not fit.
fn place_chosen(
    inst: &Instance,
    sub: &Sub,
    x: &[Vec<f64>],
    chosen: impl Fn(f64) -> bool,
    order: &[usize],
    best: &State,
) -> Option<State> {
    let mut cand = best.clone();
    for &e in sub.exps {
        cand.remove(inst, e);
    }
    for &i in order {
        let e = sub.exps[i];
        if let Some(j) = x[i].iter().position(|&w| chosen(w)) {
            let k = sub.allowed[i][j];
            if !cand.fits(inst, e, &inst.options[e][k]) {
                return None;
            }
            cand.add(inst, e, k);
        }
    }
    Some(cand)
}

/// Components with at most this many options get a branch and bound.
const BNB_MAX_OPTIONS: usize = 2500;
/// Its node budget times the square of the options left after
/// reduced-cost fixing (about the cost of one LP solve): a deterministic
/// work budget. 80 million closes the benchmark's medium portfolio (its
/// 7-test component of 169 options left needs about 2,500 nodes) in under
/// a second (DEVELOPERS.md, the 2026-12-05 bound measurements).
const BNB_WORK: usize = 80_000_000;
/// Components of more tests than this, whose trees grow too fast for a
/// budget to close them (medium-keys' 30 tests, the 13- and 20-test
/// components of large-replan), get the budget `BNB_WORK_WIDE` and a
/// best-first search that plunges only where best-first would go next.
const BNB_FEW_TESTS: usize = 10;
/// The work budget of a component of more than `BNB_FEW_TESTS` tests.
const BNB_WORK_WIDE: usize = 12_000_000;

/// Proves what it can of the component's calendar `best`: reduced-cost
/// fixing from the LP's dual (`lp::fix_by_reduced_costs`), then a branch
/// and bound over what could still beat `best`, within its work budget.
/// Improves `best` in place; returns an upper bound on the component's
/// value (infinite when neither step gave one).
fn fix_and_branch(c: Comp, best: &mut State, effort: u32) -> f64 {
    let (inst, exps, deadline) = (c.inst, c.exps, c.deadline);
    let floor = comp_value(inst, exps, best);
    let all = Sub::all(inst, exps);
    let (mut bound, root) =
        match lp::fix_by_reduced_costs(inst, &all, floor, tol(floor), remaining(deadline)) {
            // Nothing can beat `best`: it is optimal.
            Some(lp::Fixed { sub: None, .. }) => return floor,
            Some(lp::Fixed {
                bound,
                sub: Some(narrowed),
            }) => (bound, narrowed),
            None => (f64::INFINITY, all),
        };
    if floor >= bound - tol(bound) {
        return bound;
    }
    let left: usize = root.allowed.iter().map(Vec::len).sum();
    let work = if exps.len() <= BNB_FEW_TESTS {
        BNB_WORK
    } else {
        BNB_WORK_WIDE
    };
    let budget = (effort as usize) * work / (left * left).max(1);
    if let Some(b) = branch_and_bound(c, root, best, budget) {
        bound = bound.min(b);
    }
    bound
}

/// Branch and bound over LP relaxations from the model `root`: branch on
/// the test whose LP choice is most spread out (left out / run, or its
/// options split at the LP's median), prune by the incumbent. Best-first
/// (the open node of largest bound), except that the child explored first
/// follows its parent at once (a plunge), so that with microlp its LP is
/// its parent's re-solved from the last basis (`lp::Warm`): always in a
/// component of at most `BNB_FEW_TESTS` tests, otherwise only when no
/// open node has a larger bound. Improves
/// `best` in place and returns a bound on the component's value: its value
/// when the tree is exhausted, otherwise the largest LP value of a node
/// left open. `None` when a solve fails.
fn branch_and_bound<'s>(
    c: Comp<'s, '_, '_>,
    root: Sub<'s>,
    best: &mut State,
    budget: usize,
) -> Option<f64> {
    let (inst, exps, backend, deadline) = (c.inst, c.exps, c.backend, c.deadline);
    struct Node<'s> {
        sub: Sub<'s>,
        parent: f64,
        /// The parent's solved LP and the row that makes this node's.
        warm: Option<(lp::Warm, Edit)>,
    }
    // Open nodes holding a solved LP (each a copy of the simplex's state).
    let mut held = 0usize;
    let options: usize = root.allowed.iter().map(Vec::len).sum();
    let most_held = (WARM_HELD_OPTIONS / options.max(1)).min(16);
    let mut incumbent = comp_value(inst, exps, best);
    let mut stack = vec![Node {
        sub: root,
        parent: f64::INFINITY,
        warm: None,
    }];
    let by_rank = after_places(inst, exps);
    let mut nodes = 0usize;
    // Best-first: the open node with the largest bound (earliest made on
    // ties), so the proved bound falls as fast as it can.
    fn pop_best<'s>(stack: &mut Vec<Node<'s>>) -> Option<Node<'s>> {
        let mut bi = None;
        for (k, n) in stack.iter().enumerate() {
            if bi.is_none_or(|b: usize| n.parent > stack[b].parent) {
                bi = Some(k);
            }
        }
        bi.map(|k| stack.remove(k))
    }
    // The child explored next, straight after its parent (a plunge), so
    // its LP is re-solved from its parent's basis.
    let mut next: Option<Node> = None;
    while let Some(node) = next.take().or_else(|| pop_best(&mut stack)) {
        held -= usize::from(node.warm.is_some());
        if node.parent <= incumbent + tol(incumbent) {
            continue;
        }
        if nodes >= budget || deadline.passed() {
            stack.push(node);
            break;
        }
        nodes += 1;
        let (lp, warm) = match node_lp(inst, &node.sub, node.warm, backend, deadline) {
            Ok(lp) => lp,
            Err(lp::Failed::Infeasible) => continue,
            Err(lp::Failed::Other) => return None,
        };
        let node_bound = lp.value.min(node.parent);
        if node_bound <= incumbent + tol(incumbent) {
            continue;
        }
        // Branch on the test whose LP choice is most spread out.
        let mut pick: Option<(usize, f64)> = None;
        for (i, xs) in lp.x.iter().enumerate() {
            let sum: f64 = xs.iter().sum();
            let max = xs.iter().copied().fold(0.0, f64::max);
            let spread = if sum > 1e-6 && sum < 1.0 - 1e-6 {
                sum.min(1.0 - sum)
            } else {
                sum - max
            };
            if spread > 1e-6 && pick.is_none_or(|p| spread > p.1) {
                pick = Some((i, spread));
            }
        }
        // Round this node's LP into a calendar; an integral LP is exact.
        let whole = |x: f64| x >= 1.0 - 1e-6;
        if let Some(mut cand) = place_chosen(inst, &node.sub, &lp.x, whole, &by_rank, best) {
            fill(inst, exps, &mut cand);
            let v = comp_value(inst, exps, &cand);
            if v > incumbent + tol(incumbent) {
                copy_choices(inst, exps, best, &cand);
                incumbent = v;
            }
        }
        let Some((i, _)) = pick else {
            continue;
        };
        let xs = &lp.x[i];
        let sum: f64 = xs.iter().sum();
        let (first, second) = if sum < 1.0 - 1e-6 && !node.sub.forced[i] {
            // Left out, or run.
            let (out_warm, run_warm) = hand_on(
                warm,
                Edit::Forbid(i, node.sub.allowed[i].clone()),
                Edit::Force(i),
                &mut held,
                most_held,
            );
            let mut out = Node {
                sub: node.sub.clone(),
                parent: node_bound,
                warm: out_warm,
            };
            out.sub.allowed[i].clear();
            let mut run = Node {
                sub: node.sub,
                parent: node_bound,
                warm: run_warm,
            };
            run.sub.forced[i] = true;
            if sum >= 0.5 {
                (run, out)
            } else {
                (out, run)
            }
        } else {
            // Split its options by (start, share) at the LP's median.
            let allowed = &node.sub.allowed[i];
            let mut idx: Vec<usize> = (0..allowed.len()).collect();
            let e = exps[i];
            idx.sort_by(|&a, &b| {
                let (oa, ob) = (&inst.options[e][allowed[a]], &inst.options[e][allowed[b]]);
                oa.start.cmp(&ob.start).then(oa.share.cmp(&ob.share))
            });
            let mut cum = 0.0;
            let mut cut = 0;
            for (pos, &j) in idx.iter().enumerate() {
                cum += xs[j];
                if cum >= sum / 2.0 - 1e-9 {
                    cut = pos + 1;
                    break;
                }
            }
            let cut = cut.clamp(1, idx.len() - 1);
            let lo_mass: f64 = idx[..cut].iter().map(|&j| xs[j]).sum();
            let mut lo: Vec<usize> = idx[..cut].iter().map(|&j| allowed[j]).collect();
            let mut hi: Vec<usize> = idx[cut..].iter().map(|&j| allowed[j]).collect();
            lo.sort_unstable();
            hi.sort_unstable();
            let lo_first = lo_mass >= sum / 2.0;
            let (forbid_hi, forbid_lo) = (Edit::Forbid(i, hi.clone()), Edit::Forbid(i, lo.clone()));
            let (a_warm, b_warm) = if lo_first {
                hand_on(warm, forbid_hi, forbid_lo, &mut held, most_held)
            } else {
                let (b, a) = hand_on(warm, forbid_lo, forbid_hi, &mut held, most_held);
                (a, b)
            };
            let mut a = Node {
                sub: node.sub.clone(),
                parent: node_bound,
                warm: a_warm,
            };
            a.sub.allowed[i] = lo;
            let mut b = Node {
                sub: node.sub,
                parent: node_bound,
                warm: b_warm,
            };
            b.sub.allowed[i] = hi;
            if lo_first {
                (a, b)
            } else {
                (b, a)
            }
        };
        stack.push(second);
        // A small tree plunges always; a wide one only where best-first
        // would go next anyway, so its open bound falls as fast as it can.
        let plunge = exps.len() <= BNB_FEW_TESTS
            || first.parent
                >= stack
                    .iter()
                    .map(|n| n.parent)
                    .fold(f64::NEG_INFINITY, f64::max);
        if first.warm.is_some() && plunge {
            next = Some(first);
        } else {
            stack.push(first);
        }
    }
    let open = stack
        .iter()
        .map(|n| n.parent)
        .fold(f64::NEG_INFINITY, f64::max);
    Some(incumbent.max(open))
}

/// The row that makes a branch and bound node's LP from its parent's:
/// some options of one test forbidden, or one test made to run.
enum Edit {
    Forbid(usize, Vec<usize>),
    Force(usize),
}

/// Most open nodes (the plunge's next one included) that keep a copy of their
/// parent's solved LP for a warm start, times the options of the model
/// (capped at 16 nodes); the others solve theirs from scratch. A bound on
/// memory, since each copy is the simplex's whole state (on large-keys'
/// 2,488-option component, 16 copies took the peak from 24 to 111 MB);
/// counted, so the plan does not depend on it.
const WARM_HELD_OPTIONS: usize = 3000;

/// A parent's solved LP handed to a child, with the child's row.
type Handed = (lp::Warm, Edit);

/// The parent's solved LP `warm` handed to its two children, the first
/// (explored first) with `first`'s row, the second with `second`'s, each
/// the second only while fewer than `most` open nodes hold a copy.
fn hand_on(
    warm: Option<lp::Warm>,
    first: Edit,
    second: Edit,
    held: &mut usize,
    most: usize,
) -> (Option<Handed>, Option<Handed>) {
    let Some(w) = warm else {
        return (None, None);
    };
    let copy = (*held < most).then(|| (w.clone(), second));
    *held += 1 + usize::from(copy.is_some());
    (Some((w, first)), copy)
}

/// The LP of a branch and bound node: its parent's solved LP with the
/// node's one branching row added and re-solved (microlp), or else solved
/// from scratch; with the solved LP to hand on to its children (microlp).
fn node_lp(
    inst: &Instance,
    sub: &Sub,
    warm: Option<(lp::Warm, Edit)>,
    backend: Backend,
    deadline: Deadline,
) -> Result<(lp::Solved, Option<lp::Warm>), lp::Failed> {
    let solved = match warm {
        Some((w, Edit::Forbid(i, ks))) => w.forbid(i, &ks),
        Some((w, Edit::Force(i))) => w.force(i, &sub.allowed[i]),
        None if backend == Backend::Microlp => lp::Warm::root(inst, sub, remaining(deadline)),
        None => {
            let cold = lp::solve(inst, sub, backend, false, remaining(deadline), None);
            deadline.after_lp(&cold);
            return cold.map(|s| (s, None));
        }
    };
    let solved = solved.map(|w| {
        let s = lp::Solved {
            value: w.value(),
            x: w.x(sub),
            optimal: true,
        };
        (s, Some(w))
    });
    if matches!(solved, Err(lp::Failed::Other)) {
        deadline.passed();
    }
    solved
}

fn proved(state: &State, inst: &Instance, exps: &[usize], bound: f64) -> bool {
    comp_value(inst, exps, state) >= bound - tol(bound)
}

/// Value of the component's tests in `state`.
pub(crate) fn comp_value(inst: &Instance, exps: &[usize], state: &State) -> f64 {
    exps.iter()
        .filter_map(|&e| state.opt(inst, e).map(|o| o.value))
        .sum()
}

/// Makes `to` hold the choices of `from` for the component's tests.
pub(crate) fn copy_choices(inst: &Instance, exps: &[usize], to: &mut State, from: &State) {
    for &e in exps {
        if to.choice[e] != from.choice[e] {
            to.remove(inst, e);
        }
    }
    for &e in exps {
        if to.choice[e] != from.choice[e] {
            if let Some(k) = from.choice[e] {
                to.add(inst, e, k);
            }
        }
    }
}

/// Takes `cand` into `best` when it is strictly better.
fn adopt(inst: &Instance, exps: &[usize], best: &mut State, cand: &State) {
    if comp_value(inst, exps, cand) > comp_value(inst, exps, best) + tol(best.value) {
        copy_choices(inst, exps, best, cand);
    }
}

/// LP-guided rounding: the options in order of their LP weight (then
/// value), each taken when its test is still free and it fits; then every
/// test left tries its best fitting option. `x` is the LP solution of `sub`.
fn round(inst: &Instance, sub: &Sub, x: &[Vec<f64>], state: &mut State) {
    let (exps, allowed) = (sub.exps, &sub.allowed);
    for &e in exps {
        state.remove(inst, e);
    }
    let mut order: Vec<(f64, f64, usize, usize)> = Vec::new();
    for (i, &e) in exps.iter().enumerate() {
        for (j, &k) in allowed[i].iter().enumerate() {
            if x[i][j] > 1e-6 {
                order.push((x[i][j], inst.options[e][k].value, i, k));
            }
        }
    }
    order.sort_by(|a, b| {
        b.0.total_cmp(&a.0)
            .then(b.1.total_cmp(&a.1))
            .then(a.2.cmp(&b.2))
            .then(a.3.cmp(&b.3))
    });
    for pass in 0..2 {
        for &(_, _, i, k) in &order {
            let e = exps[i];
            if pass == 1 && !retry(inst, e) {
                continue;
            }
            if state.choice[e].is_none() && state.fits(inst, e, &inst.options[e][k]) {
                state.add(inst, e, k);
            }
        }
    }
    fill(inst, exps, state);
}

/// Whether a second pass over the tests that did not fit should try `e`
/// again. Adding runs only takes room, so an option that did not fit
/// still does not, unless it waited on a predecessor that the first pass
/// placed after it: only a test with predecessors can fit the second time.
fn retry(inst: &Instance, e: usize) -> bool {
    !inst.preds[e].is_empty()
}

/// Every unscheduled test of the component takes its best fitting option,
/// by priority.
fn fill(inst: &Instance, exps: &[usize], state: &mut State) {
    let mut order: Vec<usize> = exps.to_vec();
    let p = inst.portfolio;
    order.sort_by(|&a, &b| {
        p.experiments[b]
            .priority
            .total_cmp(&p.experiments[a].priority)
            .then(a.cmp(&b))
    });
    for pass in 0..2 {
        for &e in &order {
            if pass == 1 && !retry(inst, e) {
                continue;
            }
            if state.choice[e].is_none() {
                if let Some(k) = state.best_fit(inst, e) {
                    state.add(inst, e, k);
                }
            }
        }
    }
}

/// Whether test `a` over span `a_span` and scheduled test `b` over
/// `b_span` compete: a shared pool and overlapping days, or a `not_with`
/// pair overlapping.
fn competes(
    inst: &Instance,
    a: usize,
    a_span: (usize, usize),
    b: usize,
    b_span: (usize, usize),
) -> bool {
    let p = inst.portfolio;
    let overlap = a_span.0 <= b_span.1 && b_span.0 <= a_span.1;
    overlap
        && (p.experiments[a]
            .pools
            .iter()
            .any(|&pool| p.experiments[b].uses(pool))
            || p.experiments[a].not_with.contains(&b))
}

/// The large neighbourhood search on the component's tests in `state`.
fn lns(
    inst: &Instance,
    exps: &[usize],
    state: &mut State,
    iters: usize,
    rng: &mut SplitMix64,
    deadline: Deadline,
) {
    let p = inst.portfolio;
    let eff = chain_priority(inst);
    let mut best = state.clone();
    let mut best_value = best.value;
    let mut removed: Vec<usize> = Vec::new();
    // The places in `exps` of the tests on each pool, so a move finds the
    // tests of the pools it touched without a pass over the component.
    let mut on_pool: Vec<Vec<usize>> = vec![Vec::new(); p.pools.len()];
    for (i, &e) in exps.iter().enumerate() {
        for &pool in &p.experiments[e].pools {
            on_pool[pool].push(i);
        }
    }
    // The places of the tests whose choice may differ between `state` and
    // `best`: every move changes only tests on the pools it touched, so
    // copying between the two needs to look at these alone.
    // Each test's place in `exps`, for its `not_with` partners.
    let place: std::collections::HashMap<usize, usize> =
        exps.iter().enumerate().map(|(i, &e)| (e, i)).collect();
    let mut near: Vec<usize> = Vec::new();
    let mut differs = vec![false; exps.len()];
    let mut differing: Vec<usize> = Vec::new();
    for it in 0..iters {
        if it % 32 == 0 && deadline.passed() {
            break;
        }
        removed.clear();
        let mode = rng.below(4);
        let unscheduled: Vec<usize> = if mode <= 1 {
            exps.iter()
                .copied()
                .filter(|&e| state.choice[e].is_none() && !inst.options[e].is_empty())
                .collect()
        } else {
            Vec::new()
        };
        let mut seed_move: Option<(usize, usize)> = None;
        if mode <= 1 && !unscheduled.is_empty() {
            // Clear the way for one option of a left-out test.
            let u = unscheduled[rng.below(unscheduled.len())];
            let n = inst.options[u].len();
            let top = 1 + rng.below(n);
            let k = rng.below(top);
            let o = inst.options[u][k];
            // Only a test on a pool of `u`'s or kept from it by `not_with`
            // can compete with it: those, in the component's order.
            near.clear();
            for &pool in &p.experiments[u].pools {
                near.extend(&on_pool[pool]);
            }
            near.extend(
                p.experiments[u]
                    .not_with
                    .iter()
                    .filter_map(|&b| place.get(&b)),
            );
            near.sort_unstable();
            near.dedup();
            for &i in &near {
                let e = exps[i];
                if let Some(eo) = state.opt(inst, e) {
                    let span = (eo.start, eo.end);
                    if competes(inst, u, (o.start, o.end), e, span) {
                        state.remove_with_successors(inst, e, &mut removed);
                    }
                }
            }
            // Predecessors that end too late for this start make way too.
            for &(pre, gap) in &inst.preds[u] {
                if state
                    .opt(inst, pre)
                    .is_some_and(|po| po.end + 1 + gap as usize > o.start)
                {
                    state.remove_with_successors(inst, pre, &mut removed);
                }
            }
            if state.fits(inst, u, &o) {
                seed_move = Some((u, k));
            }
        } else if mode == 2 {
            // A pool over a span of weeks.
            let e0 = exps[rng.below(exps.len())];
            // A test on several pools picks one of them (one pool draws
            // nothing, so single-pool portfolios search as before).
            let ps = &p.experiments[e0].pools;
            let pool = if ps.len() == 1 {
                ps[0]
            } else {
                ps[rng.below(ps.len())]
            };
            let a = rng.below(inst.days.max(1));
            let b = a + 7 * (1 + rng.below(6));
            for &i in &on_pool[pool] {
                let e = exps[i];
                if let Some(eo) = state.opt(inst, e) {
                    if eo.start <= b && a <= eo.end {
                        state.remove_with_successors(inst, e, &mut removed);
                    }
                }
            }
        } else {
            // A few at random.
            let scheduled: Vec<usize> = exps
                .iter()
                .copied()
                .filter(|&e| state.choice[e].is_some())
                .collect();
            if scheduled.is_empty() {
                continue;
            }
            for _ in 0..1 + rng.below(3) {
                let e = scheduled[rng.below(scheduled.len())];
                state.remove_with_successors(inst, e, &mut removed);
            }
        }
        let mut touched: Vec<usize> = removed
            .iter()
            .flat_map(|&e| p.experiments[e].pools.iter().copied())
            .collect();
        if let Some((u, k)) = seed_move {
            state.add(inst, u, k);
            touched.extend(p.experiments[u].pools.iter().copied());
        }
        // The tests on the touched pools, in the component's order.
        let mut at: Vec<usize> = touched
            .iter()
            .flat_map(|&pool| on_pool[pool].iter().copied())
            .collect();
        at.sort_unstable();
        at.dedup();
        for &i in &at {
            if !differs[i] {
                differs[i] = true;
                differing.push(i);
            }
        }
        let local: Vec<usize> = at.iter().map(|&i| exps[i]).collect();
        recreate(inst, &local, state, rng, &eff);
        // Only this component changes, so the global value compares alike.
        let cur_value = state.value;
        // Record-to-record travel: keep a move that stays within a
        // shrinking margin of the best, so the search can leave a local
        // optimum; fall back to the best otherwise.
        let margin = 0.01 * (1.0 - it as f64 / iters as f64) * best_value.abs();
        let better = cur_value > best_value + tol(best_value);
        if better || cur_value < best_value - margin - tol(best_value) {
            // Only the tests that may differ, in the component's order, so
            // runs are removed and added in the order a full copy takes.
            differing.sort_unstable();
            let tests: Vec<usize> = differing.iter().map(|&i| exps[i]).collect();
            if better {
                copy_choices(inst, &tests, &mut best, state);
                best_value = cur_value;
            } else {
                copy_choices(inst, &tests, state, &best);
            }
            for &i in &differing {
                differs[i] = false;
            }
            differing.clear();
        }
    }
    copy_choices(inst, exps, state, &best);
}

/// Each test's priority raised to the largest of its successors' (and
/// theirs), so a predecessor is re-inserted before the tests waiting on it.
pub(crate) fn chain_priority(inst: &Instance) -> Vec<f64> {
    let p = inst.portfolio;
    let mut eff: Vec<f64> = p.experiments.iter().map(|e| e.priority).collect();
    for &e in p.after_order.iter().rev() {
        for &(s, _) in &inst.succs[e] {
            eff[e] = eff[e].max(eff[s]);
        }
    }
    eff
}

/// Re-inserts every unscheduled test of the component, in priority order
/// with noise, each at its best fitting option or, now and then, at the
/// leanest option worth nearly as much.
fn recreate(inst: &Instance, exps: &[usize], state: &mut State, rng: &mut SplitMix64, eff: &[f64]) {
    let mut order: Vec<(f64, usize)> = exps
        .iter()
        .copied()
        .filter(|&e| state.choice[e].is_none() && !inst.options[e].is_empty())
        .map(|e| (eff[e] * (0.7 + 0.6 * rng.unit()), e))
        .collect();
    order.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
    let lean = rng.below(3) == 0;
    for pass in 0..2 {
        for &(_, e) in &order {
            if state.choice[e].is_some() || (pass == 1 && !retry(inst, e)) {
                continue;
            }
            let Some(k) = state.best_fit(inst, e) else {
                continue;
            };
            let k = if lean {
                let top = inst.options[e][k].value;
                let floor = top - 0.03 * top.abs();
                let mut pick = k;
                let mut foot = footprint(&inst.options[e][k]);
                for (j, o) in inst.options[e].iter().enumerate().skip(k + 1) {
                    if o.value < floor {
                        break;
                    }
                    let f = footprint(o);
                    if f < foot && state.fits(inst, e, o) {
                        pick = j;
                        foot = f;
                    }
                }
                pick
            } else {
                k
            };
            state.add(inst, e, k);
        }
    }
}

fn footprint(o: &super::options::Opt) -> f64 {
    o.share.fraction() * (o.end - o.start + 1) as f64
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::{after_order, Prerequisite};
    use crate::schedule::{synthetic, PlanRequest};
    use std::sync::atomic::AtomicBool;
    use std::time::{Duration, Instant};

    fn far_deadline(cut: &AtomicBool) -> Deadline<'_> {
        Deadline::new(Instant::now() + Duration::from_secs(600), cut)
    }

    /// The Lagrangian bound is at or above the full LP relaxation of the
    /// same tests (solved by microlp, a solver of its own), which is at or
    /// above the value of any calendar (here the greedy one and the one
    /// searched from the bound's rounding); after its steps it comes
    /// within 1% of the LP; and its average choices stay a fraction of one
    /// run per test.
    #[test]
    fn the_lagrangian_bound_stays_above_the_full_lp_and_comes_close_to_it() {
        let mut multi = 0;
        let mut worst: f64 = 1.0;
        for seed in 0..6 {
            let spec = synthetic::Spec {
                tests: 8,
                pools: 3,
                weeks: 8,
                seed,
            };
            let mut p = synthetic::with_calendar_keys(synthetic::portfolio(&spec), seed);
            synthetic::with_keys(&mut p, seed);
            // Every test on several pools, so the split matters.
            for e in &mut p.experiments {
                if e.pools.len() == 1 {
                    e.pools.push((e.pools[0] + 1 + seed as usize % 2) % 3);
                }
            }
            multi += p.experiments.len();
            let request = PlanRequest::default();
            let inst = Instance::new(&p, &request);
            let exps: Vec<usize> = inst.free().collect();
            let cut = AtomicBool::new(false);
            let greedy = super::super::greedy::greedy(&inst);
            let floor = comp_value(&inst, &exps, &greedy);
            let sub = Sub::all(&inst, &exps);
            let dual = super::super::lagrange::bound(
                &inst,
                &sub,
                floor,
                super::super::lagrange::STEPS,
                far_deadline(&cut),
            )
            .expect("the prices take a step");
            let full = lp::solve(
                &inst,
                &Sub::all(&inst, &exps),
                request.backend,
                false,
                600.0,
                None,
            )
            .expect("the full LP solves");
            assert!(
                dual.value >= full.value - 1e-6 * full.value.max(1.0),
                "seed {seed}: Lagrangian {} under the full LP {}",
                dual.value,
                full.value
            );
            worst = worst.max(dual.value / full.value);
            let mut searched = greedy.clone();
            solve_component(
                &inst,
                &exps,
                &mut searched,
                Some(&dual),
                request.backend,
                far_deadline(&cut),
                1,
            );
            let value = comp_value(&inst, &exps, &searched);
            assert!(value >= comp_value(&inst, &exps, &greedy) - 1e-9);
            assert!(full.value >= value - 1e-6 * value.max(1.0), "seed {seed}");
            // Each test's LP weights, summed over its options, stay a
            // fraction of one run.
            for xs in &dual.x {
                assert!(xs.iter().sum::<f64>() <= 1.0 + 1e-6);
            }
        }
        assert!(multi > 20);
        assert!(
            worst <= 1.005,
            "the Lagrangian bound ends {worst} times the LP"
        );
    }

    /// A test placed before its predecessor in the fill order still runs:
    /// the second pass retries the tests with predecessors (and only
    /// those, since adding runs never makes room).
    #[test]
    fn fill_places_a_successor_that_comes_before_its_predecessor() {
        let spec = synthetic::Spec::quarter(2, 1, 4);
        let mut p = synthetic::portfolio(&spec);
        for e in &mut p.experiments {
            e.after.clear();
            e.not_with.clear();
            e.earliest_start = None;
            e.deadline = None;
        }
        p.experiments[1].after = vec![Prerequisite {
            experiment: 0,
            gap_days: 0,
        }];
        p.experiments[0].priority = 1.0;
        p.experiments[1].priority = 9.0;
        p.after_order = after_order(&p.experiments).expect("no cycle");
        let request = PlanRequest::default();
        let inst = Instance::new(&p, &request);
        assert!(!retry(&inst, 0) && retry(&inst, 1));
        let mut state = State::new(&inst);
        fill(&inst, &[0, 1], &mut state);
        let (a, b) = (state.opt(&inst, 0), state.opt(&inst, 1));
        let (a, b) = (
            a.expect("the predecessor runs"),
            b.expect("the successor runs"),
        );
        assert!(a.end < b.start);
    }

    /// The best calendar of the tests `exps` by exhaustive search: each
    /// test, in the `after` order, takes every option that fits the runs
    /// placed before it, or none (`State::fits`, the planner's own rules),
    /// cut only where even every later test's best option could not beat
    /// the best found. Returns its value and choices.
    fn exhaustive(inst: &Instance, exps: &[usize]) -> (f64, Vec<Option<usize>>) {
        let order: Vec<usize> = inst
            .portfolio
            .after_order
            .iter()
            .copied()
            .filter(|e| exps.contains(e))
            .collect();
        // The most the tests from each place on can add.
        let mut rest = vec![0.0; order.len() + 1];
        for d in (0..order.len()).rev() {
            let top = inst.options[order[d]]
                .iter()
                .map(|o| o.value)
                .fold(0.0, f64::max);
            rest[d] = rest[d + 1] + top;
        }
        struct Search<'a, 'b> {
            inst: &'a Instance<'b>,
            order: Vec<usize>,
            rest: Vec<f64>,
            state: State,
            best: (f64, Vec<Option<usize>>),
        }
        fn go(s: &mut Search, d: usize, value: f64) {
            if value + s.rest[d] <= s.best.0 + 1e-12 {
                return;
            }
            if d == s.order.len() {
                s.best = (value, s.state.choice.clone());
                return;
            }
            let e = s.order[d];
            for k in 0..s.inst.options[e].len() {
                let o = s.inst.options[e][k];
                if s.state.fits(s.inst, e, &o) {
                    s.state.add(s.inst, e, k);
                    go(s, d + 1, value + o.value);
                    s.state.remove(s.inst, e);
                }
            }
            go(s, d + 1, value);
        }
        let mut s = Search {
            inst,
            order,
            rest,
            state: State::new(inst),
            best: (-1.0, Vec::new()),
        };
        go(&mut s, 0, 0.0);
        s.best
    }

    /// Small seeded portfolios: few tests on one or two pools over a few
    /// weeks, so that every calendar can be tried; half with the calendar
    /// keys (tests on several pools, ramps, pairs apart).
    fn small_portfolio(seed: u64) -> crate::portfolio::Portfolio {
        let spec = synthetic::Spec {
            tests: 5 + (seed % 2) as usize,
            pools: 1 + usize::from(seed.is_multiple_of(3)),
            weeks: 6 + (seed % 3) as usize,
            seed,
        };
        let p = synthetic::portfolio(&spec);
        if seed.is_multiple_of(2) {
            synthetic::with_calendar_keys(p, seed)
        } else {
            p
        }
    }

    /// Calls `check(seed, instance, greedy calendar, component, optimum,
    /// optimal choices)` for every component of the 24 small seeded
    /// portfolios, with its exhaustive optimum.
    fn each_small_component(
        mut check: impl FnMut(u64, &Instance, &State, &[usize], f64, &[Option<usize>]),
    ) {
        for seed in 0..24 {
            let p = small_portfolio(seed);
            let inst = Instance::new(&p, &PlanRequest::default());
            let greedy = super::super::greedy::greedy(&inst);
            for exps in super::super::components(&inst) {
                let (optimum, choice) = exhaustive(&inst, &exps);
                check(seed, &inst, &greedy, &exps, optimum, &choice);
            }
        }
    }

    /// Every component's outcome against its exhaustive optimum: the bound
    /// is never below the optimum nor below the calendar found, a calendar
    /// stamped proved is worth the optimum, and no calendar is worth more
    /// than it. The fixing and the branch and bound must close real gaps:
    /// some components are proved whose LP bound lies above the optimum.
    #[test]
    fn proved_components_are_worth_their_exhaustive_optimum() {
        let cut = AtomicBool::new(false);
        let (mut proved_past_lp, mut proved, mut comps, mut branched) = (0, 0, 0, 0);
        let request = PlanRequest::default();
        each_small_component(|seed, inst, greedy, exps, optimum, _| {
            let floor = comp_value(inst, exps, greedy);
            let relaxed = relax(inst, exps, request.backend, floor, far_deadline(&cut))
                .expect("the LP solves");
            let mut state = greedy.clone();
            let out = solve_component(
                inst,
                exps,
                &mut state,
                Some(&relaxed),
                request.backend,
                far_deadline(&cut),
                1,
            );
            let value = comp_value(inst, exps, &state);
            let eps = 1e-6 * optimum.max(1.0);
            assert!(
                value <= optimum + eps,
                "seed {seed}: {value} above {optimum}"
            );
            assert!(
                out.bound >= optimum - eps,
                "seed {seed}: bound {} under the optimum {optimum}",
                out.bound
            );
            assert!(out.bound >= value - eps);
            if out.proved {
                assert!(
                    value >= optimum - eps,
                    "seed {seed}: proved {value}, optimum {optimum}"
                );
                proved += 1;
                if relaxed.value > optimum + 1e-4 * optimum.max(1.0) {
                    proved_past_lp += 1;
                }
            }
            comps += 1;
            // Fixing and branching alone, from the greedy calendar and
            // from none: the search's optimum proves nothing for them.
            for from in [greedy.clone(), State::new(inst)] {
                let mut best = from;
                let comp = Comp {
                    inst,
                    exps,
                    backend: request.backend,
                    deadline: far_deadline(&cut),
                };
                let bound = fix_and_branch(comp, &mut best, 1);
                let value = comp_value(inst, exps, &best);
                assert!(
                    bound >= optimum - eps,
                    "seed {seed}: bound {bound} under {optimum}"
                );
                assert!(value <= optimum + eps);
                if value >= bound - tol(bound) {
                    assert!(
                        value >= optimum - eps,
                        "seed {seed}: {value} proved, optimum {optimum}"
                    );
                    branched += 1;
                }
            }
        });
        assert!(
            branched >= comps,
            "{branched} of {} proved by fixing and branching",
            2 * comps
        );
        assert!(comps >= 24);
        assert!(proved * 2 >= comps, "{proved} of {comps} proved");
        assert!(
            proved_past_lp >= 6,
            "{proved_past_lp} proved past their LP bound"
        );
    }

    /// Reduced-cost fixing from a calendar worth less than the optimum
    /// keeps the exhaustive optimum: its options stay allowed and the
    /// tests it forces run in it; its bound is at or above the optimum;
    /// and from the optimum itself it often proves it with no search.
    #[test]
    fn reduced_cost_fixing_keeps_every_better_calendar() {
        let (mut narrowed, mut closed) = (0, 0);
        each_small_component(|seed, inst, greedy, exps, optimum, choice| {
            let all = Sub::all(inst, exps);
            let eps = 1e-6 * optimum.max(1.0);
            // From the greedy calendar, and from just under the optimum.
            for floor in [comp_value(inst, exps, greedy), 0.99 * optimum] {
                let fixed = lp::fix_by_reduced_costs(inst, &all, floor, tol(floor), 600.0)
                    .expect("the dual solves");
                assert!(fixed.bound >= optimum - eps, "seed {seed}");
                if optimum <= floor + tol(floor) {
                    continue;
                }
                let sub = fixed.sub.expect("a better calendar is left");
                for (i, &e) in exps.iter().enumerate() {
                    match choice[e] {
                        Some(k) => {
                            assert!(sub.allowed[i].contains(&k), "seed {seed}: test {e}")
                        }
                        None => assert!(!sub.forced[i], "seed {seed}: test {e} forced"),
                    }
                }
                let before: usize = all.allowed.iter().map(Vec::len).sum();
                let after: usize = sub.allowed.iter().map(Vec::len).sum();
                narrowed += usize::from(after < before);
            }
            let at_optimum = lp::fix_by_reduced_costs(inst, &all, optimum, tol(optimum), 600.0)
                .expect("the dual solves");
            assert!(at_optimum.bound >= optimum - eps);
            closed += usize::from(at_optimum.sub.is_none());
        });
        assert!(narrowed >= 5, "{narrowed} models narrowed");
        assert!(closed >= 1, "{closed} optima proved by fixing alone");
    }

    /// A node's LP re-solved from its parent's basis (`lp::Warm`) is worth
    /// what the same narrowed model solved from scratch is worth.
    #[test]
    fn a_warm_node_lp_equals_the_same_model_solved_cold() {
        let mut edits = 0;
        for seed in 0..12 {
            let p = small_portfolio(seed);
            let request = PlanRequest::default();
            let inst = Instance::new(&p, &request);
            for exps in super::super::components(&inst) {
                let mut sub = Sub::all(&inst, &exps);
                let mut warm = lp::Warm::root(&inst, &sub, 600.0).expect("the root solves");
                // Forbid the upper half of each test's options in turn, and
                // make every other test run.
                for i in 0..exps.len() {
                    let n = sub.allowed[i].len();
                    let next = if i % 2 == 0 && n > 1 {
                        let cut: Vec<usize> = sub.allowed[i][n / 2..].to_vec();
                        sub.allowed[i].truncate(n / 2);
                        warm.forbid(i, &cut)
                    } else {
                        sub.forced[i] = true;
                        warm.force(i, &sub.allowed[i])
                    };
                    let cold = lp::solve(&inst, &sub, request.backend, false, 600.0, None);
                    match (next, cold) {
                        (Ok(w), Ok(c)) => {
                            assert!(
                                (w.value() - c.value).abs() <= 1e-6 * c.value.abs().max(1.0),
                                "seed {seed}: warm {} against cold {}",
                                w.value(),
                                c.value
                            );
                            edits += 1;
                            warm = w;
                        }
                        (Err(lp::Failed::Infeasible), Err(lp::Failed::Infeasible)) => break,
                        (w, c) => panic!(
                            "seed {seed}: warm {:?} against cold {:?}",
                            w.map(|w| w.value()).err(),
                            c.map(|c| c.value).err()
                        ),
                    }
                }
            }
        }
        assert!(edits >= 20);
    }
}
