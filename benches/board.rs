//! `cargo bench --bench board --features bench`: how fast the planning
//! board answers one edit with the new calendar. Each edit is checked,
//! planned, compared with the starting plan and drawn as the HTML report
//! in the JSON answer the page reads (`Base::plan` and `Base::view`, what
//! the server does per change); the median of 20 edits is printed, with
//! the plan and the answer apart, and written to
//! `target/bench-board.json`. Rows: the demo portfolio (leaving a test
//! out and keeping it in again, in turn) and a seeded synthetic portfolio
//! of 1,000 tests (a priority changed, in turn). The targets (300 ms and
//! 2 s) are printed beside the medians; timings are measured, never
//! asserted.

use serde_json::json;
use sluice::board::{Base, History};
use sluice::portfolio::Portfolio;
use sluice::scenario::RawEdit;
use sluice::schedule::{synthetic, PlanRequest};
use std::time::Instant;

const EDITS: usize = 20;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        (v[n / 2 - 1] + v[n / 2]) / 2.0
    }
}

/// Times `EDITS` edits on `portfolio`, each a step on top of the last
/// (`edits` in turn): (whole answer, plan alone) medians in seconds.
fn row(name: &str, portfolio: Portfolio, edits: &[&str], target: f64) -> serde_json::Value {
    let started = Instant::now();
    let base =
        Base::new(portfolio, name.into(), None, PlanRequest::default()).expect("the starting plan");
    let first = started.elapsed().as_secs_f64();
    let mut history = History::default();
    let (mut whole, mut plans, mut bytes) = (Vec::new(), Vec::new(), 0);
    for i in 0..EDITS {
        let raw: RawEdit = serde_json::from_str(edits[i % edits.len()]).expect("an edit");
        let t = Instant::now();
        history.edit(&base, &raw).expect("a valid edit");
        let state = history.snapshot();
        let plan = base.plan(&state.edits).expect("a plan");
        let planned = t.elapsed().as_secs_f64();
        let answer = serde_json::to_vec(&base.view(&state, &plan)).expect("JSON");
        whole.push(t.elapsed().as_secs_f64());
        plans.push(planned);
        bytes = answer.len();
    }
    let (m, p) = (median(whole), median(plans));
    println!(
        "{name:<14} tests {:>5}  first plan {first:>6.3} s  edit median {m:>6.3} s (plan {p:.3} s)  target {target} s  {}  answer {} KB",
        base.start.experiments.len(),
        if m < target { "met" } else { "MISSED" },
        bytes / 1024
    );
    json!({
        "portfolio": name,
        "tests": base.start.experiments.len(),
        "first_plan_seconds": first,
        "edit_median_seconds": m,
        "plan_median_seconds": p,
        "target_seconds": target,
        "edits": EDITS,
        "answer_bytes": bytes,
    })
}

fn main() {
    let root = env!("CARGO_MANIFEST_DIR");
    let demo = Portfolio::load(format!("{root}/portfolios/demo.yaml")).expect("the demo loads");
    let mut rows = vec![row(
        "demo",
        demo,
        &[
            r#"{"test": "home-static-hero", "leave_out": true}"#,
            r#"{"test": "home-static-hero", "leave_out": false}"#,
        ],
        0.3,
    )];
    let spec = synthetic::Spec {
        tests: 1000,
        pools: 20,
        weeks: 13,
        seed: 7,
    };
    let big = synthetic::portfolio(&spec);
    let id = big.experiments[0].id.clone();
    let up = format!(r#"{{"test": "{id}", "priority": 9}}"#);
    let down = format!(r#"{{"test": "{id}", "priority": 1}}"#);
    rows.push(row("synthetic-1000", big, &[&up, &down], 2.0));
    let out = format!("{root}/target/bench-board.json");
    let text = serde_json::to_string_pretty(&rows).expect("JSON");
    if std::fs::write(&out, text + "\n").is_ok() {
        println!("wrote {out}");
    }
}
