//! `cargo bench --bench forecast`: the traffic model's cost, measured (never
//! asserted).
//!
//! 1. **One pool, three years.** The fit of one pool from 1,092 days of
//!    invented daily history (a weekly rhythm, a yearly season, growth,
//!    noise), backtest included (every week over the last year): the
//!    median and the slowest of 21 runs.
//! 2. **Forty pools.** A portfolio of 40 pools with two tests each is
//!    loaded and planned twice: once with every pool fitted from a year of
//!    history, once with the same pools typed (`daily` and
//!    `weekday_pattern`). The difference is what the histories cost a
//!    plan: loading, fitting, backtests, and the result-range simulation
//!    the fitted spread switches on.
//!
//! 3. **A million counts.** A progress file's `counts` export of 1,000,000
//!    rows (500 tests x 2 arms x 1,000 days) parsed and summed
//!    (`replan::counts::parse`): the median of 3 runs.
//!
//! The table is printed and written to `target/bench-forecast.json`.

use chrono::{Duration, NaiveDate};
use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use sluice::forecast::fit;
use sluice::portfolio::Portfolio;
use sluice::Planner;
use std::fmt::Write;
use std::time::Instant;

/// `days` of invented daily units ending the day before `end`.
fn history(days: usize, level: f64, seed: u64) -> Vec<f64> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let week = [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96];
    (0..days)
        .map(|i| {
            let t = i as f64 / 364.0;
            let season = 1.0 + 0.15 * (2.0 * std::f64::consts::PI * t).cos();
            let growth = 1.1f64.powf(t - days as f64 / 364.0);
            let z: f64 = StandardNormal.sample(&mut rng);
            level * season * growth * week[i % 7] * (0.05 * z).exp()
        })
        .collect()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn one_pool() -> (f64, f64) {
    let start = NaiveDate::from_ymd_opt(2023, 12, 4).expect("a date");
    let units = history(1092, 20_000.0, 1);
    let mut times = Vec::new();
    for _ in 0..21 {
        let t = Instant::now();
        let f = fit::fit(start, &units, true, &[]).expect("the history fits");
        times.push(t.elapsed().as_secs_f64() * 1000.0);
        assert!(f.backtest.is_some());
    }
    let worst = times.iter().copied().fold(0.0, f64::max);
    (median(times), worst)
}

/// The forty-pool portfolio, with histories or typed, in `dir`.
fn forty_pools(dir: &std::path::Path, with_history: bool) -> std::path::PathBuf {
    let start = NaiveDate::from_ymd_opt(2026, 1, 5).expect("a date");
    let mut y =
        String::from("name: forty pools\nwindow: {start: 2027-01-04, end: 2027-04-04}\npools:\n");
    for k in 0..40 {
        if with_history {
            let units = history(364, 5_000.0 + 500.0 * k as f64, 100 + k);
            let mut csv = String::from("date,units\n");
            for (i, u) in units.iter().enumerate() {
                let _ = writeln!(csv, "{},{}", start + Duration::days(i as i64), u.round());
            }
            std::fs::write(dir.join(format!("p{k}.csv")), csv).expect("a scratch file");
            let _ = writeln!(
                y,
                "  - id: p{k}\n    history: p{k}.csv\n    trend: true\n    max_concurrent: 2"
            );
        } else {
            let _ = writeln!(
                y,
                "  - id: p{k}\n    daily: {}\n    weekday_pattern: [1.05, 1.08, 1.06, 1.02, 0.95, 0.88, 0.96]\n    max_concurrent: 2",
                5_000 + 500 * k
            );
        }
    }
    y.push_str("experiments:\n");
    for k in 0..40 {
        for (j, mde) in [(0, 0.05), (1, 0.08)] {
            let _ = writeln!(
                y,
                "  - id: t{k}-{j}\n    pool: p{k}\n    baseline: 0.04\n    mde: {mde}\n    priority: {}",
                1 + (k + j) % 5
            );
        }
    }
    let path = dir.join(if with_history {
        "history.yaml"
    } else {
        "typed.yaml"
    });
    std::fs::write(&path, y).expect("a scratch file");
    path
}

fn plan_seconds(path: &std::path::Path) -> f64 {
    let mut times = Vec::new();
    for _ in 0..3 {
        let t = Instant::now();
        let p = Portfolio::load(path).expect("the portfolio loads");
        Planner::new(&p).plan().expect("it plans");
        times.push(t.elapsed().as_secs_f64());
    }
    median(times)
}

/// Seconds to parse and sum a counts export of a million rows.
fn million_counts() -> f64 {
    let mut y = String::from(
        "window: {start: 2027-01-04, end: 2027-04-04}\npools:\n  - id: p\n    daily: 100000\n    max_concurrent: 500\n    sharing: overlap\nexperiments:\n",
    );
    for k in 0..500 {
        let _ = writeln!(
            y,
            "  - id: t{k}\n    pool: p\n    baseline: 0.05\n    mde: 0.1"
        );
    }
    let p = sluice::portfolio::load_str(&y, "counts.yaml").expect("the portfolio loads");
    let first = NaiveDate::from_ymd_opt(2024, 1, 1).expect("a date");
    let mut csv = String::with_capacity(40_000_000);
    csv.push_str("date,experiment,arm,units\n");
    for day in 0..1000 {
        let date = first + Duration::days(day);
        for k in 0..500 {
            for arm in 0..2 {
                let _ = writeln!(csv, "{date},t{k},{arm},{}", 1000 + (day + k) % 97);
            }
        }
    }
    let as_of = first + Duration::days(1000);
    let mut times = Vec::new();
    for _ in 0..3 {
        let t = Instant::now();
        let c =
            sluice::replan::counts::parse(&csv, "counts.csv", &p, as_of).expect("the counts parse");
        times.push(t.elapsed().as_secs_f64());
        assert_eq!(c.len(), 500);
    }
    median(times)
}

fn main() {
    let counts_s = million_counts();
    let (fit_ms, worst_ms) = one_pool();
    let dir = tempfile::tempdir().expect("a scratch folder");
    let history = plan_seconds(&forty_pools(dir.path(), true));
    let typed = plan_seconds(&forty_pools(dir.path(), false));
    println!("{:<44} {:>10}", "measure", "value");
    println!(
        "{:<44} {:>8.1} ms",
        "fit + backtest, 3 years, median of 21", fit_ms
    );
    println!(
        "{:<44} {:>8.1} ms",
        "fit + backtest, 3 years, slowest of 21", worst_ms
    );
    println!(
        "{:<44} {:>9.2} s",
        "40 pools from history: load + plan", history
    );
    println!("{:<44} {:>9.2} s", "40 pools typed: load + plan", typed);
    println!("{:<44} {:>9.2} s", "difference", history - typed);
    println!(
        "{:<44} {:>9.2} s",
        "counts export, 1,000,000 rows", counts_s
    );
    let json = format!(
        "{{\"fit_ms_median\":{fit_ms:.3},\"fit_ms_worst\":{worst_ms:.3},\"plan_history_s\":{history:.4},\"plan_typed_s\":{typed:.4},\"counts_1m_s\":{counts_s:.4}}}\n"
    );
    let out = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("target/bench-forecast.json");
    let _ = std::fs::write(out, json);
}
