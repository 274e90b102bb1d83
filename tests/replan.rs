//! `sluice replan`, run as the real binary on the demo portfolio: the
//! scenario of the re-planning issue (plan at the window's start, progress
//! at day 30, one pool 30% down from day 30, re-plan against the previous
//! plan), checked against the independent verifier through the library,
//! and the edge cases: today outside the window, every test finished, a
//! pool without traffic, a test already past its need, bad progress files.

use crate::util::{cmd, demo, repo, sluice};
use chrono::NaiveDate;
use serde_json::Value;
use sluice::replan::{self, load_progress, ScaleArg};
use sluice::schedule::{self, PlanRequest};
use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::process::Output;
use std::sync::OnceLock;

/// Day 30 of the demo's window (which starts on 2027-01-04).
const DAY30: &str = "2027-02-03";

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("replan");
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

fn ok(out: &Output) -> String {
    assert!(
        out.status.success(),
        "exit {:?}: {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).unwrap()
}

fn d(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

fn date(v: &Value) -> Option<NaiveDate> {
    v.as_str().map(d)
}

/// The demo planned at the window's start, written once to a file.
fn previous() -> &'static (PathBuf, Value) {
    static PLAN: OnceLock<(PathBuf, Value)> = OnceLock::new();
    PLAN.get_or_init(|| {
        let path = scratch("plan.json");
        let out = sluice(&[
            "plan",
            &demo(),
            "--format",
            "json",
            "--no-timing",
            "--out",
            path.to_str().unwrap(),
        ]);
        ok(&out);
        let v: Value = serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
        (path, v)
    })
}

/// A progress file at `today` from a plan, as demo/progress_from_plan.py
/// writes it: tests that ended before today are finished, tests that
/// started before today are running with 90% of the units their pool's
/// forecast gave them so far.
fn progress_from(plan: &Value, today: NaiveDate) -> String {
    let mut s = format!("as_of: {today}\nexperiments:\n");
    for e in plan["experiments"].as_array().unwrap() {
        if e["status"] != "scheduled" {
            continue;
        }
        let (start, end) = (date(&e["start"]).unwrap(), date(&e["end"]).unwrap());
        if start >= today {
            continue;
        }
        let id = e["id"].as_str().unwrap();
        if end < today {
            s += &format!(
                "  - id: {id}\n    state: finished\n    started: {start}\n    ended: {end}\n"
            );
            continue;
        }
        let pool = plan["pools"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["id"] == e["pool"])
            .unwrap();
        let delivered: f64 = pool["days"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|day| (start..today).contains(&date(&day["date"]).unwrap()))
            .map(|day| day["forecast"].as_f64().unwrap())
            .sum();
        let share = e["share"].as_f64().unwrap();
        let units = (delivered * share * 0.9) as u64;
        s += &format!(
            "  - id: {id}\n    state: running\n    started: {start}\n    share: {share}\n    units: {units}\n"
        );
    }
    s
}

fn write(name: &str, text: &str) -> String {
    let path = scratch(name);
    std::fs::write(&path, text).unwrap();
    path.display().to_string()
}

/// The day-30 progress file of the scenario.
fn day30_progress() -> &'static String {
    static P: OnceLock<String> = OnceLock::new();
    P.get_or_init(|| {
        write(
            "progress-day30.yaml",
            &progress_from(&previous().1, d(DAY30)),
        )
    })
}

fn by_id<'a>(plan: &'a Value, id: &str) -> &'a Value {
    plan["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == id)
        .unwrap_or_else(|| panic!("`{id}` is in the plan"))
}

fn ids_where(plan: &Value, f: impl Fn(&Value) -> bool) -> Vec<String> {
    plan["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| f(e))
        .map(|e| e["id"].as_str().unwrap().to_string())
        .collect()
}

fn in_calendar(e: &Value) -> bool {
    e["status"] == "scheduled" || e["status"] == "running"
}

#[test]
fn the_scenario_keeps_running_tests_passes_the_verifier_and_diffs_exactly() {
    let (prev_path, old) = previous();
    let progress = day30_progress();
    let scale = format!("home=0.7@{DAY30}");
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        progress,
        "--today",
        DAY30,
        "--scale",
        &scale,
        "--previous",
        prev_path.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
    ]);
    let new: Value = serde_json::from_str(&ok(&out)).expect("valid JSON");
    assert_eq!(new["today"], DAY30);

    // Running tests keep their start and share; the others have their status.
    let text = std::fs::read_to_string(progress).unwrap();
    let prog: serde_yaml::Value = serde_yaml::from_str(&text).unwrap();
    let entries = prog["experiments"].as_sequence().unwrap();
    assert!(entries.iter().any(|e| e["state"] == "running"));
    assert!(entries.iter().any(|e| e["state"] == "finished"));
    for entry in entries {
        let id = entry["id"].as_str().unwrap();
        let e = by_id(&new, id);
        let state = entry["state"].as_str().unwrap();
        assert_eq!(e["status"], state, "{id}");
        if state == "running" {
            assert_eq!(e["start"], entry["started"].as_str().unwrap(), "{id}");
            assert_eq!(e["share"].as_f64(), entry["share"].as_f64(), "{id}");
        }
    }
    // No new test starts before today.
    for e in new["experiments"].as_array().unwrap() {
        if e["status"] == "scheduled" {
            assert!(date(&e["start"]).unwrap() >= d(DAY30), "{e}");
        }
    }

    // The home pool's forecast from day 30 on is 70% of the old one.
    let home = |plan: &Value, day: &str| -> f64 {
        let pool = &plan["pools"][0];
        assert_eq!(pool["id"], "home");
        pool["days"]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["date"] == day)
            .unwrap()["forecast"]
            .as_f64()
            .unwrap()
    };
    assert_eq!(home(&new, "2027-02-02"), home(old, "2027-02-02"));
    let ratio = home(&new, DAY30) / home(old, DAY30);
    assert!((ratio - 0.7).abs() < 1e-9, "{ratio}");

    // The diff is exactly the difference of the two plans' result dates.
    let changes = &new["changes"];
    let rows = changes["experiments"].as_array().unwrap();
    assert_eq!(rows.len(), 32);
    let mut slipped = 0;
    for row in rows {
        let id = row["id"].as_str().unwrap();
        let (o, n) = (by_id(old, id), by_id(&new, id));
        assert_eq!(row["old_result_date"], o["result_date"], "{id}");
        assert_eq!(row["new_result_date"], n["result_date"], "{id}");
        if in_calendar(o) && in_calendar(n) {
            let want =
                (date(&n["result_date"]).unwrap() - date(&o["result_date"]).unwrap()).num_days();
            assert_eq!(row["slip_days"].as_i64(), Some(want), "{id}");
            slipped += usize::from(want != 0);
        } else {
            assert!(row["slip_days"].is_null(), "{id}");
        }
    }
    assert!(slipped > 0, "a 30% drop moves something");
    let no_longer: Vec<String> = ids_where(&new, |n| {
        n["status"] == "unscheduled" && in_calendar(by_id(old, n["id"].as_str().unwrap()))
    });
    let now: Vec<String> = ids_where(&new, |n| {
        in_calendar(n) && by_id(old, n["id"].as_str().unwrap())["status"] == "unscheduled"
    });
    let list = |v: &Value| -> Vec<String> {
        v.as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap().to_string())
            .collect()
    };
    assert_eq!(list(&changes["no_longer_fit"]), no_longer);
    assert_eq!(list(&changes["now_fit"]), now);

    // The independent verifier on the same re-plan, made through the library.
    let portfolio = sluice::portfolio::load(&repo("portfolios/demo.yaml")).unwrap();
    let scales: Vec<ScaleArg> = vec![scale.parse().unwrap()];
    let portfolio = replan::with_scales(&portfolio, &scales, d(DAY30)).unwrap();
    let progress = load_progress(Path::new(progress), &portfolio, d(DAY30)).unwrap();
    let (plan, request) =
        replan::replan(&portfolio, &progress, d(DAY30), &PlanRequest::default()).unwrap();
    if let Err(problems) = schedule::verify(&portfolio, &request, &plan) {
        panic!("the verifier rejects the re-plan:\n{}", problems.join("\n"));
    }
    // ... and it is the plan the binary printed.
    let lib = serde_json::to_value(&plan.experiments).unwrap();
    assert_eq!(lib, new["experiments"]);
}

#[test]
fn the_scenario_in_text_leads_with_what_moved() {
    let (prev_path, _) = previous();
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        day30_progress(),
        "--today",
        DAY30,
        "--scale",
        &format!("home=0.7@{DAY30}"),
        "--previous",
        prev_path.to_str().unwrap(),
        "--no-timing",
    ]);
    let text = ok(&out);
    assert!(
        text.starts_with("What moved since the previous plan\n"),
        "{text}"
    );
    // Rows that moved come first, then the unchanged, then the finished.
    let row = |last: &str| {
        text.lines()
            .position(|l| l.trim_end().ends_with(last))
            .unwrap_or_else(|| panic!("no row ends with {last:?}:\n{text}"))
    };
    assert!(row(" later") < row(" unchanged"), "{text}");
    assert!(row(" unchanged") < row(" finished"), "{text}");
    // Pool totals with thousands separators and the drop in per cent.
    let home = text
        .lines()
        .find(|l| l.starts_with("pool home: "))
        .unwrap_or_else(|| panic!("{text}"));
    assert!(home.contains("units over the window (-"), "{home}");
    assert!(
        home.split(' ')
            .filter(|w| w.chars().next().is_some_and(|c| c.is_ascii_digit()))
            .all(|w| w.trim_end_matches(',').len() <= 3 || w.contains(',')),
        "{home}"
    );
    assert!(text.contains("Experiment plan: "), "{text}");
}

#[test]
fn today_before_the_window_plans_from_its_start() {
    let progress = write(
        "progress-early.yaml",
        "experiments:\n  - id: home-cookie-copy\n    state: cancelled\n    note: legal review\n",
    );
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        &progress,
        "--today",
        "2026-12-14",
        "--format",
        "json",
        "--no-timing",
    ]);
    let v: Value = serde_json::from_str(&ok(&out)).unwrap();
    assert_eq!(v["today"], "2027-01-04");
    assert_eq!(by_id(&v, "home-cookie-copy")["status"], "cancelled");
    let starts: BTreeSet<NaiveDate> = v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|e| date(&e["start"]))
        .collect();
    assert_eq!(starts.first(), Some(&d("2027-01-04")));
}

#[test]
fn today_after_the_window_is_a_clear_error() {
    let out = cmd(&[
        "replan",
        &demo(),
        "--progress",
        day30_progress(),
        "--today",
        "2027-04-05",
    ])
    .assert_exit_code(2);
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("`--today` 2027-04-05 is after the window's end 2027-04-04"),
        "{err}"
    );
    assert!(out.stdout.is_empty());
}

#[test]
fn every_test_finished_leaves_an_empty_calendar() {
    let portfolio = std::fs::read_to_string(repo("portfolios/demo.yaml")).unwrap();
    let p = sluice::portfolio::load_str(&portfolio, &demo()).unwrap();
    let mut s = String::from("experiments:\n");
    for e in &p.experiments {
        s += &format!("  - id: {}\n    state: finished\n", e.id);
    }
    let progress = write("progress-all-done.yaml", &s);
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        &progress,
        "--today",
        "2027-03-01",
        "--format",
        "json",
        "--no-timing",
    ]);
    let v: Value = serde_json::from_str(&ok(&out)).unwrap();
    for e in v["experiments"].as_array().unwrap() {
        assert_eq!(e["status"], "finished", "{e}");
    }
    for pool in v["pools"].as_array().unwrap() {
        assert!(pool["days"]
            .as_array()
            .unwrap()
            .iter()
            .all(|day| day["running"] == 0 && day["share_used"] == 0.0));
    }
    // The terminal table renders an empty calendar too.
    let text = ok(&sluice(&[
        "replan",
        &demo(),
        "--progress",
        &progress,
        "--today",
        "2027-03-01",
    ]));
    assert!(text.contains("0 of 32 tests fit"), "{text}");
}

#[test]
fn a_pool_without_traffic_schedules_nothing_new_and_advises_its_running_tests() {
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        day30_progress(),
        "--today",
        DAY30,
        "--scale",
        "product=0",
        "--format",
        "json",
        "--no-timing",
    ]);
    let v: Value = serde_json::from_str(&ok(&out)).unwrap();
    let product = ids_where(&v, |e| e["pool"] == "product");
    let mut advised = 0;
    for id in &product {
        let e = by_id(&v, id);
        assert_ne!(e["status"], "scheduled", "{id} has no traffic to run on");
        if e["status"] != "running" {
            continue;
        }
        let o = v["running"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["id"] == id.as_str())
            .unwrap();
        if o["collected"].as_u64() >= o["units_needed"].as_u64() {
            // Already past its need: it ends as it stands.
            assert_eq!(o["fits_window"], true, "{o}");
            continue;
        }
        assert_eq!(o["fits_window"], false, "{o}");
        assert!(o["end"].is_null(), "{o}");
        assert!(o["rescue_share"].is_null(), "{o}");
        let advice = o["advice"].as_str().unwrap();
        assert!(advice.contains("within ten years"), "{advice}");
        assert!(
            advice.contains("can detect a relative effect of"),
            "{advice}"
        );
        assert_eq!(e["reason"].as_str(), Some(advice));
        advised += 1;
    }
    assert!(
        advised >= 2,
        "the product pool has running tests: {product:?}"
    );
}

#[test]
fn a_test_past_its_need_ends_at_the_end_of_its_week_and_big_counts_warn() {
    // home-static-hero needs 625,218 units; 700,000 is past its need, and
    // more than the forecast could have delivered at 50% since 2027-01-18.
    let progress = write(
        "progress-past-need.yaml",
        "experiments:\n  - id: home-static-hero\n    state: running\n    started: 2027-01-18\n    share: 0.5\n    units: 700000\n",
    );
    let out = sluice(&[
        "replan",
        &demo(),
        "--progress",
        &progress,
        "--today",
        DAY30,
        "--format",
        "json",
        "--no-timing",
    ]);
    let v: Value = serde_json::from_str(&ok(&out)).unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("warning: "), "{err}");
    assert!(err.contains("more than the forecast"), "{err}");
    assert!(err.contains("progress-past-need.yaml:6"), "{err}");
    let e = by_id(&v, "home-static-hero");
    assert!(e["units_needed"].as_u64().unwrap() < 700_000);
    // Today, Wednesday 2027-02-03, is day 17 from its Monday start; whole
    // weeks (the demo's default) end it on day 21, Sunday 2027-02-07.
    assert_eq!(e["status"], "running");
    assert_eq!(e["start"], "2027-01-18");
    assert_eq!(e["end"], "2027-02-07");
    assert_eq!(e["result_date"], "2027-02-08");
}

#[test]
fn bad_progress_files_name_the_file_line_key_and_a_hint() {
    let progress = write(
        "progress-bad.yaml",
        "experiments:\n  - id: pdp-bundle\n    state: finished\n  - id: search-ranking-v2\n    state: running\n    started: 2027-02-10\n    share: 1\n    units: 10\n",
    );
    let out =
        cmd(&["replan", &demo(), "--progress", &progress, "--today", DAY30]).assert_exit_code(2);
    assert!(out.stdout.is_empty());
    let err = String::from_utf8_lossy(&out.stderr);
    for want in [
        "experiment `pdp-bundle` is not in the portfolio",
        "progress-bad.yaml:2:",
        "key: experiments[0].id",
        "hint: defined experiments, closest first: `pdp-bundles`",
        "`search-ranking-v2` is marked running but starts on 2027-02-10",
        "progress-bad.yaml:6:",
        "key: experiments[1].started",
        "hint: a running test started before today",
    ] {
        assert!(err.contains(want), "missing {want:?} in:\n{err}");
    }
}
