//! The progress file's checks, on the quick-start portfolio.

use super::*;

fn quickstart() -> Portfolio {
    let text = include_str!("../../../portfolios/quickstart.yaml");
    crate::portfolio::load_str(text, "quickstart.yaml").unwrap()
}

fn d(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

fn load(text: &str) -> Result<Progress, LoadError> {
    load_progress_str(text, "progress.yaml", &quickstart(), d("2027-02-03"))
}

fn messages(r: Result<Progress, LoadError>) -> String {
    r.unwrap_err()
        .diagnostics
        .iter()
        .map(|d| format!("{}:{} {}", d.line.unwrap_or(0), d.key, d.message))
        .collect::<Vec<_>>()
        .join("\n")
}

#[test]
fn reads_inline_traffic_days() {
    let p = load(
        "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-05, units: 120.5}\n",
    )
    .unwrap();
    assert_eq!(
        p.traffic,
        vec![Observed {
            pool: 0,
            start: d("2027-01-04"),
            units: vec![100.0, 120.5],
            events: Vec::new(),
        }]
    );
    assert_eq!(p.traffic[0].end(), d("2027-01-05"));
}

#[test]
fn traffic_events_are_read_and_checked_against_its_days() {
    let p = load(
        "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-05, units: 900}\n    events:\n      - {from: 2027-01-05, to: 2027-01-05, note: flash sale}\n",
    )
    .unwrap();
    assert_eq!(
        p.traffic[0].events,
        vec![Event {
            from: d("2027-01-05"),
            to: d("2027-01-05"),
            note: "flash sale".into()
        }]
    );
    let outside = messages(load(
        "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n    events:\n      - {from: 2027-01-03, to: 2027-01-04}\n",
    ));
    assert!(
        outside.contains("6:traffic[0].events[0].from the traffic of pool `product`: event `from` 2027-01-03 is outside the days given, which run from 2027-01-04 to 2027-01-04"),
        "{outside}"
    );
}

#[test]
fn traffic_problems_are_errors_at_their_keys() {
    let gap = messages(load(
        "traffic:\n  - pool: product\n    days:\n      - {date: 2027-01-04, units: 100}\n      - {date: 2027-01-06, units: 120}\n",
    ));
    assert!(
        gap.contains("5:traffic[0].days[1].date 2027-01-06 leaves a gap"),
        "{gap}"
    );
    let unknown = messages(load(
        "traffic:\n  - pool: prodct\n    days: [{date: 2027-01-04, units: 1}]\n",
    ));
    assert!(
        unknown.contains("pool `prodct` is not in the portfolio"),
        "{unknown}"
    );
    let both = messages(load(
        "traffic:\n  - pool: product\n    history: t.csv\n    days: [{date: 2027-01-04, units: 1}]\n",
    ));
    assert!(both.contains("needs either `history` or `days`"), "{both}");
    let future = messages(load(
        "as_of: 2027-01-05\ntraffic:\n  - pool: product\n    days: [{date: 2027-01-04, units: 1}, {date: 2027-01-05, units: 1}]\n",
    ));
    assert!(
        future.contains("on or after `as_of` (2027-01-05)"),
        "{future}"
    );
    let negative = messages(load(
        "traffic:\n  - pool: product\n    days: [{date: 2027-01-04, units: -3}]\n",
    ));
    assert!(negative.contains("`units` is -3"), "{negative}");
    let unread = messages(load(
        "traffic:\n  - pool: product\n    history: nowhere.csv\n",
    ));
    assert!(
        unread.contains("cannot read the traffic `nowhere.csv`"),
        "{unread}"
    );
}

#[test]
fn reads_every_state() {
    let p = load(
        "as_of: 2027-02-02\nexperiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units_per_arm: [40000, 40100]\n  - id: one-page-checkout\n    state: finished\n    started: 2027-01-04\n    ended: 2027-01-31\n  - id: delivery-dates\n    state: cancelled\n    note: legal review\n",
    )
    .unwrap();
    assert_eq!(p.as_of, d("2027-02-02"));
    assert_eq!(p.entries.len(), 3);
    assert_eq!(
        p.entries[0].state,
        State::Running {
            started: d("2027-01-04"),
            share: Share::from_fraction(0.5),
            units: 80100,
            units_per_arm: Some(vec![40000, 40100]),
        }
    );
    assert!(matches!(p.entries[1].state, State::Finished { .. }));
    assert_eq!(
        p.entries[2].state,
        State::Cancelled {
            note: "legal review".into(),
            started: None,
            ended: None,
            share: None,
        }
    );
    assert!(p.warnings.is_empty());
}

#[test]
fn unknown_id_lists_the_closest_first_with_its_line() {
    let e = load("experiments:\n  - id: biger-photos\n    state: finished\n").unwrap_err();
    let d = &e.diagnostics[0];
    assert_eq!(d.line, Some(2));
    assert_eq!(d.key, "experiments[0].id");
    assert!(d.message.contains("`biger-photos` is not in the portfolio"));
    assert!(d
        .hint
        .as_deref()
        .unwrap()
        .contains("closest first: `bigger-photos`"));
}

#[test]
fn running_after_today_is_an_error() {
    let e = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-02-10\n    share: 0.5\n    units: 0\n").unwrap_err();
    let d = &e.diagnostics[0];
    assert_eq!(d.line, Some(4));
    assert!(
        d.message
            .contains("marked running but starts on 2027-02-10"),
        "{}",
        d.message
    );
}

#[test]
fn too_many_units_is_a_warning_not_an_error() {
    // The product pool offers about 9,000 a day; at 50% for 30 days that
    // is about 135,000, far below 900,000.
    let p = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units: 900000\n").unwrap();
    assert_eq!(p.warnings.len(), 1);
    assert_eq!(p.warnings[0].line, Some(6));
    assert!(p.warnings[0].message.contains("more than the forecast"));
}

#[test]
fn misspelt_key_names_the_closest_allowed_one() {
    let e = load("experiments:\n  - id: bigger-photos\n    stat: running\n").unwrap_err();
    let d = &e.diagnostics[0];
    assert_eq!(d.line, Some(3));
    assert!(
        d.hint.as_deref().unwrap().contains("did you mean `state`?"),
        "{d:?}"
    );
}

#[test]
fn every_problem_is_reported_at_once() {
    let e = load("experiments:\n  - id: nope\n    state: finished\n  - id: bigger-photos\n    state: runing\n  - id: one-page-checkout\n    state: running\n    started: 2027-01-04\n    share: 1.5\n    units: 10\n").unwrap_err();
    assert_eq!(e.diagnostics.len(), 3, "{e}");
}

#[test]
fn arm_counts_must_match_the_design() {
    let e = load("experiments:\n  - id: bigger-photos\n    state: running\n    started: 2027-01-04\n    share: 0.5\n    units_per_arm: [1, 2, 3]\n").unwrap_err();
    assert!(e.diagnostics[0].message.contains("has 2 arms"));
}

#[test]
fn garbage_is_an_error_not_a_panic() {
    for text in [
        "",
        "[1, 2",
        "experiments: 3",
        "- a\n- b",
        "as_of: tomorrow",
        "\u{0}\u{1}",
    ] {
        assert!(load(text).is_err(), "{text:?}");
    }
}
