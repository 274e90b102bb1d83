//! `sluice size` end to end: runs the real binary and reads what it prints.
//!
//! Covers the JSON object the command promises (issue 2), one design
//! against statsmodels, the text summary, the exit code and message of bad
//! flags, and byte-for-byte determinism. The wider comparison with scipy and
//! statsmodels is tests/reference/run.sh.

use crate::util::{cmd, sluice};
use serde_json::Value;

fn json(args: &[&str]) -> Value {
    let mut all = vec!["size"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--format", "json"]);
    let out = sluice(&all);
    assert!(
        out.status.success(),
        "sluice {all:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("stdout is one JSON object")
}

fn int(v: &Value, key: &str) -> u64 {
    v[key]
        .as_u64()
        .unwrap_or_else(|| panic!("`{key}` is not a whole number: {v}"))
}

fn float(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("`{key}` is not a number: {v}"))
}

/// statsmodels 0.15.0: samplesize_proportions_2indep_onetail(0.01, 0.10,
/// 0.8, ratio=1, alpha=0.05, alternative='two-sided') = 14750.790469044945
/// (a 10% relative lift on a 10% baseline; pooled variance under H0).
#[test]
fn default_rate_design_matches_statsmodels() {
    let v = json(&["--baseline", "0.1", "--mde", "0.1"]);
    let reference = 14750.790469044945;
    assert!((float(&v, "control_exact") - reference).abs() < 1e-6 * reference);
    assert!((float(&v, "treatment_exact") - reference).abs() < 1e-6 * reference);
    assert_eq!(int(&v, "control"), 14751);
    assert_eq!(int(&v, "treatment"), 14751);
    assert_eq!(int(&v, "total"), 29502);
    assert_eq!(int(&v, "arms"), 2);
    assert_eq!(v["method"], "pooled");
}

#[test]
fn json_object_has_the_promised_fields() {
    let v = json(&["--baseline", "0.04", "--mde", "0.1", "--arms", "3"]);
    for key in ["control", "treatment", "total", "arms"] {
        int(&v, key);
    }
    for key in [
        "control_exact",
        "treatment_exact",
        "comparison_alpha",
        "achieved_power",
    ] {
        float(&v, key);
    }
    assert!(v["method"].is_string());
    assert_eq!(int(&v, "arms"), 3);
    assert_eq!(
        int(&v, "total"),
        int(&v, "control") + 2 * int(&v, "treatment")
    );
    // `days` only when a daily volume is given.
    assert!(v.get("days").is_none());
    let with_days = json(&[
        "--baseline",
        "0.04",
        "--mde",
        "0.1",
        "--daily",
        "20000",
        "--share",
        "0.5",
    ]);
    let days = int(&with_days, "days");
    let total = int(&with_days, "total") as f64;
    // At 10,000 units a day: ceil(total / 10,000), at least 14, whole weeks.
    let raw = (total / 10_000.0).ceil() as u64;
    assert_eq!(days, raw.max(14).div_ceil(7) * 7);
}

#[test]
fn rounded_sizes_are_the_exact_sizes_rounded_up() {
    let v = json(&[
        "--mean", "38.5", "--sd", "61", "--mde", "0.03", "--ratio", "1.5",
    ]);
    let c = float(&v, "control_exact");
    let t = float(&v, "treatment_exact");
    assert!((t - 1.5 * c).abs() < 1e-9 * t);
    assert_eq!(int(&v, "control"), c.ceil() as u64);
    assert_eq!(int(&v, "treatment"), t.ceil() as u64);
    assert_eq!(v["method"], "t");
    assert!(float(&v, "achieved_power") >= 0.8);
}

#[test]
fn negative_baseline_mean_and_negative_effects_are_accepted() {
    // A metric such as margin change can be negative; so can the effect.
    let v = json(&["--mean", "-50", "--sd", "20", "--mde-abs", "-2.5"]);
    let w = json(&["--mean", "-50", "--sd", "20", "--mde-abs", "2.5"]);
    assert_eq!(int(&v, "control"), int(&w, "control"));
    assert!((float(&v, "treatment_value") + 52.5).abs() < 1e-12);
}

#[test]
fn text_output_gives_the_per_arm_numbers() {
    let out = sluice(&["size", "--baseline", "0.1", "--mde", "0.1"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("14,751"), "{text}");
    assert!(text.contains("29,502"), "{text}");
    assert!(
        text.contains("control") && text.contains("treatment"),
        "{text}"
    );
}

#[test]
fn same_input_gives_the_same_bytes() {
    let args = [
        "size",
        "--mean",
        "12",
        "--sd",
        "30",
        "--mde",
        "0.04",
        "--arms",
        "4",
        "--correction",
        "sidak",
        "--format",
        "json",
    ];
    assert_eq!(sluice(&args).stdout, sluice(&args).stdout);
}

/// Each bad flag: exit code 2, and the message names the flag.
#[test]
fn bad_flags_exit_2_naming_the_flag() {
    let cases: &[(&[&str], &str)] = &[
        (
            &["--baseline", "0.1", "--mde", "0.1", "--alpha", "0.7"],
            "--alpha",
        ),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--power", "1.5"],
            "--power",
        ),
        (&["--baseline", "1.5", "--mde", "0.1"], "--baseline"),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--rho", "1"],
            "--rho",
        ),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--ratio", "0"],
            "--ratio",
        ),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--arms", "1"],
            "--arms",
        ),
        (&["--baseline", "0.1", "--mde", "0"], "--mde"),
        (&["--baseline", "0.9", "--mde", "0.2"], "--mde"),
        (&["--baseline", "0.01", "--mde-abs", "-0.02"], "--mde-abs"),
        (&["--mean", "10", "--sd", "-1", "--mde", "0.1"], "--sd"),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--daily", "0"],
            "--daily",
        ),
        (
            &[
                "--baseline",
                "0.1",
                "--mde",
                "0.1",
                "--daily",
                "1000",
                "--share",
                "2",
            ],
            "--share",
        ),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--method", "fast"],
            "--method",
        ),
        (
            &["--baseline", "0.1", "--mde", "0.1", "--alpha", "often"],
            "--alpha",
        ),
        (&["--baseline", "0.1"], "--mde"),
        (&["--mde", "0.1"], "--baseline"),
    ];
    for (args, flag) in cases {
        let mut all = vec!["size"];
        all.extend_from_slice(args);
        let out = sluice(&all);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{all:?}: {err}");
        assert!(
            err.contains(flag),
            "{all:?}: message does not name {flag}: {err}"
        );
        assert!(out.stdout.is_empty(), "{all:?} printed to stdout");
    }
}

#[test]
fn a_rate_method_on_a_mean_is_refused() {
    let out = cmd(&[
        "size", "--mean", "10", "--sd", "2", "--mde", "0.1", "--method", "pooled",
    ])
    .assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("`pooled`") && err.contains("t, z"), "{err}");
}

/// The command issue 11 names prints every field of a design with looks.
#[test]
fn looks_add_the_promised_fields() {
    let v = json(&[
        "--baseline",
        "0.1",
        "--mde",
        "0.1",
        "--looks",
        "3",
        "--boundary",
        "obrien-fleming",
    ]);
    let fixed = json(&["--baseline", "0.1", "--mde", "0.1"]);
    let f = float(&v, "fixed_control_exact");
    assert!((f - float(&fixed, "control_exact")).abs() < 1e-9 * f);
    let inflation = float(&v, "inflation");
    assert!(inflation > 1.0 && inflation < 1.1, "{inflation}");
    let max = float(&v, "control_exact");
    assert!((max - f * inflation).abs() < 1e-9 * max);
    assert_eq!(int(&v, "control"), max.ceil() as u64);
    let list = |key: &str| -> Vec<f64> {
        v[key]
            .as_array()
            .unwrap_or_else(|| panic!("`{key}` is not a list"))
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let boundaries = list("boundaries");
    assert_eq!(boundaries.len(), 3);
    assert!(boundaries.windows(2).all(|w| w[0] > w[1]), "{boundaries:?}");
    let stops = list("stop_probabilities");
    assert_eq!(stops.len(), 3);
    let power: f64 = stops.iter().sum();
    assert!((power - 0.8).abs() < 1e-9, "the stops sum to {power}");
    let h1 = float(&v, "expected_control_exact_h1");
    let h0 = float(&v, "expected_control_exact_h0");
    assert!(h1 < h0 && h0 < max && h1 > f / 2.0, "{h1} {h0} {max}");
    assert_eq!(v["boundary"], "obrien-fleming");
    assert!(float(&v, "achieved_power") >= 0.8);
}

#[test]
fn one_look_is_the_fixed_test_and_bad_looks_are_refused() {
    let one = json(&["--baseline", "0.1", "--mde", "0.1", "--looks", "1"]);
    let fixed = json(&["--baseline", "0.1", "--mde", "0.1"]);
    assert_eq!(int(&one, "control"), int(&fixed, "control"));
    assert!((float(&one, "inflation") - 1.0).abs() < 1e-9);
    for looks in ["0", "11"] {
        let out = cmd(&[
            "size",
            "--baseline",
            "0.1",
            "--mde",
            "0.1",
            "--looks",
            looks,
        ])
        .assert_exit_code(2);
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("`--looks`"), "{err}");
    }
    cmd(&[
        "size",
        "--baseline",
        "0.1",
        "--mde",
        "0.1",
        "--boundary",
        "pocock",
    ])
    .assert_exit_code(2);
}

/// A guardrail: p = 0.2, a 5% relative margin (0.01 absolute), one-sided
/// 0.05, power 0.8. Blackwelder (1982): (z_.95 + z_.8)^2 x 0.16 x 2 /
/// 0.01^2 = 19784.183 per arm, with z from scipy.stats.norm.
#[test]
fn a_margin_sizes_a_one_sided_non_inferiority_test() {
    let v = json(&["--baseline", "0.2", "--margin", "0.05"]);
    assert!((float(&v, "control_exact") - 19784.18314).abs() < 1e-3);
    assert_eq!(int(&v, "control"), 19785);
    assert_eq!(v["sides"], "one");
    assert_eq!(v["method"], "unpooled");
    assert!((float(&v, "null_value") - 0.19).abs() < 1e-12);
    assert_eq!(v["margin"]["value"], 0.05);
    // The same fields as a superiority size.
    let sup = json(&["--baseline", "0.2", "--mde", "0.05"]);
    for key in sup.as_object().unwrap().keys() {
        assert!(v.get(key).is_some(), "`{key}` is missing");
    }
    // A harm upward (a negative margin) costs the same here.
    let up = json(&["--baseline", "0.2", "--margin-abs=-0.01"]);
    assert!((float(&up, "control_exact") - 19784.18314).abs() < 1e-3);
    assert!((float(&up, "null_value") - 0.21).abs() < 1e-12);
}

#[test]
fn bad_margins_are_refused_naming_the_flag() {
    let cases: &[(&[&str], &str)] = &[
        (&["--baseline", "0.1", "--margin", "0"], "--margin"),
        (
            &["--baseline", "0.1", "--margin-abs", "0.2"],
            "--margin-abs",
        ),
        (
            &["--baseline", "0.1", "--margin", "0.1", "--method", "pooled"],
            "Blackwelder",
        ),
        (
            &["--baseline", "0.1", "--margin", "0.1", "--mde", "0.1"],
            "--mde",
        ),
    ];
    for (args, needle) in cases {
        let mut all = vec!["size"];
        all.extend_from_slice(args);
        let out = cmd(&all).assert_exit_code(2);
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(needle), "{all:?}: {err}");
    }
}

fn detect(args: &[&str]) -> Value {
    let mut all = vec!["detect"];
    all.extend_from_slice(args);
    all.extend_from_slice(&["--format", "json"]);
    let out = cmd(&all).stdout();
    serde_json::from_str(&out).expect("stdout is one JSON object")
}

#[test]
fn detect_inverts_size() {
    // The default rate design needs 14,751 per arm for a 10% lift.
    let v = detect(&["--baseline", "0.1", "--n", "14751"]);
    let mde = float(&v, "mde");
    assert!(mde > 0.0999 && mde < 0.1, "{mde}");
    assert!((float(&v, "mde_abs") - 0.1 * mde).abs() < 1e-15);
    assert_eq!(float(&v, "power"), 0.8);
    assert_eq!(float(&v, "control"), 14751.0);
    let back = json(&["--baseline", "0.1", &format!("--mde={mde}")]);
    assert!(int(&back, "control").abs_diff(14751) <= 1);
    // The power for the effect `size` was asked for.
    let p = detect(&["--baseline", "0.1", "--n", "14751", "--mde", "0.1"]);
    let power = float(&p, "power");
    assert!(power > 0.8 && power < 0.8001, "{power}");
    // A fall is detectable too, and a larger one is needed on a rate below 0.5.
    let down = detect(&["--baseline", "0.1", "--n", "14751", "--decrease"]);
    assert!(float(&down, "mde") < 0.0 && -float(&down, "mde") > mde * 0.9);
}

#[test]
fn detect_with_looks_inverts_size_with_looks() {
    // `size` plans the maximum sample of a three-look Pocock design.
    let planned = json(&[
        "--baseline",
        "0.04",
        "--mde",
        "0.15",
        "--looks",
        "3",
        "--boundary",
        "pocock",
    ]);
    let n = int(&planned, "control").to_string();
    let looks = ["--looks", "3", "--boundary", "pocock"];
    let mut args = vec!["--baseline", "0.04", "--n", n.as_str()];
    args.extend(looks);
    let v = detect(&args);
    // The sample was rounded up, so a little under the planned 15%.
    let mde = float(&v, "mde");
    assert!(mde > 0.1499 && mde <= 0.15, "{mde}");
    let l = &v["looks"];
    assert_eq!(l["looks"], 3);
    assert_eq!(l["boundary"], "pocock");
    assert_eq!(float(l, "inflation"), float(&planned, "inflation"));
    // The power for the planned effect is the design's.
    args.extend(["--mde", "0.15"]);
    let p = float(&detect(&args), "power");
    assert!((p - float(&planned, "achieved_power")).abs() < 1e-9, "{p}");
    // Without looks the same sample detects a smaller effect.
    let single = detect(&["--baseline", "0.04", "--n", n.as_str()]);
    assert!(float(&single, "mde") < mde);
}

#[test]
fn detect_a_guardrail_gives_the_margin_it_rules_out_and_its_power() {
    // Blackwelder (1982): n = (z_a + z_b)^2 p (1 - p) (1 + 1/r) / m^2, so
    // with 60,000 per arm at p = 0.41 the smallest margin m is
    // (z_0.95 + z_0.8) sqrt(0.41 x 0.59 x 2 / 60,000); the z values are
    // scipy.stats.norm.ppf(0.95) and norm.ppf(0.8).
    let z = 1.6448536269514722 + 0.8416212335729143;
    let want = z * (0.41f64 * 0.59 * 2.0 / 60_000.0).sqrt();
    let v = detect(&["--baseline", "0.41", "--n", "60000", "--guardrail"]);
    let g = &v["guardrail"];
    assert_eq!(g["harm"], "fall");
    assert!((float(g, "margin_abs") - want).abs() < 1e-12, "{g}");
    assert!((float(&v, "mde_abs") + want).abs() < 1e-12);
    assert_eq!(v["sides"], "one");
    assert_eq!(v["method"], "unpooled");
    let rise = detect(&["--baseline", "0.41", "--n", "60000", "--guardrail", "rise"]);
    assert!((float(&rise["guardrail"], "margin_abs") + want).abs() < 1e-12);
    // `size --margin` plans that margin's sample; `detect --margin` on it
    // gives back the planned power.
    let m = format!("--margin={}", 0.02);
    let planned = json(&["--baseline", "0.41", &m]);
    let n = int(&planned, "control").to_string();
    let p = detect(&["--baseline", "0.41", "--n", &n, &m]);
    assert!((float(&p, "power") - float(&planned, "achieved_power")).abs() < 1e-9);
    assert!((float(&p["guardrail"], "null_value") - 0.41 * 0.98).abs() < 1e-12);
    let text = cmd(&["detect", "--baseline", "0.41", "--n", &n, &m]).stdout();
    assert!(
        text.contains("guardrail   non-inferiority, one-sided: a fall is the harm"),
        "{text}"
    );
    assert!(text.contains(" for this margin"), "{text}");
    // An effect and a margin together are refused.
    let out = cmd(&[
        "detect",
        "--baseline",
        "0.41",
        "--n",
        "6",
        "--mde",
        "0.1",
        &m,
    ])
    .assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("--margin"));
}

#[test]
fn detect_from_days_splits_the_units_over_the_arms() {
    // 8,000 a day x 50% x 28 days = 112,000 units; ratio 1.5 and 3 arms:
    // control = 112,000 / (1 + 2 x 1.5) = 28,000.
    let v = detect(&[
        "--mean", "38.5", "--sd", "61", "--daily", "8000", "--share", "0.5", "--days", "28",
        "--ratio", "1.5", "--arms", "3",
    ]);
    assert_eq!(float(&v, "control"), 28_000.0);
    assert_eq!(float(&v, "treatment"), 42_000.0);
    let n = detect(&[
        "--mean", "38.5", "--sd", "61", "--n", "28000", "--ratio", "1.5", "--arms", "3",
    ]);
    assert_eq!(float(&v, "mde_abs"), float(&n, "mde_abs"));
    let out = cmd(&["detect", "--baseline", "0.1"]).assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("--n"));
    let out = cmd(&["detect", "--baseline", "0.1", "--n", "0"]).assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("`--n`"));
}

#[test]
fn help_warns_against_reading_a_fixed_test_early() {
    for command in ["size", "detect"] {
        let help = cmd(&[command, "--help"]).stdout();
        assert!(
            help.contains("inflates false positives") && help.contains("--looks"),
            "{command} --help: {help}"
        );
    }
}
/// statsmodels 0.15.0: NormalIndPower().solve_power(effect_size=0.2,
/// alpha=0.05, power=0.8, ratio=1, alternative='two-sided') =
/// 392.4430232577885, and for effect_size=1/3000 (a 1% lift on a mean of
/// 100 with sd 3,000) 141279489.16787153. Both tails of the two-sided test
/// count, as for the t method (issue 9). statsmodels' root finder stops
/// about 6e-9 (relative) from the root (its power at 392.44302 is 2e-9 short
/// of 0.8), so the tolerance is 1e-7: well inside the 2.5e-6 that leaving
/// out the far tail adds.
#[test]
fn z_on_means_counts_both_tails_as_normal_ind_power() {
    for (sd, mde, reference) in [
        ("20", "0.04", 392.4430232577885),
        ("3000", "0.01", 141279489.16787153),
    ] {
        let v = json(&["--mean", "100", "--sd", sd, "--mde", mde, "--method", "z"]);
        let exact = float(&v, "control_exact");
        assert!(
            (exact - reference).abs() < 1e-7 * reference,
            "sd {sd}: {exact} against {reference}"
        );
        assert_eq!(int(&v, "control"), reference.ceil() as u64);
    }
}

#[test]
fn the_text_summary_prints_numbers_rounded_for_people() {
    let text = cmd(&["size", "--baseline", "0.05", "--mde", "0.07"]).stdout();
    assert!(text.contains("effect      +7% relative\n"), "{text}");
    assert!(
        text.contains("rate, baseline 5% -> treatment 5.35%"),
        "{text}"
    );
    let text = cmd(&[
        "size",
        "--mean",
        "0.3",
        "--sd",
        "0.1",
        "--mde-abs",
        "-0.07",
        "--method",
        "z",
    ])
    .stdout();
    assert!(text.contains("effect      -0.07 absolute\n"), "{text}");
    assert!(text.contains("-> treatment 0.23\n"), "{text}");
    assert!(!text.contains("00000"), "{text}");
}
