//! A recent change of a pool's level: where its deseasonalised log series
//! stepped to a new level, told apart from a holiday, an outage and a slow
//! drift.
//!
//! The method, step by step:
//!
//! 1. **Segments.** PELT, the pruned exact linear time search of Killick,
//!    Fearnhead & Eckley (2012, "Optimal detection of changepoints with a
//!    linear computational cost", JASA 107(500), 1590-1598), splits the
//!    series into segments of constant mean, minimising the squared
//!    deviations from each segment's mean (in units of the daily noise's
//!    variance) plus a penalty of [`PENALTY`] x ln(days) per change (the
//!    Schwarz information criterion's ln(n) per parameter, doubled for
//!    the change's place as well as its size, and made a little stricter
//!    for the heavier tails of real traffic).
//! 2. **Episodes.** A segment shorter than [`MIN_RUN`] days inside the
//!    series is a holiday, a spike or an outage, not a new level: its days
//!    are set aside. A segment that short at the very end is too new to
//!    tell from a holiday: its days are set aside too and reported
//!    ([`Found::newest_set_aside`]). The search is then run again on the days left.
//! 3. **A step, not a drift.** From the latest change backwards, a line
//!    with a step at the change is fitted by ordinary least squares to up
//!    to [`PRE_DAYS`] days before it and every day after it. The change
//!    counts as a shift when the step explains those days better than a
//!    line alone by more than the same penalty (the drop in squared
//!    residuals over the residual variance: an F test of the step, Chow
//!    1960) and the step is at least [`MIN_CHANGE`]. The step is the
//!    change reported; a drift goes to the line, so a slow drift is never
//!    read as a step, nor inflates one. A change that ends a stretch
//!    shorter than [`EPISODE_DAYS`] is measured against the days before
//!    the stretch instead: a campaign that ended, back at the old level,
//!    is no shift, and when the stretch stood at least [`MIN_CHANGE`]
//!    apart from both sides the same way, its days are set aside like a
//!    holiday's.
//!
//! Implemented here: no crate on crates.io offers PELT with this cost at
//! the time of writing (the change-point crates there are Bayesian online
//! detectors); the search is thirty lines and checked against the
//! `ruptures` package (tests/reference/check_forecast.py).

/// The penalty per change, times ln(days) (see the module notes).
pub const PENALTY: f64 = 3.0;
/// Days a level must last to count as one, rather than as an episode.
pub const MIN_RUN: usize = 4;
/// The smallest change, relative, that counts as a shift.
pub const MIN_CHANGE: f64 = 0.08;
/// Days before a change that, with the days after it, test and measure it.
pub const PRE_DAYS: usize = 56;
/// A stretch between two changes shorter than this is measured against
/// the days before it: a campaign or a holiday week that ended is no
/// shift.
pub const EPISODE_DAYS: usize = 28;

/// What the search found in a series.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Found {
    /// The position (in the series given) of the first day of the new
    /// level, and the change as a difference of logs.
    pub shift: Option<(usize, f64)>,
    /// Positions of days set aside: episodes and the newest days when too
    /// few to judge.
    pub set_aside: Vec<usize>,
    /// How many of the set-aside days are the newest ones.
    pub newest_set_aside: usize,
}

/// Finds the latest shift in `y` (log levels, one per usable day, oldest
/// first), whose daily noise has standard deviation `sigma`, searching the
/// days from position `from` on; the days before it only lengthen the
/// span a change is tested on. Positions in the answer are `y`'s.
pub fn find(y: &[f64], sigma: f64, from: usize) -> Found {
    let from = from.min(y.len());
    let n = y.len() - from;
    if n < 2 * MIN_RUN {
        return Found::default();
    }
    let sigma = sigma.max(1e-3);
    let z: Vec<f64> = y.iter().map(|v| v / sigma).collect();
    let beta = PENALTY * (n as f64).ln();

    // 2. Episodes and too-new days.
    let mut keep = vec![true; y.len()];
    let mut bounds: Vec<usize> = pelt(&z[from..], beta).iter().map(|b| b + from).collect();
    bounds.push(y.len());
    let mut start = from;
    let mut newest = 0;
    for (k, &to) in bounds.iter().enumerate() {
        if to - start < MIN_RUN && start > from {
            keep[start..to].iter_mut().for_each(|x| *x = false);
            if k == bounds.len() - 1 {
                newest = to - start;
            }
        }
        start = to;
    }
    let kept: Vec<usize> = (0..y.len()).filter(|&i| keep[i]).collect();
    let mut set_aside: Vec<usize> = (0..y.len()).filter(|&i| !keep[i]).collect();
    let zk: Vec<f64> = kept.iter().map(|&i| z[i]).collect();

    // 3. The latest change that is a step. A change that ends a stretch of
    // under four weeks (a campaign, a holiday week) is measured against
    // the days before that stretch: back to the old level, it is no shift,
    // the stretch is set aside, and nothing before it is a shift either.
    let changes: Vec<usize> = pelt(&zk[from..], beta).iter().map(|c| c + from).collect();
    let mut shift = None;
    for k in (0..changes.len()).rev() {
        let c = changes[k];
        let stretch = k > 0 && c - changes[k - 1] < EPISODE_DAYS;
        let pre_end = if stretch { changes[k - 1] } else { c };
        let pre = pre_end.saturating_sub(PRE_DAYS)..pre_end;
        if pre.len() < MIN_RUN || zk.len() - c < MIN_RUN {
            continue;
        }
        let points: Vec<(f64, f64, bool)> = pre
            .map(|i| (kept[i] as f64, zk[i], false))
            .chain((c..zk.len()).map(|i| (kept[i] as f64, zk[i], true)))
            .collect();
        let (gain, step) = step_fit(&points);
        let change = step * sigma;
        if change.exp_m1().abs() >= MIN_CHANGE && gain > beta {
            shift = Some((kept[c], change));
            break;
        }
        if stretch {
            // Back at the old level: the stretch is set aside when it
            // stood apart from both sides the same way (a campaign, a
            // holiday week), not when it lies between them (a drift's
            // stair).
            let mid = median(&zk[changes[k - 1]..c]);
            let (before, after) = (
                mid - median(&zk[pre_end.saturating_sub(PRE_DAYS)..pre_end]),
                mid - median(&zk[c..]),
            );
            let apart = (1.0 + MIN_CHANGE).ln() / sigma;
            if before * after > 0.0 && before.abs() >= apart && after.abs() >= apart {
                set_aside.extend(kept[changes[k - 1]..c].iter().copied());
                set_aside.sort_unstable();
            }
            break;
        }
    }
    Found {
        shift,
        set_aside,
        newest_set_aside: newest,
    }
}

/// PELT for a change in mean with a squared-error cost: the first index of
/// every segment after the first, in order.
pub fn pelt(x: &[f64], beta: f64) -> Vec<usize> {
    let n = x.len();
    let mut s1 = vec![0.0; n + 1];
    let mut s2 = vec![0.0; n + 1];
    for (i, v) in x.iter().enumerate() {
        s1[i + 1] = s1[i] + v;
        s2[i + 1] = s2[i] + v * v;
    }
    let cost = |a: usize, b: usize| {
        let m = (b - a) as f64;
        let s = s1[b] - s1[a];
        (s2[b] - s2[a] - s * s / m).max(0.0)
    };
    let mut best = vec![0.0; n + 1];
    let mut last = vec![0usize; n + 1];
    best[0] = -beta;
    let mut candidates = vec![0usize];
    for t in 1..=n {
        let (mut f, mut at) = (f64::INFINITY, 0);
        for &tau in &candidates {
            let v = best[tau] + cost(tau, t) + beta;
            if v < f {
                (f, at) = (v, tau);
            }
        }
        best[t] = f;
        last[t] = at;
        // Pruning (Killick et al. 2012, Theorem 3.1, with K = 0).
        candidates.retain(|&tau| best[tau] + cost(tau, t) <= f);
        candidates.push(t);
    }
    let mut out = Vec::new();
    let mut t = n;
    while last[t] > 0 {
        t = last[t];
        out.push(t);
    }
    out.reverse();
    out
}

/// A least-squares line with a step, through `(day, value, after the
/// step)` points: how much the step lowers the squared residuals of the
/// line alone, over the residual variance of the line with the step when
/// that is above the daily noise's (an F statistic, so that weeks that
/// wander about their level need more to count), and the step's size.
fn step_fit(points: &[(f64, f64, bool)]) -> (f64, f64) {
    let n = points.len() as f64;
    let mean = |f: &dyn Fn(&(f64, f64, bool)) -> f64| points.iter().map(f).sum::<f64>() / n;
    let (mt, mz, md) = (
        mean(&|p| p.0),
        mean(&|p| p.1),
        mean(&|p| if p.2 { 1.0 } else { 0.0 }),
    );
    let stt: f64 = points.iter().map(|p| (p.0 - mt).powi(2)).sum();
    if stt <= 0.0 {
        return (0.0, 0.0);
    }
    // Residuals of the values and of the step on the line
    // (Frisch-Waugh-Lovell).
    let slope = |y: &dyn Fn(&(f64, f64, bool)) -> f64, my: f64| {
        points.iter().map(|p| (p.0 - mt) * (y(p) - my)).sum::<f64>() / stt
    };
    let d = |p: &(f64, f64, bool)| if p.2 { 1.0 } else { 0.0 };
    let (bz, bd) = (slope(&|p| p.1, mz), slope(&d, md));
    let rz: Vec<f64> = points.iter().map(|p| p.1 - mz - bz * (p.0 - mt)).collect();
    let rd: Vec<f64> = points.iter().map(|p| d(p) - md - bd * (p.0 - mt)).collect();
    let dd: f64 = rd.iter().map(|v| v * v).sum();
    if dd <= 0.0 {
        return (0.0, 0.0);
    }
    let zd: f64 = rz.iter().zip(&rd).map(|(a, b)| a * b).sum();
    let gain = zd * zd / dd;
    let rest = (rz.iter().map(|v| v * v).sum::<f64>() - gain) / (n - 3.0).max(1.0);
    (gain / rest.max(1.0), zd / dd)
}

/// The median (0 for no values).
pub fn median(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    let mut v = x.to_vec();
    v.sort_by(f64::total_cmp);
    let k = v.len() / 2;
    if v.len() % 2 == 1 {
        v[k]
    } else {
        (v[k - 1] + v[k]) / 2.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic noise: a fixed pseudo-random sequence in (-1, 1)
    /// scaled to standard deviation `s` (uniform, sd = 1/sqrt(3)).
    fn noise(n: usize, s: f64, seed: u64) -> Vec<f64> {
        let mut x = seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1;
        (0..n)
            .map(|_| {
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                let u = (x >> 11) as f64 / (1u64 << 53) as f64;
                (2.0 * u - 1.0) * s * 3f64.sqrt()
            })
            .collect()
    }

    #[test]
    fn pelt_finds_two_clean_changes_at_their_days() {
        let mut x = vec![0.0; 30];
        x.extend(vec![5.0; 20]);
        x.extend(vec![1.0; 25]);
        assert_eq!(pelt(&x, 10.0), vec![30, 50]);
        assert!(pelt(&[2.0; 40], 10.0).is_empty());
    }

    #[test]
    fn a_step_is_found_at_its_day_with_its_size() {
        for seed in 1..=5 {
            let mut y = noise(112, 0.04, seed);
            for v in &mut y[98..] {
                *v += 0.7f64.ln();
            }
            let f = find(&y, 0.04, 0);
            let (at, change) = f.shift.expect("a shift");
            assert_eq!(at, 98, "seed {seed}");
            assert!((change.exp() - 0.7).abs() < 0.05, "seed {seed}: {change}");
        }
    }

    #[test]
    fn episodes_and_drifts_are_not_shifts() {
        for seed in 1..=5 {
            // A two-day outage, a three-day holiday and a one-day spike.
            let mut y = noise(112, 0.04, seed);
            y[40] -= 5.0;
            y[41] -= 5.0;
            for v in &mut y[70..73] {
                *v += 0.4f64.ln();
            }
            y[100] += 0.5;
            let f = find(&y, 0.04, 0);
            assert_eq!(f.shift, None, "seed {seed}");
            assert!(f.set_aside.contains(&40) && f.set_aside.contains(&71));
            // A holiday in the last three days is set aside as too new.
            let mut y = noise(112, 0.04, seed);
            for v in &mut y[109..] {
                *v += 0.5f64.ln();
            }
            let f = find(&y, 0.04, 0);
            assert_eq!((f.shift, f.newest_set_aside), (None, 3), "seed {seed}");
            // A drift of -2% a week over sixteen weeks.
            let y: Vec<f64> = noise(112, 0.04, seed)
                .iter()
                .enumerate()
                .map(|(i, v)| v + (0.98f64).ln() * i as f64 / 7.0)
                .collect();
            assert_eq!(find(&y, 0.04, 0).shift, None, "seed {seed}");
        }
    }
}
