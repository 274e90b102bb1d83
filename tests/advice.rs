//! Advice a planner can follow: `check` and `plan` agree on a test's days
//! (its first start day, `planning.confidence`), a reason names the real
//! cause, every "could detect" run is one the plan's rules allow, and
//! interim looks that a run is too short to hold are said, not promised.
//!
//! The portfolios here are invented for the checks: one pool, two tests.

use crate::util::{cmd, demo, scratch_file};
use chrono::{Datelike, NaiveDate, Weekday};
use serde_json::Value;
use std::path::Path;

/// One busy pool: `quick` needs two weeks at any share, so its three looks
/// all fall on its result day; `steady` runs long enough for its two.
const LOOKS: &str = "\
name: Looks that cannot fire
window: {start: 2027-01-04, end: 2027-04-04}
defaults: {min_days: 14, whole_weeks: true}
planning: {start_grid: weekly, start_weekday: monday}
pools:
  - id: web
    daily: 40000
    sharing: split
    max_concurrent: 2
experiments:
  - id: quick
    pool: web
    baseline: 0.05
    mde: 0.1
    looks: 3
    boundary: obrien-fleming
  - id: steady
    pool: web
    baseline: 0.05
    mde: 0.03
    looks: 2
    boundary: pocock
";

/// A window that opens on a Wednesday with Monday starts, planned at 80%
/// confidence on an uncertain pool: `big` fills it for three weeks, and
/// `small` (MDE `mde`, then `more` keys) wants the rest.
fn margin(mde: f64, planning: &str, more: &str) -> String {
    format!(
        "\
name: Margin
window: {{start: 2027-01-06, end: 2027-04-04}}
defaults: {{min_days: 14, whole_weeks: true}}
planning: {{start_grid: weekly, start_weekday: monday{planning}}}
pools:
  - id: web
    daily: 4000
    sharing: split
    max_concurrent: 2
    uncertainty: {{level_cv: 0.25, daily_cv: 0.3}}
experiments:
  - id: big
    pool: web
    baseline: 0.05
    mde: 0.1
    priority: 5
  - id: small
    pool: web
    baseline: 0.05
    mde: {mde}
    priority: 1
{more}"
    )
}

const AT_80: &str = ", confidence: 0.8";

fn run(args: &[&str]) -> (String, String) {
    let out = cmd(args).assert_exit_code(0);
    (
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

fn json(args: &[&str]) -> Value {
    serde_json::from_str(&run(args).0).expect("valid JSON")
}

fn plan(path: &Path, format: &str) -> (String, String) {
    run(&[
        "plan",
        path.to_str().unwrap(),
        "--format",
        format,
        "--no-timing",
    ])
}

fn plan_json(path: &Path) -> Value {
    serde_json::from_str(&plan(path, "json").0).expect("valid JSON")
}

fn check_json(path: &Path) -> Value {
    json(&["check", path.to_str().unwrap(), "--format", "json"])
}

fn by_id<'a>(v: &'a Value, id: &str) -> &'a Value {
    v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == id)
        .unwrap_or_else(|| panic!("{id} is listed"))
}

fn date(v: &Value) -> NaiveDate {
    v.as_str().expect("a date").parse().expect("ISO date")
}

#[test]
fn looks_with_no_day_of_their_own_are_said_and_not_promised() {
    let (_dir, path) = scratch_file("looks.yaml", LOOKS);
    let v = plan_json(&path);
    let quick = &by_id(&v, "quick")["looks"];
    assert_eq!(quick["idle"], serde_json::json!([1, 2]), "{quick}");
    let added = quick["added_sample"].as_f64().unwrap();
    assert!(added > 0.0 && added < 0.1, "{added}");
    let steady = &by_id(&v, "steady")["looks"];
    assert!(steady.get("idle").is_none(), "{steady}");
    assert!(steady.get("added_sample").is_none(), "{steady}");

    // Every format warns on stderr; the text leads with it and no longer
    // promises an early stop.
    let (text, err) = plan(&path, "text");
    let warning =
        "quick: 2 of its 2 interim looks fall on the day of a later look or of its result";
    assert!(err.contains(&format!("warning: {warning}")), "{err}");
    assert!(text.starts_with("Interim looks that cannot stop a test early\n"));
    assert!(text.contains("its run holds only its final read, so it cannot stop early"));
    assert!(
        text.contains("plan it with a single read") || text.contains("Plan it with a single read")
    );
    assert!(text.contains("none of its interim looks has a day of its own before the result"));
    assert!(
        text.contains("its interim look may stop it early"),
        "steady's still may"
    );
    let (_, err) = plan(&path, "csv");
    assert!(err.contains(warning), "{err}");

    // The calendar file holds no interim event for it, and the page no tick.
    let (ics, _) = plan(&path, "ics");
    assert!(!ics.contains("may stop early: quick [quick]"), "{ics}");
    assert!(ics.contains("SUMMARY:Interim look 1 of 2\\, may stop early: steady [steady]"));
    let (html, _) = plan(&path, "html");
    assert!(!html.contains("interim look 1 of 3"));
    assert!(html.contains("interim look 1 of 2 on"));
    assert!(html.contains("Interim looks that cannot stop a test early"));
    // Only `steady` counts among the tests that may stop early.
    assert!(
        html.contains(r#"<span class="big">1</span><span class="small">test with interim looks that may stop early"#),
        "the summary tile counts only looks that can fire"
    );

    // `check` says it of the test's solo run too.
    let c = check_json(&path);
    assert_eq!(
        by_id(&c, "quick")["looks"]["idle"],
        serde_json::json!([1, 2])
    );
    assert!(by_id(&c, "steady")["looks"]["dates"].is_array());
    let (text, _) = run(&["check", path.to_str().unwrap()]);
    assert!(text.contains("Interim looks that cannot stop a test early, even alone:"));
    assert!(text.contains("`quick`: 2 of its 2 interim looks"), "{text}");
    assert!(!text.contains("`steady`: "), "{text}");
}

#[test]
fn check_sizes_each_test_at_the_confidence_the_plan_plans_to() {
    // On the expected forecast `small` fits alone; at 80% confidence it
    // asks for more units than the window holds, and the plan drops it.
    let (_a, sure) = scratch_file("sure.yaml", &margin(0.045, AT_80, ""));
    let (_b, plain) = scratch_file("plain.yaml", &margin(0.045, "", ""));
    assert_eq!(by_id(&plan_json(&sure), "small")["status"], "unscheduled");
    let at = by_id(&check_json(&sure), "small").clone();
    assert_eq!(at["fits_alone"], false, "{at}");
    let reason = at["reason"].as_str().unwrap();
    assert!(
        reason.contains("(planned at 80% confidence as 384,040 units)"),
        "{reason}"
    );
    assert_eq!(check_json(&sure)["confidence"], 0.8);
    let plain = by_id(&check_json(&plain), "small").clone();
    assert_eq!(plain["fits_alone"], true, "{plain}");
    // The units reported are the test's own need either way.
    assert_eq!(at["total_units"], plain["total_units"]);
    let (text, _) = run(&["check", sure.to_str().unwrap()]);
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        flat.contains("At 80% confidence, as the plan is made"),
        "{text}"
    );
}

#[test]
fn check_counts_days_from_the_first_start_day_in_text_and_json() {
    // The window opens on Wednesday 6 January; the first Monday is the 11th.
    let (_dir, path) = scratch_file("p.yaml", &margin(0.05, AT_80, ""));
    let v = check_json(&path);
    assert_eq!(v["first_start"], "2027-01-11");
    let big = by_id(&v, "big");
    assert_eq!(big["solo_start"], "2027-01-11");
    let days = big["days_from_first_start"].as_u64().unwrap();
    let end = date(&big["end_from_first_start"]);
    assert_eq!(
        (end - date(&v["first_start"])).num_days() + 1,
        days as i64,
        "{big}"
    );
    assert_eq!(big["solo_end"], big["end_from_first_start"]);
    // On the demo too: a test that fits alone counts its own solo run,
    // never days before its first start (some start weeks in).
    let demo = json(&["check", &demo(), "--format", "json"]);
    for e in demo["experiments"].as_array().unwrap() {
        if e["fits_alone"] == true {
            assert_eq!(e["solo_end"], e["end_from_first_start"], "{e}");
            let days = (date(&e["solo_end"]) - date(&e["solo_start"])).num_days() + 1;
            assert_eq!(e["days_from_first_start"], days, "{e}");
        }
    }
    let (text, _) = run(&["check", path.to_str().unwrap()]);
    let flat = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(flat
        .contains("Each test's days count from its first start day (the window's is 2027-01-11)."));
    assert!(text.contains(&format!("{days} (to {end})")), "{text}");
}

#[test]
fn a_test_left_out_by_the_confidence_margin_is_told_so() {
    let (_dir, path) = scratch_file("p.yaml", &margin(0.05, AT_80, ""));
    let small = by_id(&plan_json(&path), "small").clone();
    assert_eq!(small["status"], "unscheduled");
    let reason = small["reason"].as_str().unwrap();
    assert!(
        reason.starts_with("the room the plan leaves holds it on the expected forecast (100% from 2027-02-01 to 2027-04-04"),
        "{reason}"
    );
    assert!(
        reason.contains("but not with the margin for 80% confidence, which plans it as "),
        "{reason}"
    );
    assert!(!reason.contains("is full"), "{reason}");
    // What it could detect is counted on the same 80% of traffic paths, so
    // it is worse than the MDE planned, never better.
    let d = &small["detectable"];
    assert_eq!(d["confidence"], 0.8, "{d}");
    assert!(d["mde"].as_f64().unwrap() > 0.05, "{d}");
    let (text, _) = plan(&path, "text");
    assert!(text.contains("units on 80% of traffic paths) it"), "{text}");
}

/// `from` to `to` is a run the plan allows a test with `deadline`: a
/// Monday start in the window, whole weeks, at least 14 days, ending by
/// its deadline.
fn allowed(id: &str, d: &Value, window_start: NaiveDate, last: NaiveDate) {
    let (from, to) = (date(&d["from"]), date(&d["to"]));
    let days = (to - from).num_days() + 1;
    assert_eq!(from.weekday(), Weekday::Mon, "{id}: {d}");
    assert!(from >= window_start, "{id}: {d}");
    assert!(days >= 14 && days % 7 == 0, "{id}: {days} days");
    assert!(to <= last, "{id}: {d}");
}

#[test]
fn every_could_detect_run_is_one_the_rules_allow() {
    let demo_plan = json(&["plan", &demo(), "--format", "json", "--no-timing"]);
    let demo_check = json(&["check", &demo(), "--format", "json"]);
    let (_dir, path) = scratch_file("p.yaml", &margin(0.05, AT_80, ""));
    let margin_plan = plan_json(&path);
    let mut seen = 0;
    for v in [&demo_plan, &margin_plan, &demo_check] {
        let start = date(v.get("window_start").unwrap_or(&v["window"]["start"]));
        let end = date(v.get("window_end").unwrap_or(&v["window"]["end"]));
        for e in v["experiments"].as_array().unwrap() {
            let d = &e["detectable"];
            if d.is_null() {
                continue;
            }
            let id = e["id"].as_str().unwrap();
            let last = e["deadline"].as_str().map_or(end, |s| s.parse().unwrap());
            allowed(id, d, start, last.min(end));
            seen += 1;
        }
    }
    assert!(seen >= 6, "{seen}");
    // Before its deadline of 31 January the demo's basket leaves
    // `basket-returns-note` one free week (18 to 24 January): under the
    // 14-day minimum, so no run, and nothing said it could detect.
    let note = by_id(&demo_plan, "basket-returns-note");
    assert_eq!(note["status"], "unscheduled");
    assert!(note["detectable"].is_null(), "{note}");
}

#[test]
fn a_deadline_reason_counts_the_days_to_the_deadline() {
    let (_dir, path) = scratch_file(
        "p.yaml",
        &margin(0.045, AT_80, "    deadline: 2027-03-07\n"),
    );
    let small = by_id(&plan_json(&path), "small").clone();
    let reason = small["reason"].as_str().unwrap();
    // 11 January to 7 March is 56 days; the window's 84 would mislead.
    assert!(
        reason.starts_with(
            "deadline 2027-03-07 cannot be met: needs 98 days at 100% of `web`; \
             from its earliest start on 2027-01-11 to its deadline there are 56"
        ),
        "{reason}"
    );
    let d = &small["detectable"];
    assert_eq!(d["to"], "2027-03-07", "{d}");
}
