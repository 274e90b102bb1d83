//! Group-sequential designs: a test read at `K` planned looks, equally
//! spaced in information, that may stop early for efficacy.
//!
//! Sources:
//!
//! * The classical boundaries, O'Brien & Fleming (1979) (`c_k = C_B(K)
//!   sqrt(K / k)`) and Pocock (1977) (`c_k = C_P(K)` at every look), as
//!   tabulated in Jennison & Turnbull (2000), *Group Sequential Methods with
//!   Applications to Clinical Trials*, chapter 2 (Tables 2.1 to 2.4 give
//!   `C_B`, `C_P` and the inflation factors `R`).
//! * Error spending, Lan & DeMets (1983), "Discrete sequential boundaries
//!   for clinical trials", *Biometrika* 70, 659-663, with the one-sided
//!   spending functions `a(t) = 2 - 2 Phi(z_{1 - a_s/2} / sqrt(t))`
//!   (O'Brien-Fleming type) and `a(t) = a_s ln(1 + (e - 1) t)` (Pocock
//!   type), where `a_s` is the alpha of one side: alpha / 2 on each side of
//!   a two-sided test, alpha for a one-sided one.
//! * The probabilities: the recursive numerical integration of Armitage,
//!   McPherson & Rowe (1969), "Repeated significance tests on accumulating
//!   data", *JRSS A* 132, 235-244, on the grid and with Simpson's rule as
//!   Jennison & Turnbull (2000) chapter 19 lay them out (the grid from
//!   memory: `6r - 1` points around the mean, uniform within three standard
//!   deviations and logarithmically spaced beyond, plus the mid-points).
//!   No simulation.
//!
//! The scale: `Z_k` is the test statistic at look `k`, at information
//! fraction `t_k = k / K`; under a true effect whose statistic at the
//! final look has mean `drift`, `Z_k` has mean `drift sqrt(t_k)` and
//! `cov(Z_j, Z_k) = sqrt(t_j / t_k)`. A two-sided test stops at look `k`
//! when `|Z_k| >= c_k`, a one-sided one when `Z_k >= c_k`. Power counts
//! crossings in the planned (upper) direction only, as Jennison & Turnbull's
//! tables do. The inflation factor is the maximum information over the
//! fixed test's: `(drift / (z_{a_s} + z_beta))^2`.

use super::{SampleSize, Sides, SizingError};
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};
use statrs::function::erf::erfc;
use std::fmt;

/// The most looks a design may have.
pub const MAX_LOOKS: u32 = 10;

/// The boundary family of a group-sequential design.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Boundary {
    /// O'Brien & Fleming (1979): `c_k = C sqrt(K / k)`.
    ObrienFleming,
    /// Pocock (1977): the same `c` at every look.
    Pocock,
    /// Lan & DeMets (1983) spending, O'Brien-Fleming type.
    SpendingObrienFleming,
    /// Lan & DeMets (1983) spending, Pocock type.
    SpendingPocock,
}

impl Boundary {
    /// Every boundary, in the order the help lists them.
    pub const ALL: [Boundary; 4] = [
        Boundary::ObrienFleming,
        Boundary::Pocock,
        Boundary::SpendingObrienFleming,
        Boundary::SpendingPocock,
    ];

    /// The name in files, flags and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Boundary::ObrienFleming => "obrien-fleming",
            Boundary::Pocock => "pocock",
            Boundary::SpendingObrienFleming => "spending-obrien-fleming",
            Boundary::SpendingPocock => "spending-pocock",
        }
    }

    /// The boundary called `s`.
    pub fn parse(s: &str) -> Option<Boundary> {
        Boundary::ALL.into_iter().find(|b| b.name() == s)
    }
}

impl fmt::Display for Boundary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// What fixes a group-sequential design, apart from the sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Plan {
    /// Looks, equally spaced in information; 1 is the fixed-horizon test.
    pub looks: u32,
    /// The boundary family.
    pub boundary: Boundary,
    /// The alpha of the comparison (after any multi-arm correction).
    pub alpha: f64,
    /// The power wanted in the planned direction.
    pub power: f64,
    /// One- or two-sided.
    pub sides: Sides,
}

/// A solved group-sequential design.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sequential {
    /// Information fraction of each look, `k / K`.
    pub information: Vec<f64>,
    /// The efficacy boundary (z) at each look.
    pub boundaries: Vec<f64>,
    /// Type I error spent by each look, cumulative (both sides of a
    /// two-sided test).
    pub alpha_spent: Vec<f64>,
    /// Maximum sample over the fixed test's.
    pub inflation: f64,
    /// The mean of the final look's statistic under the planned effect.
    pub drift: f64,
    /// Under the planned effect, the probability of crossing the boundary
    /// in the planned direction at each look (the sum is the power).
    pub stop_probabilities: Vec<f64>,
    /// The expected sample over the maximum, under the planned effect.
    pub expected_fraction_h1: f64,
    /// The expected sample over the maximum, under no effect.
    pub expected_fraction_h0: f64,
}

impl Sequential {
    /// The power (planned direction) at `fraction` of the maximum sample:
    /// for the power an arm rounded up to whole units reaches.
    pub fn power_at(&self, fraction: f64, sides: Sides) -> f64 {
        let drift = self.drift * fraction.max(0.0).sqrt();
        let exits = exits(&self.boundaries, &self.information, sides, drift);
        exits.iter().map(|e| e.upper).sum()
    }
}

/// Grid size parameter `r` of Jennison & Turnbull's chapter 19 grid: 6r - 1
/// points before the mid-points. Their text reports r = 16 accurate to
/// about 1e-6 (from memory); 24 leaves a margin.
const GRID_R: usize = 24;

/// The statistic's boundary at any look can never exceed this (a spending
/// increment below 1e-300 would need more); a safe upper bracket.
const C_MAX: f64 = 37.0;

fn phi(x: f64) -> f64 {
    (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt()
}

/// Upper tail P(Z > x), accurate far into the tail.
fn upper(x: f64) -> f64 {
    0.5 * erfc(x / std::f64::consts::SQRT_2)
}

fn z_upper(q: f64) -> f64 {
    Normal::standard().inverse_cdf(1.0 - q)
}

/// Simpson's grid (points and weights) on `(lo, hi)` for a statistic with
/// mean `mean` and unit variance: Jennison & Turnbull (2000), 19.2.
fn grid(mean: f64, lo: f64, hi: f64) -> (Vec<f64>, Vec<f64>) {
    let r = GRID_R as f64;
    let mut xs = Vec::with_capacity(6 * GRID_R + 1);
    for i in 1..6 * GRID_R {
        let fi = i as f64;
        let x = if i < GRID_R {
            mean - 3.0 - 4.0 * (r / fi).ln()
        } else if i <= 5 * GRID_R {
            mean - 3.0 + 3.0 * (fi - r) / (2.0 * r)
        } else {
            mean + 3.0 + 4.0 * (r / (6.0 * r - fi)).ln()
        };
        xs.push(x);
    }
    let first = lo.max(xs[0]);
    let last = hi.min(xs[xs.len() - 1]);
    let mut pts = vec![first];
    pts.extend(xs.into_iter().filter(|&x| x > first && x < last));
    pts.push(last);
    if last <= first {
        // The region lies beyond the grid: no mass worth carrying.
        return (vec![first], vec![0.0]);
    }
    let m = pts.len();
    let mut z = Vec::with_capacity(2 * m - 1);
    let mut w = vec![0.0; 2 * m - 1];
    for i in 0..m {
        z.push(pts[i]);
        if i + 1 < m {
            z.push(0.5 * (pts[i] + pts[i + 1]));
        }
    }
    for i in 0..m - 1 {
        let d = pts[i + 1] - pts[i];
        w[2 * i] += d / 6.0;
        w[2 * i + 1] += 4.0 * d / 6.0;
        w[2 * i + 2] += d / 6.0;
    }
    (z, w)
}

/// The exits at one look: the probability of stopping there (and not
/// before) above the upper boundary and below the lower one.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Exit {
    upper: f64,
    lower: f64,
}

/// The density of the statistic on the continuation region of a look, as
/// grid points and `weight x density` (so an integral is a sum).
struct Carried {
    z: Vec<f64>,
    h: Vec<f64>,
    t: f64,
}

/// The continuation region at a boundary.
fn region(c: f64, sides: Sides, mean: f64) -> (f64, f64) {
    match sides {
        Sides::Two => (-c, c),
        // Below the grid's own lower end (mean - 15.7) nothing is carried.
        Sides::One => (mean - 100.0, c),
    }
}

/// The exit probabilities at a look with boundary `c` at fraction `t`,
/// given the density carried from the previous look (None at the first).
fn exit_at(prev: Option<&Carried>, c: f64, t: f64, sides: Sides, drift: f64) -> Exit {
    let two = matches!(sides, Sides::Two);
    match prev {
        None => {
            let m = drift * t.sqrt();
            Exit {
                upper: upper(c - m),
                lower: if two { upper(c + m) } else { 0.0 },
            }
        }
        Some(p) => {
            let dt = t - p.t;
            let sd = dt.sqrt();
            let (st, sp) = (t.sqrt(), p.t.sqrt());
            let mut up = 0.0;
            let mut low = 0.0;
            for (&u, &h) in p.z.iter().zip(&p.h) {
                if h == 0.0 {
                    continue;
                }
                let centre = u * sp + drift * dt;
                up += h * upper((c * st - centre) / sd);
                if two {
                    low += h * upper((c * st + centre) / sd);
                }
            }
            Exit {
                upper: up,
                lower: low,
            }
        }
    }
}

/// The density on the continuation region at a look, from the previous one.
fn carry(prev: Option<&Carried>, c: f64, t: f64, sides: Sides, drift: f64) -> Carried {
    let mean = drift * t.sqrt();
    let (lo, hi) = region(c, sides, mean);
    let (z, w) = grid(mean, lo, hi);
    let h = match prev {
        None => z
            .iter()
            .zip(&w)
            .map(|(&x, &wi)| wi * phi(x - mean))
            .collect(),
        Some(p) => {
            let dt = t - p.t;
            let sd = dt.sqrt();
            let (st, sp) = (t.sqrt(), p.t.sqrt());
            z.iter()
                .zip(&w)
                .map(|(&x, &wi)| {
                    let mut f = 0.0;
                    for (&u, &hu) in p.z.iter().zip(&p.h) {
                        f += hu * phi((x * st - u * sp - drift * dt) / sd);
                    }
                    wi * f * st / sd
                })
                .collect()
        }
    };
    Carried { z, h, t }
}

/// The exits at every look for given boundaries.
fn exits(bounds: &[f64], info: &[f64], sides: Sides, drift: f64) -> Vec<Exit> {
    let mut out = Vec::with_capacity(bounds.len());
    let mut prev: Option<Carried> = None;
    for (k, (&c, &t)) in bounds.iter().zip(info).enumerate() {
        out.push(exit_at(prev.as_ref(), c, t, sides, drift));
        if k + 1 < bounds.len() {
            prev = Some(carry(prev.as_ref(), c, t, sides, drift));
        }
    }
    out
}

/// The total type I error of boundaries (both sides of a two-sided test).
fn total_alpha(bounds: &[f64], info: &[f64], sides: Sides) -> f64 {
    exits(bounds, info, sides, 0.0)
        .iter()
        .map(|e| e.upper + e.lower)
        .sum()
}

/// A root of `f` on [lo, hi], where `f(lo)` and `f(hi)` differ in sign, by
/// the Illinois variant of false position, to `tol` in x. Without a sign
/// change it returns the end nearer a root.
fn solve(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> f64 {
    let mut flo = f(lo);
    let mut fhi = f(hi);
    if flo == 0.0 {
        return lo;
    }
    if fhi == 0.0 || flo.signum() == fhi.signum() {
        return if flo.abs() < fhi.abs() { lo } else { hi };
    }
    let mut side = 0;
    for _ in 0..200 {
        let x = (lo * fhi - hi * flo) / (fhi - flo);
        let x = if x > lo && x < hi { x } else { 0.5 * (lo + hi) };
        let fx = f(x);
        if fx == 0.0 || (hi - lo) < tol {
            return x;
        }
        if fx.signum() == flo.signum() {
            lo = x;
            flo = fx;
            if side == -1 {
                fhi *= 0.5;
            }
            side = -1;
        } else {
            hi = x;
            fhi = fx;
            if side == 1 {
                flo *= 0.5;
            }
            side = 1;
        }
        if (hi - lo) < tol {
            return 0.5 * (lo + hi);
        }
    }
    0.5 * (lo + hi)
}

/// The one-sided spending function of a boundary at fraction `t`, for the
/// alpha of one side `a_s`.
fn spent(boundary: Boundary, a_s: f64, t: f64) -> f64 {
    match boundary {
        Boundary::SpendingObrienFleming => 2.0 * upper(z_upper(a_s / 2.0) / t.sqrt()),
        Boundary::SpendingPocock => a_s * (1.0 + (std::f64::consts::E - 1.0) * t).ln(),
        // The classical families spend what their constant gives.
        Boundary::ObrienFleming | Boundary::Pocock => f64::NAN,
    }
}

/// The spending function of `boundary` at fraction `t`, over both sides of
/// a two-sided test: what a Lan-DeMets design has spent by then.
pub fn spending(boundary: Boundary, alpha: f64, sides: Sides, t: f64) -> f64 {
    let n = f64::from(sides.count());
    n * spent(boundary, alpha / n, t)
}

/// Boundaries for a design under H0.
fn boundaries(p: &Plan, info: &[f64]) -> Vec<f64> {
    let k = info.len();
    let a_s = p.alpha / f64::from(p.sides.count());
    match p.boundary {
        Boundary::ObrienFleming | Boundary::Pocock => {
            let shape: Vec<f64> = info
                .iter()
                .map(|&t| match p.boundary {
                    Boundary::ObrienFleming => (1.0 / t).sqrt(),
                    _ => 1.0,
                })
                .collect();
            let at = |c: f64| -> Vec<f64> { shape.iter().map(|s| c * s).collect() };
            let c = solve(
                |c| total_alpha(&at(c), info, p.sides) - p.alpha,
                z_upper(a_s) - 1e-9,
                z_upper(a_s / k as f64) + 1e-9,
                1e-12,
            );
            at(c)
        }
        Boundary::SpendingObrienFleming | Boundary::SpendingPocock => {
            let n = f64::from(p.sides.count());
            let mut out = Vec::with_capacity(k);
            let mut prev: Option<Carried> = None;
            let mut before = 0.0;
            for (j, &t) in info.iter().enumerate() {
                let cumulative = spending(p.boundary, p.alpha, p.sides, t);
                let target = cumulative - before;
                let c = solve(
                    |c| {
                        let e = exit_at(prev.as_ref(), c, t, p.sides, 0.0);
                        (e.upper + e.lower) / n - target / n
                    },
                    0.0,
                    C_MAX,
                    1e-12,
                );
                out.push(c);
                before = cumulative;
                if j + 1 < k {
                    prev = Some(carry(prev.as_ref(), c, t, p.sides, 0.0));
                }
            }
            out
        }
    }
}

/// The maximum sample of a design with looks: the fixed size `fixed` times
/// the inflation factor, each arm rounded up.
pub fn inflate(fixed: &SampleSize, ratio: f64, inflation: f64) -> Result<SampleSize, SizingError> {
    let control_exact = fixed.control_exact * inflation;
    let treatment_exact = control_exact * ratio;
    SampleSize::from_exact(
        control_exact,
        treatment_exact,
        fixed.arms,
        fixed.comparison_alpha,
    )
    .ok_or_else(|| {
        SizingError::NoSolution(
            format!(
                "with its looks the design needs {control_exact:.0} units in the control arm, \
                     beyond any traffic; use a larger MDE"
            )
            .into(),
        )
    })
}

/// Solves a group-sequential design: boundaries, inflation factor,
/// stopping probabilities and expected samples.
pub fn solve_plan(p: &Plan) -> Result<Sequential, SizingError> {
    if !(1..=MAX_LOOKS).contains(&p.looks) {
        return Err(SizingError::OutOfRange {
            field: "looks",
            value: f64::from(p.looks),
            expected: "a whole number from 1 to 10",
        });
    }
    if !(p.alpha > 0.0 && p.alpha <= 0.5) {
        return Err(SizingError::OutOfRange {
            field: "alpha",
            value: p.alpha,
            expected: "in (0, 0.5]",
        });
    }
    if !(p.power > p.alpha && p.power < 1.0) {
        return Err(SizingError::OutOfRange {
            field: "power",
            value: p.power,
            expected: "in (alpha, 1)",
        });
    }
    let k = p.looks as usize;
    let info: Vec<f64> = (1..=k).map(|j| j as f64 / k as f64).collect();
    let bounds = boundaries(p, &info);
    let a_s = p.alpha / f64::from(p.sides.count());
    let fixed = z_upper(a_s) + z_upper(1.0 - p.power);
    let power_at = |drift: f64| -> f64 {
        exits(&bounds, &info, p.sides, drift)
            .iter()
            .map(|e| e.upper)
            .sum()
    };
    // Power rises with the drift; the fixed test's drift is a lower end.
    let mut hi = fixed * 1.5;
    while power_at(hi) < p.power {
        hi *= 1.5;
        if hi > 1e3 {
            return Err(SizingError::NoSolution(
                "the group-sequential design does not reach the power".into(),
            ));
        }
    }
    let drift = solve(|d| power_at(d) - p.power, fixed * 0.5, hi, 1e-12);
    let h1 = exits(&bounds, &info, p.sides, drift);
    let h0 = exits(&bounds, &info, p.sides, 0.0);
    let expected = |ex: &[Exit]| -> f64 {
        let mut reach = 1.0;
        let mut e = 0.0;
        for (j, x) in ex.iter().enumerate() {
            if j + 1 == ex.len() {
                e += reach * info[j];
            } else {
                let stop = x.upper + x.lower;
                e += stop * info[j];
                reach -= stop;
            }
        }
        e
    };
    let mut alpha_spent = Vec::with_capacity(k);
    let mut acc = 0.0;
    for x in &h0 {
        acc += x.upper + x.lower;
        alpha_spent.push(acc);
    }
    Ok(Sequential {
        expected_fraction_h1: expected(&h1),
        expected_fraction_h0: expected(&h0),
        stop_probabilities: h1.iter().map(|e| e.upper).collect(),
        inflation: (drift / fixed).powi(2),
        drift,
        alpha_spent,
        boundaries: bounds,
        information: info,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn plan(looks: u32, boundary: Boundary, power: f64) -> Sequential {
        solve_plan(&Plan {
            looks,
            boundary,
            alpha: 0.05,
            power,
            sides: Sides::Two,
        })
        .unwrap()
    }

    #[test]
    fn one_look_is_the_fixed_test() {
        for b in Boundary::ALL {
            let s = plan(1, b, 0.8);
            assert_abs_diff_eq!(s.boundaries[0], 1.959963984540054, epsilon = 1e-9);
            assert_abs_diff_eq!(s.inflation, 1.0, epsilon = 1e-9);
            assert_abs_diff_eq!(s.stop_probabilities[0], 0.8, epsilon = 1e-9);
            assert_abs_diff_eq!(s.expected_fraction_h1, 1.0, epsilon = 1e-12);
        }
    }

    #[test]
    fn the_grid_integrates_a_normal_density() {
        let (z, w) = grid(0.7, -2.0, 2.5);
        let mass: f64 = z.iter().zip(&w).map(|(x, wi)| wi * phi(x - 0.7)).sum();
        let want = 1.0 - upper(2.5 - 0.7) - upper(2.0 + 0.7);
        assert_abs_diff_eq!(mass, want, epsilon = 1e-8);
    }

    #[test]
    fn stop_probabilities_sum_to_the_power_and_alpha_is_spent() {
        for b in Boundary::ALL {
            for looks in [2, 4, 7] {
                let s = plan(looks, b, 0.9);
                let total: f64 = s.stop_probabilities.iter().sum();
                assert_abs_diff_eq!(total, 0.9, epsilon = 1e-9);
                assert_abs_diff_eq!(s.alpha_spent[looks as usize - 1], 0.05, epsilon = 1e-9);
                assert!(s.inflation > 1.0);
                assert!(s.expected_fraction_h1 < 1.0 && s.expected_fraction_h1 > 0.0);
                assert!(s.expected_fraction_h0 > s.expected_fraction_h1);
            }
        }
    }

    #[test]
    fn spending_boundaries_spend_the_function_at_every_look() {
        for b in [Boundary::SpendingObrienFleming, Boundary::SpendingPocock] {
            let s = plan(5, b, 0.8);
            for (t, spent) in s.information.iter().zip(&s.alpha_spent) {
                assert_abs_diff_eq!(*spent, spending(b, 0.05, Sides::Two, *t), epsilon = 1e-9);
            }
        }
    }

    #[test]
    fn obrien_fleming_boundaries_fall_and_pocock_stays() {
        let s = plan(4, Boundary::ObrienFleming, 0.8);
        assert!(s.boundaries.windows(2).all(|w| w[0] > w[1]));
        assert_abs_diff_eq!(s.boundaries[0], s.boundaries[3] * 2.0, epsilon = 1e-12);
        let p = plan(4, Boundary::Pocock, 0.8);
        assert!(p.boundaries.windows(2).all(|w| w[0] == w[1]));
    }

    #[test]
    fn one_sided_designs_spend_alpha_above_only() {
        let s = solve_plan(&Plan {
            looks: 3,
            boundary: Boundary::Pocock,
            alpha: 0.025,
            power: 0.8,
            sides: Sides::One,
        })
        .unwrap();
        // A one-sided test at 0.025 has the two-sided 0.05 test's boundaries.
        let two = plan(3, Boundary::Pocock, 0.8);
        for (a, b) in s.boundaries.iter().zip(&two.boundaries) {
            assert_abs_diff_eq!(a, b, epsilon = 1e-4);
        }
        assert_abs_diff_eq!(s.inflation, two.inflation, epsilon = 1e-4);
    }

    #[test]
    fn looks_out_of_range_are_errors() {
        for looks in [0, 11] {
            let p = Plan {
                looks,
                boundary: Boundary::Pocock,
                alpha: 0.05,
                power: 0.8,
                sides: Sides::Two,
            };
            assert!(solve_plan(&p).is_err());
        }
    }
}
