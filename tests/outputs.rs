//! Every output format of `sluice plan`, produced by the real binary from
//! the demo portfolio (portfolios/demo.yaml) and parsed back: JSON with
//! serde_json (and into `sluice::plan::Plan`), CSV with the csv crate,
//! iCalendar with the `ical` crate (a different crate from the `icalendar`
//! writer), HTML with quick-xml, Markdown by its lines. Also: the same bytes
//! on two runs, `--out` and its refusals, `sluice replan` with a progress
//! file and `--previous`, and the text layout at the widths `COLUMNS` asks
//! for, without colour off a terminal.
//!
//! The library-level snapshots of each format live in tests/render.rs.

use crate::util::{cmd, demo, ics_unescape, repo, sluice, DAY30_PROGRESS};
use chrono::{Duration, NaiveDate};
use sluice::plan::{Plan, PlannedExperiment, Status};
use std::collections::BTreeSet;
use std::process::Output;
use unicode_width::UnicodeWidthStr;

/// Runs the binary with `env` set and `COLUMNS` and `NO_COLOR` removed
/// unless `env` names them, so the caller's shell does not leak in.
fn sluice_env(args: &[&str], env: &[(&str, &str)]) -> Output {
    let mut c = cmd(args);
    for (k, v) in env {
        c.env(k, v);
    }
    c.output()
}

/// Runs and insists on success; returns stdout.
fn ok(args: &[&str]) -> Vec<u8> {
    let out = sluice(args);
    assert!(
        out.status.success(),
        "sluice {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

fn plan_demo(format: &str) -> Vec<u8> {
    ok(&["plan", &demo(), "--format", format])
}

fn text(bytes: Vec<u8>) -> String {
    String::from_utf8(bytes).expect("UTF-8 output")
}

/// The demo plan as the binary prints it in JSON, parsed into the
/// library's own type. `--no-timing` writes 0 as the solver's seconds: the
/// seconds are the only clock reading in any output, and without the flag
/// two runs differ in them.
fn demo_plan() -> Plan {
    let bytes = ok(&["plan", &demo(), "--format", "json", "--no-timing"]);
    serde_json::from_slice(&bytes).expect("the JSON is a plan")
}

fn scheduled(plan: &Plan) -> Vec<&PlannedExperiment> {
    plan.experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
        .collect()
}

// ---------------------------------------------------------------- JSON

#[test]
fn json_parses_back_into_the_plan_type_without_losing_a_key() {
    let bytes = ok(&["plan", &demo(), "--format", "json", "--no-timing"]);
    let value: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
    let plan: Plan = serde_json::from_value(value.clone()).unwrap();
    // Nothing the binary printed is dropped or invented by the type.
    assert_eq!(serde_json::to_value(&plan).unwrap(), value);
    assert_eq!(plan.experiments.len(), 37);
    assert_eq!(plan.pools.len(), 5);
    assert_eq!(plan.solver.seconds, 0.0);
    assert!(plan.portfolio.contains("Larkspur"), "{}", plan.portfolio);
    // The demo has both kinds, so every later format check sees both.
    let fit = scheduled(&plan).len();
    assert!(fit > 20 && fit < 37, "{fit} of 37 scheduled");
    for e in scheduled(&plan) {
        let r = e.run.unwrap();
        let (start, end, due) = (r.start, r.end, r.result_date);
        assert!(plan.window.start <= start && start <= end && end <= plan.window.end);
        assert!(due > end, "{}: result after the run", e.id);
        assert_eq!(
            e.run.map(|r| r.days),
            Some((end - start).num_days() as u32 + 1),
            "{}",
            e.id
        );
    }
}

// ---------------------------------------------------------------- CSV

#[test]
fn csv_has_a_header_and_one_row_per_experiment_agreeing_with_the_json() {
    let plan = demo_plan();
    let bytes = plan_demo("csv");
    let mut reader = csv::Reader::from_reader(bytes.as_slice());
    let header: Vec<String> = reader
        .headers()
        .unwrap()
        .iter()
        .map(str::to_string)
        .collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("column `{name}` in {header:?}"))
    };
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), plan.experiments.len(), "one row per experiment");

    let date = |s: &str| -> Option<NaiveDate> {
        if s.is_empty() {
            None
        } else {
            Some(NaiveDate::parse_from_str(s, "%Y-%m-%d").expect("ISO 8601 date"))
        }
    };
    for (row, e) in rows.iter().zip(&plan.experiments) {
        assert_eq!(row.len(), header.len());
        assert_eq!(&row[col("id")], e.id);
        assert_eq!(&row[col("title")], e.title);
        assert_eq!(&row[col("pools")], e.pools.join(";"));
        assert_eq!(&row[col("status")], e.status.name(), "{}", e.id);
        assert_eq!(date(&row[col("start")]), e.run.map(|r| r.start), "{}", e.id);
        assert_eq!(date(&row[col("end")]), e.run.map(|r| r.end), "{}", e.id);
        assert_eq!(
            date(&row[col("result_date")]),
            e.run.map(|r| r.result_date),
            "{}",
            e.id
        );
        let share = &row[col("share")];
        assert_eq!(
            (!share.is_empty()).then(|| share.parse::<f64>().unwrap()),
            e.run.map(|r| r.share.fraction()),
            "{}",
            e.id
        );
        let days = &row[col("days")];
        assert_eq!(
            (!days.is_empty()).then(|| days.parse::<u32>().unwrap()),
            e.run.map(|r| r.days)
        );
        assert_eq!(
            row[col("units_needed")].parse::<u64>().unwrap(),
            e.units_needed
        );
        assert_eq!(&row[col("reason")], e.reason.as_deref().unwrap_or(""));
    }
}

// ---------------------------------------------------------------- iCalendar

struct Event {
    props: Vec<ical::property::Property>,
}

impl Event {
    fn one(&self, name: &str) -> &ical::property::Property {
        let found: Vec<_> = self.props.iter().filter(|p| p.name == name).collect();
        assert_eq!(found.len(), 1, "exactly one {name}");
        found[0]
    }

    fn get(&self, name: &str) -> String {
        self.one(name).value.clone().unwrap_or_default()
    }

    /// An all-day date: `VALUE=DATE` and eight digits.
    fn date(&self, name: &str) -> NaiveDate {
        let p = self.one(name);
        let all_day = p.params.as_ref().is_some_and(|ps| {
            ps.iter()
                .any(|(k, v)| k == "VALUE" && v.iter().any(|x| x == "DATE"))
        });
        assert!(all_day, "{name} is an all-day date");
        NaiveDate::parse_from_str(p.value.as_deref().unwrap(), "%Y%m%d").unwrap()
    }
}

fn parse_ics(bytes: &[u8]) -> Vec<Event> {
    let mut parser = ical::IcalParser::new(std::io::BufReader::new(bytes));
    let cal = parser.next().expect("a calendar").expect("it parses");
    assert!(parser.next().is_none(), "one calendar");
    let has = |name: &str, value: &str| {
        cal.properties
            .iter()
            .any(|p| p.name == name && p.value.as_deref() == Some(value))
    };
    assert!(has("VERSION", "2.0"));
    assert!(cal.properties.iter().any(|p| p.name == "PRODID"));
    cal.events
        .into_iter()
        .map(|e| Event {
            props: e.properties,
        })
        .collect()
}

#[test]
fn ics_has_a_run_and_a_result_day_for_every_scheduled_test() {
    let plan = demo_plan();
    let bytes = plan_demo("ics");
    // RFC 5545 §3.1: CRLF line ends, lines folded at 75 octets.
    let body = std::str::from_utf8(&bytes).unwrap();
    assert!(body.ends_with("\r\n"));
    for line in body.split("\r\n") {
        assert!(!line.contains('\n'), "a bare LF in {line:?}");
        assert!(line.len() <= 75, "unfolded line {line:?}");
    }
    // The calendar's name reads back as written (RFC 7986 NAME is TEXT).
    let cal = ical::IcalParser::new(std::io::BufReader::new(bytes.as_slice()))
        .next()
        .unwrap()
        .unwrap();
    let want = format!("Experiment plan: {}", plan.portfolio);
    for key in ["NAME", "X-WR-CALNAME"] {
        let p = cal.properties.iter().find(|p| p.name == key).unwrap();
        assert_eq!(ics_unescape(p.value.as_deref().unwrap()), want, "{key}");
    }
    let events = parse_ics(&bytes);
    let tests = scheduled(&plan);
    // Interim looks: every look of a test but its last (its result).
    let interim = |e: &PlannedExperiment| -> Vec<NaiveDate> {
        e.looks.as_ref().map_or_else(Vec::new, |l| {
            l.dates[..l.dates.len() - 1]
                .iter()
                .map(|d| d.date)
                .collect()
        })
    };
    let looks: usize = tests.iter().map(|e| interim(e).len()).sum();
    assert!(looks > 0, "the demo has tests with interim looks");
    assert_eq!(
        events.len(),
        2 * tests.len() + looks,
        "two events per scheduled test and one per interim look"
    );

    let mut uids = BTreeSet::new();
    for e in &tests {
        // The events of one test: the only ones whose summary names its id.
        let tag = format!("[{}]", e.id);
        let (look_events, mine): (Vec<&Event>, Vec<&Event>) = events
            .iter()
            .filter(|ev| ics_unescape(&ev.get("SUMMARY")).ends_with(&tag))
            .partition(|ev| ics_unescape(&ev.get("SUMMARY")).starts_with("Interim look "));
        assert_eq!(mine.len(), 2, "{}: two events", e.id);
        // One all-day event per interim look, on the look's date, that
        // says which look it is and that the test may stop there.
        let dates = interim(e);
        assert_eq!(
            look_events.len(),
            dates.len(),
            "{}: its interim looks",
            e.id
        );
        for (k, (ev, date)) in look_events.iter().zip(&dates).enumerate() {
            let summary = ics_unescape(&ev.get("SUMMARY"));
            let want = format!(
                "Interim look {} of {}, may stop early",
                k + 1,
                dates.len() + 1
            );
            assert!(summary.starts_with(&want), "{summary}");
            assert_eq!(ev.date("DTSTART"), *date, "{}", e.id);
            assert_eq!(ev.date("DTEND"), *date + Duration::days(1), "{}", e.id);
            assert!(uids.insert(ev.get("UID")), "UIDs are unique");
        }
        let (result, run): (Vec<&Event>, Vec<&Event>) = mine
            .into_iter()
            .partition(|ev| ics_unescape(&ev.get("SUMMARY")).starts_with("Result due: "));
        let (run, result) = (run[0], result[0]);
        let r = e.run.unwrap();
        let (start, end, due) = (r.start, r.end, r.result_date);

        // All day from the first day; DTEND is exclusive (RFC 5545 §3.6.1),
        // so the day after the last day of data.
        assert_eq!(run.date("DTSTART"), start, "{}", e.id);
        assert_eq!(run.date("DTEND"), end + Duration::days(1), "{}", e.id);
        assert!(ics_unescape(&run.get("SUMMARY")).contains(&e.title));
        // The result-due event covers exactly the result date.
        assert_eq!(result.date("DTSTART"), due, "{}", e.id);
        assert_eq!(result.date("DTEND"), due + Duration::days(1), "{}", e.id);

        let labels: Vec<&str> = e
            .pools
            .iter()
            .map(|id| {
                plan.pools
                    .iter()
                    .find(|p| &p.id == id)
                    .unwrap()
                    .label
                    .as_str()
            })
            .collect();
        for ev in [run, result] {
            let desc = ics_unescape(&ev.get("DESCRIPTION"));
            assert!(
                desc.contains(&format!(
                    "Pool: {} ({})",
                    labels.join(", "),
                    e.pools.join(", ")
                )),
                "{desc}"
            );
            let share = format!(
                "Share of the pool: {:.0}%",
                e.run.unwrap().share.fraction() * 100.0
            );
            assert!(desc.contains(&share), "{share} in {desc}");
            let units = format!("Units needed: {}", e.units_needed);
            assert!(desc.replace(',', "").contains(&units), "{units} in {desc}");
            let uid = ev.get("UID");
            assert!(uid.contains(&e.id), "{uid}");
            assert!(uids.insert(uid), "UIDs are unique");
        }
    }
}

fn uids_by_summary(bytes: &[u8]) -> BTreeSet<(String, String)> {
    parse_ics(bytes)
        .iter()
        .map(|ev| (ics_unescape(&ev.get("SUMMARY")), ev.get("UID")))
        .collect()
}

#[test]
fn ics_uids_are_stable_across_runs_and_when_dates_move() {
    let a = uids_by_summary(&plan_demo("ics"));
    let b = uids_by_summary(&plan_demo("ics"));
    assert_eq!(a, b);
    // Planned a week later most dates move, but each test keeps its UIDs,
    // so a re-imported calendar updates its events instead of adding more.
    let later = ok(&["plan", &demo(), "--format", "ics", "--today", "2027-01-11"]);
    let c = uids_by_summary(&later);
    let moved_dates = plan_demo("ics") != later;
    assert!(moved_dates, "the later plan differs");
    let same_event_same_uid = c.iter().filter(|pair| a.contains(pair)).count();
    let shared_tests = c
        .iter()
        .filter(|(s, _)| a.iter().any(|(s2, _)| s2 == s))
        .count();
    assert!(shared_tests > 30, "{shared_tests} events in both calendars");
    assert_eq!(same_event_same_uid, shared_tests);
}

// ---------------------------------------------------------------- HTML

/// A start tag: its name and its attributes, unescaped.
type Tag = (String, Vec<(String, String)>);

/// Walks the document with quick-xml (well-formed: every element closed and
/// nested, one root, only XML's own entities) and returns every start tag
/// with its attributes, and all text.
fn parse_html(html: &str) -> (Vec<Tag>, String) {
    use quick_xml::events::{BytesStart, Event};
    fn tag(e: &BytesStart) -> Tag {
        let name = AsRef::<str>::as_ref(&e.name()).to_string();
        let attrs = e
            .attributes()
            .map(|a| {
                let a = a.expect("well-formed attribute");
                (
                    AsRef::<str>::as_ref(&a.key).to_string(),
                    a.normalized_value(quick_xml::XmlVersion::Implicit1_0)
                        .expect("attribute value unescapes")
                        .into_owned(),
                )
            })
            .collect();
        (name, attrs)
    }
    let body = html
        .strip_prefix("<!DOCTYPE html>")
        .expect("starts with the HTML5 doctype");
    let mut reader = quick_xml::Reader::from_str(body);
    reader.config_mut().check_end_names = true;
    let (mut depth, mut roots) = (0usize, 0usize);
    let mut tags = Vec::new();
    let mut texts = String::new();
    loop {
        match reader.read_event() {
            Ok(Event::Start(e)) => {
                roots += usize::from(depth == 0);
                depth += 1;
                tags.push(tag(&e));
            }
            Ok(Event::Empty(e)) => {
                roots += usize::from(depth == 0);
                tags.push(tag(&e));
            }
            Ok(Event::End(_)) => depth -= 1,
            Ok(Event::Text(t)) => texts.push_str(&t),
            Ok(Event::CData(t)) => texts.push_str(&t),
            Ok(Event::GeneralRef(r)) => {
                if r.is_char_ref() {
                    r.resolve_char_ref().expect("a valid character reference");
                } else {
                    let name: &str = &r;
                    assert!(
                        ["amp", "lt", "gt", "quot", "apos"].contains(&name),
                        "entity &{name}; is not XML's"
                    );
                }
            }
            Ok(Event::Eof) => break,
            Ok(_) => {}
            Err(e) => panic!("not well-formed at byte {}: {e}", reader.error_position()),
        }
    }
    assert_eq!(depth, 0, "every element is closed");
    assert_eq!(roots, 1, "one root element");
    (tags, texts)
}

#[test]
fn html_is_well_formed_self_contained_and_names_every_test() {
    let plan = demo_plan();
    let html = text(plan_demo("html"));
    let (tags, texts) = parse_html(&html);
    assert_eq!(tags[0].0, "html");
    assert!(tags.iter().any(|(n, _)| n == "svg"), "an inline SVG chart");
    for e in &plan.experiments {
        assert!(html.contains(&e.id), "`{}` in the report", e.id);
    }
    // Self-contained: nothing is fetched from anywhere.
    for (name, attrs) in &tags {
        for (key, value) in attrs {
            let v = value.trim().to_ascii_lowercase();
            if ["src", "href", "xlink:href", "srcset", "data", "action"].contains(&key.as_str()) {
                assert!(
                    !(v.starts_with("http:") || v.starts_with("https:") || v.starts_with("//")),
                    "<{name} {key}=\"{value}\"> reaches out"
                );
            }
        }
        if name == "script" {
            assert!(!attrs.iter().any(|(k, _)| k == "src"), "an external script");
        }
        if name == "link" {
            assert!(
                !attrs
                    .iter()
                    .any(|(k, v)| k == "rel" && v.contains("stylesheet")),
                "an external style sheet"
            );
        }
    }
    let css = texts.to_ascii_lowercase();
    for bad in [
        "@import",
        "@font-face",
        "url(http",
        "url(//",
        "url('http",
        "url(\"http",
    ] {
        assert!(!css.contains(bad), "`{bad}` in the report's style");
    }
}

// ---------------------------------------------------------------- Markdown

#[test]
fn markdown_has_a_row_per_result_the_misfits_and_the_assumptions() {
    let plan = demo_plan();
    let md = text(plan_demo("md"));
    let rows: Vec<&str> = md.lines().filter(|l| l.starts_with("| ")).collect();
    for e in scheduled(&plan) {
        let due = e
            .run
            .unwrap()
            .result_date
            .format("%a %-d %b %Y")
            .to_string();
        let mine: Vec<&&str> = rows
            .iter()
            .filter(|r| r.contains(&format!("(`{}`)", e.id)))
            .collect();
        assert_eq!(mine.len(), 1, "one table row for `{}`", e.id);
        assert!(mine[0].starts_with(&format!("| {due} |")), "{}", mine[0]);
        let runs = format!("{} to {}", e.run.unwrap().start, e.run.unwrap().end);
        assert!(mine[0].contains(&runs), "{}", mine[0]);
    }
    // The result table lists the results in date order.
    let dues: Vec<NaiveDate> = rows
        .iter()
        .filter_map(|r| r.split('|').nth(1))
        .filter_map(|c| NaiveDate::parse_from_str(c.trim(), "%a %-d %b %Y").ok())
        .collect();
    assert_eq!(dues.len(), scheduled(&plan).len());
    assert!(
        dues.windows(2).all(|w| w[0] <= w[1]),
        "sorted by result date"
    );

    let (_, misfits) = md
        .split_once("\n### Tests that do not fit\n")
        .expect("a section for the tests that do not fit");
    let (misfits, assumptions) = misfits
        .split_once("\n### Assumptions\n")
        .expect("an assumptions section after it");
    for e in plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Unscheduled)
    {
        let line = misfits
            .lines()
            .find(|l| l.contains(&format!("(`{}`", e.id)))
            .unwrap_or_else(|| panic!("`{}` among the misfits", e.id));
        assert!(line.starts_with("- "), "{line}");
        assert!(line.contains(e.reason.as_deref().unwrap()), "{line}");
    }
    let paragraph = assumptions.trim();
    assert!(paragraph.len() > 200, "{paragraph}");
    assert!(!paragraph.contains("\n\n"), "one paragraph");
    assert!(paragraph.contains("forecast"), "{paragraph}");
}

// ---------------------------------------------------------------- same bytes

#[test]
fn every_format_gives_the_same_bytes_on_two_runs() {
    for format in ["text", "csv", "ics", "html", "md"] {
        assert_eq!(plan_demo(format), plan_demo(format), "{format}");
    }
    // JSON carries the solver's wall-clock seconds; `--no-timing` writes 0.
    let json = || ok(&["plan", &demo(), "--format", "json", "--no-timing"]);
    assert_eq!(json(), json());
}

// ---------------------------------------------------------------- --out

#[test]
fn out_writes_the_file_and_nothing_on_stdout() {
    let dir = tempfile::tempdir().unwrap();
    for format in ["json", "csv", "ics", "html", "md", "text"] {
        let path = dir.path().join(format!("plan.{format}"));
        let p = path.to_str().unwrap();
        let out = sluice(&[
            "plan",
            &demo(),
            "--format",
            format,
            "--no-timing",
            "--out",
            p,
        ]);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(out.stdout.is_empty(), "{format}: stdout stays empty");
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(stderr.contains(p), "the note names the file: {stderr}");
        // The file holds what stdout would have held at 120 columns (files
        // get that fixed width and no colour).
        let piped = sluice_env(
            &["plan", &demo(), "--format", format, "--no-timing"],
            &[("COLUMNS", "120")],
        )
        .stdout;
        assert_eq!(std::fs::read(&path).unwrap(), piped, "{format}");
    }
    let mut names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    // No temporary files left behind by the atomic writes.
    assert_eq!(
        names,
        [
            "plan.csv",
            "plan.html",
            "plan.ics",
            "plan.json",
            "plan.md",
            "plan.text"
        ]
    );
}

#[test]
fn out_never_overwrites_the_portfolio() {
    let dir = tempfile::tempdir().unwrap();
    let portfolio = dir.path().join("demo.yaml");
    std::fs::copy(repo("portfolios/demo.yaml"), &portfolio).unwrap();
    // The demo's pools read their history next to it.
    crate::util::demo_history_into(dir.path());
    let before = std::fs::read(&portfolio).unwrap();
    let same = portfolio.to_str().unwrap().to_string();
    let dotted = dir.path().join(".").join("demo.yaml");
    for target in [same.clone(), dotted.to_str().unwrap().to_string()] {
        let out = sluice(&["plan", &same, "--format", "html", "--out", &target]);
        assert_ne!(out.status.code(), Some(0), "refused: {target}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("input file"), "{err}");
        assert!(err.contains("demo.yaml"), "{err}");
        assert!(out.stdout.is_empty());
        assert_eq!(std::fs::read(&portfolio).unwrap(), before, "untouched");
    }
}

#[test]
fn out_into_a_missing_folder_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("reports");
    let target = missing.join("plan.html");
    let out = sluice(&[
        "plan",
        &demo(),
        "--format",
        "html",
        "--out",
        target.to_str().unwrap(),
    ]);
    assert_ne!(out.status.code(), Some(0));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.starts_with("error: "), "{err}");
    assert!(err.contains(&format!("`{}`", missing.display())), "{err}");
    assert!(err.contains("does not exist"), "{err}");
    assert!(!missing.exists(), "no folder made on the user's behalf");
}

// ---------------------------------------------------------------- replan

#[test]
fn replan_with_previous_shows_what_moved_in_text_md_and_json() {
    let dir = tempfile::tempdir().unwrap();
    let previous = dir.path().join("plan.json");
    let progress = dir.path().join("progress.yaml");
    std::fs::write(&progress, DAY30_PROGRESS).unwrap();
    let prev = previous.to_str().unwrap();
    ok(&[
        "plan",
        &demo(),
        "--format",
        "json",
        "--no-timing",
        "--out",
        prev,
    ]);
    let replan = |format: &str| {
        ok(&[
            "replan",
            &demo(),
            "--progress",
            progress.to_str().unwrap(),
            "--today",
            "2027-02-03",
            "--previous",
            prev,
            "--format",
            format,
            "--no-timing",
        ])
    };
    for format in ["text", "md"] {
        let out = text(replan(format));
        assert!(
            out.contains("What moved since the previous plan"),
            "{format}: {out}"
        );
        assert!(out.contains("pdp-bundles"), "{format}");
    }
    let json: serde_json::Value = serde_json::from_slice(&replan("json")).unwrap();
    assert!(json["changes"].is_object(), "{}", json["changes"]);
    let plan: Plan = serde_json::from_value(json).unwrap();
    let status = |id: &str| {
        plan.experiments
            .iter()
            .find(|e| e.id == id)
            .unwrap_or_else(|| panic!("`{id}` in the re-plan"))
            .status
    };
    assert_eq!(status("search-ranking-v2"), Status::Running);
    assert_eq!(status("home-personal-recs"), Status::Finished);
    assert_eq!(status("pdp-bundles"), Status::Cancelled);
    // Nothing new starts before the re-plan's day.
    for e in scheduled(&plan) {
        assert!(e.run.unwrap().start >= NaiveDate::from_ymd_opt(2027, 2, 3).unwrap());
    }
    // The re-plan's other formats render too and stay well-formed.
    parse_html(&text(replan("html")));
    parse_ics(&replan("ics"));
}

// ---------------------------------------------------------------- widths

fn text_with(env: &[(&str, &str)]) -> String {
    let out = sluice_env(&["plan", &demo()], env);
    assert!(out.status.success());
    text(out.stdout)
}

fn widest(s: &str) -> usize {
    s.lines().map(UnicodeWidthStr::width).max().unwrap_or(0)
}

#[test]
fn columns_sets_the_width_off_a_terminal() {
    let plan = demo_plan();
    let narrow = text_with(&[("COLUMNS", "60")]);
    let wide = text_with(&[("COLUMNS", "160")]);
    let default = text_with(&[]);
    assert!(widest(&narrow) <= 60, "{narrow}");
    assert!(widest(&wide) <= 160, "{wide}");
    assert!(widest(&default) <= 100, "{default}");
    // The widths are used, not just respected.
    assert!(widest(&narrow) > 50, "{}", widest(&narrow));
    assert!(widest(&wide) > 120, "{}", widest(&wide));
    assert!(widest(&default) > 80, "{}", widest(&default));

    // The narrow table still names every experiment in full.
    let (table, _) = narrow
        .split_once("\nTimeline")
        .expect("a timeline after the table");
    for e in &plan.experiments {
        assert!(table.contains(&e.id), "`{}` in the narrow table", e.id);
    }

    // A value that is no width falls back to 100 columns.
    for junk in ["", "0", "wide", "-5", "99999"] {
        assert_eq!(text_with(&[("COLUMNS", junk)]), default, "COLUMNS={junk:?}");
    }
    // A file does not depend on the caller's COLUMNS: it is laid out at
    // 120 columns, with the result range and the pool in its table.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("plan.txt");
    let out = sluice_env(
        &["plan", &demo(), "--out", file.to_str().unwrap()],
        &[("COLUMNS", "60")],
    );
    assert!(out.status.success());
    let written = std::fs::read_to_string(&file).unwrap();
    assert_eq!(written, text_with(&[("COLUMNS", "120")]));
    assert!(written.lines().all(|l| l.width() <= 120), "{written}");
    let header = written.lines().find(|l| l.contains(" test ")).unwrap();
    for column in [
        "pool",
        "share",
        "start",
        "result due",
        "result due (P10–P90)",
    ] {
        assert!(header.contains(column), "{column} in {header}");
    }
}

#[test]
fn no_colour_off_a_terminal_or_with_no_color() {
    for env in [
        vec![],
        vec![("NO_COLOR", "1")],
        vec![("COLUMNS", "160"), ("NO_COLOR", "1")],
        vec![("COLUMNS", "60")],
    ] {
        let out = text_with(&env);
        assert!(!out.contains('\x1b'), "an escape sequence with {env:?}");
    }
}
