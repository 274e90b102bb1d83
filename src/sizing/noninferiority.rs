//! Non-inferiority (guardrail) sizing: a one-sided test that the treatment
//! is no worse than the control by more than a margin, when the true
//! difference is zero.
//!
//! The margin is the largest acceptable harm. A positive margin says a
//! fall is the harm: H0 is `treatment - control <= -margin`, H1 (the
//! assumed truth) a difference of 0. A negative margin says a rise is the
//! harm (a metric where lower is better): H0 is `treatment - control >=
//! |margin|`. Either way the null lies at a difference of `-margin`.
//!
//! * Rates: Blackwelder (1982), "'Proving the null hypothesis' in clinical
//!   trials", *Controlled Clinical Trials* 3, 345-353: with both arms at
//!   the baseline `p` under the assumed truth,
//!   `n_control = (z_alpha + z_beta)^2 p (1 - p) (1 + 1/r) / margin^2`.
//!   Its variance is the unpooled one at the assumed rates, so the method
//!   is `unpooled`.
//! * Means: Chow, Shao & Wang (2008), *Sample Size Calculations in
//!   Clinical Research*, 2nd ed., 3.2.2 (two-sample parallel design,
//!   non-inferiority): `n_control = (z_alpha + z_beta)^2 sigma^2 (1 + 1/r) /
//!   margin^2` (method `z`); the `t` method solves the same one-sided test
//!   with the noncentral t.
//!
//! Both are the one-sided superiority formulas with the margin in place of
//! the effect, so each design is sized as the one-sided test of a mean
//! whose effect is the margin (for a rate, a mean with standard deviation
//! `sqrt(p (1 - p))` under the `z` method), with CUPED's `1 - rho^2` and the
//! multi-arm correction applied as for any other test.

use super::{
    achieved_power, minimum_detectable_effect, sample_size, Design, Effect, Method, Metric,
    SampleSize, Sides, SizingError,
};

/// The design of a non-inferiority (guardrail) test, with the defaults
/// that make it one, in one place for the portfolio and the command line:
/// `base` (its `effect` the margin) made one-sided, with `method` when one
/// is named; otherwise, for a rate, the unpooled variance of Blackwelder
/// (1982), whose formula sizes it, and for a mean `base`'s own method.
pub fn design(base: Design, method: Option<Method>) -> Design {
    let method = method.unwrap_or(match base.metric {
        Metric::Rate { .. } => Method::Unpooled,
        Metric::Mean { .. } => base.method,
    });
    Design {
        sides: Sides::One,
        method,
        ..base
    }
}

/// The margin as an absolute difference, with its sign (positive: a fall
/// is the harm).
fn margin_abs(d: &Design) -> f64 {
    match (d.effect, d.metric) {
        (Effect::Absolute(m), _) => m,
        (Effect::Relative(m), Metric::Rate { baseline }) => m * baseline,
        (Effect::Relative(m), Metric::Mean { mean, .. }) => m * mean.abs(),
    }
}

/// The value of the control's metric moved by the harm the margin allows:
/// the treatment's rate or mean under H0.
pub fn null_value(d: &Design) -> f64 {
    d.metric.control_value() - margin_abs(d)
}

/// The one-sided superiority design with the same size as the
/// non-inferiority design `d` (whose `effect` is the margin; its `sides`
/// are ignored: a guardrail is one-sided). Checks `d`'s inputs.
pub fn equivalent(d: &Design) -> Result<Design, SizingError> {
    let (field, m) = match d.effect {
        Effect::Relative(m) => ("margin", m),
        Effect::Absolute(m) => ("margin_abs", m),
    };
    if !m.is_finite() || m == 0.0 {
        return Err(SizingError::OutOfRange {
            field,
            value: m,
            expected: "a finite non-zero number",
        });
    }
    let one = Design {
        sides: Sides::One,
        ..*d
    };
    match d.metric {
        Metric::Rate { baseline } => {
            if !matches!(d.method, Method::Unpooled) {
                return Err(SizingError::NoSolution(
                    format!(
                        "a non-inferiority test of a rate is sized by Blackwelder's formula, \
                     method `unpooled`; `{}` applies to superiority tests",
                        d.method
                    )
                    .into(),
                ));
            }
            if !(baseline > 0.0 && baseline < 1.0) {
                return Err(SizingError::OutOfRange {
                    field: "baseline",
                    value: baseline,
                    expected: "a rate strictly inside (0, 1)",
                });
            }
            let null = null_value(d);
            if !(null > 0.0 && null < 1.0) {
                return Err(SizingError::OutOfRange {
                    field,
                    value: m,
                    expected: "a margin that keeps the rate under H0 inside (0, 1)",
                });
            }
            let equivalent = Design {
                metric: Metric::Mean {
                    mean: baseline,
                    sd: (baseline * (1.0 - baseline)).sqrt(),
                },
                effect: Effect::Absolute(margin_abs(d).abs()),
                method: Method::Z,
                ..one
            };
            equivalent.validate()?;
            Ok(equivalent)
        }
        Metric::Mean { mean, .. } => {
            if matches!(d.effect, Effect::Relative(_)) && mean == 0.0 {
                return Err(SizingError::RelativeOfZero);
            }
            let equivalent = Design {
                effect: Effect::Absolute(margin_abs(d).abs()),
                ..one
            };
            equivalent.validate()?;
            Ok(equivalent)
        }
    }
}

/// Units per arm for a non-inferiority design (`effect` is the margin).
pub fn size(d: &Design) -> Result<SampleSize, SizingError> {
    sample_size(&equivalent(d)?)
}

/// The power with `n_control` control units: the probability of showing
/// non-inferiority when the true difference is 0.
pub fn power(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    achieved_power(&equivalent(d)?, n_control)
}

/// The smallest margin (in the design's own kind, relative or absolute,
/// with its sign) that `n_control` control units can rule out at the power.
pub fn smallest_margin(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    let abs = minimum_detectable_effect(&equivalent(d)?, n_control)?;
    let sign = margin_abs(d).signum();
    Ok(match (d.effect, d.metric) {
        (Effect::Absolute(_), _) => sign * abs,
        (Effect::Relative(_), Metric::Rate { baseline }) => sign * abs / baseline,
        (Effect::Relative(_), Metric::Mean { mean, .. }) => sign * abs / mean.abs(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;
    use statrs::distribution::{ContinuousCDF, Normal};

    fn rate(p: f64, margin: Effect) -> Design {
        Design {
            method: Method::Unpooled,
            ..Design::new(Metric::Rate { baseline: p }, margin)
        }
    }

    #[test]
    fn rates_follow_blackwelders_closed_form() {
        // p = 0.2, margin 0.02 absolute, one-sided 0.05, power 0.8, by hand:
        // (1.644854 + 0.841621)^2 x 0.16 x 2 / 0.0004.
        let n = size(&rate(0.2, Effect::Absolute(0.02))).unwrap();
        let want = (1.6448536269514722f64 + 0.8416212335729143).powi(2) * 0.16 * 2.0 / 0.0004;
        assert_abs_diff_eq!(n.control_exact, want, epsilon = 1e-6);
        // A relative margin of 10% of 0.2 is the same test.
        let r = size(&rate(0.2, Effect::Relative(0.1))).unwrap();
        assert_abs_diff_eq!(r.control_exact, want, epsilon = 1e-6);
        // The direction of the harm does not change the size.
        let up = size(&rate(0.2, Effect::Absolute(-0.02))).unwrap();
        assert_abs_diff_eq!(up.control_exact, want, epsilon = 1e-6);
        assert_abs_diff_eq!(null_value(&rate(0.2, Effect::Absolute(-0.02))), 0.22);
    }

    #[test]
    fn means_follow_the_normal_formula_and_t_costs_a_little_more() {
        let base = Design::new(
            Metric::Mean {
                mean: 40.0,
                sd: 12.0,
            },
            Effect::Absolute(1.5),
        );
        let z = size(&Design {
            method: Method::Z,
            ratio: 2.0,
            ..base
        })
        .unwrap();
        let q = Normal::standard();
        let want = (q.inverse_cdf(0.95) + q.inverse_cdf(0.8)).powi(2) * 144.0 * 1.5 / 2.25;
        assert_abs_diff_eq!(z.control_exact, want, epsilon = 1e-6 * want);
        let t = size(&Design { ratio: 2.0, ..base }).unwrap();
        assert!(t.control_exact > z.control_exact && t.control_exact < z.control_exact + 3.0);
    }

    #[test]
    fn power_and_margin_invert_the_size() {
        let d = rate(0.05, Effect::Relative(0.08));
        let n = size(&d).unwrap();
        assert_abs_diff_eq!(power(&d, n.control_exact).unwrap(), 0.8, epsilon = 1e-9);
        assert_abs_diff_eq!(
            smallest_margin(&d, n.control_exact).unwrap(),
            0.08,
            epsilon = 1e-8
        );
    }

    #[test]
    fn a_guardrail_design_is_one_sided_and_unpooled_for_a_rate_unless_named() {
        let two = |metric| Design {
            sides: Sides::Two,
            method: Method::default_for(&metric),
            ..Design::new(metric, Effect::Relative(0.02))
        };
        let rate = design(two(Metric::Rate { baseline: 0.1 }), None);
        assert_eq!((rate.sides, rate.method), (Sides::One, Method::Unpooled));
        let named = design(two(Metric::Rate { baseline: 0.1 }), Some(Method::Pooled));
        assert_eq!((named.sides, named.method), (Sides::One, Method::Pooled));
        // A mean keeps its own method; the margin stays the effect.
        let mean = Metric::Mean {
            mean: 40.0,
            sd: 12.0,
        };
        let m = design(two(mean), None);
        assert_eq!(m.method, Method::default_for(&mean));
        assert_eq!((m.sides, m.effect), (Sides::One, Effect::Relative(0.02)));
    }

    #[test]
    fn bad_margins_and_methods_are_refused() {
        assert!(size(&rate(0.1, Effect::Absolute(0.0))).is_err());
        assert!(size(&rate(0.1, Effect::Absolute(0.2))).is_err()); // null rate -0.1
        assert!(size(&rate(0.95, Effect::Absolute(-0.06))).is_err()); // null rate 1.01
        let pooled = Design {
            method: Method::Pooled,
            ..rate(0.1, Effect::Relative(0.1))
        };
        let e = size(&pooled).unwrap_err().to_string();
        assert!(e.contains("Blackwelder"), "{e}");
    }
}
