//! `sluice replan`, run as the real binary on the demo portfolio: the
//! scenario of the re-planning issue (plan at the window's start, progress
//! at day 30, one pool 30% down from day 30, re-plan against the previous
//! plan), checked against the independent verifier through the library,
//! and the edge cases: today outside the window, every test finished, a
//! pool without traffic, a test already past its need, bad progress files.

use crate::util::{cmd, demo, repo, scratch_path, sluice, stdout_of, write_scratch};
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
    scratch_path("replan", name)
}

fn ok(out: &Output) -> String {
    stdout_of(out)
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
/// forecast gave them so far (at their share, eligibility and holdout).
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
                "  - id: {id}\n    state: finished\n    started: {start}\n    ended: {end}\n    share: {}\n",
                e["share"]
            );
            continue;
        }
        let pool = plan["pools"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["id"] == e["pools"][0])
            .unwrap();
        let delivered: f64 = pool["days"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|day| (start..today).contains(&date(&day["date"]).unwrap()))
            .map(|day| day["forecast"].as_f64().unwrap())
            .sum();
        // Of the units under its share, what its targeting admits and what
        // an overlap pool's holdout leaves.
        let open = if pool["sharing"] == "overlap" {
            1.0 - pool["holdout"].as_f64().unwrap()
        } else {
            1.0
        };
        let entering = e["eligible"].as_f64().unwrap() * open;
        let share = e["share"].as_f64().unwrap();
        let units = (delivered * share * entering * 0.9) as u64;
        s += &format!(
            "  - id: {id}\n    state: running\n    started: {start}\n    share: {share}\n    units: {units}\n"
        );
    }
    s
}

fn write(name: &str, text: &str) -> String {
    write_scratch("replan", name, text)
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
    assert_eq!(rows.len(), 37);
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
    let (plan, request) = replan::replan(&portfolio, &progress, d(DAY30), &PlanRequest::default());
    if let Err(problems) = schedule::verify(&portfolio, &request, &plan) {
        panic!("the verifier rejects the re-plan:\n{}", problems.join("\n"));
    }
    // ... and it is the plan the binary printed.
    // Through text both ways: serde_json reads a float back to within one
    // unit in the last place, so the library's values are printed and read
    // as the binary's were.
    let lib: Value =
        serde_json::from_str(&serde_json::to_string(&plan.experiments).unwrap()).unwrap();
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

/// Before the window's start there is nothing to re-plan: an error, as for
/// `plan` (issue 9; it used to be moved silently to the window's start).
#[test]
fn today_before_the_window_is_an_error() {
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
    ]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("`--today` 2026-12-14 lies outside the window 2027-01-04 to 2027-04-04"),
        "{err}"
    );
    assert!(out.stdout.is_empty());
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
    assert!(text.contains("0 of 37 tests fit"), "{text}");
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
    let product = ids_where(&v, |e| e["pools"][0] == "product");
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

// ---------------------------------------------------------------------
// Re-planning faults (issue 9): small invented portfolios on one flat
// pool of 1,000 units a day, so every date below is plain arithmetic.

/// A flat split pool `shop` of 1,000 a day over 2027-01-04..2027-03-28 (84
/// days), no whole weeks, a one-day minimum run, the daily grid; `extra`
/// adds experiments (indented list items) and top-level keys.
fn flat_portfolio(name: &str, reshare: bool, experiments: &str, extra: &str) -> String {
    write(
        name,
        &format!(
            "name: flat\nwindow: {{start: 2027-01-04, end: 2027-03-28}}\n\
             defaults: {{min_days: 1, whole_weeks: false}}\n\
             planning: {{reshare_running: {reshare}, start_grid: daily}}\n\
             pools:\n  - {{id: shop, daily: 1000, sharing: split, max_concurrent: 4}}\n\
             experiments:\n{experiments}{extra}"
        ),
    )
}

/// The units `id` needs, from a plain plan of `portfolio`.
fn need_of(portfolio: &str, id: &str) -> u64 {
    let v: Value = serde_json::from_str(&ok(&sluice(&[
        "plan",
        portfolio,
        "--format",
        "json",
        "--no-timing",
    ])))
    .unwrap();
    by_id(&v, id)["units_needed"].as_u64().unwrap()
}

fn replan_json(portfolio: &str, progress: &str, today: &str, more: &[&str]) -> Value {
    let mut args = vec![
        "replan",
        portfolio,
        "--progress",
        progress,
        "--today",
        today,
        "--format",
        "json",
        "--no-timing",
    ];
    args.extend_from_slice(more);
    serde_json::from_str(&ok(&sluice(&args))).unwrap()
}

fn replan_text(portfolio: &str, progress: &str, today: &str, more: &[&str]) -> String {
    let mut args = vec![
        "replan",
        portfolio,
        "--progress",
        progress,
        "--today",
        today,
        "--no-timing",
    ];
    args.extend_from_slice(more);
    ok(&sluice(&args))
}

fn outlook_of<'a>(plan: &'a Value, id: &str) -> &'a Value {
    plan["running"]
        .as_array()
        .expect("a running[] list")
        .iter()
        .find(|o| o["id"] == id)
        .unwrap_or_else(|| panic!("`{id}` is in running[]"))
}

fn flags(o: &Value) -> Vec<String> {
    o["flags"]
        .as_array()
        .unwrap_or_else(|| panic!("no flags in {o}"))
        .iter()
        .map(|f| f.as_str().unwrap().to_string())
        .collect()
}

fn pool_day<'a>(plan: &'a Value, pool: &str, day: &str) -> &'a Value {
    plan["pools"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["id"] == pool)
        .unwrap()["days"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["date"] == day)
        .unwrap()
}

fn max_share_used(plan: &Value, pool: &str, from: &str) -> f64 {
    plan["pools"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["id"] == pool)
        .unwrap()["days"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|x| x["date"].as_str().unwrap() >= from)
        .map(|x| x["share_used"].as_f64().unwrap())
        .fold(0.0, f64::max)
}

const TWO: &str = "  - {id: a, pool: shop, baseline: 0.1, mde: 0.08, priority: 2}\n  - {id: b, pool: shop, baseline: 0.1, mde: 0.08}\n";

/// Two tests at 50% each from 2027-01-04, read on 2027-02-01 with 35,000
/// units still to go: 56 days at 500 a day give 28,000, too few; 75% from
/// today would finish either one alone.
fn two_halves(name: &str, reshare: bool, share_b: f64) -> (String, String) {
    let portfolio = flat_portfolio(&format!("{name}.yaml"), reshare, TWO, "");
    let need = need_of(&portfolio, "a");
    assert!(need > 35_000, "{need}");
    let units = need - 35_000;
    let progress = write(
        &format!("{name}-progress.yaml"),
        &format!(
            "experiments:\n  - {{id: a, state: running, started: 2027-01-04, share: 0.5, units: {units}}}\n  - {{id: b, state: running, started: 2027-01-04, share: {share_b}, units: {units}}}\n"
        ),
    );
    (portfolio, progress)
}

#[test]
fn resharing_never_overloads_a_pool_and_says_when_there_is_no_room() {
    // Point 1: 50% + 50% of a split pool, both short: no room to grow.
    let (portfolio, progress) = two_halves("reshare-full", true, 0.5);
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    assert!(max_share_used(&v, "shop", "2027-02-01") <= 1.0 + 1e-9);
    for id in ["a", "b"] {
        let o = outlook_of(&v, id);
        assert_eq!(o["share"].as_f64(), Some(0.5), "{o}");
        assert_eq!(by_id(&v, id)["share"].as_f64(), Some(0.5));
        let advice = o["advice"].as_str().unwrap();
        assert!(advice.contains("no room"), "{advice}");
        assert!(!advice.contains("re-shared"), "{advice}");
    }
    // 50% + 25%: the room there is (25%) goes to one of them, by priority.
    let (portfolio, progress) = two_halves("reshare-some", true, 0.25);
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    assert!(max_share_used(&v, "shop", "2027-02-01") <= 1.0 + 1e-9);
    assert_eq!(outlook_of(&v, "a")["share"].as_f64(), Some(0.75));
    assert_eq!(outlook_of(&v, "b")["share"].as_f64(), Some(0.25));
    assert!(outlook_of(&v, "a")["advice"]
        .as_str()
        .unwrap()
        .contains("re-shared from 50% to 75%"));
}

#[test]
fn the_verifier_flags_an_overload_the_replan_made_and_reports_one_the_input_had() {
    let (portfolio, progress) = two_halves("verify-reshare", true, 0.5);
    let p = sluice::portfolio::load(Path::new(&portfolio)).unwrap();
    let today = d("2027-02-01");
    let prog = load_progress(Path::new(&progress), &p, today).unwrap();
    let (plan, request) = replan::replan(&p, &prog, today, &PlanRequest::default());
    let facts = schedule::verify(&p, &request, &plan).expect("the re-plan verifies");
    assert!(facts.is_empty(), "{facts:?}");
    // Both raised to 75% from today: the re-plan made 150%, never excused.
    let mut bad = request.clone();
    for f in &mut bad.fixed {
        f.share = sluice::share::Share::from_fraction(0.75);
    }
    let plan2 = schedule::plan(&p, &bad);
    let problems = schedule::verify(&p, &bad, &plan2).unwrap_err();
    assert!(
        problems.iter().any(|m| m.contains("`shop` is shared 1.5")),
        "{problems:?}"
    );
    // Given at 75% + 50% in the progress file: a fact of the input.
    let (portfolio, progress) = two_halves("verify-input", false, 0.75);
    let p = sluice::portfolio::load(Path::new(&portfolio)).unwrap();
    let prog = load_progress(Path::new(&progress), &p, today).unwrap();
    let (plan, request) = replan::replan(&p, &prog, today, &PlanRequest::default());
    let facts = schedule::verify(&p, &request, &plan).expect("an input overload is excused");
    assert!(
        facts
            .iter()
            .any(|m| m.contains("`shop`") && m.contains("input")),
        "{facts:?}"
    );
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    for id in ["a", "b"] {
        assert!(
            flags(outlook_of(&v, id)).contains(&"input_overload".to_string()),
            "{v}"
        );
    }
}

#[test]
fn a_running_test_that_meets_a_no_running_span_is_a_decision_with_numbers() {
    // Point 2: one test at 50%, 20,000 to go from 2027-02-01: 40 days at
    // 500 a day, to 2027-03-12. A sale 2027-03-01..2027-03-07 stops all
    // running: its units never count, so excluding those days ends it 7
    // days later, on 2027-03-19; or it stops on 2027-02-28.
    let one = "  - {id: a, pool: shop, baseline: 0.1, mde: 0.08}\n";
    let sale =
        "blackouts:\n  - {from: 2027-03-01, to: 2027-03-07, kind: no_running, note: spring sale}\n";
    let plain = flat_portfolio("sale-none.yaml", false, one, "");
    let with_sale = flat_portfolio("sale.yaml", false, one, sale);
    let need = need_of(&plain, "a");
    let progress = write(
        "sale-progress.yaml",
        &format!(
            "experiments:\n  - {{id: a, state: running, started: 2027-01-04, share: 0.5, units: {}}}\n",
            need - 20_000
        ),
    );
    let v = replan_json(&plain, &progress, "2027-02-01", &[]);
    assert_eq!(outlook_of(&v, "a")["end"], "2027-03-12");
    assert!(flags(outlook_of(&v, "a")).is_empty());
    let v = replan_json(&with_sale, &progress, "2027-02-01", &[]);
    let o = outlook_of(&v, "a");
    assert_eq!(o["end"], "2027-03-19", "{o}");
    assert_eq!(by_id(&v, "a")["end"], "2027-03-19");
    assert_eq!(flags(o), vec!["crosses_no_running"]);
    let advice = o["advice"].as_str().unwrap();
    for want in [
        "2027-03-01..2027-03-07",
        "spring sale",
        "stopped on 2027-02-28",
        "can detect a relative effect of",
        "2027-03-19",
    ] {
        assert!(advice.contains(want), "{want:?} missing: {advice}");
    }
    let text = replan_text(&with_sale, &progress, "2027-02-01", &[]);
    assert!(text.contains("1 running test needs a decision"), "{text}");
}

#[test]
fn running_tests_that_cannot_finish_are_counted_apart() {
    // Point 3: the plan at the window's start, then the two tests short.
    let (portfolio, progress) = two_halves("apart", false, 0.5);
    let prev = scratch("apart-plan.json");
    ok(&sluice(&[
        "plan",
        &portfolio,
        "--format",
        "json",
        "--no-timing",
        "--out",
        prev.to_str().unwrap(),
    ]));
    let more = ["--previous", prev.to_str().unwrap()];
    let text = replan_text(&portfolio, &progress, "2027-02-01", &more);
    assert!(text.contains("2 running tests need a decision"), "{text}");
    assert!(!text.contains("2 of 2 tests fit"), "{text}");
    assert!(!text.contains("no longer fit: none"), "{text}");
    assert!(text.contains("need a decision: a, b"), "{text}");
    for line in text
        .lines()
        .filter(|l| l.starts_with("a ") || l.starts_with("b "))
    {
        assert!(!line.trim_end().ends_with("later, running"), "{line}");
    }
    let v = replan_json(&portfolio, &progress, "2027-02-01", &more);
    let rows = v["changes"]["experiments"].as_array().unwrap();
    for row in rows {
        assert_eq!(row["movement"], "needs_decision", "{row}");
    }
    assert_eq!(
        v["changes"]["needs_decision"],
        serde_json::json!(["a", "b"])
    );
}

#[test]
fn rescue_advice_for_one_pool_can_all_be_followed() {
    // Point 4: without re-sharing, each would be told 75% finishes it; both
    // cannot have it. The advice says one would have to stop, and what
    // each can detect.
    let (portfolio, progress) = two_halves("joint", false, 0.5);
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    for id in ["a", "b"] {
        let o = outlook_of(&v, id);
        assert!(o["rescue_share"].is_null(), "{o}");
        let advice = o["advice"].as_str().unwrap();
        assert!(!advice.contains("would finish it in time"), "{advice}");
        assert!(
            advice.contains("one of them would have to stop"),
            "{advice}"
        );
        assert!(
            advice.contains("can detect a relative effect of"),
            "{advice}"
        );
        let other = if id == "a" { "`b`" } else { "`a`" };
        assert!(advice.contains(other), "{advice}");
        assert_eq!(flags(o), vec!["cannot_finish"]);
    }
    // 50% + 25%: the 25% left goes to one (the higher priority), and the
    // other is told the room is taken.
    let (portfolio, progress) = two_halves("joint-some", false, 0.25);
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    assert_eq!(outlook_of(&v, "a")["rescue_share"].as_f64(), Some(0.75));
    assert!(outlook_of(&v, "b")["rescue_share"].is_null());
    assert!(outlook_of(&v, "b")["advice"]
        .as_str()
        .unwrap()
        .contains("no room"));
}

#[test]
fn reasons_name_the_real_cause_and_never_suggest_a_change_at_its_limit() {
    // Point 5: `c` (no deadline, up to 100%) is blocked only because `a`
    // and `b` hold all of `shop` past the window's end; a no-starts span
    // elsewhere in the window must not be blamed.
    let three = format!("{TWO}  - {{id: c, pool: shop, baseline: 0.1, mde: 0.2}}\n");
    let freeze = "blackouts:\n  - {from: 2027-03-01, to: 2027-03-07, kind: no_starts, note: release freeze}\n";
    let portfolio = flat_portfolio("held.yaml", false, &three, freeze);
    let progress = write(
        "held-progress.yaml",
        "experiments:\n  - {id: a, state: running, started: 2027-01-04, share: 0.5, units: 100}\n  - {id: b, state: running, started: 2027-01-04, share: 0.5, units: 100}\n",
    );
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    let reason = by_id(&v, "c")["reason"].as_str().unwrap().to_string();
    assert!(reason.contains("`a`") && reason.contains("`b`"), "{reason}");
    assert!(reason.contains("running"), "{reason}");
    for never in ["blackout", "larger share", "deadline"] {
        assert!(!reason.contains(never), "{never:?} in: {reason}");
    }
    // Blocked by a no-running span with a deadline, at 100% already: a later
    // deadline may help, a larger share cannot.
    // `d` needs about 8 days at 100%: from 2027-01-04 it meets the sale,
    // from 2027-01-11 it ends 2027-01-18, after its deadline. A later
    // deadline may help; a larger share cannot (it is at 100%).
    let one = "  - {id: d, pool: shop, baseline: 0.1, mde: 0.2, deadline: 2027-01-15}\n";
    let sale = "blackouts:\n  - {from: 2027-01-08, to: 2027-01-10, kind: no_running, note: sale}\n";
    let portfolio = flat_portfolio("blocked.yaml", false, one, sale);
    let v: Value = serde_json::from_str(&ok(&sluice(&[
        "plan",
        &portfolio,
        "--format",
        "json",
        "--no-timing",
    ])))
    .unwrap();
    let d_ = by_id(&v, "d");
    assert_eq!(d_["status"], "unscheduled", "{d_}");
    let reason = d_["reason"].as_str().unwrap();
    assert!(reason.contains("2027-01-08..2027-01-10"), "{reason}");
    assert!(reason.contains("a later deadline"), "{reason}");
    assert!(!reason.contains("share"), "{reason}");
}

#[test]
fn a_running_test_past_its_sample_is_ready_to_read_and_frees_its_pool_today() {
    // Point 6: home-static-hero needs 625,218 units; 700,000 is past its
    // need, and more than the forecast could have delivered at 50% since
    // 2027-01-18 (a warning, not a refusal). It has run 16 days, past its
    // 14-day minimum: ready to read, its last day of data yesterday.
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
    assert_eq!(e["status"], "running");
    assert_eq!(e["start"], "2027-01-18");
    assert_eq!(e["end"], "2027-02-02");
    assert_eq!(e["result_date"], DAY30);
    let o = outlook_of(&v, "home-static-hero");
    assert_eq!(flags(o), vec!["past_need"]);
    assert!(
        o["advice"].as_str().unwrap().contains("ready to read"),
        "{o}"
    );
    // Its half of `home` is free from today.
    let before = pool_day(&v, "home", "2027-02-02")["share_used"]
        .as_f64()
        .unwrap();
    let today = pool_day(&v, "home", DAY30)["share_used"].as_f64().unwrap();
    assert!(before >= 0.5, "{before}");
    let holders_today: f64 = v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|x| x["pools"][0] == "home" && in_calendar(x))
        .filter(|x| x["start"].as_str().unwrap() <= DAY30 && x["end"].as_str().unwrap() >= DAY30)
        .map(|x| x["share"].as_f64().unwrap())
        .sum();
    assert!((today - holders_today).abs() < 1e-9);
    let text = replan_text(&demo(), &progress, DAY30, &[]);
    assert!(text.contains("ready to read"), "{text}");
}

#[test]
fn units_expected_of_a_running_test_starts_from_what_it_collected() {
    // Point 7: 20,000 to go at 500 a day from 2027-02-01: 40 days, so
    // units_expected is the count so far plus 40 x 500.
    let one = "  - {id: a, pool: shop, baseline: 0.1, mde: 0.08}\n";
    let portfolio = flat_portfolio("expected.yaml", false, one, "");
    let need = need_of(&portfolio, "a");
    let units = need - 20_000;
    let progress = write(
        "expected-progress.yaml",
        &format!(
            "experiments:\n  - {{id: a, state: running, started: 2027-01-04, share: 0.5, units: {units}}}\n"
        ),
    );
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    let e = by_id(&v, "a");
    assert_eq!(e["end"], "2027-03-12");
    assert_eq!(e["units_expected"].as_f64(), Some((units + 20_000) as f64));
}

#[test]
fn a_replan_keeps_history_in_every_format() {
    // Point 8: `a` finished, `b` cancelled after a week, `c` re-shared.
    let three = format!("{TWO}  - {{id: c, pool: shop, baseline: 0.1, mde: 0.08}}\n");
    // `c` needs 40,000 more from 2027-02-01 (it has 5,000 of about 45,700):
    // 56 days at 25% give 14,000, at 75% 42,000.
    let portfolio = flat_portfolio("history.yaml", true, &three, "");
    assert!(need_of(&portfolio, "c") > 45_000);
    let progress = write(
        "history-progress.yaml",
        "experiments:\n  - {id: a, state: finished, started: 2027-01-04, ended: 2027-01-24, share: 0.25}\n  - {id: b, state: cancelled, started: 2027-01-04, ended: 2027-01-10, share: 0.25, note: broken tracking}\n  - {id: c, state: running, started: 2027-01-11, share: 0.25, units: 5000}\n",
    );
    let v = replan_json(&portfolio, &progress, "2027-02-01", &[]);
    let a = by_id(&v, "a");
    assert_eq!(a["status"], "finished");
    assert_eq!(a["ran"]["start"], "2027-01-04");
    assert_eq!(a["ran"]["end"], "2027-01-24");
    let b = by_id(&v, "b");
    assert_eq!(b["status"], "cancelled");
    assert_eq!(b["ran"]["end"], "2027-01-10");
    // The past as it ran: 25% + 25% in the first week, 25% (a) + 25% (c)
    // on 2027-01-20, and `c` at its old 25% until it was re-shared.
    assert_eq!(
        pool_day(&v, "shop", "2027-01-05")["share_used"].as_f64(),
        Some(0.5)
    );
    assert_eq!(
        pool_day(&v, "shop", "2027-01-20")["share_used"].as_f64(),
        Some(0.5)
    );
    assert_eq!(
        pool_day(&v, "shop", "2027-01-31")["share_used"].as_f64(),
        Some(0.25)
    );
    let c = outlook_of(&v, "c");
    assert!(c["share"].as_f64().unwrap() > 0.25, "{c}");
    assert_eq!(c["share_before"].as_f64(), Some(0.25));
    assert_eq!(
        pool_day(&v, "shop", "2027-02-01")["share_used"].as_f64(),
        c["share"].as_f64()
    );
    // Every other format shows the finished and the cancelled test with
    // their real dates.
    for format in ["text", "md", "csv", "html"] {
        let mut args = vec!["--format", format];
        if format == "text" {
            args.clear();
        }
        let out = replan_text(&portfolio, &progress, "2027-02-01", &args);
        for want in ["2027-01-24", "2027-01-10", "finished", "cancelled"] {
            assert!(out.contains(want), "{format}: {want:?} missing:\n{out}");
        }
    }
    // The calendar, even without `--previous`: the finished run stands
    // confirmed at its real dates, the cancelled one is cancelled.
    let ics = replan_text(&portfolio, &progress, "2027-02-01", &["--format", "ics"]);
    let events: Vec<&str> = ics.split("BEGIN:VEVENT").skip(1).collect();
    let run_of = |id: &str| {
        events
            .iter()
            .find(|e| e.contains(&format!("UID:run.{id}.")))
            .unwrap_or_else(|| panic!("no run event for `{id}`:\n{ics}"))
    };
    let a_run = run_of("a");
    assert!(a_run.contains("DTSTART;VALUE=DATE:20270104"), "{a_run}");
    assert!(a_run.contains("DTEND;VALUE=DATE:20270125"), "{a_run}");
    assert!(a_run.contains("STATUS:CONFIRMED"), "{a_run}");
    assert!(a_run.contains("SUMMARY:Test ran: a [a]"), "{a_run}");
    let b_run = run_of("b");
    assert!(b_run.contains("DTEND;VALUE=DATE:20270111"), "{b_run}");
    assert!(b_run.contains("STATUS:CANCELLED"), "{b_run}");
    assert!(b_run.contains("SUMMARY:Test cancelled: b [b]"), "{b_run}");
}

#[test]
fn running_flags_are_exactly_the_documented_codes() {
    // Point 9: every flag sluice writes is one of the four, and each is
    // documented in docs/plan-json.md.
    let doc = std::fs::read_to_string(repo("docs/plan-json.md")).unwrap();
    let codes = [
        "cannot_finish",
        "crosses_no_running",
        "past_need",
        "input_overload",
    ];
    for code in codes {
        assert!(doc.contains(&format!("`{code}`")), "{code} undocumented");
    }
    let (prev_path, _) = previous();
    let v = replan_json(
        &demo(),
        day30_progress(),
        DAY30,
        &[
            "--scale",
            "product=0",
            "--previous",
            prev_path.to_str().unwrap(),
        ],
    );
    let mut seen = BTreeSet::new();
    for o in v["running"].as_array().unwrap() {
        for f in flags(o) {
            assert!(codes.contains(&f.as_str()), "{f}");
            seen.insert(f);
        }
        let fits = o["fits_window"].as_bool().unwrap();
        assert_eq!(
            !fits,
            flags(o).contains(&"cannot_finish".to_string()),
            "{o}"
        );
    }
    assert!(seen.contains("cannot_finish"), "{seen:?}");
}

#[test]
fn running_tests_get_ranges_from_today_with_their_units_so_far() {
    let v = replan_json(&demo(), day30_progress(), DAY30, &[]);
    let today = d(DAY30);
    let mut seen = 0;
    for e in v["experiments"].as_array().unwrap() {
        if e["status"] != "running" || date(&e["end"]).unwrap() < today {
            continue;
        }
        let r = e
            .get("result_range")
            .unwrap_or_else(|| panic!("a running test on a history pool has a range: {e}"));
        let (p10, p50, p90) = (date(&r["p10"]), date(&r["p50"]), date(&r["p90"]));
        // Its data end no earlier than today: results from tomorrow on.
        assert!(p10.unwrap() > today, "{e}");
        assert!(p10 <= p50 && p50 <= p90, "{e}");
        // Around the outlook's own end: within a week of the point date.
        let due = date(&e["result_date"]).unwrap();
        assert!((p50.unwrap() - due).num_days().abs() <= 7, "{e}");
        seen += 1;
    }
    assert!(seen > 0, "the scenario has running tests");
}

/// The day-30 progress with a `traffic` entry per pool naming the demo's
/// actual traffic (demo/traffic/, made by demo/make_traffic.py).
fn day30_with_traffic() -> String {
    let mut text = std::fs::read_to_string(day30_progress()).unwrap();
    text += "traffic:\n";
    for pool in ["home", "search", "product", "basket", "app-onboarding"] {
        let csv = repo(&format!("demo/traffic/{pool}.csv"));
        text += &format!("  - pool: {pool}\n    history: {}\n", csv.display());
    }
    write("progress-day30-traffic.yaml", &text)
}

/// Units the plan forecasts for `pool` from `from` to the window's end.
fn forecast_from(plan: &Value, pool: &str, from: NaiveDate) -> f64 {
    plan["pools"]
        .as_array()
        .unwrap()
        .iter()
        .find(|p| p["id"] == pool)
        .unwrap()["days"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|d| date(&d["date"]).unwrap() >= from)
        .map(|d| d["forecast"].as_f64().unwrap())
        .sum()
}

#[test]
fn a_replan_refits_from_the_traffic_observed_and_says_how_far_it_ran_off() {
    let progress = day30_with_traffic();
    let v = replan_json(&demo(), &progress, DAY30, &[]);
    let plain = replan_json(&demo(), day30_progress(), DAY30, &[]);
    assert!(plain.get("traffic").is_none());
    let traffic = v["traffic"].as_array().unwrap();
    assert_eq!(traffic.len(), 5);
    let product = traffic.iter().find(|t| t["pool"] == "product").unwrap();
    assert_eq!(product["from"], "2027-01-04");
    assert_eq!(product["to"], "2027-02-02");
    assert_eq!(product["refit"], "history_and_traffic");
    // The scenario's product pages lost a fifth of their visitors from
    // 18 January: over the month they ran several percent short.
    let diff = product["difference"].as_f64().unwrap();
    let (units, forecast) = (
        product["units"].as_f64().unwrap(),
        product["forecast"].as_f64().unwrap(),
    );
    assert!((units / forecast - 1.0 - diff).abs() < 1e-12);
    assert!(diff < -0.03, "{product}");
    // The refit carries the drop on: the rest of the window forecasts
    // fewer product units than the portfolio's own forecast, about as
    // many fewer as the late January days ran (a fifth), not the month.
    let today = d(DAY30);
    let ratio = forecast_from(&v, "product", today) / forecast_from(&plain, "product", today);
    assert!((0.74..0.86).contains(&ratio), "{ratio}");
    // The shift is found on its day, with about its size, and the level
    // comes from the days since it; the last 14 days show the drop that
    // the month's average halves.
    assert_eq!(product["shift"]["date"], "2027-01-18", "{product}");
    let change = product["shift"]["change"].as_f64().unwrap();
    assert!((change + 0.2).abs() < 0.04, "{product}");
    assert_eq!(product["level"], "since_shift");
    let recent = product["last_14_days"].as_f64().unwrap();
    assert!(recent < -0.15 && recent < 2.0 * diff, "{product}");
    for t in traffic.iter().filter(|t| t["pool"] != "product") {
        assert!(t["shift"].is_null(), "{t}");
        assert_eq!(t["level"], "recent", "{t}");
    }
    // The app's onboarding ran above its forecast and is forecast higher.
    let app = traffic
        .iter()
        .find(|t| t["pool"] == "app-onboarding")
        .unwrap();
    assert!(app["difference"].as_f64().unwrap() > 0.05, "{app}");
    assert!(
        forecast_from(&v, "app-onboarding", today) > forecast_from(&plain, "app-onboarding", today)
    );
    let text = replan_text(&demo(), &progress, DAY30, &[]);
    // The shift is the news: it comes first.
    // Percentages as the report words them: one decimal, a trailing 0 cut.
    let pct = |x: f64| {
        let s = format!("{:.1}", x * 100.0);
        s.strip_suffix(".0").unwrap_or(&s).to_string()
    };
    let shift = format!(
        "Product pages (product): traffic fell {}% from 18 Jan and stayed there",
        pct(-change)
    );
    assert!(
        text.starts_with(&format!("Traffic shift\n- {shift}")),
        "{text}"
    );
    assert!(text.contains("Traffic so far"), "{text}");
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains(&format!(
            "{shift}; over the last 14 days it ran {}% below its forecast, and {}% below from 4 Jan to 2 Feb",
            pct(-recent),
            pct(-diff)
        )),
        "{text}"
    );
    assert!(
        flat.contains("with the level from the days since the shift."),
        "{text}"
    );
    // Markdown and HTML say it too.
    let md = replan_text(&demo(), &progress, DAY30, &["--format", "md"]);
    assert!(
        md.starts_with(&format!("## Traffic shift\n\n- {shift}")),
        "{md}"
    );
    assert!(md.contains("### Traffic so far\n\n- "), "{md}");
    assert!(
        md.contains(&format!("\n- {shift}; over the last 14 days")),
        "{md}"
    );
    let html = replan_text(&demo(), &progress, DAY30, &["--format", "html"]);
    assert!(html.contains(r#"<h2 id="traffic-shift">Traffic shift</h2>"#));
    assert!(html.contains(r#"<h2 id="traffic-so-far">Traffic so far</h2>"#));
    assert!(html.find(r#"id="traffic-shift""#).unwrap() < html.find(r#"id="summary""#).unwrap());
    assert_eq!(html.matches("its forecast is fitted again").count(), 5);
}

#[test]
fn per_arm_counts_that_miss_the_split_are_flagged_with_the_test_and_the_advice() {
    // Quickstart: bigger-photos is a 1:1 test on product pages. 27,400
    // against 24,288 is far off an even split (scipy.stats.chisquare gives
    // 1.2e-42, tests/fixtures/srm-scipy.json); 25,910 against 25,778 is
    // not (p = 0.56).
    let portfolio = repo("portfolios/quickstart.yaml").display().to_string();
    let progress = |arms: &str, name: &str| {
        write(
            name,
            &format!(
                "as_of: 2027-02-01\nexperiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units_per_arm: {arms}\n"
            ),
        )
    };
    let lopsided = progress("[27400, 24288]", "srm-lopsided.yaml");
    let v = replan_json(&portfolio, &lopsided, "2027-02-01", &[]);
    let o = outlook_of(&v, "bigger-photos");
    assert!(
        flags(o).contains(&"sample_ratio_mismatch".to_string()),
        "{o}"
    );
    let r = &o["sample_ratio"];
    assert_eq!(r["counts"], serde_json::json!([27400, 24288]));
    assert_eq!(r["expected"], serde_json::json!([25844.0, 25844.0]));
    let p = r["p_value"].as_f64().unwrap();
    assert!((p / 1.1951512164805365e-42 - 1.0).abs() < 1e-8, "{p}");
    let text = replan_text(&portfolio, &lopsided, "2027-02-01", &[]);
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.starts_with("Tests with a sample-ratio mismatch - bigger-photos: its arms have 27,400 and 24,288 units where its 1:1 split expects 25,844 and 25,844 (Pearson's chi-square, p < 0.0001)"),
        "{text}"
    );
    assert!(flat.contains(
        "Check how units are assigned and logged before trusting its result or its date."
    ));
    let md = replan_text(&portfolio, &lopsided, "2027-02-01", &["--format", "md"]);
    assert!(
        md.starts_with("## Tests with a sample-ratio mismatch\n\n- bigger-photos: its arms"),
        "{md}"
    );
    let html = replan_text(&portfolio, &lopsided, "2027-02-01", &["--format", "html"]);
    assert!(html.contains(r#"<h2 id="sample-ratio">"#));
    // Within noise: checked, not flagged, not worded.
    let even = progress("[25910, 25778]", "srm-even.yaml");
    let v = replan_json(&portfolio, &even, "2027-02-01", &[]);
    let o = outlook_of(&v, "bigger-photos");
    assert!(
        !flags(o).contains(&"sample_ratio_mismatch".to_string()),
        "{o}"
    );
    assert!(o["sample_ratio"]["p_value"].as_f64().unwrap() > 0.5);
    assert!(!replan_text(&portfolio, &even, "2027-02-01", &[]).contains("sample-ratio"));
}

#[test]
fn srm_alpha_outside_zero_to_one_is_an_error_at_its_key() {
    let portfolio = write(
        "srm-alpha.yaml",
        &std::fs::read_to_string(repo("portfolios/quickstart.yaml"))
            .unwrap()
            .replace("pools:\n", "planning:\n  srm_alpha: 1.5\npools:\n"),
    );
    let out = cmd(&["check", &portfolio]).assert_exit_code(2);
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("`srm_alpha`"), "{err}");
    assert!(err.contains("srm-alpha.yaml:8:14"), "{err}");
    assert!(err.contains("a number in (0, 1)"), "{err}");
}

#[test]
fn finished_tests_left_out_of_the_progress_file_are_named_and_strict_refuses() {
    // Day 30 of the scenario with the first finished test's entry cut out:
    // the previous plan ended it before today, and without a word it
    // would be planned again from today.
    let full = std::fs::read_to_string(day30_progress()).unwrap();
    let (prev_path, prev) = previous();
    let today = d(DAY30);
    let gone = prev["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| date(&e["end"]).is_some_and(|end| end < today))
        .unwrap()["id"]
        .as_str()
        .unwrap()
        .to_string();
    let entry = format!("  - id: {gone}\n");
    let at = full.find(&entry).unwrap();
    let next = full[at + entry.len()..]
        .find("  - id: ")
        .map_or(full.len(), |k| at + entry.len() + k);
    let cut = write(
        "progress-missing.yaml",
        &format!("{}{}", &full[..at], &full[next..]),
    );
    let prev_arg = prev_path.to_str().unwrap();
    let v = replan_json(&demo(), &cut, DAY30, &["--previous", prev_arg]);
    assert_eq!(v["missing_progress"], serde_json::json!([gone.clone()]));
    let demo = demo();
    let args = |last: &'static str| {
        [
            "replan",
            &demo,
            "--progress",
            &cut,
            "--today",
            DAY30,
            "--previous",
            prev_arg,
            last,
        ]
    };
    let out = sluice(&args("--no-timing"));
    let text = ok(&out);
    let stderr = String::from_utf8(out.stderr.clone()).unwrap();
    assert!(
        stderr.contains(&format!(
            "warning: the previous plan ended `{gone}` before today"
        )),
        "{stderr}"
    );
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains(&format!(
            "Tests the progress file leaves out - {gone}: the previous plan ended it before today"
        )),
        "{text}"
    );
    // The full file names none; --strict refuses the cut one.
    let v = replan_json(&demo, day30_progress(), DAY30, &["--previous", prev_arg]);
    assert!(v.get("missing_progress").is_none());
    let out = cmd(&args("--strict")).assert_exit_code(2);
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains(&format!("error: the previous plan ended `{gone}`")),
        "{err}"
    );
    assert!(err.contains("add it with `state: finished`"), "{err}");
}

#[test]
fn counts_from_an_export_fill_units_per_arm_and_the_start() {
    // Two weeks of daily exposures of bigger-photos (quickstart), arm 0
    // control: the re-plan sums them, and its first day is the start.
    let mut csv = String::from("date,experiment,arm,units\n");
    let start = d("2027-01-04");
    for k in 0..14 {
        let day = start + chrono::Duration::days(k);
        csv += &format!(
            "{day},bigger-photos,0,{}\n{day},bigger-photos,1,{}\n",
            2000 + k,
            2010 + k
        );
    }
    write("counts-export.csv", &csv);
    let progress = write(
        "progress-counts.yaml",
        "as_of: 2027-01-18\ncounts: counts-export.csv\nexperiments:\n  - id: bigger-photos\n    state: running\n    share: 0.5\n",
    );
    let portfolio = repo("portfolios/quickstart.yaml").display().to_string();
    let v = replan_json(&portfolio, &progress, "2027-01-18", &[]);
    let o = outlook_of(&v, "bigger-photos");
    // 14 x 2000 + (0 + ... + 13) = 28,091 control; 28,231 treatment.
    assert_eq!(o["collected"], 28_091 + 28_231, "{o}");
    assert_eq!(o["started"], "2027-01-04");
    assert_eq!(
        o["sample_ratio"]["counts"],
        serde_json::json!([28_091, 28_231])
    );
    // Given twice and differing: an error at both places.
    let clash = write(
        "progress-counts-clash.yaml",
        "as_of: 2027-01-18\ncounts: counts-export.csv\nexperiments:\n  - id: bigger-photos\n    state: running\n    share: 0.5\n    units: 50000\n",
    );
    let out = cmd(&[
        "replan",
        &portfolio,
        "--progress",
        &clash,
        "--today",
        "2027-01-18",
    ])
    .assert_exit_code(2);
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("`bigger-photos`: `units` is 50000, but `counts` adds up to [28091, 28231] (units 56322) from line 2"),
        "{err}"
    );
    assert!(err.contains("progress-counts-clash.yaml:7:12"), "{err}");
    assert!(err.contains("counts-export.csv:2:"), "{err}");
    // A bad row is an error at its line and column in the CSV.
    write(
        "counts-bad.csv",
        "date,experiment,arm,units\n2027-01-04,bigger-photos,0,10\n2027-01-04,bigger-photo,1,10\n",
    );
    let bad = write(
        "progress-counts-bad.yaml",
        "as_of: 2027-01-18\ncounts: counts-bad.csv\nexperiments:\n  - id: bigger-photos\n    state: running\n    share: 0.5\n",
    );
    let out = cmd(&[
        "replan",
        &portfolio,
        "--progress",
        &bad,
        "--today",
        "2027-01-18",
    ])
    .assert_exit_code(2);
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("experiment `bigger-photo` is not in the portfolio"),
        "{err}"
    );
    assert!(err.contains("counts-bad.csv:3:12"), "{err}");
}

/// A test with two interim looks and a ramp, beside a plain one, planned
/// on the flat pool; its plan's JSON and the path of that JSON.
fn looked_plan() -> (String, String, Value) {
    let tests = "  - {id: a, pool: shop, baseline: 0.1, mde: 0.1, looks: 3, priority: 2, ramp: [{share: 0.05, days: 7}]}\n  - {id: b, pool: shop, baseline: 0.1, mde: 0.08}\n";
    let portfolio = flat_portfolio("looked.yaml", false, tests, "");
    let out = ok(&sluice(&[
        "plan",
        &portfolio,
        "--format",
        "json",
        "--no-timing",
    ]));
    let previous = write("looked-plan.json", &out);
    (portfolio, previous, serde_json::from_str(&out).unwrap())
}

#[test]
fn a_test_stopped_at_an_interim_look_is_shown_as_it_ran() {
    // Issue 20, point 1: `a` stopped at its second look of three with a
    // better result. Its calendar keeps look 1 (held), moves look 2 to the
    // day its result came, cancels look 3, and writes its run and result
    // in the past tense at the real dates; every format says so, and its
    // ramp is drawn at the ramp's 5%, not its full share.
    let (portfolio, previous, plan) = looked_plan();
    let a = by_id(&plan, "a");
    let looks: Vec<NaiveDate> = a["looks"]["dates"]
        .as_array()
        .unwrap()
        .iter()
        .map(|l| date(&l["date"]).unwrap())
        .collect();
    assert_eq!(looks.len(), 3, "{a}");
    let start = date(&a["start"]).unwrap();
    let share = a["share"].as_f64().unwrap();
    let ended = looks[1] - chrono::Duration::days(1);
    let today = looks[1] + chrono::Duration::days(2);
    let progress = write(
        "looked-progress.yaml",
        &format!(
            "experiments:\n  - {{id: a, state: finished, started: {start}, ended: {ended}, share: {share}, stopped_at_look: 2, outcome: better, units_per_arm: [27400, 24288]}}\n"
        ),
    );
    let today = today.to_string();
    let v = replan_json(&portfolio, &progress, &today, &["--previous", &previous]);
    let ran = &by_id(&v, "a")["ran"];
    assert_eq!(ran["stopped_at_look"], 2, "{ran}");
    assert_eq!(ran["looks"], 3, "{ran}");
    assert_eq!(ran["outcome"], "better", "{ran}");
    assert_eq!(ran["sample_ratio_mismatch"], true, "{ran}");
    // The ramp's week at 5%, then its share.
    let first = pool_day(&v, "shop", &start.to_string())["share_used"]
        .as_f64()
        .unwrap();
    let after = pool_day(&v, "shop", &(start + chrono::Duration::days(7)).to_string())
        ["share_used"]
        .as_f64()
        .unwrap();
    assert!((first - 0.05).abs() < 1e-9, "{first}");
    assert!((after - share).abs() < 1e-9, "{after}");

    let ics = replan_text(
        &portfolio,
        &progress,
        &today,
        &["--previous", &previous, "--format", "ics"],
    );
    let event = |uid: &str| -> String {
        ics.split("BEGIN:VEVENT")
            .find(|e| e.contains(&format!("UID:{uid}.a.")))
            .unwrap_or_else(|| panic!("no {uid} event:\n{ics}"))
            .replace("\r\n ", "")
    };
    let ymd = |d: NaiveDate| d.format("%Y%m%d").to_string();
    let run = event("run");
    assert!(run.contains("SUMMARY:Test ran: a [a]"), "{run}");
    assert!(run.contains("STATUS:CONFIRMED"), "{run}");
    assert!(
        run.contains(&format!("DTEND;VALUE=DATE:{}", ymd(looks[1]))),
        "{run}"
    );
    assert!(run.contains("finished early at look 2 of 3"), "{run}");
    assert!(run.contains("SEQUENCE:1"), "{run}");
    let result = event("result");
    assert!(
        result.contains(&format!("DTSTART;VALUE=DATE:{}", ymd(looks[1]))),
        "{result}"
    );
    assert!(
        result.contains("SUMMARY:Result in (better than control): a [a]"),
        "{result}"
    );
    let look1 = event("look-1");
    assert!(look1.contains("STATUS:CONFIRMED"), "{look1}");
    assert!(
        look1.contains(&format!("DTSTART;VALUE=DATE:{}", ymd(looks[0]))),
        "{look1}"
    );
    let look2 = event("look-2");
    assert!(look2.contains("STATUS:CONFIRMED"), "{look2}");
    assert!(look2.contains("stopped the test"), "{look2}");
    assert!(
        look2.contains(&format!("DTSTART;VALUE=DATE:{}", ymd(looks[1]))),
        "{look2}"
    );
    // Look 3 was the final read (the result); no other look event exists.
    assert!(!ics.contains("UID:look-3.a."), "{ics}");

    // Every other format says it stopped early and what it found, and
    // raises the sample-ratio mismatch.
    for format in ["text", "md", "html"] {
        let args: Vec<&str> = if format == "text" {
            vec!["--previous", &previous]
        } else {
            vec!["--previous", &previous, "--format", format]
        };
        let out = replan_text(&portfolio, &progress, &today, &args);
        let flat = out.split_whitespace().collect::<Vec<_>>().join(" ");
        assert!(
            flat.contains("finished early at look 2 of 3: better than control")
                || flat.contains("look 2, better"),
            "{format}:\n{out}"
        );
        assert!(flat.contains("sample-ratio mismatch"), "{format}:\n{out}");
        if format == "html" {
            // Its past run is drawn as a bar, its ramp washed out on it.
            let past = out
                .split("<g class=\"past-bar\">")
                .nth(1)
                .expect("a past bar");
            let past = past.split("</g>").next().unwrap();
            assert!(past.contains("class=\"ramp\""), "{past}");
        }
    }
}

#[test]
fn a_stop_or_an_outcome_that_cannot_be_is_an_error_at_its_key() {
    let (portfolio, _, _) = looked_plan();
    for (entry, key, words) in [
        (
            "{id: a, state: running, started: 2027-01-04, share: 0.5, units: 10, stopped_at_look: 1}",
            "experiments[0].stopped_at_look",
            "is for a finished test",
        ),
        (
            "{id: a, state: finished, started: 2027-01-04, stopped_at_look: 3}",
            "experiments[0].stopped_at_look",
            "its interim looks are 1 to 2",
        ),
        (
            "{id: b, state: finished, started: 2027-01-04, stopped_at_look: 1}",
            "experiments[0].stopped_at_look",
            "has no interim looks",
        ),
        (
            "{id: a, state: finished, started: 2027-01-04, outcome: beter}",
            "experiments[0].outcome",
            "did you mean `better`?",
        ),
    ] {
        let progress = write(
            "bad-stop-progress.yaml",
            &format!("experiments:\n  - {entry}\n"),
        );
        let out = sluice(&[
            "replan",
            &portfolio,
            "--progress",
            &progress,
            "--today",
            "2027-02-01",
        ]);
        assert_eq!(out.status.code(), Some(2), "{entry}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(key), "{entry}: {err}");
        assert!(err.contains(words), "{entry}: {err}");
        assert!(err.contains("bad-stop-progress.yaml:2:"), "{entry}: {err}");
    }
}
