//! `sluice check` run as a binary: every fixture in tests/fixtures is one
//! invalid portfolio whose error must name its line and key and exit 2;
//! the shipped portfolios must pass with exit 0.

use crate::util::{cmd, sluice};
use std::path::Path;
use std::process::Output;

fn text(bytes: &[u8]) -> String {
    String::from_utf8(bytes.to_vec()).expect("utf-8 output")
}

/// (fixture, line, key, part of the message)
const FIXTURES: &[(&str, usize, &str, &str)] = &[
    (
        "misspelt-key",
        13,
        "experiments[0].priorty",
        "unknown key `priorty` in `experiments[0]`",
    ),
    (
        "unknown-pool",
        14,
        "experiments[1].pool",
        "pool `hoem` is not defined",
    ),
    (
        "unknown-after",
        13,
        "experiments[0].after[0]",
        "experiment `heroo` is not defined",
    ),
    (
        "unknown-not-with",
        13,
        "experiments[0].not_with[0]",
        "experiment `banner` is not defined",
    ),
    (
        "duplicate-id",
        13,
        "experiments[1].id",
        "duplicate experiment id `hero`",
    ),
    (
        "after-cycle",
        18,
        "experiments[1].after[0].id",
        "`after` forms a cycle: hero -> menu -> hero",
    ),
    (
        "self-after",
        13,
        "experiments[0].after[0]",
        "lists itself in `after`",
    ),
    (
        "window-out-of-order",
        3,
        "window.end",
        "`window.end` 2027-01-04 is before `window.start` 2027-04-04",
    ),
    (
        "date-outside-window",
        13,
        "experiments[0].earliest_start",
        "`earliest_start` 2027-05-03 is after the window ends",
    ),
    (
        "deadline-before-start",
        14,
        "experiments[0].deadline",
        "`deadline` 2027-01-25 is before `earliest_start` 2027-02-01",
    ),
    (
        "bad-date",
        13,
        "experiments[0].deadline",
        "`deadline` is `2027-02-30`, not a date",
    ),
    (
        "alpha-range",
        13,
        "experiments[0].alpha",
        "`alpha` is 0.7; it must be in (0, 0.5]",
    ),
    (
        "power-range",
        13,
        "experiments[0].power",
        "`power` is 1; it must be in (alpha, 1)",
    ),
    (
        "baseline-range",
        11,
        "experiments[0].baseline",
        "`baseline` is 4; it must be a rate strictly inside (0, 1)",
    ),
    (
        "rho-range",
        13,
        "experiments[0].rho",
        "`rho` is 1; it must be in [0, 1)",
    ),
    (
        "arms-range",
        13,
        "experiments[0].arms",
        "`arms` is 1; it must be a whole number from 2 to 50",
    ),
    (
        "ratio-range",
        13,
        "experiments[0].ratio",
        "`ratio` is -1; it must be in [0.001, 1000]",
    ),
    (
        "share-level-range",
        3,
        "share_levels[2]",
        "`share_levels[2]` is 1.5; it must be a share in (0, 1]",
    ),
    (
        "max-share-range",
        13,
        "experiments[0].max_share",
        "`max_share` is 0; it must be a share in (0, 1]",
    ),
    (
        "priority-range",
        13,
        "experiments[0].priority",
        "`priority` is 0; it must be a positive weight",
    ),
    (
        "multiplier-negative",
        9,
        "pools[0].adjustments[0].multiply",
        "`multiply` is -0.5; it must be a multiplier >= 0",
    ),
    (
        "adjustment-out-of-order",
        9,
        "pools[0].adjustments[0].to",
        "adjustment `to` 2027-02-01 is before its `from` 2027-02-07",
    ),
    (
        "weekday-pattern-length",
        8,
        "pools[0].weekday_pattern",
        "`weekday_pattern` has 6 values; it must have exactly 7",
    ),
    ("negative-daily", 6, "pools[0].daily", "`daily` is -20000"),
    (
        "nan-number",
        13,
        "experiments[0].sd",
        "`sd` is not a number (NaN)",
    ),
    (
        "huge-number",
        6,
        "pools[0].daily",
        "1e400 is too large to be a number",
    ),
    (
        "treatment-rate-outside",
        12,
        "experiments[0].mde",
        "moves the rate from 0.8 to 1.2, outside (0, 1)",
    ),
    (
        "sample-size-with-mde",
        12,
        "experiments[0].baseline",
        "both `sample_size` and `baseline`, `mde` are given",
    ),
    (
        "eligible-range",
        11,
        "experiments[0].eligible",
        "`eligible` is 30; it must be in (0, 1]",
    ),
    (
        "holdout-range",
        8,
        "pools[0].holdout",
        "`holdout` is 1; it must be in [0, 1)",
    ),
    (
        "holdout-no-room",
        10,
        "pools[0].holdout",
        "a `holdout` of 0.8 leaves 20% of the pool, less than the smallest share level 25%",
    ),
    (
        "both-mde",
        13,
        "experiments[0].mde_abs",
        "both `mde` and `mde_abs` are given",
    ),
    (
        "missing-pool-key",
        9,
        "experiments[0].pool",
        "experiment `hero` has no `pool`",
    ),
    (
        "wrong-type",
        13,
        "experiments[0].arms",
        "invalid type: string \"three\", expected a number",
    ),
    (
        "unknown-blackout-kind",
        14,
        "blackouts[0].kind",
        "`kind` is `no_runing`; it must be one of `no_starts`, `no_running`",
    ),
    (
        "blackout-unknown-pool",
        17,
        "blackouts[0].pools[0]",
        "pool `search` is not defined",
    ),
    (
        "duplicate-key",
        13,
        "experiments[0].baseline",
        "key `baseline` appears twice",
    ),
    (
        "percent",
        11,
        "experiments[0].baseline",
        "invalid type: string \"4%\", expected a number",
    ),
    (
        "unicode-id",
        14,
        "experiments[1].pool",
        "experiment `café-menü`: pool `größe` is not defined",
    ),
];

/// Fixtures with no key (the file as a whole): (fixture, line, message).
const WHOLE_FILE: &[(&str, Option<usize>, &str)] = &[
    ("empty", None, "the file is empty"),
    ("not-yaml", Some(4), "did not find expected ',' or '}'"),
    (
        "tab-indent",
        Some(4),
        "found character that cannot start any token",
    ),
    (
        "wrong-shape",
        Some(2),
        "invalid type: sequence, expected a mapping of keys",
    ),
];

fn run_fixture(name: &str) -> (Output, String, String) {
    let path = format!("tests/fixtures/{name}.yaml");
    assert!(
        Path::new(env!("CARGO_MANIFEST_DIR")).join(&path).exists(),
        "{path} exists"
    );
    let out = sluice(&["check", &path]);
    let stderr = text(&out.stderr);
    (out, path, stderr)
}

#[test]
fn every_fixture_names_its_line_key_and_message_and_exits_2() {
    for &(name, line, key, message) in FIXTURES {
        let (out, path, stderr) = run_fixture(name);
        assert_eq!(out.status.code(), Some(2), "{name}: exit code\n{stderr}");
        assert!(out.stdout.is_empty(), "{name}: nothing on stdout");
        assert!(
            stderr.starts_with("error: "),
            "{name}: starts with `error: `\n{stderr}"
        );
        assert!(
            stderr.contains(&format!("--> {path}:{line}:")),
            "{name}: line {line}\n{stderr}"
        );
        assert!(
            stderr.contains(&format!("= key: {key}\n")),
            "{name}: key {key}\n{stderr}"
        );
        assert!(
            stderr.contains(message),
            "{name}: message {message:?}\n{stderr}"
        );
        assert!(stderr.contains("= hint: "), "{name}: a hint\n{stderr}");
        // The caret line sits under the quoted source line.
        assert!(
            stderr.contains(&format!("{line} | ")),
            "{name}: source line\n{stderr}"
        );
        assert!(stderr.contains('^'), "{name}: a caret\n{stderr}");
        insta::assert_snapshot!(format!("fixture-{name}"), stderr);
    }
}

#[test]
fn whole_file_problems_exit_2_with_a_position_where_there_is_one() {
    for &(name, line, message) in WHOLE_FILE {
        let (out, path, stderr) = run_fixture(name);
        assert_eq!(out.status.code(), Some(2), "{name}\n{stderr}");
        assert!(stderr.contains(message), "{name}: {message:?}\n{stderr}");
        match line {
            Some(l) => assert!(stderr.contains(&format!("--> {path}:{l}:")), "{stderr}"),
            None => assert!(stderr.contains(&format!("--> {path}\n")), "{stderr}"),
        }
        insta::assert_snapshot!(format!("fixture-{name}"), stderr);
    }
}

#[test]
fn every_fixture_file_is_tested() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures");
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| {
            let p = e.ok()?.path();
            if p.extension()? != "yaml" {
                return None;
            }
            Some(p.file_stem()?.to_string_lossy().into_owned())
        })
        .collect();
    names.sort();
    for n in &names {
        let known = FIXTURES.iter().any(|f| f.0 == n) || WHOLE_FILE.iter().any(|f| f.0 == n);
        assert!(known, "fixture {n} has no expectation in tests/check.rs");
    }
}

#[test]
fn all_problems_are_reported_in_one_run() {
    let dir = std::env::temp_dir().join(format!("sluice-check-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("many.yaml");
    std::fs::write(
        &file,
        "name: many\nwindow: {start: 2027-01-04, end: 2027-04-04}\npools:\n  - {id: home, daily: 1000, max_concurrent: 0}\nexperiments:\n  - {id: a, pool: nowhere, baseline: 2, mde: 0.1, priority: -1}\n  - {id: b, pool: home, baseline: 0.1, mde: 0.1, not_with: [c]}\n",
    )
    .unwrap();
    let out = cmd(&["check", file.to_str().unwrap()]).assert_exit_code(2);
    let stderr = text(&out.stderr);
    for part in [
        "`max_concurrent` is 0",
        "pool `nowhere` is not defined",
        "`baseline` is 2",
        "`priority` is -1",
        "experiment `c` is not defined",
        "5 problems in",
    ] {
        assert!(stderr.contains(part), "{part:?}\n{stderr}");
    }
    // In file order.
    let pos = |s: &str| stderr.find(s).unwrap();
    assert!(pos("`max_concurrent` is 0") < pos("pool `nowhere`"));
    assert!(pos("`priority` is -1") < pos("experiment `c`"));
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_missing_file_is_an_error_not_a_panic() {
    let out = cmd(&["check", "tests/fixtures/no-such-file.yaml"]).assert_exit_code(2);
    assert!(text(&out.stderr).contains("cannot read the file"));
}

#[test]
fn the_demo_portfolio_passes_and_shows_both_tables() {
    let out = sluice(&["check", "portfolios/demo.yaml"]);
    let stdout = text(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    assert!(stdout.contains("37 experiments"), "{stdout}");
    assert!(stdout.contains("fits alone"));
    assert!(stdout.contains("cannot fit even alone"));
    assert!(stdout.contains("needed / offered"));
    insta::assert_snapshot!("demo-text", stdout);
}

#[test]
fn the_demo_report_as_json() {
    let out = sluice(&["check", "portfolios/demo.yaml", "--format", "json"]);
    assert_eq!(out.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let exps = v["experiments"].as_array().unwrap();
    assert_eq!(exps.len(), 37);
    let mega = exps.iter().find(|e| e["id"] == "home-mega-menu").unwrap();
    assert_eq!(mega["fits_alone"], false);
    assert_eq!(mega["arms"], 3);
    assert!(mega["reason"]
        .as_str()
        .unwrap()
        .contains("after the window's end"));
    let pools = v["pools"].as_array().unwrap();
    assert_eq!(pools.len(), 5);
    assert_eq!(
        v["fit_alone"].as_u64().unwrap() + v["cannot_fit"].as_u64().unwrap(),
        37
    );
    insta::assert_snapshot!("demo-json", text(&out.stdout));
}

#[test]
fn the_quick_start_portfolio_passes() {
    let out = sluice(&["check", "portfolios/quickstart.yaml"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    let stdout = text(&out.stdout);
    assert!(stdout.contains("5 experiments"));
    insta::assert_snapshot!("quickstart-text", stdout);
}

#[test]
fn output_is_deterministic() {
    let a = sluice(&["check", "portfolios/demo.yaml", "--format", "json"]);
    let b = sluice(&["check", "portfolios/demo.yaml", "--format", "json"]);
    assert_eq!(a.stdout, b.stdout);
}

#[test]
fn the_json_names_the_metric_that_drives_each_test() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("metrics.yaml");
    std::fs::write(
        &path,
        "name: metrics\nwindow: {start: 2027-01-04, end: 2027-03-28}\n\
         pools:\n  - {id: home, daily: 10000, max_concurrent: 2}\n\
         experiments:\n\
         \x20 - id: guarded\n    pool: home\n    metrics:\n\
         \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
         \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin_abs: 0.008}\n\
         \x20 - id: short\n    pool: home\n    baseline: 0.1\n    mde: 0.1\n",
    )
    .unwrap();
    let out = sluice(&["check", path.to_str().unwrap(), "--format", "json"]);
    assert_eq!(out.status.code(), Some(0), "{}", text(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let exps = v["experiments"].as_array().unwrap();
    // The guardrail (Blackwelder, one-sided 0.05, margin 0.008: 17,389 per
    // arm) needs more than the primary (14,751), so it drives.
    assert_eq!(exps[0]["driver"], "refunds");
    assert_eq!(exps[0]["control_units"], 17_389);
    assert_eq!(exps[1]["driver"], "primary");
    assert_eq!(exps[1]["control_units"], 14_751);
}

/// `check` lays its report out for the width it has (`COLUMNS` off a
/// terminal): the table keeps the test and whether it fits alone, then
/// its days, share and pool as room allows, and the prose is wrapped.
#[test]
fn check_fits_the_width() {
    use unicode_width::UnicodeWidthStr;
    let run = |columns: &str| {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_sluice"))
            .args(["check", &crate::util::demo()])
            .env("COLUMNS", columns)
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(0));
        text(&out.stdout)
    };
    for (columns, wanted) in [
        (80, &["experiment", "alone", "days from start"][..]),
        (
            120,
            &["experiment", "alone", "days from start", "share"][..],
        ),
        (
            200,
            &["pool", "metric", "arms", "units per arm", "total units"][..],
        ),
    ] {
        let report = run(&columns.to_string());
        // The first line is the portfolio's name, which is not wrapped.
        for line in report.lines().skip(1) {
            assert!(line.width() <= columns, "{columns}: {line}");
        }
        let header = report.lines().find(|l| l.contains("│ experiment")).unwrap();
        for column in wanted {
            assert!(header.contains(column), "{columns}: {column} in {header}");
        }
        // Every test is named whole.
        for id in [
            "home-static-hero",
            "search-sort-bestsellers",
            "sitewide-free-returns",
        ] {
            assert!(report.contains(id), "{columns}: {id}");
        }
    }
}
