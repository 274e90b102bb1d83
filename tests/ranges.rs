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
