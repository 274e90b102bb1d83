//! Tests on several pools, ramps and pairs kept apart on traffic, through
//! the binary: an invented quarter that uses every one of these keys
//! checks, plans (every format), re-plans, and reports bad keys at their
//! line.

use crate::util::{cmd, sluice};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// Hollowbrook Cycles (an invented bicycle-parts shop), spring 2027: a
/// header change on three pools, a ramped checkout test, and two search
/// tests kept apart on traffic on an overlap pool.
const QUARTER: &str = "\
name: Hollowbrook Cycles, spring 2027
window: {start: 2027-04-05, end: 2027-06-27}
pools:
  - {id: home, daily: 20000, sharing: split, max_concurrent: 3}
  - {id: search, daily: 10000, sharing: overlap, max_concurrent: 3}
  - {id: product, daily: 10000, sharing: split, max_concurrent: 3}
experiments:
  - id: header-wide
    title: Slimmer header on every page
    pools: [home, search, product]
    baseline: 0.03
    mde: 0.05
    priority: 5
  - id: checkout-ramp
    title: New basket page, ramped up
    pool: product
    baseline: 0.4
    mde: 0.03
    priority: 3
    max_share: 0.5
    ramp:
      - {share: 0.05, days: 2}
      - {share: 0.2, days: 3}
  - id: search-chips
    title: Category chips above results
    pool: search
    baseline: 0.3
    mde: 0.03
    priority: 2
    not_with:
      - {id: search-sort, apart: traffic}
  - id: search-sort
    title: Sort by rating by default
    pool: search
    baseline: 0.3
    mde: 0.03
    priority: 2
";

fn quarter(text: &str) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("spring.yaml");
    std::fs::write(&path, text).unwrap();
    (dir, path)
}

fn plan_json(path: &Path) -> Value {
    let out = cmd(&[
        "plan",
        path.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
    ])
    .stdout();
    serde_json::from_str(&out).unwrap()
}

/// `sluice replan` of the quarter on its fifteenth day (2027-04-19) from
/// `progress`, with `extra` arguments, untimed; its standard output.
fn replan_on_day_15(path: &Path, progress: &Path, extra: &[&str]) -> String {
    let mut args = vec![
        "replan",
        path.to_str().unwrap(),
        "--progress",
        progress.to_str().unwrap(),
        "--today",
        "2027-04-19",
        "--no-timing",
    ];
    args.extend_from_slice(extra);
    cmd(&args).stdout()
}

fn by_id<'v>(v: &'v Value, id: &str) -> &'v Value {
    v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == id)
        .unwrap()
}

fn date(v: &Value) -> chrono::NaiveDate {
    chrono::NaiveDate::parse_from_str(v.as_str().unwrap(), "%Y-%m-%d").unwrap()
}

#[test]
fn a_three_pool_test_runs_on_the_summed_forecast_in_every_pool() {
    let (_dir, path) = quarter(QUARTER);
    let v = plan_json(&path);
    let e = by_id(&v, "header-wide");
    assert_eq!(e["status"], "scheduled");
    assert_eq!(e["pools"], serde_json::json!(["home", "search", "product"]));
    assert!(e.get("pool").is_none());
    // By hand: the three pools give 20,000 + 10,000 + 10,000 = 40,000
    // units a day, so at `share` the need takes ceil(need / (40,000 x
    // share)) days, at least 14 (the default minimum), whole weeks.
    let share = e["share"].as_f64().unwrap();
    let need = e["units_needed"].as_f64().unwrap();
    let raw = (need / (40_000.0 * share)).ceil() as i64;
    let days = (raw.max(14) + 6) / 7 * 7;
    let (start, end) = (date(&e["start"]), date(&e["end"]));
    assert_eq!((end - start).num_days() + 1, days, "{e}");
    assert_eq!(
        e["units_expected"].as_f64().unwrap(),
        share * 40_000.0 * days as f64
    );
    // It holds its share of each pool on each of its days.
    for pool in v["pools"].as_array().unwrap() {
        let first = &pool["days"].as_array().unwrap()
            [(start - date(&v["window"]["start"])).num_days() as usize];
        assert!(
            first["share_used"].as_f64().unwrap() >= share - 1e-12,
            "{pool}"
        );
        assert!(first["running"].as_u64().unwrap() >= 1);
    }
    // `check` agrees on the summed forecast.
    let out = cmd(&["check", path.to_str().unwrap(), "--format", "json"]).stdout();
    let c: Value = serde_json::from_str(&out).unwrap();
    let wide = &c["experiments"][0];
    assert_eq!(
        wide["pools"],
        serde_json::json!(["home", "search", "product"])
    );
    assert_eq!(wide["fits_alone"], true);
}

#[test]
fn a_ramp_holds_its_steps_first_and_is_listed_with_dates() {
    let (_dir, path) = quarter(QUARTER);
    let v = plan_json(&path);
    let e = by_id(&v, "checkout-ramp");
    assert_eq!(e["status"], "scheduled");
    // Its planned share: a level at or above the ramp's largest step,
    // within its maximum of 50% (the site-wide test holds 75% of
    // `product` in its first weeks, so 25% here).
    let share = e["share"].as_f64().unwrap();
    assert!((0.2..=0.5).contains(&share), "{share}");
    let start = date(&e["start"]);
    let ramp = e["ramp"].as_array().unwrap();
    assert_eq!(ramp.len(), 2);
    assert_eq!(date(&ramp[0]["start"]), start);
    assert_eq!(date(&ramp[0]["end"]), start + chrono::Duration::days(1));
    assert_eq!(ramp[0]["share"], 0.05);
    assert_eq!(date(&ramp[1]["start"]), start + chrono::Duration::days(2));
    assert_eq!(date(&ramp[1]["end"]), start + chrono::Duration::days(4));
    assert_eq!(ramp[1]["share"], 0.2);
    // Its pool's use on the ramp days includes the ramp's shares: the
    // product pool's share on each day is its tests' shares that day.
    let product = &v["pools"][2];
    assert_eq!(product["id"], "product");
    let day0 = (start - date(&v["window"]["start"])).num_days() as usize;
    let days = product["days"].as_array().unwrap();
    let others = |d: usize| -> f64 {
        let day = date(&days[d]["date"]);
        let w = by_id(&v, "header-wide");
        if date(&w["start"]) <= day && day <= date(&w["end"]) {
            w["share"].as_f64().unwrap()
        } else {
            0.0
        }
    };
    for (d, want) in [(day0, 0.05), (day0 + 2, 0.2), (day0 + 5, share)] {
        let used = days[d]["share_used"].as_f64().unwrap();
        assert!((used - want - others(d)).abs() < 1e-9, "day {d}: {used}");
    }
    // Units count only after the ramp (ramp_counts defaults to false): the
    // units expected are those of its days at its share from its sixth day on.
    let after: f64 = (day0 + 5..=day0 + e["days"].as_u64().unwrap() as usize - 1)
        .map(|d| share * days[d]["forecast"].as_f64().unwrap())
        .sum();
    assert!((e["units_expected"].as_f64().unwrap() - after).abs() < 1e-6);
}

#[test]
fn tests_apart_on_traffic_never_take_more_than_the_whole_search_pool() {
    let (_dir, path) = quarter(QUARTER);
    let v = plan_json(&path);
    let (a, b) = (by_id(&v, "search-chips"), by_id(&v, "search-sort"));
    assert_eq!(a["status"], "scheduled");
    assert_eq!(b["status"], "scheduled");
    let overlap = date(&a["start"]).max(date(&b["start"])) <= date(&a["end"]).min(date(&b["end"]));
    if overlap {
        let sum = a["share"].as_f64().unwrap() + b["share"].as_f64().unwrap();
        assert!(sum <= 1.0 + 1e-12, "{sum}");
    }
    // Without the pair the plan runs both at once on more than the whole
    // overlap pool: the rule is what keeps them apart.
    let (_dir2, free) = quarter(&QUARTER.replace(
        "    not_with:\n      - {id: search-sort, apart: traffic}\n",
        "",
    ));
    let f = plan_json(&free);
    let (fa, fb) = (by_id(&f, "search-chips"), by_id(&f, "search-sort"));
    assert_eq!(fa["start"], fb["start"]);
    assert!(fa["share"].as_f64().unwrap() + fb["share"].as_f64().unwrap() > 1.0);
}

#[test]
fn every_format_shows_one_test_under_each_of_its_pools() {
    let (_dir, path) = quarter(QUARTER);
    let p = path.to_str().unwrap();
    let text = cmd(&["plan", p, "--no-timing"])
        .env("COLUMNS", "160")
        .stdout();
    let rows: Vec<&str> = text.lines().filter(|l| l.contains("header-wide")).collect();
    assert!(rows.len() >= 3, "{text}");
    assert!(text.contains("also on `search`, `product`"), "{text}");
    assert!(text.contains("also on `home`, `product`"), "{text}");
    assert!(text.contains("▒ ramp"), "{text}");
    assert!(text.contains('▒'), "{text}");
    let html = cmd(&["plan", p, "--no-timing", "--format", "html"]).stdout();
    assert!(html.contains("also on search, product"), "html");
    assert!(html.contains(r#"class="ramp""#), "html");
    assert!(
        html.contains("after a ramp: 5% 2027-04-05 to 2027-04-06"),
        "html"
    );
    let ics = cmd(&["plan", p, "--no-timing", "--format", "ics"]).stdout();
    let unfolded = ics.replace("\r\n ", "");
    assert!(
        unfolded.contains("Ramp before that share: 5% 2027-04-05 to 2027-04-06"),
        "{unfolded}"
    );
    assert!(
        unfolded.contains("(home\\, search\\, product)"),
        "{unfolded}"
    );
    let md = cmd(&["plan", p, "--no-timing", "--format", "md"]).stdout();
    assert!(
        md.contains("% (after a ramp: 5% 2027-04-05 to 2027-04-06, 20% 2027-04-07 to 2027-04-09)"),
        "{md}"
    );
    let csv_text = cmd(&["plan", p, "--no-timing", "--format", "csv"]).stdout();
    let mut r = csv::Reader::from_reader(csv_text.as_bytes());
    let head = r.headers().unwrap().clone();
    let col = |n: &str| head.iter().position(|h| h == n).unwrap();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    assert_eq!(&rows[0][col("pools")], "home;search;product");
    assert_eq!(&rows[0][col("ramp")], "");
    assert_eq!(
        &rows[1][col("ramp")],
        "5% 2027-04-05 to 2027-04-06, 20% 2027-04-07 to 2027-04-09"
    );
}

#[test]
fn a_running_multi_pool_and_a_ramping_test_keep_their_dates_and_shares() {
    let (dir, path) = quarter(QUARTER);
    let v = plan_json(&path);
    let wide = by_id(&v, "header-wide");
    let ramp = by_id(&v, "checkout-ramp");
    assert_eq!(wide["start"], "2027-04-05");
    assert_eq!(ramp["start"], "2027-04-05");
    let progress = dir.path().join("progress.yaml");
    std::fs::write(
        &progress,
        format!(
            "experiments:\n\
             \x20 - {{id: header-wide, state: running, started: 2027-04-05, share: {}, units: 100000}}\n\
             \x20 - {{id: checkout-ramp, state: running, started: 2027-04-05, share: {}, units: 20000}}\n",
            wide["share"], ramp["share"]
        ),
    )
    .unwrap();
    let out = replan_on_day_15(&path, &progress, &["--format", "json"]);
    let r: Value = serde_json::from_str(&out).unwrap();
    for (id, share) in [
        ("header-wide", wide["share"].clone()),
        ("checkout-ramp", ramp["share"].clone()),
    ] {
        let e = by_id(&r, id);
        assert_eq!(e["status"], "running", "{id}");
        assert_eq!(e["start"], "2027-04-05", "{id}");
        assert_eq!(e["share"], share, "{id}");
    }
    assert_eq!(by_id(&r, "checkout-ramp")["ramp"], ramp["ramp"]);
    // The ramp's days are drawn at the ramp's shares in the past.
    let product = &r["pools"][2]["days"];
    let wide_share = wide["share"].as_f64().unwrap();
    assert!((product[0]["share_used"].as_f64().unwrap() - 0.05 - wide_share).abs() < 1e-9);
    // Units so far are the total over all pools: 100,000 collected plus
    // the forecast from today at its share of the three pools (40,000 a
    // day), to its end.
    let e = by_id(&r, "header-wide");
    let days_left = (date(&e["end"]) - date(&Value::from("2027-04-19"))).num_days() + 1;
    let want = 100_000.0 + wide_share * 40_000.0 * days_left as f64;
    assert!(
        (e["units_expected"].as_f64().unwrap() - want).abs() < 1e-6,
        "{e}"
    );
}

/// A re-plan's change list names every pool of a test on several pools,
/// in the JSON and in the text table, not just the first one.
#[test]
fn the_change_list_names_every_pool_of_a_test_on_several() {
    let (dir, path) = quarter(QUARTER);
    let previous = dir.path().join("plan.json");
    cmd(&[
        "plan",
        path.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
        "--out",
        previous.to_str().unwrap(),
    ])
    .stdout();
    let progress = dir.path().join("progress.yaml");
    std::fs::write(
        &progress,
        "experiments:\n  - {id: checkout-ramp, state: cancelled}\n",
    )
    .unwrap();
    let previous = previous.to_str().unwrap();
    let replan = |format: &str| {
        replan_on_day_15(
            &path,
            &progress,
            &["--previous", previous, "--format", format],
        )
    };
    let r: Value = serde_json::from_str(&replan("json")).unwrap();
    let changes = r["changes"]["experiments"].as_array().unwrap();
    let wide = changes.iter().find(|e| e["id"] == "header-wide").unwrap();
    assert_eq!(
        wide["pools"],
        serde_json::json!(["home", "search", "product"])
    );
    assert!(wide.get("pool").is_none());
    let ramp = changes.iter().find(|e| e["id"] == "checkout-ramp").unwrap();
    assert_eq!(ramp["pools"], serde_json::json!(["product"]));
    let text = replan("text");
    let row = text
        .lines()
        .find(|l| l.contains("header-wide") && l.contains("home, search, product"));
    assert!(row.is_some(), "{text}");
}

#[test]
fn bad_calendar_keys_are_named_at_their_line() {
    let cases = [
        (
            QUARTER.replace(
                "    pools: [home, search, product]\n",
                "    pool: home\n    pools: [home, search]\n",
            ),
            "gives both `pool` and `pools`",
            ":11:",
        ),
        (
            QUARTER.replace(
                "    pools: [home, search, product]\n",
                "    pools: [home, serch]\n",
            ),
            "pool `serch` is not defined",
            ":10:",
        ),
        (
            QUARTER.replace("{share: 0.2, days: 3}", "{share: 0.6, days: 3}"),
            "ramp share 0.6 is above the largest share it may take (0.5)",
            ":23:",
        ),
        (
            QUARTER.replace("{share: 0.2, days: 3}", "{share: 0.2, days: 400}"),
            "`days` is 400",
            ":23:",
        ),
        (
            QUARTER.replace("{share: 0.2, days: 3}", "{share: 0.2, days: 90}"),
            "the ramp lasts 92 days, but the window has only 84",
            ":22:",
        ),
        (
            QUARTER.replace("apart: traffic", "apart: users"),
            "`apart` is `users`; it must be one of `time`, `traffic`",
            ":31:",
        ),
    ];
    for (text, message, line) in cases {
        let (_dir, path) = quarter(&text);
        let out = sluice(&["check", path.to_str().unwrap()]);
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(message), "{message} in {err}");
        assert!(
            err.contains(&format!("spring.yaml{line}")),
            "{line} in {err}"
        );
        assert!(err.contains("= hint:"), "{err}");
    }
}

/// [`QUARTER`] with every other key of the calendar model as well: a 5%
/// holdout on the home page, a campaign (x1.3) inside a seasonal dip
/// (x0.8) on search, a signed-in-only test (30% eligible) and a test whose
/// size was worked out elsewhere.
fn every_key() -> String {
    QUARTER
        .replace(
            "  - {id: home, daily: 20000, sharing: split, max_concurrent: 3}\n",
            "  - {id: home, daily: 20000, sharing: split, max_concurrent: 3, holdout: 0.05}\n",
        )
        .replace(
            "  - {id: search, daily: 10000, sharing: overlap, max_concurrent: 3}\n",
            "  - id: search\n    daily: 10000\n    sharing: overlap\n    max_concurrent: 3\n    \
             adjustments:\n      - {from: 2027-05-01, to: 2027-05-31, multiply: 0.8, note: seasonal dip}\n      \
             - {from: 2027-05-10, to: 2027-05-16, multiply: 1.3, note: campaign}\n",
        )
        + "  - id: member-saved-bikes\n    title: Saved bikes for signed-in riders\n    pool: home\n    \
           eligible: 0.3\n    baseline: 0.05\n    mde: 0.1\n    priority: 1\n\
           \x20 - id: fit-guide\n    title: Frame-size guide\n    pool: product\n    \
           sample_size: 20000\n    priority: 1\n"
}

#[test]
fn a_quarter_with_every_calendar_key_checks_plans_renders_and_replans_to_verified_calendars() {
    let text = every_key();
    let (dir, path) = quarter(&text);
    let p = path.to_str().unwrap();
    cmd(&["check", p]).assert_exit_code(0);
    for format in ["text", "json", "csv", "md", "html", "ics"] {
        cmd(&["plan", p, "--no-timing", "--format", format]).assert_exit_code(0);
    }
    let portfolio = sluice::portfolio::load(&path).unwrap();
    // A campaign day inside the dip: 10,000 x 0.8 x 1.3 = 10,400 units.
    let search = &portfolio.pools[1];
    let day = chrono::NaiveDate::from_ymd_opt(2027, 5, 12).unwrap();
    assert!((sluice::forecast::units_on(search, day) - 10_400.0).abs() < 1e-9);
    let request = sluice::schedule::PlanRequest::default();
    let plan = sluice::schedule::plan(&portfolio, &request);
    if let Err(v) = sluice::schedule::verify(&portfolio, &request, &plan) {
        panic!("the verifier rejects the plan: {v:#?}");
    }
    // The binary prints the same calendar.
    let v = plan_json(&path);
    for e in &plan.experiments {
        let j = by_id(&v, &e.id);
        assert_eq!(j["status"], e.status.name(), "{}", e.id);
        if let Some(r) = e.run {
            assert_eq!(date(&j["start"]), r.start, "{}", e.id);
            assert_eq!(date(&j["end"]), r.end, "{}", e.id);
        }
    }
    assert_eq!(by_id(&v, "member-saved-bikes")["eligible"], 0.3);
    assert_eq!(by_id(&v, "fit-guide")["sample_size_given"], true);
    assert_eq!(by_id(&v, "fit-guide")["units_needed"], 40_000);
    assert_eq!(v["pools"][0]["holdout"], 0.05);
    // No day of the home page goes past its 95%.
    for d in v["pools"][0]["days"].as_array().unwrap() {
        assert!(d["share_used"].as_f64().unwrap() <= 0.95 + 1e-9, "{d}");
    }
    // Two weeks in, every test that started is running: re-plan around them.
    let today = "2027-04-19";
    let mut running = String::from("experiments:\n");
    for e in &plan.experiments {
        if let Some(r) = e.run.filter(|r| r.start.to_string().as_str() < today) {
            running.push_str(&format!(
                "  - {{id: {}, state: running, started: {}, share: {}, units: 1000}}\n",
                e.id,
                r.start,
                r.share.fraction()
            ));
        }
    }
    assert!(running.lines().count() > 2, "{running}");
    let progress = dir.path().join("progress.yaml");
    std::fs::write(&progress, &running).unwrap();
    for format in ["text", "json", "html", "md", "csv", "ics"] {
        cmd(&[
            "replan",
            p,
            "--progress",
            progress.to_str().unwrap(),
            "--today",
            today,
            "--no-timing",
            "--format",
            format,
        ])
        .assert_exit_code(0);
    }
    let today = chrono::NaiveDate::from_ymd_opt(2027, 4, 19).unwrap();
    let prog = sluice::replan::load_progress(&progress, &portfolio, today).unwrap();
    let (again, req) = sluice::replan::replan(
        &portfolio,
        &prog,
        today,
        &sluice::schedule::PlanRequest::default(),
    );
    if let Err(v) = sluice::schedule::verify(&portfolio, &req, &again) {
        panic!("the verifier rejects the re-plan: {v:#?}");
    }
    for e in &plan.experiments {
        if let Some(r) = e.run.filter(|r| r.start < today) {
            let a = again.experiments.iter().find(|x| x.id == e.id).unwrap();
            assert_eq!(a.status.name(), "running", "{}", e.id);
            assert_eq!(a.run.map(|x| (x.start, x.share)), Some((r.start, r.share)));
        }
    }
}
