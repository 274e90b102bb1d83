//! Result ranges on `sluice plan`: present in JSON and text only when a
//! pool's forecast carries an error, the same bytes for the same seed,
//! and clear errors on bad keys.

use crate::util::{cmd, demo, demo_history_into, repo, sluice};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// The quick start with `extra` (pool keys) added to the product pool and
/// `planning` added at the top, written to a fresh folder.
fn quickstart_with(pool_keys: &str, planning: &str) -> (tempfile::TempDir, PathBuf) {
    let text = std::fs::read_to_string(repo("portfolios/quickstart.yaml")).unwrap();
    let text = text.replacen(
        "    sharing: split          # tests take disjoint slices of the traffic\n",
        &format!(
            "    sharing: split          # tests take disjoint slices of the traffic\n{pool_keys}"
        ),
        1,
    );
    assert!(text.contains(pool_keys));
    let text = format!("{text}\n{planning}");
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("p.yaml");
    std::fs::write(&path, text).unwrap();
    (dir, path)
}

fn plan_json(path: &Path) -> (Vec<u8>, Value) {
    let out = sluice(&[
        "plan",
        path.to_str().unwrap(),
        "--format",
        "json",
        "--no-timing",
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v = serde_json::from_slice(&out.stdout).unwrap();
    (out.stdout, v)
}

const NOISY: &str = "    uncertainty: {level_cv: 0.25, daily_cv: 0.3}\n";

#[test]
fn an_uncertain_pool_gives_its_scheduled_tests_ranges_around_the_point_date() {
    let (_dir, path) = quickstart_with(NOISY, "");
    let (_, v) = plan_json(&path);
    let mut seen = 0;
    for e in v["experiments"].as_array().unwrap() {
        let range = e.get("result_range");
        if e["pools"][0] != "product" || e["status"] != "scheduled" {
            assert!(range.is_none(), "{e}");
            continue;
        }
        let r = range.expect("a scheduled product test has a range");
        seen += 1;
        let (p10, p50, p90) = (
            r["p10"].as_str().unwrap(),
            r["p50"].as_str().unwrap(),
            r["p90"].as_str().unwrap(),
        );
        assert!(p10 <= p50 && p50 <= p90, "{r}");
        // A 25% level error spreads a run of weeks over more than a day.
        assert!(p10 < p90, "{r}");
        let on_time = r["on_time"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&on_time), "{r}");
    }
    assert!(seen > 0);
}

#[test]
fn without_uncertainty_the_json_has_no_ranges_and_the_text_no_column() {
    let (_dir, path) = quickstart_with("", "");
    let (_, v) = plan_json(&path);
    assert!(v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .all(|e| e.get("result_range").is_none()));
    let text = cmd(&["plan", path.to_str().unwrap(), "--no-timing"])
        .env("COLUMNS", "100")
        .stdout();
    assert!(!text.contains("P10"), "{text}");
    let (_dir, path) = quickstart_with(NOISY, "");
    let text = cmd(&["plan", path.to_str().unwrap(), "--no-timing"])
        .env("COLUMNS", "100")
        .stdout();
    assert!(text.contains("result due (P10–P90)"), "{text}");
}

#[test]
fn the_same_seed_gives_the_same_bytes_and_another_seed_other_paths() {
    let (_a, one) = quickstart_with(
        NOISY,
        "planning: {seed: 7, paths: 100}\ndefaults: {whole_weeks: false}\n",
    );
    let (_b, two) = quickstart_with(
        NOISY,
        "planning: {seed: 7, paths: 100}\ndefaults: {whole_weeks: false}\n",
    );
    let (_c, other) = quickstart_with(
        NOISY,
        "planning: {seed: 8, paths: 100}\ndefaults: {whole_weeks: false}\n",
    );
    assert_eq!(plan_json(&one).0, plan_json(&two).0);
    let ranges = |v: &Value| -> Vec<String> {
        v["experiments"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|e| e.get("result_range").map(Value::to_string))
            .collect()
    };
    assert_ne!(ranges(&plan_json(&one).1), ranges(&plan_json(&other).1));
}

#[test]
fn a_bad_spread_is_an_error_at_its_key() {
    let (_dir, path) = quickstart_with("    uncertainty: {level_cv: -0.1}\n", "");
    let out = cmd(&["plan", path.to_str().unwrap()]).assert_exit_code(2);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("`level_cv` is -0.1; it must be from 0 to 10"),
        "{stderr}"
    );
    assert!(stderr.contains("p.yaml:"), "{stderr}");
    let (_dir, path) = quickstart_with("    uncertainty: {level: 0.1}\n", "");
    let out = cmd(&["plan", path.to_str().unwrap()]).assert_exit_code(2);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("level"), "{stderr}");
}

#[test]
fn history_pools_get_ranges_from_their_fit_and_a_given_uncertainty_replaces_it() {
    let (_, v) = plan_json(Path::new(&demo()));
    let has_range = |v: &Value, pool: &str| {
        v["experiments"]
            .as_array()
            .unwrap()
            .iter()
            // Tests on this pool alone: one on several takes the spread
            // of each of its pools.
            .filter(|e| e["pools"] == serde_json::json!([pool]) && e["status"] == "scheduled")
            .map(|e| e.get("result_range").is_some())
            .collect::<Vec<_>>()
    };
    let home = has_range(&v, "home");
    assert!(!home.is_empty() && home.iter().all(|&h| h), "{home:?}");
    // A zero spread on the home pool replaces its fitted one: point dates.
    let dir = tempfile::tempdir().unwrap();
    demo_history_into(dir.path());
    let text = std::fs::read_to_string(demo()).unwrap();
    let line = "    history: history/home.csv";
    assert!(text.contains(line));
    let text = text.replacen(
        line,
        "    uncertainty: {level_cv: 0, daily_cv: 0}\n    history: history/home.csv",
        1,
    );
    let path = dir.path().join("demo.yaml");
    std::fs::write(&path, text).unwrap();
    let (_, v) = plan_json(&path);
    assert!(has_range(&v, "home").iter().all(|&h| !h));
    assert!(has_range(&v, "search").iter().all(|&h| h));
}

#[test]
fn too_few_paths_is_an_error_at_its_key() {
    let (_dir, path) = quickstart_with("", "planning: {paths: 5}\n");
    let out = cmd(&["plan", path.to_str().unwrap()]).assert_exit_code(2);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("`paths` is 5; it must be a whole number from 100 to 100000"),
        "{stderr}"
    );
}

/// `sluice plan` of `path` in `format`, as text.
fn plan_as(path: &Path, format: &str) -> String {
    cmd(&[
        "plan",
        path.to_str().unwrap(),
        "--format",
        format,
        "--no-timing",
    ])
    .stdout()
}

/// The product pool's scheduled tests with their ranges, from the JSON.
fn product_ranges(v: &Value) -> Vec<(String, Value)> {
    v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["pools"][0] == "product" && e["status"] == "scheduled")
        .map(|e| {
            (
                e["id"].as_str().unwrap().to_string(),
                e["result_range"].clone(),
            )
        })
        .collect()
}

#[test]
fn every_format_shows_the_same_ranges_as_the_json() {
    let (_dir, path) = quickstart_with(NOISY, "");
    let (_, v) = plan_json(&path);
    let ranges = product_ranges(&v);
    assert!(!ranges.is_empty());
    // CSV: the columns, read back with the csv crate.
    let csv = plan_as(&path, "csv");
    let mut r = csv::Reader::from_reader(csv.as_bytes());
    let header = r.headers().unwrap().clone();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    for (id, range) in &ranges {
        let row = rows.iter().find(|row| &row[0] == id).unwrap();
        for q in ["p10", "p50", "p90"] {
            assert_eq!(
                &row[col(&format!("result_{q}"))],
                range[q].as_str().unwrap()
            );
        }
        let on_time: f64 = row[col("on_time")].parse().unwrap();
        assert_eq!(on_time, range["on_time"].as_f64().unwrap());
    }
    // A test without a range has empty cells.
    let other = rows.iter().find(|row| &row[3] != "product").unwrap();
    assert_eq!(&other[col("result_p50")], "");
    // Markdown: a column, and each product test's P10 – P90 in its row.
    let md = plan_as(&path, "md");
    assert!(
        md.contains("| Result due | Result due (P10–P90) | Test |"),
        "{md}"
    );
    for (id, range) in &ranges {
        let row = md
            .lines()
            .find(|l| l.contains(&format!("(`{id}`)")))
            .unwrap();
        let words = format!(
            "{} – {}",
            range["p10"].as_str().unwrap(),
            range["p90"].as_str().unwrap()
        );
        assert!(row.contains(&words), "{row}");
        assert!(row.contains("on time "), "{row}");
    }
    // ICS: the range in the result event's description.
    let ics = plan_as(&path, "ics");
    let unfolded = ics.replace("\r\n ", "");
    let mut seen = 0;
    for (id, range) in &ranges {
        let event = unfolded
            .split("BEGIN:VEVENT")
            .find(|e| e.contains("SUMMARY:Result due: ") && e.contains(&format!("[{id}]")))
            .unwrap();
        assert!(
            event.contains(&format!(
                "Result range (P10–P90): {} – {}",
                range["p10"].as_str().unwrap(),
                range["p90"].as_str().unwrap()
            )),
            "{event}"
        );
        seen += 1;
    }
    assert_eq!(seen, ranges.len());
    // HTML: one whisker per test with a range, and the on-time share in
    // the table.
    let html = plan_as(&path, "html");
    assert_eq!(html.matches(r#"<g class="range">"#).count(), ranges.len());
    for (_, range) in &ranges {
        let words = format!(
            "P10–P90 {} – {}",
            range["p10"].as_str().unwrap(),
            range["p90"].as_str().unwrap()
        );
        assert!(html.contains(&words), "{words}");
    }
    assert!(html.contains("on time "));
    // The cautions say what the ranges cover, in every report.
    for out in [&md, &html, &plan_as(&path, "text")] {
        assert!(out.contains("not cover a wrong baseline rate or variance"));
    }
}

#[test]
fn without_ranges_the_outputs_say_nothing_of_them() {
    let (_dir, path) = quickstart_with("", "");
    let md = plan_as(&path, "md");
    assert!(!md.contains("P10"), "{md}");
    let html = plan_as(&path, "html");
    assert!(!html.contains(r#"class="range""#));
    assert!(!html.contains("wrong baseline rate"));
    let ics = plan_as(&path, "ics");
    assert!(!ics.contains("Result range"));
}

#[test]
fn planning_to_a_confidence_puts_each_planned_end_at_its_quantile_or_later() {
    let (_a, plain) = quickstart_with(NOISY, "planning: {paths: 1000}\n");
    let (_b, sure) = quickstart_with(NOISY, "planning: {paths: 1000, confidence: 0.8}\n");
    let (_, before) = plan_json(&plain);
    let (_, after) = plan_json(&sure);
    let ends = |v: &Value| -> Vec<(String, String)> {
        v["experiments"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|e| e["pools"][0] == "product" && e["status"] == "scheduled")
            .map(|e| {
                (
                    e["id"].as_str().unwrap().to_string(),
                    e["result_date"].as_str().unwrap().to_string(),
                )
            })
            .collect()
    };
    let csv_text = plan_as(&sure, "csv");
    let mut reader = csv::Reader::from_reader(csv_text.as_bytes());
    let csv_head = reader.headers().unwrap().clone();
    let csv_col = |n: &str| csv_head.iter().position(|h| h == n).unwrap();
    let csv_rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    let mut later = 0;
    for e in after["experiments"].as_array().unwrap() {
        if e["status"] != "scheduled" || e["pools"][0] != "product" {
            continue;
        }
        let r = &e["result_range"];
        let on_plan = r["on_plan"]
            .as_f64()
            .expect("a confidence plan reports on_plan");
        assert!(on_plan >= 0.8, "{e}");
        // The CSV carries it too.
        let id = e["id"].as_str().unwrap();
        let row = csv_rows.iter().find(|row| &row[0] == id).unwrap();
        assert_eq!(row[csv_col("on_plan")].parse::<f64>().unwrap(), on_plan);
        // The units needed are the test's own, not what the planner asked.
        let id = e["id"].as_str().unwrap();
        let plain_e = before["experiments"]
            .as_array()
            .unwrap()
            .iter()
            .find(|x| x["id"] == id)
            .unwrap();
        assert_eq!(e["units_needed"], plain_e["units_needed"]);
        if plain_e["status"] == "scheduled" && plain_e["start"] == e["start"] {
            assert!(e["result_date"].as_str() >= plain_e["result_date"].as_str());
            later += usize::from(e["result_date"] != plain_e["result_date"]);
        }
    }
    // Without the key the plan is the forecast's own: some tests on the
    // noisy pool end before their P80 there, and later with it.
    assert!(product_ranges(&before)
        .iter()
        .all(|(_, r)| r.get("on_plan").is_none()));
    assert!(later > 0, "{:?} vs {:?}", ends(&before), ends(&after));
    let text = cmd(&["plan", sure.to_str().unwrap(), "--no-timing"])
        .env("COLUMNS", "160")
        .stdout();
    assert!(text.contains("(by plan "), "{text}");
}

#[test]
fn a_confidence_out_of_range_is_an_error_at_its_key() {
    let (_dir, path) = quickstart_with("", "planning: {confidence: 1.2}\n");
    let out = cmd(&["plan", path.to_str().unwrap()]).assert_exit_code(2);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("`confidence` is 1.2"), "{stderr}");
    assert!(stderr.contains("p.yaml:"), "{stderr}");
}

#[test]
fn a_confidence_without_uncertain_pools_changes_nothing() {
    let (_a, plain) = quickstart_with("", "");
    let (_b, sure) = quickstart_with("", "planning: {confidence: 0.9}\n");
    assert_eq!(plan_json(&plain).0, plan_json(&sure).0);
}

#[test]
fn the_report_charts_each_history_pool_forecast_and_the_json_carries_its_last_weeks() {
    let html = plan_as(Path::new(&demo()), "html");
    assert!(html.contains(r#"<h2 id="forecast">Forecast from history</h2>"#));
    assert_eq!(
        html.matches("daily units, history and forecast</title>")
            .count(),
        5
    );
    let (_, v) = plan_json(Path::new(&demo()));
    for p in v["pools"].as_array().unwrap() {
        let h = p["history"].as_array().unwrap();
        assert_eq!(h.len(), 84, "{}", p["id"]);
        // The history's last day is the day before the window opens.
        assert_eq!(h[83]["date"], "2027-01-03");
    }
    let (_dir, path) = quickstart_with("", "");
    let html = plan_as(&path, "html");
    assert!(!html.contains("Forecast from history"));
    let (_, v) = plan_json(&path);
    assert!(v["pools"][0].get("history").is_none());
}

/// The demo with `planning.seed` and `whole_weeks` set, in a fresh folder.
fn demo_with(seed: u64, whole_weeks: bool) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    demo_history_into(dir.path());
    let text = std::fs::read_to_string(demo()).unwrap();
    let text = text
        .replacen(
            "  whole_weeks: true\n",
            &format!("  whole_weeks: {whole_weeks}\n"),
            1,
        )
        .replacen(
            "  start_grid: weekly\n",
            &format!("  start_grid: weekly\n  seed: {seed}\n"),
            1,
        );
    let path = dir.path().join("demo.yaml");
    std::fs::write(&path, text).unwrap();
    (dir, path)
}

/// Each test's P50 result date, by id.
fn medians(v: &Value) -> Vec<(String, chrono::NaiveDate)> {
    v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|e| {
            let p50 = e.get("result_range")?["p50"].as_str()?;
            Some((e["id"].as_str().unwrap().to_string(), p50.parse().unwrap()))
        })
        .collect()
}

/// Another seed moves the demo's P50 dates by at most a day when runs end
/// on any day, and by at most a week with whole weeks, where an end moves
/// only in steps of a week: a median near a week's edge can jump it.
#[test]
fn another_seed_moves_the_demos_medians_by_a_day_or_a_whole_week() {
    for (whole_weeks, most) in [(false, 1), (true, 7)] {
        let (_a, one) = demo_with(1, whole_weeks);
        let base = medians(&plan_json(&one).1);
        assert!(base.len() > 10);
        for seed in [2, 3, 4] {
            let (_b, other) = demo_with(seed, whole_weeks);
            let (_, v) = plan_json(&other);
            let moved = medians(&v);
            assert_eq!(moved.len(), base.len());
            for ((id, a), (id2, b)) in base.iter().zip(&moved) {
                assert_eq!(id, id2);
                let days = (*b - *a).num_days().abs();
                assert!(days <= most, "{id}: seed {seed} moves P50 {a} -> {b}");
            }
        }
    }
}

#[test]
fn a_confidence_plans_reason_names_the_units_it_was_planned_as() {
    let (_b, sure) = quickstart_with(
        "    uncertainty: {level_cv: 2.0, daily_cv: 0.3}\n",
        "planning: {paths: 500, confidence: 0.9}\n",
    );
    let (_, v) = plan_json(&sure);
    let out: Vec<&Value> = v["experiments"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|e| e["status"] == "unscheduled" && e["pools"][0] == "product")
        .collect();
    assert!(!out.is_empty(), "a 200% level error pushes a test out");
    for e in out {
        // Either the margin is the whole cause, and the reason says so, or
        // another cause is named with the units it was planned as.
        let reason = e["reason"].as_str().unwrap();
        let margin =
            reason.contains("but not with the margin for 90% confidence, which plans it as ");
        assert!(
            margin
                || reason.ends_with(" units)") && reason.contains("(planned at 90% confidence as "),
            "{reason}"
        );
    }
}
