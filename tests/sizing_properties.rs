//! Property tests of the sizing engine (`sluice::sizing`), over random
//! designs: monotonicity in the MDE, power, alpha and arms; the symmetries
//! each method really has; power at the rounded size; the MDE inverse; the
//! t sizes against the z sizes; CUPED; and no panic on any input.
//!
//! Symmetry, reasoned out before asserting it:
//! * Mean methods (t, z) depend on the effect only through |delta|, so
//!   +delta and -delta need the same sizes, at any ratio.
//! * Rate methods are NOT symmetric in the effect's direction from one
//!   baseline: p(1 - p) (or the arcsine slope) differs at p1 + d and p1 - d.
//!   What holds for every rate method is relabelling:
//!   - swapping the arms: sizing p1 -> p2 with ratio r and p2 -> p1 with
//!     ratio 1/r puts the same units on each rate, so the second design's
//!     control (rate p2) equals the first's treatment, r x control. With
//!     r = 1 the sizes are equal.
//!   - swapping success and failure: p1 -> p2 and (1 - p1) -> (1 - p2)
//!     have the same variances (and arcsine h flips sign), so equal sizes.
//!   - at p1 = 0.5 the two directions coincide by the previous point.

use proptest::prelude::*;
use sluice::sizing::{
    achieved_power, days_needed, minimum_detectable_effect, sample_size, Correction, Design,
    Effect, Method, Metric, Sides,
};

const RATE_METHODS: [Method; 4] = [
    Method::Pooled,
    Method::Unpooled,
    Method::Corrected,
    Method::Arcsine,
];

fn rate_method() -> impl Strategy<Value = Method> {
    prop::sample::select(RATE_METHODS.to_vec())
}

fn mean_method() -> impl Strategy<Value = Method> {
    prop::sample::select(vec![Method::T, Method::Z])
}

fn sides() -> impl Strategy<Value = Sides> {
    prop::sample::select(vec![Sides::One, Sides::Two])
}

fn correction() -> impl Strategy<Value = Correction> {
    prop::sample::select(Correction::ALL.to_vec())
}

/// The settings every design has besides metric, effect and method.
#[derive(Debug, Clone, Copy)]
struct Settings {
    alpha: f64,
    power: f64,
    sides: Sides,
    arms: u32,
    ratio: f64,
    correction: Correction,
    rho: f64,
}

fn settings() -> impl Strategy<Value = Settings> {
    (
        0.001f64..0.2,
        0.5f64..0.99,
        sides(),
        2u32..7,
        0.25f64..4.0,
        correction(),
        prop_oneof![Just(0.0), 0.0f64..0.9],
    )
        .prop_map(
            |(alpha, power, sides, arms, ratio, correction, rho)| Settings {
                alpha,
                power,
                sides,
                arms,
                ratio,
                correction,
                rho,
            },
        )
}

fn with(s: Settings, metric: Metric, effect: Effect, method: Method) -> Design {
    Design {
        metric,
        effect,
        alpha: s.alpha,
        power: s.power,
        sides: s.sides,
        arms: s.arms,
        ratio: s.ratio,
        method,
        correction: s.correction,
        rho: s.rho,
    }
}

/// A valid rate design: baseline p, absolute effect `delta` (treatment
/// p + delta kept inside [0.005, 0.995]).
fn rate(s: Settings, p: f64, delta: f64, method: Method) -> Design {
    with(
        s,
        Metric::Rate { baseline: p },
        Effect::Absolute(delta),
        method,
    )
}

fn mean(s: Settings, sd: f64, delta: f64, method: Method) -> Design {
    with(
        s,
        Metric::Mean { mean: 40.0, sd },
        Effect::Absolute(delta),
        method,
    )
}

fn n_exact(d: &Design) -> f64 {
    sample_size(d)
        .unwrap_or_else(|e| panic!("{d:?}: {e}"))
        .control_exact
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs())
}

/// A rate design's baseline and a treatment rate both inside (0.005, 0.995)
/// and at least 0.002 apart.
fn two_rates() -> impl Strategy<Value = (f64, f64)> {
    (0.005f64..0.995, 0.005f64..0.995)
        .prop_filter("rates too close", |(a, b)| (a - b).abs() > 0.002)
}

/// The t method finds its exact size by bisection to a relative tolerance
/// of 1e-9 (`sizing::bisect`), so two t sizes that meet at the same root
/// (e.g. where the degrees of freedom reach 1) may differ by that much;
/// the closed forms are compared at 1e-12.
const T_TOL: f64 = 1e-9;

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    #[test]
    fn n_falls_as_the_rate_mde_grows(
        s in settings(), m in rate_method(), p in 0.01f64..0.9,
        small in 0.003f64..0.2, grow in 1.01f64..3.0, up in any::<bool>(),
    ) {
        let sign = if up { 1.0 } else { -1.0 };
        let big = small * grow;
        prop_assume!(p + sign * big > 0.001 && p + sign * big < 0.999);
        let n_small = n_exact(&rate(s, p, sign * small, m));
        let n_big = n_exact(&rate(s, p, sign * big, m));
        prop_assert!(n_big <= n_small * (1.0 + 1e-12), "{n_big} > {n_small}");
    }

    #[test]
    fn n_falls_as_the_mean_mde_grows(
        s in settings(), m in mean_method(), sd in 0.5f64..50.0,
        d_small in 0.02f64..1.0, grow in 1.01f64..3.0, up in any::<bool>(),
    ) {
        let sign = if up { 1.0 } else { -1.0 };
        let n_small = n_exact(&mean(s, sd, sign * d_small * sd, m));
        let n_big = n_exact(&mean(s, sd, sign * d_small * grow * sd, m));
        prop_assert!(n_big <= n_small * (1.0 + T_TOL), "{n_big} > {n_small}");
    }

    #[test]
    fn n_rises_with_power(
        s in settings(), rm in rate_method(), mm in mean_method(),
        (p1, p2) in two_rates(), dz in 0.02f64..1.0,
        lo in 0.5f64..0.98, step in 0.001f64..0.4,
    ) {
        let hi = (lo + step).min(0.995);
        for d in [rate(s, p1, p2 - p1, rm), mean(s, 3.0, dz * 3.0, mm)] {
            let a = n_exact(&Design { power: lo, ..d });
            let b = n_exact(&Design { power: hi, ..d });
            prop_assert!(b >= a * (1.0 - T_TOL), "{:?}: power {lo} needs {a}, {hi} needs {b}", d.method);
        }
    }

    #[test]
    fn n_falls_as_alpha_grows(
        s in settings(), rm in rate_method(), mm in mean_method(),
        (p1, p2) in two_rates(), dz in 0.02f64..1.0,
        lo in 0.0005f64..0.3, step in 0.0001f64..0.2,
    ) {
        let hi = (lo + step).min(0.45);
        for d in [rate(s, p1, p2 - p1, rm), mean(s, 3.0, dz * 3.0, mm)] {
            let a = n_exact(&Design { alpha: lo, ..d });
            let b = n_exact(&Design { alpha: hi, ..d });
            prop_assert!(b <= a * (1.0 + T_TOL), "{:?}: alpha {lo} needs {a}, {hi} needs {b}", d.method);
        }
    }

    #[test]
    fn n_per_arm_rises_with_arms_under_a_correction(
        s in settings(), rm in rate_method(), mm in mean_method(),
        (p1, p2) in two_rates(), dz in 0.02f64..1.0,
        arms in 2u32..10, more in 1u32..5,
    ) {
        for d in [rate(s, p1, p2 - p1, rm), mean(s, 3.0, dz * 3.0, mm)] {
            for c in Correction::ALL {
                let few = sample_size(&Design { arms, correction: c, ..d }).unwrap();
                let many = sample_size(&Design { arms: arms + more, correction: c, ..d }).unwrap();
                if c == Correction::None {
                    prop_assert_eq!(few.control_exact, many.control_exact);
                } else {
                    prop_assert!(many.control_exact > few.control_exact);
                }
                prop_assert!(many.total > few.total);
            }
        }
    }

    #[test]
    fn mean_methods_are_symmetric_in_the_effect_direction(
        s in settings(), m in mean_method(), sd in 0.5f64..50.0, dz in 0.02f64..1.5,
    ) {
        // Equal up to rounding: 40 + delta - 40 and 40 - delta - 40 may
        // differ in the last bit.
        let up = n_exact(&mean(s, sd, dz * sd, m));
        let down = n_exact(&mean(s, sd, -dz * sd, m));
        prop_assert!(close(up, down, 1e-12), "{up} vs {down}");
    }

    #[test]
    fn rate_methods_are_symmetric_when_the_arms_swap(
        s in settings(), m in rate_method(), (p1, p2) in two_rates(),
    ) {
        let arms2 = Settings { arms: 2, ..s };
        let forward = sample_size(&rate(arms2, p1, p2 - p1, m)).unwrap();
        let back = sample_size(&rate(Settings { ratio: 1.0 / s.ratio, ..arms2 }, p2, p1 - p2, m)).unwrap();
        // Same units on each rate: back's control (p2) is forward's treatment.
        prop_assert!(close(back.control_exact, forward.treatment_exact, 1e-9),
            "{} vs {}", back.control_exact, forward.treatment_exact);
        prop_assert!(close(back.treatment_exact, forward.control_exact, 1e-9));
        // With an even split the sizes are simply equal.
        let even = Settings { ratio: 1.0, ..arms2 };
        let f1 = n_exact(&rate(even, p1, p2 - p1, m));
        let b1 = n_exact(&rate(even, p2, p1 - p2, m));
        prop_assert!(close(f1, b1, 1e-9), "{f1} vs {b1}");
    }

    #[test]
    fn rate_methods_are_symmetric_in_success_and_failure(
        s in settings(), m in rate_method(), (p1, p2) in two_rates(),
    ) {
        let n = n_exact(&rate(s, p1, p2 - p1, m));
        let flipped = n_exact(&rate(s, 1.0 - p1, (1.0 - p2) - (1.0 - p1), m));
        prop_assert!(close(n, flipped, 1e-9), "{n} vs {flipped}");
    }

    #[test]
    fn at_one_half_both_directions_need_the_same_size(
        s in settings(), m in rate_method(), delta in 0.002f64..0.45,
    ) {
        let up = n_exact(&rate(s, 0.5, delta, m));
        let down = n_exact(&rate(s, 0.5, -delta, m));
        prop_assert!(close(up, down, 1e-9), "{up} vs {down}");
    }

    #[test]
    fn power_at_the_rounded_size_reaches_the_target(
        s in settings(), rm in rate_method(), mm in mean_method(),
        (p1, p2) in two_rates(), dz in 0.02f64..2.0,
    ) {
        for d in [rate(s, p1, p2 - p1, rm), mean(s, 3.0, dz * 3.0, mm)] {
            let n = sample_size(&d).unwrap();
            let at_rounded = achieved_power(&d, n.control as f64).unwrap();
            prop_assert!(at_rounded >= d.power - 1e-9, "{d:?}: {at_rounded}");
            // Rounded up: control - 1 < exact <= control (up to 1e-9 of
            // floating-point noise, which sizing forgives).
            let (c, x) = (n.control as f64, n.control_exact);
            prop_assert!(c - 1.0 < x * (1.0 + 1e-9) && x <= c * (1.0 + 1e-9), "{x} -> {c}");
            prop_assert!(close(n.treatment_exact, d.ratio * n.control_exact, 1e-12));
            prop_assert_eq!(n.total, n.control + u64::from(d.arms - 1) * n.treatment);
            if n.control_exact > 10.0 {
                let at_exact = achieved_power(&d, n.control_exact).unwrap();
                prop_assert!((at_exact - d.power).abs() < 1e-6, "{d:?}: {at_exact}");
            }
        }
    }

    #[test]
    fn the_mde_inverts_the_sample_size(
        s in settings(), rm in rate_method(), mm in mean_method(),
        (p1, p2) in two_rates(), dz in 0.01f64..1.0, relative in any::<bool>(),
    ) {
        let r = rate(s, p1, p2 - p1, rm);
        let r = if relative { Design { effect: Effect::Relative((p2 - p1) / p1), ..r } } else { r };
        let m = mean(s, 3.0, -dz * 3.0, mm);
        let m = if relative { Design { effect: Effect::Relative(-dz * 3.0 / 40.0), ..m } } else { m };
        for d in [r, m] {
            let n = sample_size(&d).unwrap();
            prop_assume!(n.control_exact > 10.0);
            let e = minimum_detectable_effect(&d, n.control_exact).unwrap();
            let want = match d.effect { Effect::Relative(x) | Effect::Absolute(x) => x };
            prop_assert!(close(e, want, 1e-6), "{d:?}: MDE {e}, effect {want}");
        }
    }

    /// One-sided, so that both methods count the same single tail (the
    /// two-sided z method leaves out the far tail, the t method does not,
    /// which at millions of units outweighs the t test's cost).
    #[test]
    fn t_needs_a_little_more_than_z_at_every_size(
        s in settings(), dz in 0.0005f64..1.0,
    ) {
        let s = Settings { sides: Sides::One, ..s };
        let t = n_exact(&mean(s, 2.0, dz * 2.0, Method::T));
        let z = n_exact(&mean(s, 2.0, dz * 2.0, Method::Z));
        prop_assume!(z >= 20.0);
        // The t test's heavier tails cost about z_alpha^2 / 4 units per arm.
        prop_assert!(t >= z, "t {t} < z {z}");
        prop_assert!(t - z <= 3.0 + 0.05 * z, "t {t}, z {z}");
    }

    #[test]
    fn cuped_scales_normal_sizes_by_one_minus_rho_squared(
        s in settings(), (p1, p2) in two_rates(), rho in 0.01f64..0.95, dz in 0.02f64..1.0,
    ) {
        let plain = Settings { rho: 0.0, ..s };
        let reduced = Settings { rho, ..s };
        for m in [Method::Pooled, Method::Unpooled, Method::Arcsine] {
            let a = n_exact(&rate(plain, p1, p2 - p1, m));
            let b = n_exact(&rate(reduced, p1, p2 - p1, m));
            prop_assert!(close(b, a * (1.0 - rho * rho), 1e-12));
        }
        let a = n_exact(&mean(plain, 3.0, dz * 3.0, Method::Z));
        let b = n_exact(&mean(reduced, 3.0, dz * 3.0, Method::Z));
        prop_assert!(close(b, a * (1.0 - rho * rho), 1e-12));
        for m in [Method::Corrected, Method::T] {
            let d = if m == Method::T { mean(plain, 3.0, dz * 3.0, m) } else { rate(plain, p1, p2 - p1, m) };
            let a = n_exact(&d);
            let b = n_exact(&Design { rho, ..d });
            prop_assert!(b < a);
        }
    }

    /// Any input at all: an error or a sane answer, never a panic.
    #[test]
    fn any_input_gives_an_answer_or_an_error(
        base in prop_oneof![any::<f64>(), -1.0f64..2.0],
        sd in prop_oneof![any::<f64>(), -1.0f64..100.0],
        effect in prop_oneof![any::<f64>(), -2.0f64..2.0],
        relative in any::<bool>(),
        is_rate in any::<bool>(),
        alpha in prop_oneof![any::<f64>(), -0.1f64..0.7],
        power in prop_oneof![any::<f64>(), 0.0f64..1.1],
        sides in sides(),
        arms in prop_oneof![any::<u32>(), 0u32..8],
        ratio in prop_oneof![any::<f64>(), -1.0f64..5.0],
        method in prop::sample::select(Method::ALL.to_vec()),
        correction in correction(),
        rho in prop_oneof![any::<f64>(), -0.5f64..1.5],
        n in prop_oneof![any::<f64>(), 0.0f64..1e7],
        daily in prop_oneof![any::<f64>(), -1.0f64..1e6],
        share in prop_oneof![any::<f64>(), -0.5f64..1.5],
        total in any::<u64>(),
    ) {
        let metric = if is_rate { Metric::Rate { baseline: base } } else { Metric::Mean { mean: base, sd } };
        let effect = if relative { Effect::Relative(effect) } else { Effect::Absolute(effect) };
        let d = Design { metric, effect, alpha, power, sides, arms, ratio, method, correction, rho };
        let valid = d.validate().is_ok();
        match sample_size(&d) {
            Ok(size) => {
                prop_assert!(valid);
                prop_assert!(size.control_exact.is_finite() && size.control_exact > 0.0);
                prop_assert!(size.control >= 1 && size.treatment >= 1);
                prop_assert_eq!(size.total, size.control + u64::from(arms - 1) * size.treatment);
            }
            Err(e) => prop_assert!(!e.to_string().is_empty()),
        }
        if !valid {
            prop_assert!(sample_size(&d).is_err());
            prop_assert!(minimum_detectable_effect(&d, n).is_err());
        }
        if let Ok(p) = achieved_power(&d, n) {
            prop_assert!((0.0..=1.0).contains(&p), "power {p}");
        }
        let _ = minimum_detectable_effect(&d, n);
        if let Ok(days) = days_needed(total, daily, share, 14, true) {
            prop_assert!(days >= 14 && days % 7 == 0);
        }
    }
}
