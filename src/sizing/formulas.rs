//! The formulas of the module's sources (see the module doc): normal and
//! noncentral t powers, the sample size, the achieved power, the minimum
//! detectable effect and the days a sample takes.

use super::*;
use statrs::distribution::{ContinuousCDF, Normal};
use statrs::function::beta::beta_reg;
use statrs::function::gamma::ln_gamma;

fn std_normal() -> Normal {
    Normal::standard()
}

/// Upper quantile of the standard normal: z with P(Z > z) = q.
fn z_upper(q: f64) -> f64 {
    std_normal().inverse_cdf(1.0 - q)
}

/// The two standard deviations of the normal-approximation formulas:
/// n_control = (z_alpha A + z_beta B)^2 / delta^2, with delta the difference
/// on the scale the method tests (rate, arcsine, or mean).
struct NormalForm {
    a: f64,
    b: f64,
    delta: f64,
}

fn normal_form(d: &Design) -> NormalForm {
    let r = d.ratio;
    match d.metric {
        Metric::Rate { baseline: p1 } => {
            let p2 = d.treatment_value();
            let unpooled = (p1 * (1.0 - p1) + p2 * (1.0 - p2) / r).sqrt();
            match d.method {
                Method::Pooled | Method::Corrected => {
                    let pbar = (p1 + r * p2) / (1.0 + r);
                    let pooled = (pbar * (1.0 - pbar) * (1.0 + 1.0 / r)).sqrt();
                    NormalForm {
                        a: pooled,
                        b: unpooled,
                        delta: p2 - p1,
                    }
                }
                Method::Unpooled => NormalForm {
                    a: unpooled,
                    b: unpooled,
                    delta: p2 - p1,
                },
                _ => {
                    // Arcsine: Cohen's h = 2 asin sqrt(p2) - 2 asin sqrt(p1), unit variance.
                    let h = 2.0 * p2.sqrt().asin() - 2.0 * p1.sqrt().asin();
                    let s = (1.0 + 1.0 / r).sqrt();
                    NormalForm {
                        a: s,
                        b: s,
                        delta: h,
                    }
                }
            }
        }
        Metric::Mean { sd, .. } => {
            let s = sd * (1.0 + 1.0 / r).sqrt();
            NormalForm {
                a: s,
                b: s,
                delta: d.treatment_value() - d.metric.control_value(),
            }
        }
    }
}

/// The z quantile for the test's alpha, per comparison and per side.
fn z_alpha(d: &Design) -> f64 {
    z_upper(d.comparison_alpha() / f64::from(d.sides.count()))
}

/// The continuity correction of Fleiss, Tytun & Ury (1980) for unequal
/// groups: n' = n/4 (1 + sqrt(1 + 2(r + 1) / (n r |delta|)))^2.
fn continuity_correct(n: f64, r: f64, delta: f64) -> f64 {
    n / 4.0 * (1.0 + (1.0 + 2.0 * (r + 1.0) / (n * r * delta.abs())).sqrt()).powi(2)
}

/// Inverse of [`continuity_correct`]: n = n'(1 - a / (4 n'))^2 with
/// a = 2(r + 1) / (r |delta|); zero where n' is too small to carry the correction.
fn continuity_uncorrect(n_cc: f64, r: f64, delta: f64) -> f64 {
    let a = 2.0 * (r + 1.0) / (r * delta.abs());
    if n_cc <= a / 4.0 {
        return 0.0;
    }
    n_cc * (1.0 - a / (4.0 * n_cc)).powi(2)
}

/// CDF of the noncentral t distribution, P(T <= t) with `df` degrees of
/// freedom and noncentrality `delta`: Lenth (1989), Algorithm AS 243.
pub fn noncentral_t_cdf(t: f64, df: f64, delta: f64) -> f64 {
    const ITRMAX: u32 = 2000;
    const ERRMAX: f64 = 1e-13;
    if df <= 0.0 || !t.is_finite() || !delta.is_finite() {
        return f64::NAN;
    }
    let (tt, del, negdel) = if t < 0.0 {
        (-t, -delta, true)
    } else {
        (t, delta, false)
    };
    let mut tnc = 0.0;
    let x = tt * tt / (tt * tt + df);
    if x > 0.0 {
        let lambda = del * del;
        let mut p = 0.5 * (-0.5 * lambda).exp();
        let mut q = (2.0 / std::f64::consts::PI).sqrt() * p * del;
        let mut s = 0.5 - p;
        if s < 1e-7 {
            s = -0.5 * (-0.5 * lambda).exp_m1();
        }
        let mut a = 0.5;
        let b = 0.5 * df;
        // (1 - x)^b and ln B(1/2, b) lose digits at large b (df in the
        // millions) when written plainly; these forms keep them.
        let ln_rxb = b * (-x).ln_1p();
        let rxb = ln_rxb.exp();
        let albeta = ln_beta_half(b);
        let mut xodd = beta_reg(a, b, x);
        let mut godd = 2.0 * rxb * (a * x.ln() - albeta).exp();
        let mut xeven = -ln_rxb.exp_m1();
        let mut geven = b * x * rxb;
        tnc = p * xodd + q * xeven;
        let mut en = 1.0;
        loop {
            a += 1.0;
            xodd -= godd;
            xeven -= geven;
            godd *= x * (a + b - 1.0) / a;
            geven *= x * (a + b - 0.5) / (a + 0.5);
            p *= lambda / (2.0 * en);
            q *= lambda / (2.0 * en + 1.0);
            s -= p;
            en += 1.0;
            tnc += p * xodd + q * xeven;
            let errbd = 2.0 * s * (xodd - godd);
            if errbd.abs() <= ERRMAX || en > f64::from(ITRMAX) {
                break;
            }
        }
    }
    tnc += std_normal().cdf(-del);
    let tnc = if negdel { 1.0 - tnc } else { tnc };
    tnc.clamp(0.0, 1.0)
}

/// ln B(1/2, b) = ln Gamma(1/2) + ln Gamma(b) - ln Gamma(b + 1/2). For large b
/// the difference of two huge ln Gamma values cancels (1e-7 lost at
/// b = 5e7), so there it uses the asymptotic series Gamma(b + 1/2) /
/// Gamma(b) = sqrt(b) (1 - 1/(8b) + 1/(128b^2) + 5/(1024b^3) - 21/(32768b^4)),
/// whose next term is below 1e-15 for b > 1000 (Abramowitz & Stegun 1964,
/// 6.1.47, the ratio of gamma functions).
fn ln_beta_half(b: f64) -> f64 {
    let ln_sqrt_pi = std::f64::consts::PI.sqrt().ln();
    if b > 1000.0 {
        let series = 1.0 - 1.0 / (8.0 * b) + 1.0 / (128.0 * b * b) + 5.0 / (1024.0 * b.powi(3))
            - 21.0 / (32768.0 * b.powi(4));
        ln_sqrt_pi - 0.5 * b.ln() - series.ln()
    } else {
        ln_sqrt_pi + ln_gamma(b) - ln_gamma(0.5 + b)
    }
}

/// Upper quantile of Student's t with `df` degrees of freedom: the t with
/// P(T > t) = q, for q in (0, 0.5].
///
/// statrs' `inverse_cdf` (an inverse regularised beta) drifts at large df
/// (at df = 1e7 it gives 1.8266 for the 0.975 quantile, where the answer is
/// 1.959964, which made large t-test sizes too small) and is slow beyond.
/// Instead:
/// * df >= 1e5: the Cornish-Fisher expansion of t in the normal quantile z
///   (Abramowitz & Stegun 1964, *Handbook of Mathematical Functions*,
///   26.7.5), t = z + g1/df + g2/df^2 + g3/df^3, whose next term is below
///   1e-17 here;
/// * smaller df: Newton's method on statrs' survival function (accurate to
///   about 1e-11 there), from the same expansion, kept inside a bracket
///   that bisection falls back to.
fn t_upper(q: f64, df: f64) -> f64 {
    use statrs::distribution::{Continuous, StudentsT};
    if !(q > 0.0 && q <= 0.5) {
        return f64::NAN;
    }
    let Ok(t) = StudentsT::new(0.0, 1.0, df) else {
        return f64::NAN;
    };
    if q == 0.5 {
        return 0.0;
    }
    let z = z_upper(q);
    let (z3, z5, z7) = (z.powi(3), z.powi(5), z.powi(7));
    let expansion = z
        + (z3 + z) / (4.0 * df)
        + (5.0 * z5 + 16.0 * z3 + 3.0 * z) / (96.0 * df * df)
        + (3.0 * z7 + 19.0 * z5 + 17.0 * z3 - 15.0 * z) / (384.0 * df * df * df);
    if df >= 1e5 {
        return expansion;
    }
    // sf falls from 0.5 at 0; grow the upper end until it falls below q.
    // Past 1e150 (df far below 1) the quantile means nothing: no answer.
    let mut lo = 0.0;
    let mut hi = z.max(1.0);
    while t.sf(hi) > q {
        lo = hi;
        hi *= 2.0;
        if hi > 1e150 {
            return f64::NAN;
        }
    }
    let mut x = if expansion > lo && expansion < hi {
        expansion
    } else {
        0.5 * (lo + hi)
    };
    for _ in 0..200 {
        let f = t.sf(x) - q;
        if f == 0.0 {
            return x;
        }
        if f > 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        let mut next = x + f / t.pdf(x);
        if !(next > lo && next < hi) {
            next = 0.5 * (lo + hi);
        }
        if (next - x).abs() <= 4.0 * f64::EPSILON * x.abs().max(1.0) {
            return next;
        }
        x = next;
    }
    x
}

/// Power of the two-sample t-test with `n_control` control units and
/// `ratio x n_control` treatment units, for a (variance-reduced) design.
/// Both tails count when the test is two-sided, as in Cohen (1988).
fn t_power(d: &Design, n_control: f64) -> f64 {
    let Metric::Mean { sd, .. } = d.metric else {
        return f64::NAN;
    };
    let sd = sd * (1.0 - d.rho * d.rho).sqrt();
    let n1 = n_control;
    let n2 = n_control * d.ratio;
    let df = n1 + n2 - 2.0;
    // A t-test needs at least one degree of freedom (three units in all);
    // below that its quantiles run off to infinity.
    if df < 1.0 {
        return 0.0;
    }
    let delta = (d.treatment_value() - d.metric.control_value()).abs();
    let ncp = delta / (sd * (1.0 / n1 + 1.0 / n2).sqrt());
    let sides = f64::from(d.sides.count());
    let crit = t_upper(d.comparison_alpha() / sides, df);
    if !crit.is_finite() {
        return 0.0;
    }
    // Past a million degrees of freedom the series of AS 243 (through the
    // incomplete beta) loses digits; there the normal approximation of the
    // noncentral t, Abramowitz & Stegun (1964) 26.7.10,
    // P(T <= t) ~ Phi((t (1 - 1/(4 df)) - ncp) / sqrt(1 + t^2 / (2 df))),
    // errs by O(1/df^2), far below what a size can show.
    let cdf = |x: f64| {
        if df > 1e6 {
            std_normal()
                .cdf((x * (1.0 - 1.0 / (4.0 * df)) - ncp) / (1.0 + x * x / (2.0 * df)).sqrt())
        } else {
            noncentral_t_cdf(x, df, ncp)
        }
    };
    let upper = 1.0 - cdf(crit);
    let power = if sides == 2.0 {
        upper + cdf(-crit)
    } else {
        upper
    };
    power.clamp(0.0, 1.0)
}

/// Power of the two-sample z-test on means with `n_control` control units
/// and `ratio x n_control` treatment units. Both tails count when the test
/// is two-sided, as for the t-test (Cohen 1988, chapter 2) and as
/// statsmodels' `NormalIndPower` computes it:
/// Phi(ncp - z) + Phi(-ncp - z), ncp = |delta| / (sd sqrt(1/n1 + 1/n2)).
fn z_power(d: &Design, n_control: f64) -> f64 {
    let Metric::Mean { sd, .. } = d.metric else {
        return f64::NAN;
    };
    let sd = sd * (1.0 - d.rho * d.rho).sqrt();
    let n1 = n_control;
    let n2 = n_control * d.ratio;
    let delta = (d.treatment_value() - d.metric.control_value()).abs();
    let ncp = delta / (sd * (1.0 / n1 + 1.0 / n2).sqrt());
    let za = z_alpha(d);
    let near = std_normal().cdf(ncp - za);
    match d.sides {
        Sides::Two => (near + std_normal().cdf(-ncp - za)).clamp(0.0, 1.0),
        Sides::One => near,
    }
}

/// Control-arm units before rounding, for a design assumed valid.
fn control_exact(d: &Design) -> Result<f64, SizingError> {
    let reduction = 1.0 - d.rho * d.rho;
    let za = z_alpha(d);
    let zb = z_upper(1.0 - d.power);
    let nf = normal_form(d);
    let n_normal = (za * nf.a + zb * nf.b).powi(2) / (nf.delta * nf.delta) * reduction;
    match d.method {
        Method::Corrected => Ok(continuity_correct(n_normal, d.ratio, nf.delta)),
        // Both tails count for z on means, as for t: the closed form
        // leaves out the far tail, so it is an upper end for the root.
        Method::Z if d.sides == Sides::Two => {
            let f = |n: f64| z_power(d, n) - d.power;
            let lo = f64::MIN_POSITIVE;
            if !(n_normal.is_finite() && n_normal > 0.0) || f(n_normal) < 0.0 {
                return Ok(n_normal);
            }
            Ok(bisect(f, lo, n_normal, 1e-12))
        }
        Method::T => {
            // Smallest real n with t power >= target: bracket from the z answer.
            let f = |n: f64| t_power(d, n) - d.power;
            let lo_start = (2.0 / (1.0 + d.ratio)).max(1.0) + 1e-9;
            let mut lo = lo_start;
            if f(lo) >= 0.0 {
                return Ok(lo);
            }
            let mut hi = (n_normal + 2.0).max(lo * 2.0);
            let mut guard = 0;
            while f(hi) < 0.0 {
                lo = hi;
                hi *= 2.0;
                guard += 1;
                if guard > 200 || !hi.is_finite() {
                    return Err(SizingError::NoSolution(
                        "the t-test power does not reach the target at any size".into(),
                    ));
                }
            }
            Ok(bisect(f, lo, hi, 1e-9))
        }
        _ => Ok(n_normal),
    }
}

/// Root of an increasing function on [lo, hi] by bisection.
fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, rel_tol: f64) -> f64 {
    for _ in 0..300 {
        let mid = 0.5 * (lo + hi);
        if f(mid) >= 0.0 {
            hi = mid;
        } else {
            lo = mid;
        }
        if (hi - lo) <= rel_tol * hi.abs().max(1e-12) {
            break;
        }
    }
    hi
}

/// More units than any test could ever see: sizes at or above this are
/// reported as having no solution.
const MAX_UNITS: f64 = 1e15;

/// Units per arm and in total for a design.
pub fn sample_size(d: &Design) -> Result<SampleSize, SizingError> {
    d.validate()?;
    let control_exact = control_exact(d)?;
    let treatment_exact = control_exact * d.ratio;
    for exact in [control_exact, treatment_exact] {
        if !(exact.is_finite() && exact > 0.0 && exact < MAX_UNITS) {
            return Err(SizingError::NoSolution(
                format!(
                "the design needs {exact} units in one arm, beyond any traffic; use a larger MDE"
            )
                .into(),
            ));
        }
    }
    SampleSize::from_exact(control_exact, treatment_exact, d.arms, d.comparison_alpha()).ok_or_else(
        || {
            SizingError::NoSolution(Unsolved::about(
                "arms",
                format!(
                    " is {}: {} units in each treatment arm come to more than \
                     {MAX_UNITS:e} in all, beyond any traffic; use fewer arms or a larger MDE",
                    d.arms,
                    round_up(treatment_exact)
                ),
            ))
        },
    )
}

impl SampleSize {
    /// The size of `arms` arms from the exact sizes of the control and
    /// each treatment arm, at a comparison's alpha: each rounded to whole
    /// units, and the total over the arms; `None` when the total passes
    /// [`MAX_UNITS`] (or the sizes are not finite). Power rises with n, so
    /// rounding the exact root up gives the smallest whole size that
    /// reaches the target (for the t method too); an arm holds at least one
    /// unit, however large the effect. The sum is checked: many arms of a
    /// large size must not wrap it around.
    pub(crate) fn from_exact(
        control_exact: f64,
        treatment_exact: f64,
        arms: u32,
        comparison_alpha: f64,
    ) -> Option<SampleSize> {
        let control = round_up(control_exact).max(1);
        let treatment = round_up(treatment_exact).max(1);
        let total = u64::from(arms - 1)
            .checked_mul(treatment)
            .and_then(|t| t.checked_add(control))
            .filter(|&t| (t as f64) < MAX_UNITS && treatment_exact.is_finite())?;
        Some(SampleSize {
            control_exact,
            treatment_exact,
            control,
            treatment,
            arms,
            total,
            comparison_alpha,
        })
    }
}

/// Rounds a size up to whole units, forgiving floating-point noise just
/// above an integer (1e-12 relative: at 1e-9, ten million units could be
/// rounded down by a hundredth of a unit, below the target power).
fn round_up(x: f64) -> u64 {
    let r = x.round();
    if (x - r).abs() <= 1e-12 * x.abs().max(1.0) {
        r as u64
    } else {
        x.ceil() as u64
    }
}

/// The power a design reaches with `n_control` control units (treatment arms
/// at `ratio x n_control`). The design's own `power` field is ignored.
pub fn achieved_power(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    d.validate_inputs(false)?;
    if !(n_control > 0.0 && n_control.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "n",
            value: n_control,
            expected: "> 0 units per arm",
        });
    }
    let nf = normal_form(d);
    let reduction = 1.0 - d.rho * d.rho;
    let za = z_alpha(d);
    let power = match d.method {
        Method::T => t_power(d, n_control),
        Method::Z => z_power(d, n_control),
        _ => {
            let n_for_normal = match d.method {
                Method::Corrected => continuity_uncorrect(n_control, d.ratio, nf.delta),
                _ => n_control,
            };
            // Solve (za A + zb B)^2 / delta^2 x reduction = n for zb.
            let zb = ((n_for_normal / reduction).sqrt() * nf.delta.abs() - za * nf.a) / nf.b;
            std_normal().cdf(zb)
        }
    };
    // Inputs at the edge of floating point (e.g. a ratio of 1e231) can
    // overflow the arithmetic; say so rather than return NaN.
    if power.is_finite() {
        Ok(power)
    } else {
        Err(SizingError::NoSolution(
            "the power cannot be computed for numbers this extreme; check the design's inputs"
                .into(),
        ))
    }
}

/// The smallest effect (in the design's own effect kind, relative or
/// absolute, with the design's sign) that `n_control` control units detect
/// at the design's power. The design's own effect gives the direction.
pub fn minimum_detectable_effect(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    d.validate()?;
    if !(n_control > 0.0 && n_control.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "n",
            value: n_control,
            expected: "> 0 units per arm",
        });
    }
    let sign = match d.effect {
        Effect::Relative(x) | Effect::Absolute(x) => x.signum(),
    };
    let with_effect = |e: f64| -> Design {
        let effect = match d.effect {
            Effect::Relative(_) => Effect::Relative(sign * e),
            Effect::Absolute(_) => Effect::Absolute(sign * e),
        };
        Design { effect, ..*d }
    };
    // The largest magnitude the metric allows in this direction.
    let max_mag = match (d.metric, d.effect) {
        (Metric::Rate { baseline }, Effect::Relative(_)) => {
            if sign > 0.0 {
                (1.0 - baseline) / baseline
            } else {
                1.0
            }
        }
        (Metric::Rate { baseline }, Effect::Absolute(_)) => {
            if sign > 0.0 {
                1.0 - baseline
            } else {
                baseline
            }
        }
        (Metric::Mean { sd, mean }, Effect::Absolute(_)) => {
            let _ = mean;
            sd * 1e6
        }
        (Metric::Mean { sd, mean }, Effect::Relative(_)) => sd * 1e6 / mean.abs(),
    };
    let hi_probe = max_mag * (1.0 - 1e-9);
    let power_at = |e: f64| -> f64 { achieved_power(&with_effect(e), n_control).unwrap_or(0.0) };
    if power_at(hi_probe) < d.power {
        return Err(SizingError::NoSolution(
            format!(
            "{n_control:.0} units per arm cannot reach power {} for any effect in this direction",
            d.power
        )
            .into(),
        ));
    }
    let e = bisect(|e| power_at(e) - d.power, 0.0, hi_probe, 1e-10);
    Ok(sign * e)
}

/// Days one test needs at a constant daily rate: `total_units` over all arms,
/// `daily_units` eligible per day, a `share` of them in the test. Never fewer
/// than `min_days`; with `whole_weeks`, rounded up to a multiple of seven so
/// every weekday is covered equally (common practice; Kohavi, Tang & Xu
/// 2020, *Trustworthy Online Controlled Experiments*, ch. 4).
pub fn days_needed(
    total_units: u64,
    daily_units: f64,
    share: f64,
    min_days: u32,
    whole_weeks: bool,
) -> Result<u64, SizingError> {
    if !(daily_units > 0.0 && daily_units.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "daily",
            value: daily_units,
            expected: "> 0 units per day",
        });
    }
    if !(share > 0.0 && share <= 1.0) {
        return Err(SizingError::OutOfRange {
            field: "share",
            value: share,
            expected: "in (0, 1]",
        });
    }
    let per_day = daily_units * share;
    let raw = (total_units as f64 / per_day).ceil();
    if raw > 1e9 {
        return Err(SizingError::NoSolution(
            format!("{total_units} units at {per_day:.1} a day take more than a million years")
                .into(),
        ));
    }
    Ok(round_days(raw as u64, min_days, whole_weeks))
}

/// Applies the minimum run and whole-week rounding to a run length in days.
pub fn round_days(days: u64, min_days: u32, whole_weeks: bool) -> u64 {
    let d = days.max(u64::from(min_days)).max(1);
    if whole_weeks {
        d.div_ceil(7) * 7
    } else {
        d
    }
}

#[cfg(test)]
mod tests;
