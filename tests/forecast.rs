//! `sluice forecast` and pools whose forecast is fitted from a `history`
//! file: the demo's fitted models against the levels its histories were
//! made with (demo/make_history.py), the CSV file's errors at their line
//! and column, overrides, and pools without a history.

use crate::util::{cmd, demo, repo};
use serde_json::Value;
use std::path::PathBuf;

/// A scratch folder with `portfolio.yaml` and the given history files.
fn folder(portfolio: &str, files: &[(&str, &str)]) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("portfolio.yaml");
    std::fs::write(&p, portfolio).unwrap();
    for (name, text) in files {
        std::fs::write(dir.path().join(name), text).unwrap();
    }
    (dir, p)
}

/// `days` days of history from Monday 2026-06-01: `level` x the weekday's
/// multiplier, no noise.
fn csv(days: usize, level: f64, pattern: [f64; 7]) -> String {
    let start = chrono::NaiveDate::from_ymd_opt(2026, 6, 1).unwrap();
    let mut s = String::from("date,units\n");
    for i in 0..days {
        let d = start + chrono::Duration::days(i as i64);
        s += &format!("{d},{}\n", (level * pattern[i % 7]).round());
    }
    s
}

const PATTERN: [f64; 7] = [1.1, 1.1, 1.05, 1.0, 0.95, 0.85, 0.95];

fn portfolio(pool_keys: &str) -> String {
    format!(
        "window: {{start: 2027-01-04, end: 2027-04-04}}\npools:\n  - id: web\n{pool_keys}    max_concurrent: 2\n"
    )
}

#[test]
fn the_demo_pools_are_fitted_near_the_levels_they_were_made_with() {
    let out = cmd(&["forecast", &demo(), "--format", "json"]).stdout();
    let v: Value = serde_json::from_str(&out).unwrap();
    let pools = v["pools"].as_array().unwrap();
    // (id, the level demo/make_history.py ends on, its trend per week)
    let made = [
        ("home", 60000.0, 0.002),
        ("search", 38000.0, 0.0),
        ("product", 75000.0, 0.003),
        ("basket", 9500.0, 0.0),
        ("app-onboarding", 2600.0, 0.006),
    ];
    assert_eq!(pools.len(), made.len());
    for (p, (id, level, trend)) in pools.iter().zip(made) {
        assert_eq!(p["id"], id);
        // The histories carry 4-8% daily noise and a Christmas dip in
        // the last fortnight: the level within 5%.
        let got = p["level"].as_f64().unwrap();
        assert!((got / level - 1.0).abs() < 0.05, "{id}: {got}");
        let pattern: Vec<f64> = p["weekday_pattern"]
            .as_array()
            .unwrap()
            .iter()
            .map(|m| m.as_f64().unwrap())
            .collect();
        assert_eq!(pattern.len(), 7);
        assert!((pattern.iter().sum::<f64>() / 7.0 - 1.0).abs() < 1e-9);
        // Trends were fitted only where the demo asks (`trend: true`).
        let fitted = p["trend_per_week"].as_f64().unwrap();
        if id == "product" || id == "app-onboarding" {
            assert!((fitted - trend).abs() < 0.005, "{id}: {fitted}");
        } else {
            assert_eq!(fitted, 0.0, "{id}");
        }
        for key in ["daily_cv", "level_cv", "mape"] {
            let x = p[key].as_f64().unwrap_or_else(|| panic!("{id}: {key}"));
            assert!(x > 0.0 && x < 0.2, "{id}: {key} {x}");
        }
        assert_eq!(p["history"]["days"], 217);
    }
}

#[test]
fn the_demo_forecast_as_text() {
    let out = cmd(&["forecast", &demo()]).stdout();
    insta::assert_snapshot!("demo-text", out);
}

#[test]
fn one_pool_and_pools_without_history() {
    let out = cmd(&["forecast", &demo(), "--pool", "basket"]).stdout();
    assert!(out.starts_with("basket (Basket and checkout)\n"), "{out}");
    assert!(!out.contains("home"));
    let quick = repo("portfolios/quickstart.yaml").display().to_string();
    let out = cmd(&["forecast", &quick]).stdout();
    assert!(out.contains("no history: the forecast is typed in the portfolio"));
    let v: Value =
        serde_json::from_str(&cmd(&["forecast", &quick, "--format", "json"]).stdout()).unwrap();
    assert_eq!(v["pools"][0]["history"], Value::Null);
    assert_eq!(v["pools"][0]["mape"], Value::Null);
    let out = cmd(&["forecast", &demo(), "--pool", "baskte"]).assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("`--pool` baskte is not a pool of the portfolio; defined pools, closest first: `basket`"),
        "{err}"
    );
}

#[test]
fn a_noiseless_history_gives_back_its_level_and_pattern() {
    let (_dir, p) = folder(
        &portfolio("    history: web.csv\n"),
        &[("web.csv", &csv(70, 4000.0, PATTERN))],
    );
    let v: Value =
        serde_json::from_str(&cmd(&["forecast", p.to_str().unwrap(), "--format", "json"]).stdout())
            .unwrap();
    let pool = &v["pools"][0];
    let mean = PATTERN.iter().sum::<f64>() / 7.0;
    assert!((pool["level"].as_f64().unwrap() / (4000.0 * mean) - 1.0).abs() < 1e-3);
    for (got, want) in pool["weekday_pattern"]
        .as_array()
        .unwrap()
        .iter()
        .zip(PATTERN)
    {
        assert!(
            (got.as_f64().unwrap() / (want / mean) - 1.0).abs() < 1e-3,
            "{pool}"
        );
    }
    assert!(pool["mape"].as_f64().unwrap() < 1e-3);
}

#[test]
fn daily_and_weekday_pattern_override_the_fit() {
    let (_dir, p) = folder(
        &portfolio("    history: web.csv\n    daily: 1234\n"),
        &[("web.csv", &csv(70, 4000.0, PATTERN))],
    );
    let loaded = sluice::portfolio::load(&p).unwrap();
    let f = &loaded.pools[0].forecast;
    assert_eq!(f.daily, 1234.0);
    assert_eq!(f.weekday, f.history.as_ref().unwrap().fit.weekday_pattern);
    assert!((f.weekday[5] - 0.85 / (PATTERN.iter().sum::<f64>() / 7.0)).abs() < 1e-3);
    let out = cmd(&["forecast", p.to_str().unwrap()]).stdout();
    assert!(
        out.contains("the portfolio's `daily` replace the fitted values"),
        "{out}"
    );
    let (_dir, p) = folder(
        &portfolio("    history: web.csv\n    weekday_pattern: [1, 1, 1, 1, 1, 1, 1]\n"),
        &[("web.csv", &csv(70, 4000.0, PATTERN))],
    );
    let loaded = sluice::portfolio::load(&p).unwrap();
    assert_eq!(loaded.pools[0].forecast.weekday, [1.0; 7]);
}

#[test]
fn a_trend_carries_into_the_plan_days() {
    // +1% of the level a week, noiseless: the fitted slope is about 1% a
    // week, and ten weeks on it is damped by 0.9 a week (Gardner &
    // McKenzie 1985): exp(b x 0.9 (1 - 0.9^10) / 0.1), 5.86 weeks' worth.
    let start = chrono::NaiveDate::from_ymd_opt(2026, 6, 1).unwrap();
    let mut s = String::from("date,units\n");
    let days = 84;
    for i in 0..days {
        let weeks = (i as f64 - (days - 1) as f64) / 7.0;
        s += &format!(
            "{},{}\n",
            start + chrono::Duration::days(i),
            (5000.0 * (1.0 + 0.01 * weeks)).round()
        );
    }
    let (_dir, p) = folder(
        &portfolio("    history: web.csv\n    trend: true\n"),
        &[("web.csv", &s)],
    );
    let loaded = sluice::portfolio::load(&p).unwrap();
    let pool = &loaded.pools[0];
    let end = start + chrono::Duration::days(days - 1);
    let at = |k: i64| sluice::forecast::units_on(pool, end + chrono::Duration::days(k));
    assert!((at(0) / 5000.0 - 1.0).abs() < 0.01, "{}", at(0));
    let path = pool.forecast.level_path.as_ref().unwrap();
    assert!((path.per_week - 0.01).abs() < 0.0015, "{path:?}");
    let damped = (path.per_week * 0.9 * (1.0 - 0.9f64.powi(10)) / 0.1).exp();
    assert!((at(70) / at(0) - damped).abs() < 1e-9, "{}", at(70));
    assert!(at(70) / at(0) > 1.05 && at(70) / at(0) < 1.07);
}

/// Runs `check` on the scratch portfolio; returns stderr, insisting on exit 2.
fn refused(portfolio: &str, files: &[(&str, &str)]) -> String {
    let (_dir, p) = folder(portfolio, files);
    let out = cmd(&["check", p.to_str().unwrap()]).assert_exit_code(2);
    String::from_utf8(out.stderr).unwrap()
}

#[test]
fn csv_problems_name_the_file_line_and_column() {
    let mut text = csv(35, 100.0, [1.0; 7]);
    // Line 6 (2026-06-05) repeated, line 12 (2026-06-11) dropped, a bad
    // number on the (new) line 20.
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    lines.insert(6, lines[5].clone());
    lines.remove(12);
    lines[19] = lines[19].replace(",100", ",lots");
    text = lines.join("\n");
    let err = refused(&portfolio("    history: web.csv\n"), &[("web.csv", &text)]);
    assert!(
        err.contains("error: 2026-06-05 appears twice (first on line 6)"),
        "{err}"
    );
    assert!(err.contains("web.csv:7:1"), "{err}");
    assert!(
        err.contains("a gap after 2026-06-10 (line 12): 2026-06-11 is missing"),
        "{err}"
    );
    assert!(err.contains("web.csv:13:1"), "{err}");
    assert!(err.contains("units `lots` is not a number >= 0"), "{err}");
    assert!(err.contains("web.csv:20:12"), "{err}");
    assert!(err.contains("write 0 for a day without traffic"), "{err}");
    // The caret sits under the value.
    assert!(
        err.contains("20 | 2026-06-19,lots\n   |            ^^^^"),
        "{err}"
    );
}

#[test]
fn history_problems_in_the_portfolio_point_at_the_key() {
    let err = refused(&portfolio("    history: missing.csv\n"), &[]);
    assert!(err.contains("pool `web`: cannot read the history"), "{err}");
    assert!(err.contains("portfolio.yaml:4:14"), "{err}");
    let err = refused(
        &portfolio("    history: web.csv\n"),
        &[("web.csv", &csv(20, 100.0, [1.0; 7]))],
    );
    assert!(
        err.contains("the history has 20 days; a fit needs at least 28 (four weeks)"),
        "{err}"
    );
    let err = refused(&portfolio("    daily: 100\n    trend: true\n"), &[]);
    assert!(err.contains("`trend: true` needs a `history`"), "{err}");
    assert!(err.contains("portfolio.yaml:5:12"), "{err}");
    let err = refused(&portfolio(""), &[]);
    assert!(err.contains("or a `history` file"), "{err}");
}

#[test]
fn events_outside_the_history_or_out_of_order_are_errors_at_their_key() {
    // The history runs from 2026-06-01 to 2026-07-05 (35 days).
    let files = [("web.csv", csv(35, 100.0, [1.0; 7]))];
    let files: Vec<(&str, &str)> = files.iter().map(|(n, t)| (*n, t.as_str())).collect();
    let err = refused(
        &portfolio(
            "    history: web.csv\n    events:\n      - {from: 2026-06-10, to: 2026-06-12, note: sale}\n      - {from: 2026-07-01, to: 2026-07-09, note: too late}\n",
        ),
        &files,
    );
    assert!(
        err.contains(
            "pool `web`: event `to` 2026-07-09 is outside the days given, which run from 2026-06-01 to 2026-07-05"
        ),
        "{err}"
    );
    assert!(err.contains("portfolio.yaml:7:32"), "{err}");
    let err = refused(
        &portfolio(
            "    history: web.csv\n    events:\n      - {from: 2026-06-12, to: 2026-06-10}\n",
        ),
        &files,
    );
    assert!(
        err.contains("event `to` 2026-06-10 is before its `from` 2026-06-12"),
        "{err}"
    );
    assert!(err.contains("portfolio.yaml:6:32"), "{err}");
    let err = refused(&portfolio("    daily: 100\n    events: []\n"), &[]);
    assert!(err.contains("`events` mark days of a `history`"), "{err}");
    let err = refused(
        &portfolio("    history: web.csv\n    events:\n      - {from: 2026-06-12, to: 2026-06-14, why: sale}\n"),
        &files,
    );
    assert!(err.contains("`why`"), "{err}");
}

#[test]
fn a_campaign_marked_as_an_event_stays_out_of_the_level() {
    // Ten weeks at 4,000 a day, the last ten days of them at x1.25 (a
    // campaign). Marked, the level stays 4,000; unmarked, the fit reads
    // the campaign as a shift and plans on it.
    let mut text = csv(70, 4000.0, PATTERN);
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    for line in lines.iter_mut().skip(61) {
        let (d, u) = line.split_once(',').unwrap();
        *line = format!("{d},{}", (u.parse::<f64>().unwrap() * 1.25).round());
    }
    text = lines.join("\n") + "\n";
    let level = |keys: &str| {
        let (_dir, p) = folder(&portfolio(keys), &[("web.csv", &text)]);
        let out = cmd(&["forecast", p.to_str().unwrap(), "--format", "json"]).stdout();
        let v: Value = serde_json::from_str(&out).unwrap();
        (
            v["pools"][0]["level"].as_f64().unwrap(),
            v["pools"][0]["shift"].clone(),
        )
    };
    let (marked, shift) = level(
        "    history: web.csv\n    events:\n      - {from: 2026-07-31, to: 2026-08-09, note: summer campaign}\n",
    );
    assert!((marked / 4000.0 - 1.0).abs() < 0.01, "{marked}");
    assert!(shift.is_null());
    let (unmarked, shift) = level("    history: web.csv\n");
    assert!(unmarked / 4000.0 > 1.2, "{unmarked}");
    assert_eq!(shift["date"], "2026-07-31");
}

#[test]
fn the_backtest_reports_errors_and_coverage() {
    let plain: Value =
        serde_json::from_str(&cmd(&["forecast", &demo(), "--format", "json"]).stdout()).unwrap();
    assert!(plain["pools"][0].get("backtest").is_none());
    let out = cmd(&["forecast", &demo(), "--backtest", "--format", "json"]).stdout();
    let v: Value = serde_json::from_str(&out).unwrap();
    for p in v["pools"].as_array().unwrap() {
        let b = &p["backtest"];
        // 217 days: origins every week from day 56 to day 210.
        assert_eq!(b["origins"], 23, "{p}");
        for key in ["mape_1w", "mape_4w", "mape_13w"] {
            let m = b[key].as_f64().unwrap();
            assert!(m > 0.0 && m < 0.25, "{}: {key} {m}", p["id"]);
        }
        // The spread (its level and how it widens further out) is
        // calibrated on these origins: 70-90% coverage at both horizons.
        for key in ["coverage_4w", "coverage_13w"] {
            let c = b[key].as_f64().unwrap();
            assert!((0.7..=0.9).contains(&c), "{}: {key} {c}", p["id"]);
        }
        let g = p["level_growth"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&g), "{p}");
    }
    let text = cmd(&["forecast", &demo(), "--backtest", "--pool", "home"]).stdout();
    assert!(
        text.contains("backtest         from 23 weekly origins: MAPE"),
        "{text}"
    );
    assert!(
        text.contains("the P10-P90 range held the real total"),
        "{text}"
    );
}

#[test]
fn a_trend_that_moves_the_window_by_more_than_a_tenth_is_flagged() {
    // +2% a week for 26 weeks, noiseless: damped, the trend still adds
    // well over 10% to the window's total (it starts 26 weeks later).
    let start = chrono::NaiveDate::from_ymd_opt(2026, 6, 1).unwrap();
    let mut s = String::from("date,units\n");
    for i in 0..182 {
        let u = 3000.0 * 1.02f64.powf(i as f64 / 7.0);
        s += &format!("{},{}\n", start + chrono::Duration::days(i), u.round());
    }
    let (_dir, p) = folder(
        &portfolio("    history: web.csv\n    trend: true\n"),
        &[("web.csv", &s)],
    );
    let out = cmd(&["forecast", p.to_str().unwrap()]).stdout();
    assert!(
        out.contains("warning          the trend alone moves the window's total by +"),
        "{out}"
    );
    let v: Value =
        serde_json::from_str(&cmd(&["forecast", p.to_str().unwrap(), "--format", "json"]).stdout())
            .unwrap();
    assert!(v["pools"][0]["trend_effect"].as_f64().unwrap() > 0.1);
    assert_eq!(v["pools"][0]["trend_kind"], "damped");
}
