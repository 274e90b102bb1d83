//! `sluice plan`, run as the real binary on the demo portfolios: the text
//! table, the JSON contract of the scheduler issue, byte-identical output
//! with `--no-timing`, the independent verifier on the JSON it prints, and
//! clear errors on bad input.

use crate::util::{cmd, demo, repo, sluice};
use serde_json::Value;

fn json_plan() -> (Vec<u8>, Value) {
    let out = sluice(&["plan", &demo(), "--format", "json", "--no-timing"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("valid JSON");
    (out.stdout, v)
}

fn keys(v: &Value) -> Vec<&str> {
    v.as_object()
        .expect("an object")
        .keys()
        .map(String::as_str)
        .collect()
}

/// `want` appear in `have` in this order (other keys may sit between).
fn in_order(have: &[&str], want: &[&str]) {
    let mut at = 0;
    for w in want {
        match have[at..].iter().position(|h| h == w) {
            Some(p) => at += p + 1,
            None => panic!("key `{w}` missing or out of order in {have:?}"),
        }
    }
}

#[test]
fn the_demo_prints_a_calendar_with_the_unscheduled_and_the_solver_line() {
    let out = sluice(&["plan", &demo()]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("Experiment plan: "), "{text}");
    assert!(text.contains("search-ranking-v2"), "{text}");
    assert!(text.contains("\nDoes not fit\n"), "{text}");
    // home-mega-menu needs more days than the window holds.
    assert!(
        text.contains("- home-mega-menu (Mega menu with room pictures, home): needs "),
        "{text}"
    );
    assert!(text.contains("solver `microlp`: "), "{text}");
    assert!(text.contains("greedy baseline "), "{text}");
}

#[test]
fn json_follows_the_contract() {
    let (_, v) = json_plan();
    in_order(
        &keys(&v),
        &["window", "solver", "greedy_value", "experiments", "pools"],
    );
    in_order(&keys(&v["window"]), &["start", "end"]);
    in_order(
        &keys(&v["solver"]),
        &["backend", "status", "seconds", "value", "bound", "gap"],
    );
    assert_eq!(v["solver"]["backend"], "microlp");
    assert_eq!(v["solver"]["seconds"], 0.0);
    let experiments = v["experiments"].as_array().unwrap();
    assert_eq!(experiments.len(), 37);
    for e in experiments {
        in_order(
            &keys(e),
            &[
                "id",
                "pools",
                "status",
                "start",
                "end",
                "share",
                "ramp",
                "units_needed",
                "units_expected",
                "reason",
            ],
        );
        let status = e["status"].as_str().unwrap();
        assert!(status == "scheduled" || status == "unscheduled", "{status}");
        if status == "scheduled" {
            for k in ["start", "end"] {
                let s = e[k].as_str().unwrap();
                chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").expect("an ISO 8601 date");
            }
            assert!(e["reason"].is_null());
        } else {
            assert!(e["start"].is_null());
            assert!(!e["reason"].as_str().unwrap().is_empty());
        }
    }
    let pools = v["pools"].as_array().unwrap();
    assert_eq!(pools.len(), 5);
    for p in pools {
        in_order(&keys(p), &["id", "sharing", "max_concurrent", "days"]);
        let days = p["days"].as_array().unwrap();
        // The window is 2027-01-04 to 2027-04-04: 91 days.
        assert_eq!(days.len(), 91);
        in_order(
            &keys(&days[0]),
            &["date", "forecast", "share_used", "running"],
        );
        assert_eq!(days[0]["date"], "2027-01-04");
    }
}

#[test]
fn the_same_file_gives_the_same_bytes() {
    let (a, _) = json_plan();
    let (b, _) = json_plan();
    assert_eq!(a, b);
    let t1 = sluice(&["plan", &demo(), "--no-timing"]).stdout;
    let t2 = sluice(&["plan", &demo(), "--no-timing"]).stdout;
    assert_eq!(t1, t2);
}

/// The planner bounds and searches its components (the demo has two) on
/// rayon's threads: one thread or two give the same bytes.
#[test]
fn one_thread_or_two_give_the_same_bytes() {
    let on = |threads: &str| {
        cmd(&["plan", &demo(), "--format", "json", "--no-timing"])
            .env("RAYON_NUM_THREADS", threads)
            .stdout()
    };
    let one = on("1");
    assert!(one.contains("\"status\": \"scheduled\""), "{one}");
    assert_eq!(one, on("2"));
}

#[test]
fn the_printed_plan_passes_the_independent_verifier() {
    let (bytes, _) = json_plan();
    let plan: sluice::plan::Plan = serde_json::from_slice(&bytes).unwrap();
    let portfolio = sluice::portfolio::load(&repo("portfolios/demo.yaml")).unwrap();
    let request = sluice::schedule::PlanRequest::default();
    if let Err(v) = sluice::schedule::verify(&portfolio, &request, &plan) {
        panic!("verifier: {v:#?}");
    }
    assert!(plan.solver.value > plan.greedy_value);
    assert!(plan.solver.value <= plan.solver.bound);
}

#[test]
fn the_quick_start_plans_too() {
    let out = sluice(&[
        "plan",
        &repo("portfolios/quickstart.yaml").display().to_string(),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn bad_input_gets_a_clear_error_and_exit_code_2() {
    let out = cmd(&["plan", "no/such/portfolio.yaml"]).assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("no/such/portfolio.yaml"), "{err}");

    let out = cmd(&["plan", &demo(), "--backend", "simplex-9000"]).assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("backend `simplex-9000`"), "{err}");
    assert!(err.contains("microlp"), "{err}");

    let out = cmd(&["plan", &demo(), "--time-limit", "0"]).assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("`--time-limit`"));
}

/// `plan --scale`: a what-if before the quarter (issue 12). Halving the
/// product pages from 1 February halves their forecast from that day on and
/// leaves the days before and the other pools alone.
#[test]
fn scale_is_a_what_if_on_the_forecast() {
    let plan = |extra: &[&str]| -> Value {
        let mut args = vec![
            "plan",
            "portfolios/demo.yaml",
            "--format",
            "json",
            "--no-timing",
        ];
        args.extend_from_slice(extra);
        serde_json::from_str(&cmd(&args).stdout()).unwrap()
    };
    let base = plan(&[]);
    let half = plan(&["--scale", "product=0.5@2027-02-01"]);
    let days = |v: &Value, pool: &str| -> Vec<(String, f64)> {
        let p = v["pools"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["id"] == pool)
            .unwrap();
        p["days"]
            .as_array()
            .unwrap()
            .iter()
            .map(|d| {
                (
                    d["date"].as_str().unwrap().to_string(),
                    d["forecast"].as_f64().unwrap(),
                )
            })
            .collect()
    };
    for ((date, before), (_, after)) in days(&base, "product")
        .into_iter()
        .zip(days(&half, "product"))
    {
        let want = if date.as_str() >= "2027-02-01" {
            before * 0.5
        } else {
            before
        };
        assert!(
            (after - want).abs() < 1e-6 * want.max(1.0),
            "{date}: {after} against {want}"
        );
    }
    assert_eq!(days(&base, "home"), days(&half, "home"));
    let out = cmd(&["plan", "portfolios/demo.yaml", "--scale", "nope=0.5"]).assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("`--scale`") && err.contains("`nope`"), "{err}");
}
