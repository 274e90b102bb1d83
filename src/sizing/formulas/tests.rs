//! The formulas against hand-worked values and their own inverses.

use super::*;
use approx::assert_abs_diff_eq;

fn rate(p: f64, mde: f64) -> Design {
    Design::new(Metric::Rate { baseline: p }, Effect::Relative(mde))
}

#[test]
fn noncentral_t_reduces_to_central_t_at_zero_ncp() {
    use statrs::distribution::StudentsT;
    let t = StudentsT::new(0.0, 1.0, 7.0).unwrap();
    for x in [-3.0, -1.0, 0.5, 2.0, 4.0] {
        assert_abs_diff_eq!(noncentral_t_cdf(x, 7.0, 0.0), t.cdf(x), epsilon = 1e-10);
    }
}

#[test]
fn noncentral_t_matches_reference_values() {
    // (t, df, ncp, scipy.stats.nct.cdf(t, df, ncp) with scipy 1.17.1, tolerance).
    // The last two: millions of degrees of freedom, t = its 0.975
    // quantile, where the plain (1 - x)^b and ln Gamma difference lost 1e-8.
    let cases = [
        (2.0, 10.0, 1.0, 0.8076115625303752, 1e-9),
        (-1.5, 4.0, 0.5, 0.04337356266476112, 1e-9),
        (3.0, 30.0, 2.5, 0.6709221372818337, 1e-9),
        (1.9599642217672055, 1e7, 2.8, 0.20044417208466286, 2e-9),
        (1.9599663568141072, 1e6, 2.8, 0.2004448505306511, 1e-10),
    ];
    for (t, df, ncp, want, eps) in cases {
        assert_abs_diff_eq!(noncentral_t_cdf(t, df, ncp), want, epsilon = eps);
    }
    // Large df approaches the normal: P(T <= 3) with ncp 1 ~ Phi(2).
    assert_abs_diff_eq!(
        noncentral_t_cdf(3.0, 1e6, 1.0),
        std_normal().cdf(2.0),
        epsilon = 1e-4
    );
}

#[test]
fn t_quantile_is_accurate_at_every_df() {
    // scipy.stats.t.isf(q, df), computed with scipy 1.17.1. statrs'
    // own inverse gives 1.8266 at df = 1e7 (the bug this guards).
    let cases = [
        (0.025, 1e7, 1.9599642217672055),
        (0.025, 3.4e6, 1.9599646822671306),
        (0.025, 6e5, 1.9599679383332786),
        (0.025, 1e9, 1.9599639869123253),
        (0.0125, 3.0, 4.176534846104498),
        (0.05, 1.5, 3.7051808200967518),
        (0.005, 40.0, 2.7044592674331622),
    ];
    for (q, df, want) in cases {
        assert_abs_diff_eq!(t_upper(q, df), want, epsilon = 1e-8);
    }
    assert_abs_diff_eq!(t_upper(0.5, 20.0), 0.0, epsilon = 1e-12);
}

#[test]
fn t_sizes_stay_accurate_for_millions_of_units() {
    // d = 0.003 at two-sided alpha 0.05, power 0.8, statsmodels 0.15.0:
    // TTestIndPower().solve_power(0.003, alpha=0.05, power=0.8) =
    // 1744192.184659929 per arm, and the normal test with both tails,
    // NormalIndPower().solve_power(...) = 1744191.2242947044; the t
    // test costs about z^2/4 ~ 1 unit more. Before t_upper was fixed,
    // sluice answered 1741422.7, 2,770 units short.
    let d = Design {
        method: Method::T,
        ..Design::new(Metric::Mean { mean: 0.0, sd: 1.0 }, Effect::Absolute(0.003))
    };
    let n = sample_size(&d).unwrap();
    assert_abs_diff_eq!(n.control_exact, 1744192.184659929, epsilon = 0.5);
    let extra = n.control_exact - 1744191.2242947044;
    assert!((0.5..1.5).contains(&extra), "t costs {extra} units more");
}

#[test]
fn pooled_is_the_default_and_matches_fleiss_closed_form() {
    // p1 = 0.10, p2 = 0.11: the closed form by hand with z(0.975) = 1.959964,
    // z(0.8) = 0.841621, pbar = 0.105.
    let d = rate(0.10, 0.10);
    let n = sample_size(&d).unwrap();
    let pbar: f64 = 0.105;
    let a = (2.0 * pbar * (1.0 - pbar)).sqrt();
    let b = (0.1f64 * 0.9 + 0.11 * 0.89).sqrt();
    let expect = (1.959964 * a + 0.841621 * b).powi(2) / 0.0001;
    assert_abs_diff_eq!(n.control_exact, expect, epsilon = 0.5);
    assert_eq!(n.control, n.treatment);
    assert_eq!(n.total, 2 * n.control);
    assert_eq!(d.method, Method::Pooled);
}

#[test]
fn continuity_correction_round_trips() {
    for n in [50.0, 1000.0, 123456.0] {
        let cc = continuity_correct(n, 1.5, 0.02);
        assert!(cc > n);
        assert_abs_diff_eq!(continuity_uncorrect(cc, 1.5, 0.02), n, epsilon = 1e-6 * n);
    }
}

#[test]
fn power_at_the_exact_size_is_the_target_for_every_method() {
    for method in [
        Method::Pooled,
        Method::Unpooled,
        Method::Corrected,
        Method::Arcsine,
    ] {
        let d = Design {
            method,
            ratio: 2.0,
            arms: 3,
            ..rate(0.05, 0.2)
        };
        let n = sample_size(&d).unwrap();
        assert_abs_diff_eq!(
            achieved_power(&d, n.control_exact).unwrap(),
            0.8,
            epsilon = 1e-6
        );
    }
    for method in [Method::T, Method::Z] {
        let d = Design {
            method,
            ..Design::new(
                Metric::Mean {
                    mean: 50.0,
                    sd: 20.0,
                },
                Effect::Absolute(3.0),
            )
        };
        let n = sample_size(&d).unwrap();
        assert_abs_diff_eq!(
            achieved_power(&d, n.control_exact).unwrap(),
            0.8,
            epsilon = 1e-6
        );
        assert!(achieved_power(&d, n.control as f64).unwrap() >= 0.8);
    }
}

#[test]
fn mde_inverts_sample_size() {
    let designs = [
        rate(0.2, 0.05),
        Design {
            method: Method::Arcsine,
            ..rate(0.3, -0.1)
        },
        Design {
            method: Method::Corrected,
            sides: Sides::One,
            ..rate(0.02, 0.3)
        },
        Design::new(
            Metric::Mean {
                mean: 12.0,
                sd: 30.0,
            },
            Effect::Relative(0.04),
        ),
    ];
    for d in designs {
        let n = sample_size(&d).unwrap();
        let e = minimum_detectable_effect(&d, n.control_exact).unwrap();
        let want = match d.effect {
            Effect::Relative(x) | Effect::Absolute(x) => x,
        };
        assert_abs_diff_eq!(e, want, epsilon = 1e-6 * want.abs().max(1.0));
    }
}

#[test]
fn cuped_scales_the_sample_by_one_minus_rho_squared() {
    let base = sample_size(&rate(0.1, 0.1)).unwrap();
    let reduced = sample_size(&Design {
        rho: 0.5,
        ..rate(0.1, 0.1)
    })
    .unwrap();
    assert_abs_diff_eq!(
        reduced.control_exact,
        base.control_exact * 0.75,
        epsilon = 1e-6
    );
}

#[test]
fn multi_arm_corrections() {
    let d = Design {
        arms: 4,
        ..rate(0.1, 0.1)
    };
    assert_abs_diff_eq!(d.comparison_alpha(), 0.05 / 3.0, epsilon = 1e-15);
    let s = Design {
        correction: Correction::Sidak,
        ..d
    };
    assert_abs_diff_eq!(s.comparison_alpha(), 0.016952, epsilon = 1e-6);
    let n = sample_size(&d).unwrap();
    assert_eq!(n.total, 4 * n.control);
    assert!(n.control > sample_size(&rate(0.1, 0.1)).unwrap().control);
}

#[test]
fn invalid_inputs_are_errors_not_panics() {
    let changes: [fn(&mut Design); 8] = [
        |d| d.alpha = 0.0,
        |d| d.alpha = 0.6,
        |d| d.power = 0.04,
        |d| d.power = 1.0,
        |d| d.rho = 1.0,
        |d| d.arms = 1,
        |d| d.ratio = 0.0,
        |d| d.method = Method::T,
    ];
    let changed = changes.into_iter().map(|change| {
        let mut d = rate(0.1, 0.1);
        change(&mut d);
        d
    });
    let bad = [
        rate(0.0, 0.1),
        rate(1.0, 0.1),
        rate(0.95, 0.1),
        rate(0.1, 0.0),
        rate(f64::NAN, 0.1),
        rate(0.1, f64::INFINITY),
    ]
    .into_iter()
    .chain(changed);
    for d in bad {
        assert!(sample_size(&d).is_err(), "{d:?} should be rejected");
    }
    assert!(days_needed(100, 10.0, 0.0, 14, true).is_err());
    assert!(days_needed(100, 10.0, 1.5, 14, true).is_err());
    assert!(days_needed(100, 0.0, 0.5, 14, true).is_err());
}

#[test]
fn sizes_beyond_any_traffic_are_errors_not_wrapped_totals() {
    // 1.05e13 units per arm over 2^32 - 2 treatment arms overflowed u64
    // and wrapped to 7.95e18 in a release build (a panic in debug).
    let many_arms = Design {
        arms: u32::MAX,
        effect: Effect::Absolute(1e-6),
        ..rate(0.1, 0.1)
    };
    let err = sample_size(&many_arms).unwrap_err();
    assert!(err.to_string().contains("`arms`"), "{err}");
    // A huge ratio makes the treatment arm infinite.
    let lopsided = Design {
        ratio: 1e300,
        ..rate(0.1, 0.1)
    };
    assert!(sample_size(&lopsided).is_err());
    // Far from the limit, totals are exact.
    let four = sample_size(&Design {
        arms: 4,
        ratio: 2.0,
        ..rate(0.1, 0.1)
    })
    .unwrap();
    assert_eq!(four.total, four.control + 3 * four.treatment);
}

#[test]
fn days_needed_applies_minimum_run_and_whole_weeks() {
    // 10,000 units at 1,000 a day and 50% share: 20 days, rounded to 21.
    assert_eq!(days_needed(10_000, 1000.0, 0.5, 14, true).unwrap(), 21);
    assert_eq!(days_needed(10_000, 1000.0, 0.5, 14, false).unwrap(), 20);
    // Tiny tests still run the minimum.
    assert_eq!(days_needed(10, 1000.0, 1.0, 14, true).unwrap(), 14);
    assert_eq!(days_needed(10, 1000.0, 1.0, 10, true).unwrap(), 14);
    assert_eq!(days_needed(10, 1000.0, 1.0, 10, false).unwrap(), 10);
}
