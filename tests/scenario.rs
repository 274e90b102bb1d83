//! `--scenario FILE` on `sluice plan` and `sluice replan`, run as the real
//! binary: each edit does what docs/scenario.md says (and the same as
//! editing the portfolio itself, where the file has the key), the
//! portfolio file is never written, and a bad edit is an error at its
//! line and column with a hint.

use crate::util::{cmd, demo, repo, scratch_path, write_scratch};
use serde_json::Value;
use std::path::PathBuf;

fn scratch(name: &str) -> PathBuf {
    scratch_path("scenario", name)
}

/// Writes `text` as a scenario file called `name` and returns its path.
fn scenario(name: &str, text: &str) -> String {
    write_scratch("scenario", name, text)
}

fn quickstart() -> String {
    repo("portfolios/quickstart.yaml").display().to_string()
}

/// The plan of `portfolio` as JSON text, with more arguments.
fn plan_json(portfolio: &str, more: &[&str]) -> String {
    let mut args = vec!["plan", portfolio, "--format", "json", "--no-timing"];
    args.extend(more);
    cmd(&args).stdout()
}

fn test<'a>(plan: &'a Value, id: &str) -> &'a Value {
    plan["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == id)
        .unwrap_or_else(|| panic!("{id} is in the plan"))
}

/// Asserts two outputs are the same bytes; the panic shows the first line
/// that differs, not both whole plans.
fn same(a: &str, b: &str, what: &str) {
    if a != b {
        let line = a.lines().zip(b.lines()).position(|(x, y)| x != y);
        let show = |t: &str| {
            line.and_then(|i| t.lines().nth(i))
                .unwrap_or("")
                .to_string()
        };
        panic!("{what}: line {line:?} differs: {} / {}", show(a), show(b));
    }
}

fn parse(text: &str) -> Value {
    serde_json::from_str(text).unwrap()
}

#[test]
fn leaving_a_test_out_gives_its_pool_to_the_others() {
    let base = parse(&plan_json(&quickstart(), &[]));
    assert_eq!(test(&base, "bigger-photos")["status"], "scheduled");
    let s = scenario(
        "leave.yaml",
        "edits:\n  - {test: bigger-photos, leave_out: true}\n",
    );
    let edited = parse(&plan_json(&quickstart(), &["--scenario", &s]));
    let out = test(&edited, "bigger-photos");
    assert_eq!(out["status"], "unscheduled");
    assert_eq!(out["reason"], "left out by the scenario");
    assert!(out["start"].is_null());
    // Its follower cannot run without it, and another product test's
    // result comes earlier.
    assert_eq!(test(&edited, "fabric-swatches")["status"], "unscheduled");
    let due = |p: &Value| {
        test(p, "reviews-first")["result_date"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert!(
        due(&edited) < due(&base),
        "{} is before {}",
        due(&edited),
        due(&base)
    );
    // `leave_out: false` later in the list keeps it in again: the plan is the file's.
    let back = scenario(
        "leave-and-back.yaml",
        "edits:\n  - {test: bigger-photos, leave_out: true}\n  - {test: bigger-photos, leave_out: false}\n",
    );
    same(
        &plan_json(&quickstart(), &["--scenario", &back]),
        &plan_json(&quickstart(), &[]),
        "kept in again",
    );
}

#[test]
fn a_pinned_test_starts_on_its_day() {
    let base = parse(&plan_json(&quickstart(), &[]));
    assert_ne!(test(&base, "reviews-first")["start"], "2027-02-15");
    let s = scenario(
        "pin.yaml",
        "edits:\n  - {test: reviews-first, start: 2027-02-15}\n",
    );
    let edited = parse(&plan_json(&quickstart(), &["--scenario", &s]));
    assert_eq!(test(&edited, "reviews-first")["start"], "2027-02-15");
    // `start: none` lifts the pin again.
    let lifted = scenario(
        "pin-lifted.yaml",
        "edits:\n  - {test: reviews-first, start: 2027-02-15}\n  - {test: reviews-first, start: none}\n",
    );
    same(
        &plan_json(&quickstart(), &["--scenario", &lifted]),
        &plan_json(&quickstart(), &[]),
        "pin lifted",
    );
}

#[test]
fn scaling_a_pool_down_moves_its_results_later() {
    let base = parse(&plan_json(&quickstart(), &[]));
    let s = scenario("scale.yaml", "edits:\n  - {pool: product, scale: 0.5}\n");
    let edited = parse(&plan_json(&quickstart(), &["--scenario", &s]));
    let before = test(&base, "bigger-photos")["result_date"]
        .as_str()
        .unwrap()
        .to_string();
    let after = test(&edited, "bigger-photos")["result_date"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(after > before, "{after} is later than {before}");
    // The same as `--scale`.
    same(
        &plan_json(&quickstart(), &["--scenario", &s]),
        &plan_json(&quickstart(), &["--scale", "product=0.5"]),
        "as --scale",
    );
}

#[test]
fn a_larger_mde_makes_a_smaller_test() {
    let base = parse(&plan_json(&quickstart(), &[]));
    let s = scenario("mde.yaml", "edits:\n  - {test: bigger-photos, mde: 0.1}\n");
    let edited = parse(&plan_json(&quickstart(), &["--scenario", &s]));
    let need = |p: &Value| test(p, "bigger-photos")["units_needed"].as_u64().unwrap();
    // About a quarter: the need goes with 1 / MDE squared.
    let ratio = need(&edited) as f64 / need(&base) as f64;
    assert!((0.2..0.3).contains(&ratio), "{ratio}");
}

/// The quick start with `extra` lines added under one experiment, in a
/// copy called quickstart.yaml (the plan's id comes from the file's stem).
fn edited_quickstart(dir: &str, id: &str, extra: &str) -> String {
    let text = std::fs::read_to_string(repo("portfolios/quickstart.yaml")).unwrap();
    let anchor = format!("  - id: {id}\n");
    assert!(text.contains(&anchor));
    let text = text.replace(&anchor, &format!("{anchor}{extra}"));
    let path = scratch(dir).join("quickstart.yaml");
    std::fs::create_dir_all(path.parent().unwrap()).unwrap();
    std::fs::write(&path, text).unwrap();
    path.display().to_string()
}

#[test]
fn test_edits_plan_as_the_same_keys_in_the_portfolio_would() {
    for (dir, id, edit, keys) in [
        ("prio", "delivery-dates", "priority: 9", "    priority: 9\n"),
        (
            "share",
            "bigger-photos",
            "max_share: 0.25",
            "    max_share: 0.25\n",
        ),
        (
            "early",
            "reviews-first",
            "earliest_start: 2027-03-01",
            "    earliest_start: 2027-03-01\n",
        ),
        (
            "due",
            "delivery-dates",
            "deadline: 2027-02-21",
            "    deadline: 2027-02-21\n",
        ),
    ] {
        let s = scenario(
            &format!("{dir}.yaml"),
            &format!("edits:\n  - {{test: {id}, {edit}}}\n"),
        );
        let via_scenario = plan_json(&quickstart(), &["--scenario", &s]);
        let via_file = plan_json(&edited_quickstart(dir, id, keys), &[]);
        same(&via_scenario, &via_file, edit);
        assert!(
            via_scenario != plan_json(&quickstart(), &[]),
            "{edit} changes the plan"
        );
    }
}

#[test]
fn confidence_plans_as_the_planning_key_would() {
    // The demo's pools have fitted spreads, so confidence changes dates.
    let dir = scratch("confidence");
    std::fs::create_dir_all(&dir).unwrap();
    crate::util::demo_history_into(&dir);
    let text = std::fs::read_to_string(demo()).unwrap();
    let anchor = "planning:\n";
    assert!(text.contains(anchor));
    let copy = dir.join("demo.yaml");
    std::fs::write(
        &copy,
        text.replace(anchor, "planning:\n  confidence: 0.8\n"),
    )
    .unwrap();
    let s = scenario("confidence.yaml", "edits:\n  - {confidence: 0.8}\n");
    same(
        &plan_json(&demo(), &["--scenario", &s]),
        &plan_json(copy.to_str().unwrap(), &[]),
        "confidence",
    );
}

#[test]
fn the_documented_meeting_loads_and_changes_the_demo() {
    let meeting = repo("demo/meeting.yaml").display().to_string();
    let before = std::fs::read(demo()).unwrap();
    let plan = parse(&plan_json(&demo(), &["--scenario", &meeting]));
    assert_eq!(
        test(&plan, "home-static-hero")["reason"],
        "left out by the scenario"
    );
    assert_eq!(test(&plan, "app-style-quiz")["start"], "2027-02-01");
    assert_eq!(
        std::fs::read(demo()).unwrap(),
        before,
        "the portfolio is never written"
    );
}

#[test]
fn an_unknown_id_is_an_error_at_its_line_and_column() {
    let s = scenario(
        "unknown.yaml",
        "# a typo\nedits:\n  - {test: bigger-photo, leave_out: true}\n  - {pool: prodcut, scale: 0.7}\n",
    );
    let out = cmd(&["plan", &quickstart(), "--scenario", &s]).assert_exit_code(2);
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("error: test `bigger-photo` is not in the portfolio"),
        "{err}"
    );
    assert!(err.contains("unknown.yaml:3:12"), "{err}");
    assert!(err.contains("did you mean `bigger-photos`?"), "{err}");
    assert!(
        err.contains("error: pool `prodcut` is not defined"),
        "{err}"
    );
    assert!(err.contains("unknown.yaml:4:12"), "{err}");
    assert!(err.contains("closest first: `product`"), "{err}");
}

#[test]
fn bad_values_are_errors_with_hints() {
    for (edit, says, value) in [
        (
            "{test: reviews-first, priority: 0}",
            "`priority` is 0; it must be a positive weight",
            "0}",
        ),
        (
            "{test: reviews-first, max_share: 1.5}",
            "`max_share` is 1.5; it must be a share in (0, 1]",
            "1.5",
        ),
        (
            "{test: reviews-first, start: 2027-02-17}",
            "is a Wednesday, but tests start on Mondays",
            "2027",
        ),
        (
            "{test: reviews-first, deadline: 2026-12-01}",
            "lies outside the window",
            "2026",
        ),
        ("{test: reviews-first, mde: -0.1}", "`mde` is -0.1", "-0.1"),
        (
            "{pool: product, scale: -1}",
            "`scale` is -1; it must be a number >= 0",
            "-1",
        ),
        (
            "{confidence: 1.2}",
            "not a number in [0.5, 1) or `none`",
            "1.2",
        ),
        ("{test: reviews-first}", "changes nothing", "reviews"),
        (
            "{test: reviews-first, scale: 0.5}",
            "`scale` changes a pool",
            "0.5",
        ),
        (
            "{test: reviews-first, colour: red}",
            "unknown key `colour`",
            "colour",
        ),
    ] {
        let line = format!("  - {edit}");
        let s = scenario("bad.yaml", &format!("edits:\n{line}\n"));
        let out = cmd(&["plan", &quickstart(), "--scenario", &s]).assert_exit_code(2);
        let err = String::from_utf8(out.stderr).unwrap();
        assert!(err.contains(says), "{edit}: {err}");
        let column = line.find(value).unwrap() + 1;
        assert!(
            err.contains(&format!("bad.yaml:2:{column}")),
            "{edit} at column {column}: {err}"
        );
        assert!(err.contains("= hint:"), "{edit}: {err}");
    }
    let s = scenario("no-edits.yaml", "# nothing yet\n");
    let out = cmd(&["plan", &quickstart(), "--scenario", &s]).assert_exit_code(2);
    assert!(String::from_utf8_lossy(&out.stderr).contains("the scenario file is empty"));
}

#[test]
fn a_replan_cancels_a_running_test_the_scenario_leaves_out() {
    let progress = scratch("progress.yaml");
    std::fs::write(
        &progress,
        "experiments:\n  - {id: bigger-photos, state: running, started: 2027-01-04, share: 0.5, units: 20000}\n",
    )
    .unwrap();
    let s = scenario("replan-leave.yaml", "edits:\n  - {test: bigger-photos, leave_out: true}\n  - {test: delivery-dates, leave_out: true}\n");
    let args = [
        "replan",
        &quickstart(),
        "--progress",
        progress.to_str().unwrap(),
        "--today",
        "2027-02-01",
        "--format",
        "json",
        "--no-timing",
    ];
    let base = parse(&cmd(&args).stdout());
    assert_eq!(test(&base, "bigger-photos")["status"], "running");
    let mut with = args.to_vec();
    with.extend(["--scenario", &s]);
    let edited = parse(&cmd(&with).stdout());
    let running = test(&edited, "bigger-photos");
    assert_eq!(running["status"], "cancelled");
    assert_eq!(running["reason"], "cancelled: left out by the scenario");
    let queued = test(&edited, "delivery-dates");
    assert_eq!(queued["status"], "unscheduled");
    assert_eq!(queued["reason"], "left out by the scenario");
}

#[test]
fn the_scenario_is_an_input_never_an_output() {
    let s = scenario(
        "input.yaml",
        "edits:\n  - {test: bigger-photos, priority: 2}\n",
    );
    let before = std::fs::read(&s).unwrap();
    let out = cmd(&["plan", &quickstart(), "--scenario", &s, "--out", &s]).assert_exit_code(1);
    assert!(String::from_utf8_lossy(&out.stderr).contains("it is the input file"));
    assert_eq!(std::fs::read(&s).unwrap(), before);
}
