//! The portfolio keys of eligibility, given sample sizes and holdouts, and
//! adjustments that compose, through the real binary: hand-checkable
//! plans (each number worked out beside its assertion), `check`'s solo
//! runs and pool supply, and the plan JSON.

use crate::util::sluice;
use serde_json::Value;

/// Twelve weeks from a Monday (84 days); shares 50% and 100%; runs of at
/// least 7 days in whole weeks unless a test says otherwise.
const PORTFOLIO: &str = "\
name: keys
window: {start: 2027-01-04, end: 2027-03-28}
share_levels: [0.5, 1.0]
defaults: {min_days: 7}
pools:
  - {id: shop, daily: 1000, max_concurrent: 3}
  - {id: members, daily: 1000, max_concurrent: 3}
  - {id: club, daily: 1000, holdout: 0.05, max_concurrent: 3}
  - id: news
    daily: 2000
    sharing: overlap
    holdout: 0.2
    max_concurrent: 2
    adjustments:
      - {from: 2027-02-01, to: 2027-02-28, multiply: 0.8, note: seasonal dip}
      - {from: 2027-02-08, to: 2027-02-14, multiply: 1.3, note: campaign}
      - {from: 2027-02-10, to: 2027-02-10, level: 1500, note: outage}
experiments:
  - {id: everyone, pool: shop, sample_size: 2100}
  - {id: logged-in, pool: members, sample_size: 2100, eligible: 0.3}
  - {id: held, pool: club, sample_size: 3500}
  - {id: held-short, pool: club, sample_size: 1750}
  - {id: readers, pool: news, sample_size: 8000, whole_weeks: false}
";

fn run(args: &[&str]) -> Value {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("keys.yaml");
    std::fs::write(&path, PORTFOLIO).unwrap();
    let mut all: Vec<&str> = args.to_vec();
    let p = path.to_str().unwrap();
    all.insert(1, p);
    let out = sluice(&all);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("valid JSON")
}

fn plan() -> Value {
    run(&["plan", "--format", "json", "--no-timing"])
}

/// The entry of `section` (`experiments` or `pools`) with this id.
fn entry<'v>(v: &'v Value, section: &str, id: &str) -> &'v Value {
    v[section]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["id"] == id)
        .unwrap()
}

fn experiment<'v>(v: &'v Value, id: &str) -> &'v Value {
    entry(v, "experiments", id)
}

fn pool<'v>(v: &'v Value, id: &str) -> &'v Value {
    entry(v, "pools", id)
}

#[test]
fn eligibility_0_3_lengthens_a_run_and_a_given_sample_size_sets_the_need() {
    let v = plan();
    // sample_size 2,100 control units and an even ratio: 4,200 in total.
    let all = experiment(&v, "everyone");
    assert_eq!(all["units_needed"], 4200);
    assert_eq!(all["sample_size_given"], true);
    assert_eq!(all["eligible"], 1.0);
    // At 100% of 1,000 a day: 5 days, the 7-day minimum: 4 to 10 January.
    assert_eq!(all["share"], 1.0);
    assert_eq!(all["start"], "2027-01-04");
    assert_eq!(all["end"], "2027-01-10");
    // 30% eligible: 300 units a day enter, 4,200 / 300 = 14 days, 4 to 17
    // January, and the forecast gives it 14 x 300 = 4,200 units.
    let some = experiment(&v, "logged-in");
    assert_eq!(some["eligible"], 0.3);
    assert_eq!(some["share"], 1.0);
    assert_eq!(some["end"], "2027-01-17");
    assert!((some["units_expected"].as_f64().unwrap() - 4200.0).abs() < 1e-6);
    // It holds its whole share of the split pool all the while.
    let members = pool(&v, "members");
    assert_eq!(members["days"][13]["share_used"], 1.0);
}

#[test]
fn a_holdout_caps_a_split_pool_at_0_95() {
    let v = plan();
    let club = pool(&v, "club");
    assert_eq!(club["holdout"], 0.05);
    // 100% no longer fits beside a 5% holdout, and 50% + 50% = 100% is over
    // 95%: both tests run at 50%, one after the other. `held` needs 7,000
    // units at 500 a day (14 days); `held-short` 3,500 (7 days).
    let held = experiment(&v, "held");
    let short = experiment(&v, "held-short");
    assert_eq!(held["share"], 0.5);
    assert_eq!(short["share"], 0.5);
    assert_eq!(held["days"], 14);
    assert_eq!(short["days"], 7);
    let (a, b) = (
        (
            held["start"].as_str().unwrap(),
            held["end"].as_str().unwrap(),
        ),
        (
            short["start"].as_str().unwrap(),
            short["end"].as_str().unwrap(),
        ),
    );
    assert!(a.1 < b.0 || b.1 < a.0, "they must not overlap: {a:?} {b:?}");
    for day in club["days"].as_array().unwrap() {
        assert!(day["share_used"].as_f64().unwrap() <= 0.95, "{day}");
    }
    // No other pool holds anything out.
    assert_eq!(pool(&v, "shop")["holdout"], 0.0);
}

#[test]
fn an_overlap_holdout_scales_units_and_adjustments_compose() {
    let v = plan();
    let news = pool(&v, "news");
    let forecast = |date: &str| {
        news["days"]
            .as_array()
            .unwrap()
            .iter()
            .find(|d| d["date"] == date)
            .unwrap()["forecast"]
            .as_f64()
            .unwrap()
    };
    // The dip alone: 2,000 x 0.8 = 1,600.
    assert!((forecast("2027-02-03") - 1600.0).abs() < 1e-9);
    // Campaign during the dip: 2,000 x 0.8 x 1.3 = 2,000 x 1.04 = 2,080.
    assert!((forecast("2027-02-09") - 2080.0).abs() < 1e-9);
    // The outage's level replaces the forecast, both multipliers still
    // apply: 1,500 x 1.04 = 1,560.
    assert!((forecast("2027-02-10") - 1560.0).abs() < 1e-9);
    assert!((forecast("2027-01-20") - 2000.0).abs() < 1e-9);
    // 16,000 units at 100% of 2,000 a day less the 20% holdout: 1,600 a
    // day, 10 days (without the holdout it would be 8): 4 to 13 January.
    let readers = experiment(&v, "readers");
    assert_eq!(readers["share"], 1.0);
    assert_eq!(readers["end"], "2027-01-13");
    assert!((readers["units_expected"].as_f64().unwrap() - 16000.0).abs() < 1e-6);
}

#[test]
fn check_counts_eligibility_and_holdouts_in_solo_runs_and_supply() {
    let v = run(&["check", "--format", "json"]);
    let exp = |id: &str| experiment(&v, id);
    assert_eq!(exp("everyone")["days_from_first_start"], 7);
    assert_eq!(exp("everyone")["metric"], "given");
    assert_eq!(exp("logged-in")["days_from_first_start"], 14);
    assert_eq!(exp("logged-in")["eligible"], 0.3);
    // The largest share beside the 5% holdout is 50%: 7,000 / 500 = 14 days.
    assert_eq!(exp("held")["share"], 0.5);
    assert_eq!(exp("held")["days_from_first_start"], 14);
    // 84 days x 1,000 less 5%: 79,800 offered; 7,000 + 3,500 needed.
    let club = pool(&v, "club");
    assert!((club["offered_units"].as_f64().unwrap() - 79_800.0).abs() < 1e-6);
    assert_eq!(club["needed_units"], 10_500);
    assert_eq!(club["holdout"], 0.05);
    // 4,200 units at 30% eligible take up 4,200 / 0.3 = 14,000 of the pool.
    assert_eq!(pool(&v, "members")["needed_units"], 14_000);
    let text = String::from_utf8({
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("keys.yaml");
        std::fs::write(&path, PORTFOLIO).unwrap();
        sluice(&["check", path.to_str().unwrap()]).stdout
    })
    .unwrap();
    assert!(text.contains("100% (30% eligible)"), "{text}");
    // The pools' notes are wrapped to the width.
    let words = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        words.contains("5% of its units are held out of every test"),
        "{text}"
    );
}

#[test]
fn the_new_facts_reach_every_format() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("keys.yaml");
    std::fs::write(&path, PORTFOLIO).unwrap();
    let render = |format: &str| {
        let out = sluice(&[
            "plan",
            path.to_str().unwrap(),
            "--format",
            format,
            "--no-timing",
        ]);
        assert!(out.status.success());
        String::from_utf8(out.stdout).unwrap().replace("\r\n ", "")
    };
    let text = render("text");
    assert!(
        text.contains("logged-in admits 30% of members's units"),
        "{text}"
    );
    assert!(text.contains("up to 3 at once · 5% held out"), "{text}");
    let md = render("md");
    assert!(md.contains("100% (30% eligible)"), "{md}");
    assert!(
        md.contains("Held out of every test: 5% of club; 20% of news."),
        "{md}"
    );
    let html = render("html");
    assert!(html.contains("5% held out"), "{html}");
    assert!(html.contains("100% (30% eligible)"), "{html}");
    let ics = render("ics");
    assert!(
        ics.contains("Share of the pool: 100% (30% eligible)"),
        "{ics}"
    );
    // iCalendar escapes the comma of 4,200.
    assert!(
        ics.contains("Units needed: 4\\,200 (a given sample size)"),
        "{ics}"
    );
    let csv = render("csv");
    let mut r = csv::Reader::from_reader(csv.as_bytes());
    let headers = r.headers().unwrap().clone();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    let logged_in = rows.iter().find(|r| &r[0] == "logged-in").unwrap();
    assert_eq!(&logged_in[col("eligible")], "0.3");
    assert_eq!(&logged_in[col("sample_size_given")], "true");
}
