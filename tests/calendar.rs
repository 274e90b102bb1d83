//! Calendars that update (issue 9): a re-plan's iCalendar file, imported
//! over an earlier plan's, must update every event that changed (a higher
//! SEQUENCE, RFC 5545 §3.8.7.4) and cancel the events of tests that left
//! the calendar (STATUS:CANCELLED, §3.8.1.11); event UIDs follow the
//! portfolio's `id`, not its display name. Read back with the independent
//! `ical` parser.

use crate::util::{cmd, demo, write_in, DAY30_PROGRESS};
use std::collections::BTreeMap;

/// What a calendar shows of one event, by UID.
#[derive(Debug, Clone, PartialEq)]
struct Ev {
    summary: String,
    description: String,
    start: String,
    end: String,
    status: String,
    sequence: u32,
}

impl Ev {
    fn content(&self) -> (&str, &str, &str, &str, &str) {
        (
            &self.summary,
            &self.description,
            &self.start,
            &self.end,
            &self.status,
        )
    }
}

fn events(bytes: &[u8]) -> BTreeMap<String, Ev> {
    let mut parser = ical::IcalParser::new(std::io::BufReader::new(bytes));
    let cal = parser.next().expect("a calendar").expect("it parses");
    let mut out = BTreeMap::new();
    for e in cal.events {
        let get = |name: &str| {
            e.properties
                .iter()
                .find(|p| p.name == name)
                .and_then(|p| p.value.clone())
                .unwrap_or_default()
        };
        let sequence = get("SEQUENCE").parse().expect("SEQUENCE is a whole number");
        let ev = Ev {
            summary: get("SUMMARY"),
            description: get("DESCRIPTION"),
            start: get("DTSTART"),
            end: get("DTEND"),
            status: get("STATUS"),
            sequence,
        };
        assert!(out.insert(get("UID"), ev).is_none(), "UIDs are unique");
    }
    out
}

fn replan(portfolio: &str, progress: &str, today: &str, previous: &str, format: &str) -> Vec<u8> {
    cmd(&[
        "replan",
        portfolio,
        "--progress",
        progress,
        "--today",
        today,
        "--previous",
        previous,
        "--format",
        format,
        "--no-timing",
    ])
    .assert_exit_code(0)
    .stdout
}

#[test]
fn a_replan_calendar_cancels_what_left_and_raises_the_sequence_of_what_changed() {
    let dir = tempfile::tempdir().unwrap();
    let plan = |format: &str| {
        cmd(&["plan", &demo(), "--format", format, "--no-timing"])
            .assert_exit_code(0)
            .stdout
    };
    let plan_json = write_in(dir.path(), "plan.json", plan("json"));
    let old = events(&plan("ics"));
    assert!(old
        .values()
        .all(|e| e.sequence == 0 && e.status == "TENTATIVE"));
    let progress = write_in(dir.path(), "progress.yaml", DAY30_PROGRESS);
    let new = events(&replan(&demo(), &progress, "2027-02-03", &plan_json, "ics"));

    // Every event the previous calendar held is published again: none is
    // left behind in people's calendars.
    for uid in old.keys() {
        assert!(
            new.contains_key(uid),
            "{uid} is not in the re-plan's calendar"
        );
    }
    let mut changed = 0;
    for (uid, o) in &old {
        let n = &new[uid];
        if n.content() == o.content() {
            assert_eq!(n.sequence, o.sequence, "{uid}: unchanged, same SEQUENCE");
        } else {
            changed += 1;
            assert!(n.sequence > o.sequence, "{uid}: changed, {n:?} after {o:?}");
        }
    }
    assert!(changed > 0, "the re-plan moved something");

    // Planned again from 8 February (the progress file leaves it out),
    // `app-skip-signup` runs the 14-day minimum and its interim look falls
    // on its result day: the look the first calendar published is
    // cancelled, not left behind.
    let look = &new["look-1.app-skip-signup.demo@sluice"];
    assert_eq!(look.status, "CANCELLED", "{look:?}");
    assert!(
        look.summary
            .starts_with("Interim look 1 of 2\\, not held: "),
        "{look:?}"
    );
    assert_eq!(look.start, old["look-1.app-skip-signup.demo@sluice"].start);
    assert_eq!(look.sequence, 1);

    // The cancelled test (it never started) is cancelled at its old
    // dates. The test that finished early (planned to run to 2027-02-07,
    // ended on 2027-01-31) and the one that finished as planned are
    // written as they ran, in the past tense: confirmed, their run at the
    // real dates and their result on the day after the last day of data.
    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&plan_json).unwrap()).unwrap();
    let planned_end = |id: &str| {
        json["experiments"]
            .as_array()
            .unwrap()
            .iter()
            .find(|e| e["id"] == id)
            .unwrap()["end"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert!(planned_end("home-static-hero").as_str() > "2027-01-31");
    assert!(planned_end("home-personal-recs").as_str() < "2027-02-03");
    let uid = |kind: &str, id: &str| format!("{kind}.{id}.demo@sluice");
    for kind in ["run", "result"] {
        let ev = &new[&uid(kind, "pdp-bundles")];
        assert_eq!(ev.status, "CANCELLED", "{ev:?}");
        assert_eq!(
            ev.start,
            old[&uid(kind, "pdp-bundles")].start,
            "keeps its dates"
        );
        assert!(ev.sequence > old[&uid(kind, "pdp-bundles")].sequence);
    }
    for (id, start, end_excl) in [
        ("home-static-hero", "20270118", "20270201"),
        ("home-personal-recs", "20270104", "20270118"),
    ] {
        let run = &new[&uid("run", id)];
        let result = &new[&uid("result", id)];
        assert_eq!(run.status, "CONFIRMED", "{run:?}");
        assert_eq!(result.status, "CONFIRMED", "{result:?}");
        assert_eq!((run.start.as_str(), run.end.as_str()), (start, end_excl));
        assert_eq!(result.start, end_excl, "the result came the day after");
        assert!(run.summary.starts_with("Test ran: "), "{run:?}");
        assert!(result.summary.starts_with("Result in: "), "{result:?}");
        assert!(!run.description.contains("Runs:"), "{run:?}");
        assert!(run.sequence > old[&uid("run", id)].sequence);
    }
    // Events still in the calendar are not cancelled.
    assert!(new
        .iter()
        .filter(|(u, _)| u.contains("search-ranking-v2"))
        .all(|(_, e)| e.status == "TENTATIVE"));

    // A re-plan of the re-plan keeps the history: the cancelled events stay
    // published, and no SEQUENCE ever goes down; the same inputs again
    // change nothing, so nothing moves up either.
    let replan_json = write_in(
        dir.path(),
        "replan.json",
        replan(&demo(), &progress, "2027-02-03", &plan_json, "json"),
    );
    let again = events(&replan(
        &demo(),
        &progress,
        "2027-02-03",
        &replan_json,
        "ics",
    ));
    assert_eq!(again, new, "the same re-plan twice is the same calendar");
    let later = events(&replan(
        &demo(),
        &progress,
        "2027-02-10",
        &replan_json,
        "ics",
    ));
    for (uid, n) in &new {
        let l = later.get(uid).unwrap_or_else(|| panic!("{uid} dropped"));
        if l.content() == n.content() {
            assert_eq!(l.sequence, n.sequence, "{uid}");
        } else {
            assert!(l.sequence > n.sequence, "{uid}: {l:?} after {n:?}");
        }
    }
    assert!(later
        .iter()
        .filter(|(u, _)| u.contains("pdp-bundles"))
        .all(|(_, e)| e.status == "CANCELLED"));
}

fn uids(portfolio: &str) -> Vec<String> {
    let bytes = cmd(&["plan", portfolio, "--format", "ics"])
        .assert_exit_code(0)
        .stdout;
    events(&bytes).into_keys().collect()
}

#[test]
fn uids_follow_the_portfolio_id_not_its_name() {
    let dir = tempfile::tempdir().unwrap();
    crate::util::demo_history_into(dir.path());
    let text = std::fs::read_to_string(demo()).unwrap();
    let base = uids(&demo());
    assert!(base.iter().all(|u| u.ends_with(".demo@sluice")), "{base:?}");

    // A new display name keeps every UID.
    let renamed = text.replace(
        "name: Larkspur & Loom, Q1 2027",
        "name: Larkspur and Loom - spring",
    );
    assert_ne!(renamed, text);
    let path = write_in(dir.path(), "demo.yaml", renamed.as_bytes());
    assert_eq!(uids(&path), base);

    // An `id` key keeps them when the file moves.
    let with_id = format!("id: demo\n{renamed}");
    let moved = write_in(dir.path(), "q1-final.yaml", with_id.as_bytes());
    assert_eq!(uids(&moved), base);
    let other = write_in(
        dir.path(),
        "other.yaml",
        format!("id: shop-q1\n{text}").as_bytes(),
    );
    assert!(uids(&other).iter().all(|u| u.ends_with(".shop-q1@sluice")));
}
