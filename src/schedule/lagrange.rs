//! The bound of a component too large for one LP solve: the Lagrangian
//! dual of the same model, by subgradient optimisation.
//!
//! Every row that links tests (pool capacity, `not_with`, `apart`,
//! `after`; `lp::each_linking_row`) moves into the objective with a price
//! `mu >= 0`. What is left falls apart test by test: each test takes its
//! option of largest priced value, or none when every one is negative. For
//! any prices the sum of those choices plus `mu . b` is an upper bound on
//! the model's value (weak duality), and the best prices give exactly the
//! LP relaxation's value, since each test's choice alone is integral
//! (Geoffrion 1974, "Lagrangean relaxation for integer programming",
//! Mathematical Programming Study 2). The prices follow the subgradient
//! with the step of Held, Wolfe & Crowder (1974, "Validation of subgradient
//! optimization", Mathematical Programming 6): `theta (L - floor) / |g|^2`,
//! `theta` halved whenever the bound stalls (both references cited from
//! memory). The average of the choices
//! over the later iterations estimates the LP solution, for the rounding
//! that starts the search.
//!
//! Every step is counted, not timed, and sums run in a fixed order, so the
//! same component always gets the same bound. Each step prices the tests
//! in parallel (rayon); only the sums over them, taken in test order,
//! combine the threads' work, so the bound is the same bits on any number
//! of threads.

use super::deadline::Deadline;
use super::lp::{each_linking_row, Solved, Sub};
use super::options::Instance;
use rayon::prelude::*;

/// Subgradient steps per component: about two seconds on the largest
/// benchmark component (37,315 options, 4 million coefficients), where
/// the bound ends 0.15% above the LP relaxation's value; 1,200 steps gain
/// 0.07% more for 80% more time (docs/planning.md).
pub(crate) const STEPS: usize = 800;

/// Steps without a better bound before the step size halves (on the same
/// component, 10 ended at 996.3 and 50 at 991.8 after 800 steps; after
/// 1,200, 30 and 80 ended looser than 50).
const PATIENCE: usize = 50;

/// The fewest tests a thread prices at a time: enough options that
/// handing them over costs little beside pricing them.
const TESTS_PER_TASK: usize = 16;

/// The linking rows column by column, for the priced values. Rows are
/// numbered family by family (`lp::each_linking_row`), and a column's
/// equal coefficients on successive rows of one family are one range:
/// a run's share on each segment it covers, a link's thresholds from its
/// start on. A range is priced from running sums of the prices, in one
/// step whatever its length. On the daily grid, where a run covers a
/// segment per day, the scale-daily component's 20.7 million entries are
/// 975,140 ranges, one in twenty-one (DEVELOPERS.md, the 2026-12-05
/// measurements).
struct Columns {
    /// Start of each test's options among the columns.
    first: Vec<usize>,
    /// Start of each column's ranges.
    at: Vec<usize>,
    /// Each range of rows with its coefficient.
    ranges: Vec<Range>,
    /// Each row's right-hand side, rows numbered family by family.
    rhs: Vec<f64>,
    /// Each column's value.
    value: Vec<f64>,
}

/// Rows `lo..hi` (numbered family by family), each with coefficient `coef`.
#[derive(Clone, Copy)]
struct Range {
    lo: u32,
    hi: u32,
    coef: f64,
}

/// A column's last range in one of the four families a pool makes
/// interleaved (`family % 4`): its family, the rank of its last row in
/// that family, and its coefficient's bits (first pass) or the range's
/// place (second pass).
#[derive(Clone, Copy)]
struct Tail {
    family: u32,
    rank: u32,
    data: u64,
}

const NO_TAIL: Tail = Tail {
    family: u32::MAX,
    rank: 0,
    data: 0,
};

impl Tail {
    /// Whether row `rank` of `family` continues this range.
    fn continued_by(&self, family: u32, rank: u32) -> bool {
        self.family == family && self.rank + 1 == rank
    }
}

impl Columns {
    fn new(inst: &Instance, sub: &Sub) -> Columns {
        let mut first = Vec::with_capacity(sub.exps.len() + 1);
        let mut value = Vec::new();
        for (i, &e) in sub.exps.iter().enumerate() {
            first.push(value.len());
            value.extend(sub.allowed[i].iter().map(|&k| inst.options[e][k].value));
        }
        first.push(value.len());
        let cols = value.len();
        // Two passes over the rows as they are made (counting, then
        // filling), so they are never all held at once beside the columns.
        let mut count = vec![0usize; cols + 1];
        let mut tails = vec![NO_TAIL; 4 * cols];
        let mut rhs_made = Vec::new();
        let mut made: Vec<(u32, u32)> = Vec::new();
        let mut in_family: Vec<u32> = Vec::new();
        each_linking_row(inst, sub, &mut |terms, b, family| {
            let f = family as usize;
            if in_family.len() <= f {
                in_family.resize(f + 1, 0);
            }
            let rank = in_family[f];
            in_family[f] += 1;
            made.push((family, rank));
            rhs_made.push(b);
            for (i, j, a) in terms {
                let c = first[i] + j;
                let tail = &mut tails[4 * c + f % 4];
                if tail.continued_by(family, rank) && tail.data == a.to_bits() {
                    tail.rank = rank;
                } else {
                    count[c + 1] += 1;
                    *tail = Tail {
                        family,
                        rank,
                        data: a.to_bits(),
                    };
                }
            }
        });
        // Each family's rows together, in the order they were made.
        let mut family_at = Vec::with_capacity(in_family.len());
        let mut m = 0u32;
        for &n in &in_family {
            family_at.push(m);
            m += n;
        }
        let number: Vec<u32> = made
            .iter()
            .map(|&(f, r)| family_at[f as usize] + r)
            .collect();
        drop(made);
        let mut rhs = vec![0.0; m as usize];
        for (r, b) in rhs_made.into_iter().enumerate() {
            rhs[number[r] as usize] = b;
        }
        for c in 1..count.len() {
            count[c] += count[c - 1];
        }
        let at = count.clone();
        let mut ranges = vec![
            Range {
                lo: 0,
                hi: 0,
                coef: 0.0
            };
            at[cols]
        ];
        let mut next = count;
        tails.fill(NO_TAIL);
        let mut made = 0usize;
        each_linking_row(inst, sub, &mut |terms, _, family| {
            let n = number[made];
            let rank = n - family_at[family as usize];
            made += 1;
            for (i, j, a) in terms {
                let c = first[i] + j;
                let tail = &mut tails[4 * c + family as usize % 4];
                if tail.continued_by(family, rank) && ranges[tail.data as usize].coef == a {
                    ranges[tail.data as usize].hi = n + 1;
                    tail.rank = rank;
                } else {
                    let k = next[c];
                    next[c] += 1;
                    ranges[k] = Range {
                        lo: n,
                        hi: n + 1,
                        coef: a,
                    };
                    *tail = Tail {
                        family,
                        rank,
                        data: k as u64,
                    };
                }
            }
        });
        Columns {
            first,
            at,
            ranges,
            rhs,
            value,
        }
    }

    /// Test `i`'s option of largest priced value, if any is positive, with
    /// that value (0 for none); `sums` are the running sums of the prices.
    fn best(&self, i: usize, sums: &[f64]) -> (f64, Option<usize>) {
        let mut top = 0.0;
        let mut pick = None;
        for c in self.first[i]..self.first[i + 1] {
            let v = self.priced(c, sums);
            if v > top {
                top = v;
                pick = Some(c);
            }
        }
        (top, pick)
    }

    /// Column `c`'s value less the priced use of its rows.
    fn priced(&self, c: usize, sums: &[f64]) -> f64 {
        let used: f64 = self.ranges[self.at[c]..self.at[c + 1]]
            .iter()
            .map(|r| r.coef * (sums[r.hi as usize] - sums[r.lo as usize]))
            .sum();
        self.value[c] - used
    }
}

/// The Lagrangian bound of `sub` after at most `steps` subgradient steps,
/// with `floor` the value of a known calendar of its tests (the step
/// aims at it). Its `x` is the average choice of each option over the
/// later steps. `None` when the deadline passes before the first step.
pub(crate) fn bound(
    inst: &Instance,
    sub: &Sub,
    floor: f64,
    steps: usize,
    deadline: Deadline,
) -> Option<Solved> {
    let cols = Columns::new(inst, sub);
    let tests = sub.exps.len();
    let m = cols.rhs.len();
    let mut mu = vec![0.0; m];
    let mut best = f64::INFINITY;

    let mut theta = 2.0;
    let mut stall = 0;
    let mut chosen: Vec<usize> = Vec::with_capacity(tests);
    let mut g = vec![0.0; m];
    let mut tally = vec![0.0; cols.value.len()];
    let mut tallied = 0usize;
    let mut sums = vec![0.0; m + 1];
    let average_from = steps / 2;
    for step in 0..steps {
        if step % 16 == 0 && deadline.passed() {
            break;
        }
        let mut l: f64 = mu.iter().zip(&cols.rhs).map(|(u, b)| u * b).sum();
        chosen.clear();
        for (r, u) in mu.iter().enumerate() {
            sums[r + 1] = sums[r] + u;
        }
        // Each test's best priced option, tests spread over the threads;
        // summed in test order, so the bound is the same on any number.
        let picks: Vec<(f64, Option<usize>)> = (0..tests)
            .into_par_iter()
            .with_min_len(TESTS_PER_TASK)
            .map(|i| cols.best(i, &sums))
            .collect();
        for (top, pick) in picks {
            l += top;
            chosen.extend(pick);
        }
        if !best.is_finite() || l < best - 1e-12 * best.abs().max(1.0) {
            best = l;
            stall = 0;
        } else {
            stall += 1;
            if stall >= PATIENCE {
                theta /= 2.0;
                stall = 0;
            }
        }
        if step >= average_from {
            for &c in &chosen {
                tally[c] += 1.0;
            }
            tallied += 1;
        }
        // The subgradient b - A x, projected on the prices' bounds.
        g.copy_from_slice(&cols.rhs);
        for &c in &chosen {
            for r in &cols.ranges[cols.at[c]..cols.at[c + 1]] {
                for gr in &mut g[r.lo as usize..r.hi as usize] {
                    *gr -= r.coef;
                }
            }
        }
        for (gr, &u) in g.iter_mut().zip(&mu) {
            if u <= 0.0 && *gr > 0.0 {
                *gr = 0.0;
            }
        }
        let norm: f64 = g.iter().map(|x| x * x).sum();
        if norm <= 1e-18 {
            // The choices meet every row: no price can lower the bound.
            break;
        }
        let t = theta * (l - floor).max(0.0) / norm;
        if t <= 0.0 {
            break;
        }
        for (u, gr) in mu.iter_mut().zip(&g) {
            *u = (*u - t * gr).max(0.0);
        }
    }
    if !best.is_finite() {
        return None;
    }
    if tallied == 0 {
        // Stopped before the average began: the last choices stand for it.
        for &c in &chosen {
            tally[c] += 1.0;
        }
        tallied = 1;
    }
    let scale = 1.0 / tallied.max(1) as f64;
    let x = (0..tests)
        .map(|i| {
            tally[cols.first[i]..cols.first[i + 1]]
                .iter()
                .map(|t| t * scale)
                .collect()
        })
        .collect();
    Some(Solved {
        value: best,
        x,
        optimal: true,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::schedule::tests::on_threads;
    use crate::schedule::{synthetic, PlanRequest};
    use std::sync::atomic::AtomicBool;
    use std::time::{Duration, Instant};

    /// Tests that share nothing leave no row to price: the bound is each
    /// test's best option, summed, reached at the first step, and the
    /// average choice is that option.
    #[test]
    fn tests_that_share_nothing_are_bounded_by_their_best_options() {
        let spec = synthetic::Spec::quarter(3, 3, 2);
        let mut p = synthetic::portfolio(&spec);
        p.blackouts.clear();
        for (i, e) in p.experiments.iter_mut().enumerate() {
            e.pools = vec![i];
            e.after.clear();
            e.not_with.clear();
        }
        p.after_order = crate::portfolio::after_order(&p.experiments).expect("no links");
        let inst = Instance::new(&p, &PlanRequest::default());
        let exps: Vec<usize> = inst.free().collect();
        assert_eq!(exps.len(), 3);
        let sub = Sub::all(&inst, &exps);
        let mut rows = 0;
        each_linking_row(&inst, &sub, &mut |_, _, _| rows += 1);
        assert_eq!(rows, 0);
        let cut = AtomicBool::new(false);
        let deadline = Deadline::new(Instant::now() + Duration::from_secs(60), &cut);
        let dual = bound(&inst, &sub, 0.0, STEPS, deadline).expect("one step");
        let best: f64 = exps.iter().map(|&e| inst.options[e][0].value).sum();
        assert!((dual.value - best).abs() < 1e-9, "{} vs {best}", dual.value);
        for x in &dual.x {
            assert_eq!(x[0], 1.0);
            assert!(x[1..].iter().all(|&v| v == 0.0));
        }
    }

    /// A column's ranges price exactly its entries: for any prices, its
    /// priced value is its value less price times coefficient summed over
    /// the rows as `each_linking_row` makes them (here on the daily grid,
    /// with tests on several pools, ramps, pairs apart and `after` links),
    /// and the ranges are far fewer than the entries.
    #[test]
    fn ranges_price_what_the_rows_say() {
        let spec = synthetic::Spec::medium(2);
        let mut p = synthetic::with_calendar_keys(synthetic::portfolio(&spec), 2);
        synthetic::with_keys(&mut p, 2);
        p.planning.grid = crate::portfolio::StartGrid::Daily;
        for e in &mut p.experiments {
            e.whole_weeks = false;
        }
        let inst = Instance::new(&p, &PlanRequest::default());
        let exps: Vec<usize> = inst.free().collect();
        let sub = Sub::all(&inst, &exps);
        let cols = Columns::new(&inst, &sub);
        let mut rows = Vec::new();
        each_linking_row(&inst, &sub, &mut |terms, b, family| {
            rows.push((terms, b, family))
        });
        assert_eq!(rows.len(), cols.rhs.len());
        // Numbered family by family, in the order made.
        let mut order: Vec<usize> = (0..rows.len()).collect();
        order.sort_by_key(|&r| rows[r].2);
        let mut number = vec![0; rows.len()];
        for (n, &r) in order.iter().enumerate() {
            number[r] = n;
        }
        let mut rng = crate::schedule::search::SplitMix64::new(7);
        let mu: Vec<f64> = (0..rows.len()).map(|_| rng.unit()).collect();
        let mut sums = vec![0.0; mu.len() + 1];
        for (r, u) in mu.iter().enumerate() {
            sums[r + 1] = sums[r] + u;
        }
        let mut used = vec![0.0; cols.value.len()];
        let mut entries = 0;
        for (r, (terms, b, _)) in rows.iter().enumerate() {
            assert_eq!(cols.rhs[number[r]], *b);
            for &(i, j, a) in terms {
                used[cols.first[i] + j] += a * mu[number[r]];
                entries += 1;
            }
        }
        for (c, used) in used.iter().enumerate() {
            let want = cols.value[c] - used;
            let got = cols.priced(c, &sums);
            assert!(
                (got - want).abs() < 1e-9 * want.abs().max(1.0),
                "{got} vs {want}"
            );
        }
        assert!(
            cols.ranges.len() * 4 < entries,
            "{} ranges for {entries} entries",
            cols.ranges.len()
        );
    }

    /// The same component gets the same bound and the same average
    /// choices, bit for bit, on one thread and on two.
    #[test]
    fn the_bound_is_the_same_every_time() {
        let spec = synthetic::Spec::medium(3);
        let mut p = synthetic::with_calendar_keys(synthetic::portfolio(&spec), 3);
        synthetic::with_keys(&mut p, 3);
        let inst = Instance::new(&p, &PlanRequest::default());
        let exps: Vec<usize> = inst.free().collect();
        let sub = Sub::all(&inst, &exps);
        let cut = AtomicBool::new(false);
        let deadline = Deadline::new(Instant::now() + Duration::from_secs(60), &cut);
        let on = |threads: usize| {
            on_threads(threads, || {
                bound(&inst, &sub, 10.0, 200, deadline).expect("a bound")
            })
        };
        let (a, b) = (on(1), on(2));
        assert_eq!(a.value.to_bits(), b.value.to_bits());
        assert_eq!(a.x, b.x);
        assert!(!deadline.was_cut());
    }
}
