//! `cargo bench --bench planner`: plans seeded synthetic portfolios of three
//! sizes with every backend this build has, prints a table and writes it to
//! `target/bench-planner.json`.
//!
//! Each row runs in a child process (this binary again, with the row in
//! `SLUICE_BENCH_ROW`), so its peak memory (`VmHWM` of /proc/self/status)
//! is that row's alone. With the `highs` feature the benchmark also solves
//! the exact 0-1 model of small and medium portfolios to record the proven
//! optimum. Timings are measured, never asserted.

use serde::{Deserialize, Serialize};
use sluice::schedule::{self, synthetic, Backend, PlanRequest};
use std::process::Command;
use std::time::Instant;

#[derive(Debug, Clone, Serialize, Deserialize)]
struct Row {
    size: String,
    backend: String,
    seconds: f64,
    value: f64,
    bound: f64,
    optimum: Option<f64>,
    value_over_bound: f64,
    value_over_optimum: Option<f64>,
    greedy_over_bound: f64,
    peak_mb: f64,
    /// Extra, beyond the fields: the greedy value and the status.
    greedy: f64,
    status: String,
    verified: bool,
}

/// The seed of every portfolio; `SLUICE_BENCH_SEED` picks another.
const SEED: u64 = 1;

fn spec(size: &str) -> synthetic::Spec {
    let seed = std::env::var("SLUICE_BENCH_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(SEED);
    match size {
        "small" => synthetic::Spec::small(seed),
        "medium" => synthetic::Spec::medium(seed),
        _ => synthetic::Spec::large(seed),
    }
}

fn peak_mb() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|kb| kb.parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// The optimum of the exact 0-1 model, proved by HiGHS.
#[cfg(feature = "highs")]
fn proven_optimum(portfolio: &sluice::portfolio::Portfolio) -> Option<f64> {
    let exact = PlanRequest {
        backend: Backend::Highs,
        ..PlanRequest::default()
    };
    schedule::exact_value(portfolio, &exact, 300.0)
}

/// Without HiGHS nothing proves an optimum here.
#[cfg(not(feature = "highs"))]
fn proven_optimum(_: &sluice::portfolio::Portfolio) -> Option<f64> {
    None
}

fn run_row(size: &str, backend: &str) -> Row {
    let portfolio = synthetic::portfolio(&spec(size));
    let backend = Backend::from_name(backend).expect("a backend of this build");
    let request = PlanRequest {
        backend,
        time_limit: 25.0,
        ..PlanRequest::default()
    };
    let clock = Instant::now();
    let plan = schedule::plan(&portfolio, &request);
    let seconds = clock.elapsed().as_secs_f64();
    let verified = schedule::verify(&portfolio, &request, &plan).is_ok();
    let peak = peak_mb();
    // The proven optimum, from the exact model, where HiGHS is built.
    let optimum = if size == "large" {
        None
    } else {
        proven_optimum(&portfolio)
    };
    let s = &plan.solver;
    Row {
        size: size.to_string(),
        backend: s.backend.clone(),
        seconds,
        value: s.value,
        bound: s.bound,
        optimum,
        value_over_bound: s.value / s.bound,
        value_over_optimum: optimum.map(|o| s.value / o),
        greedy_over_bound: plan.greedy_value / s.bound,
        peak_mb: peak,
        greedy: plan.greedy_value,
        status: s.status.clone(),
        verified,
    }
}

fn main() {
    if let Ok(row) = std::env::var("SLUICE_BENCH_ROW") {
        let (size, backend) = row.split_once(':').expect("size:backend");
        let r = run_row(size, backend);
        println!("{}", serde_json::to_string(&r).expect("a row serialises"));
        return;
    }
    let sizes: Vec<String> = match std::env::var("SLUICE_BENCH_SIZES") {
        Ok(s) => s.split(',').map(str::to_string).collect(),
        Err(_) => vec!["small".into(), "medium".into(), "large".into()],
    };
    let exe = std::env::current_exe().expect("the bench binary");
    let mut rows = Vec::new();
    println!(
        "{:<7} {:<8} {:>8} {:>9} {:>9} {:>9} {:>8} {:>8} {:>8} {:>8}",
        "size",
        "backend",
        "seconds",
        "value",
        "bound",
        "optimum",
        "v/bound",
        "v/opt",
        "g/bound",
        "peak MB"
    );
    for size in &sizes {
        for backend in Backend::available() {
            let out = Command::new(&exe)
                .env("SLUICE_BENCH_ROW", format!("{size}:{}", backend.name()))
                .output()
                .expect("the row's child process runs");
            let text = String::from_utf8_lossy(&out.stdout);
            let Some(line) = text.lines().last() else {
                eprintln!(
                    "row {size}/{} failed: {}",
                    backend.name(),
                    String::from_utf8_lossy(&out.stderr)
                );
                continue;
            };
            let r: Row = serde_json::from_str(line).expect("the child prints a row");
            println!(
                "{:<7} {:<8} {:>8.2} {:>9.2} {:>9.2} {:>9} {:>8.3} {:>8} {:>8.3} {:>8.0}{}",
                r.size,
                r.backend,
                r.seconds,
                r.value,
                r.bound,
                r.optimum.map_or("-".to_string(), |o| format!("{o:.2}")),
                r.value_over_bound,
                r.value_over_optimum
                    .map_or("-".to_string(), |o| format!("{o:.3}")),
                r.greedy_over_bound,
                r.peak_mb,
                if r.verified { "" } else { "  NOT VERIFIED" }
            );
            rows.push(r);
        }
    }
    let target = std::env::var("CARGO_TARGET_DIR").unwrap_or_else(|_| "target".to_string());
    let path = std::path::Path::new(&target).join("bench-planner.json");
    let json = serde_json::to_string_pretty(&rows).expect("rows serialise");
    match std::fs::write(&path, json + "\n") {
        Ok(()) => println!("wrote {}", path.display()),
        Err(e) => eprintln!("cannot write {}: {e}", path.display()),
    }
}
