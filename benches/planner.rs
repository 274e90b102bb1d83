//! `cargo bench --bench planner --features bench`: plans seeded synthetic portfolios of three
//! sizes with every backend this build has, prints a table and writes it to
//! `target/bench-planner.json`.
//!
//! Each row runs in a child process (this binary again, with the row in
//! `SLUICE_BENCH_ROW`), so its peak memory (`VmHWM` of /proc/self/status)
//! is that row's alone. With the `highs` feature the benchmark also solves
//! the exact 0-1 model of small and medium portfolios to record the proven
//! optimum, and for the large ones, whose optimum is out of its reach,
//! records the bound HiGHS proves on the exact model within
//! `SLUICE_BENCH_PROOF_SECONDS` (300 by default; columns `proved` and
//! `v/proved`). Every row gives its wall seconds and the process's CPU
//! seconds over the same span (all threads; `threads` says how many rayon
//! may use, `RAYON_NUM_THREADS` sets it). Timings are measured, never
//! asserted.
//!
//! `SLUICE_BENCH_TIME_LIMIT` sets every row's time limit in seconds (25
//! by default, the scale rows the planner's default safety net), for a
//! machine so busy that the clock would cut a row short.
//!
//! `SLUICE_BENCH_SIZES` picks rows; beyond the default five, `scale`
//! (3,000 tests on 40 pools over 13 weeks, weekly grid) and `scale-daily`
//! (the same queue on the daily grid) run only when named there.
//!
//! After the plan rows come re-plan rows (`small-replan`, ...): each size is
//! planned, then re-planned from the window's middle (the first start-grid
//! day on or after it) through [`sluice::replan::replan`], the path `sluice
//! replan` takes. The progress is made up from the plan: tests it started
//! before today and ending on or after today run, with the forecast's units
//! from their start to the day before today at their share; tests it ended
//! before today finished. The pool with the most running tests loses 30% of
//! its traffic from today (a `--scale POOL=0.7` what-if), so the running
//! tests there get new ends and the rest of the queue moves. Only the
//! re-plan is timed; its peak memory is the child's high-water mark after
//! the first plan, where the kernel lets the mark be reset (else it
//! includes the first plan). Every re-plan is checked by
//! [`schedule::verify`]; a failure fails its row, and a failed row makes
//! the benchmark exit with status 1 once the table is written.
//!
//! Last, the result-range simulation at 10,000 paths x 300 tests x a
//! 91-day window is timed with every thread and with one
//! (`target/bench-ranges.json`); different ends on one thread fail it.

use chrono::{Datelike, Duration, NaiveDate};
use serde::{Deserialize, Serialize};
use sluice::forecast::units_on;
use sluice::portfolio::{Portfolio, Scale, StartGrid};
use sluice::replan::progress::{Entry, Progress, State};
use sluice::schedule::{self, synthetic, Backend, PlanRequest};
use std::process::Command;
use std::time::Instant;

#[derive(Debug, Clone, Serialize, Deserialize)]
struct Row {
    size: String,
    backend: String,
    /// Wall-clock seconds of the plan (or re-plan).
    seconds: f64,
    /// The process's CPU seconds over the same span, user and system, all
    /// threads (/proc/self/stat, in ticks of 10 ms).
    #[serde(default)]
    cpu_seconds: f64,
    /// The rayon threads the row could use.
    #[serde(default)]
    threads: usize,
    value: f64,
    bound: f64,
    optimum: Option<f64>,
    value_over_bound: f64,
    value_over_optimum: Option<f64>,
    greedy_over_bound: f64,
    peak_mb: f64,
    /// The large rows of the `highs` build: the bound HiGHS proves on the
    /// exact model in `SLUICE_BENCH_PROOF_SECONDS` (300 by default), and
    /// the plan's value over it.
    #[serde(default)]
    proved_bound: Option<f64>,
    #[serde(default)]
    value_over_proved: Option<f64>,
    /// Extra, beyond the fields: the greedy value and the status.
    greedy: f64,
    status: String,
    verified: bool,
    /// The time limit cut the search short: its plan may vary from run
    /// to run.
    #[serde(default)]
    cut_short: bool,
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
        "scale" | "scale-daily" => synthetic::Spec::scale(seed),
        _ => synthetic::Spec::large(seed),
    }
}

/// The portfolio of a row's size: `medium-keys` and `large-keys` are the
/// medium and large portfolios with every key of issue 10: tests on
/// several pools, ramps and pairs kept apart on traffic
/// (`synthetic::with_calendar_keys`), then eligibility, pool holdouts,
/// given sample sizes and composed adjustments (`synthetic::with_keys`).
/// `scale` is 3,000 tests on 40 pools over 13 weeks on the weekly grid;
/// `scale-daily` the same queue on the daily grid, runs of any length.
fn portfolio_for(size: &str) -> Portfolio {
    if size == "scale-daily" {
        let mut p = synthetic::portfolio(&spec(size));
        p.planning.grid = StartGrid::Daily;
        for e in &mut p.experiments {
            e.whole_weeks = false;
        }
        return p;
    }
    match size.strip_suffix("-keys") {
        Some(base) => {
            let spec = spec(base);
            let mut p = synthetic::with_calendar_keys(synthetic::portfolio(&spec), spec.seed);
            synthetic::with_keys(&mut p, spec.seed);
            p
        }
        None => synthetic::portfolio(&spec(size)),
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

/// The CPU seconds this process has used so far, user and system, over
/// all its threads: fields 14 and 15 of /proc/self/stat, in clock ticks
/// of 1/100 s (Linux's fixed `USER_HZ`). NaN where the file cannot be read.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    // The command name, field 2, is in parentheses and may hold spaces:
    // count from the last `)`, after which field 3 comes first.
    let fields: Vec<&str> = stat
        .rsplit_once(')')
        .map_or(Vec::new(), |(_, rest)| rest.split_whitespace().collect());
    let ticks = |field: usize| fields.get(field - 3).and_then(|f| f.parse::<f64>().ok());
    match (ticks(14), ticks(15)) {
        (Some(user), Some(system)) => (user + system) / 100.0,
        _ => f64::NAN,
    }
}

/// Wall and CPU seconds of `f`, with its result.
fn timed<T>(f: impl FnOnce() -> T) -> (T, f64, f64) {
    let (clock, cpu) = (Instant::now(), cpu_seconds());
    let out = f();
    (out, clock.elapsed().as_secs_f64(), cpu_seconds() - cpu)
}

/// A request for HiGHS, the backend that proves optima and bounds.
#[cfg(feature = "highs")]
fn highs_request() -> PlanRequest {
    PlanRequest {
        backend: Backend::Highs,
        ..PlanRequest::default()
    }
}

/// The optimum of the exact 0-1 model, proved by HiGHS.
#[cfg(feature = "highs")]
fn proven_optimum(portfolio: &sluice::portfolio::Portfolio) -> Option<f64> {
    schedule::exact_value(portfolio, &highs_request(), 300.0)
}

/// The bound HiGHS proves on the exact model of a large portfolio, where
/// the optimum is out of its reach (run in the `highs` row only: the
/// table copies it to the other backends' rows of the same portfolio).
#[cfg(feature = "highs")]
fn proved_bound(portfolio: &sluice::portfolio::Portfolio) -> Option<f64> {
    let seconds = std::env::var("SLUICE_BENCH_PROOF_SECONDS")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(300.0);
    schedule::proved_bound(portfolio, &highs_request(), seconds)
}

/// Without HiGHS nothing proves a bound here.
#[cfg(not(feature = "highs"))]
fn proved_bound(_: &sluice::portfolio::Portfolio) -> Option<f64> {
    None
}

/// Without HiGHS nothing proves an optimum here.
#[cfg(not(feature = "highs"))]
fn proven_optimum(_: &sluice::portfolio::Portfolio) -> Option<f64> {
    None
}

/// Resets the process's peak-memory mark (`VmHWM`), so a later reading
/// covers only what comes after; false where the kernel does not allow it.
fn reset_peak() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

/// The re-plan's today: the first start-grid day on or after the window's
/// middle.
fn middle_on_grid(portfolio: &Portfolio) -> NaiveDate {
    let w = portfolio.window;
    let mut day = w.date(w.days() as i64 / 2);
    if portfolio.planning.grid == StartGrid::Weekly {
        while day.weekday() != portfolio.planning.start_weekday {
            day += Duration::days(1);
        }
    }
    day
}

/// Where every test of `plan` stands on `today`, as a progress file would
/// say: running (units = the forecast from its start to the day before
/// today, times its share) or finished (ended before today). Tests the
/// plan starts on or after today, or leaves out, are not in it.
fn progress_at(portfolio: &Portfolio, plan: &sluice::plan::Plan, today: NaiveDate) -> Progress {
    let mut entries = Vec::new();
    for (i, pe) in plan.experiments.iter().enumerate() {
        let Some(sluice::plan::Run {
            start, end, share, ..
        }) = pe.run
        else {
            continue;
        };
        if start >= today {
            continue;
        }
        let state = if end < today {
            State::Finished {
                started: Some(start),
                ended: Some(end),
                share: Some(share),
                stopped_at_look: None,
                outcome: None,
                units_per_arm: None,
            }
        } else {
            // Summed over its pools; ramp days at their steps' shares,
            // counted only when the ramp counts.
            let ex = &portfolio.experiments[i];
            let mut units = 0.0;
            let mut day = start;
            while day < today {
                let n = (day - start).num_days() as u32;
                if n >= ex.ramp_days() || ex.ramp_counts {
                    let s = ex.share_on_day(n, share).fraction();
                    for &k in &ex.pools {
                        units += s * units_on(&portfolio.pools[k], day);
                    }
                }
                day += Duration::days(1);
            }
            State::Running {
                started: start,
                share,
                units: units.round() as u64,
                units_per_arm: None,
            }
        };
        entries.push(Entry {
            experiment: i,
            state,
        });
    }
    Progress {
        as_of: today,
        entries,
        traffic: Vec::new(),
        warnings: Vec::new(),
    }
}

/// The pool with the most running tests in `progress` (the first on a tie).
fn busiest_pool(portfolio: &Portfolio, progress: &Progress) -> usize {
    let mut running = vec![0usize; portfolio.pools.len()];
    for e in &progress.entries {
        if matches!(e.state, State::Running { .. }) {
            for &k in &portfolio.experiments[e.experiment].pools {
                running[k] += 1;
            }
        }
    }
    (0..running.len())
        .max_by_key(|&i| (running[i], std::cmp::Reverse(i)))
        .unwrap_or(0)
}

/// The request of a row: a 25 s time limit, except on the scale rows,
/// which keep the default safety net so that their work budgets, not the
/// clock, decide their plans (the daily one's bound alone takes about
/// 25 s).
fn request_for(size: &str, backend: &str) -> PlanRequest {
    // On a machine shared with other work the 25 s may run out before the
    // budgets do: `SLUICE_BENCH_TIME_LIMIT` sets the seconds of every row.
    let limit = std::env::var("SLUICE_BENCH_TIME_LIMIT")
        .ok()
        .and_then(|s| s.parse::<f64>().ok());
    PlanRequest {
        backend: Backend::from_name(backend).expect("a backend of this build"),
        time_limit: match limit {
            Some(seconds) => seconds,
            None if size.starts_with("scale") => schedule::DEFAULT_TIME_LIMIT,
            None => 25.0,
        },
        ..PlanRequest::default()
    }
}

/// Plans `size`, then times the re-plan from the window's middle with the
/// busiest pool at 70% of its forecast from then on.
fn run_replan_row(size: &str, backend: &str) -> Row {
    let mut portfolio = portfolio_for(size);
    let request = request_for(size, backend);
    let first = schedule::plan(&portfolio, &request);
    let today = middle_on_grid(&portfolio);
    let progress = progress_at(&portfolio, &first, today);
    let pool = busiest_pool(&portfolio, &progress);
    portfolio.pools[pool].forecast.scales.push(Scale {
        from: today,
        factor: 0.7,
    });
    let peak_reset = reset_peak();
    let ((plan, replan_request), seconds, cpu_seconds) =
        timed(|| sluice::replan::replan(&portfolio, &progress, today, &request));
    let peak = peak_mb();
    if let Err(problems) = schedule::verify(&portfolio, &replan_request, &plan) {
        panic!(
            "the {size} re-plan from {today} fails the verifier:\n{}",
            problems.join("\n")
        );
    }
    if !peak_reset {
        eprintln!("{size}-replan: the peak memory includes the first plan");
    }
    let s = &plan.solver;
    Row {
        size: format!("{size}-replan"),
        backend: s.backend.clone(),
        seconds,
        cpu_seconds,
        threads: rayon::current_num_threads(),
        value: s.value,
        bound: s.bound,
        optimum: None,
        value_over_bound: s.value / s.bound,
        value_over_optimum: None,
        greedy_over_bound: plan.greedy_value / s.bound,
        peak_mb: peak,
        proved_bound: None,
        value_over_proved: None,
        greedy: plan.greedy_value,
        status: s.status.name().to_string(),
        verified: true,
        cut_short: s.cut_short,
    }
}

fn run_row(size: &str, backend: &str) -> Row {
    if let Some(base) = size.strip_suffix("-replan") {
        return run_replan_row(base, backend);
    }
    let portfolio = portfolio_for(size);
    let request = request_for(size, backend);
    let backend = request.backend;
    let (plan, seconds, cpu_seconds) = timed(|| schedule::plan(&portfolio, &request));
    let verified = schedule::verify(&portfolio, &request, &plan).is_ok();
    let peak = peak_mb();
    // The proven optimum, from the exact model, where HiGHS is built.
    let (optimum, proved) = if size.starts_with("large") {
        let proves = backend.name() == "highs";
        (None, proves.then(|| proved_bound(&portfolio)).flatten())
    } else {
        (proven_optimum(&portfolio), None)
    };
    let s = &plan.solver;
    Row {
        size: size.to_string(),
        backend: s.backend.clone(),
        seconds,
        cpu_seconds,
        threads: rayon::current_num_threads(),
        value: s.value,
        bound: s.bound,
        optimum,
        value_over_bound: s.value / s.bound,
        value_over_optimum: optimum.map(|o| s.value / o),
        greedy_over_bound: plan.greedy_value / s.bound,
        peak_mb: peak,
        proved_bound: proved,
        value_over_proved: proved.map(|b| s.value / b),
        greedy: plan.greedy_value,
        status: s.status.name().to_string(),
        verified,
        cut_short: s.cut_short,
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
        Err(_) => vec![
            "small".into(),
            "medium".into(),
            "large".into(),
            "medium-keys".into(),
            "large-keys".into(),
        ],
    };
    // The re-plan rows follow the plan rows, so the plan rows keep their
    // places in the JSON.
    let rows_to_run: Vec<String> = sizes
        .iter()
        .cloned()
        .chain(sizes.iter().map(|s| format!("{s}-replan")))
        .collect();
    let exe = std::env::current_exe().expect("the bench binary");
    let mut rows = Vec::new();
    let mut failed = false;
    println!(
        "{:<19} {:<8} {:>7} {:>7} {:>7} {:>9} {:>9} {:>9} {:>8} {:>8} {:>8} {:>8} {:>9} {:>8}",
        "size",
        "backend",
        "threads",
        "wall s",
        "cpu s",
        "value",
        "bound",
        "optimum",
        "v/bound",
        "v/opt",
        "g/bound",
        "peak MB",
        "proved",
        "v/proved"
    );
    for size in &rows_to_run {
        let mut size_rows: Vec<Row> = Vec::new();
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
                failed = true;
                continue;
            };
            size_rows.push(serde_json::from_str(line).expect("the child prints a row"));
        }
        // The bound HiGHS proved (in the `highs` row) holds for every
        // backend's plan of the same portfolio.
        let proved = size_rows.iter().find_map(|r| r.proved_bound);
        for mut r in size_rows {
            if let Some(b) = proved {
                r.proved_bound = Some(b);
                r.value_over_proved = Some(r.value / b);
            }
            println!(
                "{:<19} {:<8} {:>7} {:>7.2} {:>7.2} {:>9.2} {:>9.2} {:>9} {:>8.3} {:>8} {:>8.3} {:>8.0} {:>9} {:>8}{}{}",
                r.size,
                r.backend,
                r.threads,
                r.seconds,
                r.cpu_seconds,
                r.value,
                r.bound,
                r.optimum.map_or("-".to_string(), |o| format!("{o:.2}")),
                r.value_over_bound,
                r.value_over_optimum
                    .map_or("-".to_string(), |o| format!("{o:.3}")),
                r.greedy_over_bound,
                r.peak_mb,
                r.proved_bound.map_or("-".to_string(), |o| format!("{o:.2}")),
                r.value_over_proved
                    .map_or("-".to_string(), |o| format!("{o:.3}")),
                if r.verified { "" } else { "  NOT VERIFIED" },
                if r.cut_short { "  CUT SHORT" } else { "" }
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
    if !ranges_row() {
        failed = true;
    }
    if failed {
        std::process::exit(1);
    }
}

/// The result-range simulation at the size: 10,000 paths x 300
/// tests x a 91-day window (paths run over twice the window, as
/// `fill_ranges` runs them), 20 pools each with a level and a day-to-day
/// error. Each test starts on one of the window's first eight Mondays at
/// a 20% share with its synthetic need. Timed with every thread and with
/// one, whose ends must be the same, byte for byte (false when not).
/// Written to `target/bench-ranges.json`.
fn ranges_row() -> bool {
    use sluice::forecast::uncertainty::{simulate, RunRule};
    use sluice::forecast::Series;
    use sluice::portfolio::Uncertainty;
    let seed = std::env::var("SLUICE_BENCH_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(SEED);
    let spec = synthetic::Spec {
        tests: 300,
        pools: 20,
        weeks: 13,
        seed,
    };
    let portfolio = synthetic::portfolio(&spec);
    let w = portfolio.window;
    let days = w.days() as i64;
    let forecasts: Vec<Series> = portfolio
        .pools
        .iter()
        .map(|p| Series::new(p, w.start, w.start + Duration::days(2 * days - 1)))
        .collect();
    let spread = vec![
        Uncertainty {
            level_cv: 0.1,
            daily_cv: 0.2,
            ..Uncertainty::default()
        };
        forecasts.len()
    ];
    let runs: Vec<RunRule> = portfolio
        .experiments
        .iter()
        .enumerate()
        .map(|(e, ex)| {
            RunRule::new(
                ex.pools[0],
                (e % 8) * 7,
                0.2,
                ex.need.total as f64,
                ex.min_days,
                ex.whole_weeks,
            )
        })
        .collect();
    let paths = 10_000;
    let (ends, seconds, cpu) = timed(|| simulate(&forecasts, &spread, &runs, paths, 1));
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("a one-thread pool");
    let (ends_one, seconds_one, cpu_one) =
        timed(|| one.install(|| simulate(&forecasts, &spread, &runs, paths, 1)));
    let same = ends == ends_one;
    let finished = ends.iter().flatten().filter(|e| e.is_some()).count() as f64
        / (ends.len() * paths as usize) as f64;
    let threads = rayon::current_num_threads();
    println!(
        "ranges: {paths} paths x {} tests x {days}-day window: {seconds:.2} s ({cpu:.2} s of CPU) on {threads} thread{}, {seconds_one:.2} s ({cpu_one:.2} s of CPU) on one; {}; {:.0}% of runs end within twice the window",
        runs.len(),
        if threads == 1 { "" } else { "s" },
        if same { "the same ends on both" } else { "ENDS DIFFER" },
        finished * 100.0
    );
    let json = serde_json::json!({
        "paths": paths,
        "tests": runs.len(),
        "window_days": days,
        "seconds": seconds,
        "cpu_seconds": cpu,
        "threads": threads,
        "seconds_one_thread": seconds_one,
        "cpu_seconds_one_thread": cpu_one,
        "same_ends_on_one_thread": same,
    });
    let target = std::env::var("CARGO_TARGET_DIR").unwrap_or_else(|_| "target".to_string());
    let path = std::path::Path::new(&target).join("bench-ranges.json");
    if let Err(e) = std::fs::write(&path, format!("{json:#}\n")) {
        eprintln!("cannot write {}: {e}", path.display());
    }
    same
}
