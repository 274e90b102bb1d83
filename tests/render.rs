//! Library-level tests of the renderers on the fixture plan in
//! tests/fixtures/plan-small.json (invented data: two pools, one split and
//! one overlap, five scheduled tests, two that do not fit, two blackouts):
//! snapshots of every format, parse-backs with independent crates (JSON with
//! serde_json, CSV with csv, iCalendar with `ical`, a different crate from
//! the `icalendar` writer, HTML with quick-xml), byte-identical output, and
//! wide and narrow terminals.
//!
//! These call the library: `sluice plan` (and with it tests that run the
//! binary on the demo portfolio) arrives with the scheduler.

use crate::util::ics_unescape;
use chrono::{Duration, NaiveDate};
use sluice::plan::{Plan, Run, Status};
use sluice::render::{render, Format, RenderOptions};
use unicode_width::UnicodeWidthStr;

fn fixture() -> Plan {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/plan-small.json"
    ))
    .unwrap();
    serde_json::from_str(&text).unwrap()
}

fn render_str(plan: &Plan, format: Format, opts: &RenderOptions) -> String {
    String::from_utf8(render(plan, format, opts).unwrap()).unwrap()
}

fn file_opts() -> RenderOptions {
    RenderOptions::for_file()
}

fn text_at(width: u16) -> RenderOptions {
    RenderOptions {
        width: Some(width),
        colour: false,
    }
}

// ---------------------------------------------------------------- snapshots

#[test]
fn snapshot_text_default_width() {
    insta::assert_snapshot!(
        "text_100",
        render_str(&fixture(), Format::Text, &file_opts())
    );
}

#[test]
fn snapshot_text_wide() {
    insta::assert_snapshot!(
        "text_160",
        render_str(&fixture(), Format::Text, &text_at(160))
    );
}

#[test]
fn snapshot_text_narrow() {
    insta::assert_snapshot!(
        "text_60",
        render_str(&fixture(), Format::Text, &text_at(60))
    );
}

#[test]
fn snapshot_json() {
    insta::assert_snapshot!("json", render_str(&fixture(), Format::Json, &file_opts()));
}

#[test]
fn snapshot_csv() {
    insta::assert_snapshot!("csv", render_str(&fixture(), Format::Csv, &file_opts()));
}

#[test]
fn snapshot_ics() {
    // CRLF line ends shown as `\r` marks so the snapshot file stays plain.
    let ics = render_str(&fixture(), Format::Ics, &file_opts()).replace("\r\n", "␍\n");
    insta::assert_snapshot!("ics", ics);
}

#[test]
fn snapshot_html() {
    insta::assert_snapshot!("html", render_str(&fixture(), Format::Html, &file_opts()));
}

#[test]
fn snapshot_md() {
    insta::assert_snapshot!("md", render_str(&fixture(), Format::Md, &file_opts()));
}

// ------------------------------------------------------- determinism

#[test]
fn every_format_is_byte_identical_on_two_renders() {
    for format in Format::ALL {
        for opts in [file_opts(), text_at(60), text_at(160)] {
            let a = render(&fixture(), format, &opts).unwrap();
            let b = render(&fixture(), format, &opts).unwrap();
            assert_eq!(a, b, "{format} at {opts:?}");
        }
    }
}

#[test]
fn the_json_fixture_is_what_the_json_renderer_writes() {
    // The fixture file is itself renderer output: parse and re-render gives
    // the same bytes, so key order and number formatting are stable.
    let on_disk = std::fs::read(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/plan-small.json"
    ))
    .unwrap();
    assert_eq!(
        render(&fixture(), Format::Json, &file_opts()).unwrap(),
        on_disk
    );
}

// ------------------------------------------------------------ parse-backs

#[test]
fn json_parses_back_into_an_equal_plan() {
    let plan = fixture();
    let bytes = render(&plan, Format::Json, &file_opts()).unwrap();
    let back: Plan = serde_json::from_slice(&bytes).unwrap();
    assert_eq!(back, plan);
}

#[test]
fn csv_parses_back_row_by_row() {
    let plan = fixture();
    let bytes = render(&plan, Format::Csv, &file_opts()).unwrap();
    let mut reader = csv::Reader::from_reader(bytes.as_slice());
    let headers = reader.headers().unwrap().clone();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    assert_eq!(rows.len(), plan.experiments.len());
    for (row, e) in rows.iter().zip(&plan.experiments) {
        assert_eq!(&row[col("id")], e.id);
        assert_eq!(&row[col("title")], e.title, "quotes and commas survive");
        assert_eq!(&row[col("pools")], e.pools.join(";"));
        let date = |name: &str| {
            let cell = &row[col(name)];
            (!cell.is_empty()).then(|| NaiveDate::parse_from_str(cell, "%Y-%m-%d").unwrap())
        };
        assert_eq!(date("start"), e.run.map(|r| r.start));
        assert_eq!(date("end"), e.run.map(|r| r.end));
        assert_eq!(date("result_date"), e.run.map(|r| r.result_date));
        let share = &row[col("share")];
        assert_eq!(
            (!share.is_empty()).then(|| share.parse::<f64>().unwrap()),
            e.run.map(|r| r.share.fraction())
        );
        assert_eq!(
            row[col("units_needed")].parse::<u64>().unwrap(),
            e.units_needed
        );
        let status = match e.status {
            Status::Scheduled => "scheduled",
            Status::Unscheduled => "unscheduled",
            Status::Running => "running",
            Status::Finished => "finished",
            Status::Cancelled => "cancelled",
        };
        assert_eq!(&row[col("status")], status);
        assert_eq!(&row[col("reason")], e.reason.as_deref().unwrap_or(""));
    }
}

/// One property as the parser gives it: name, parameters, value.
type ParsedProperty = (String, Vec<(String, Vec<String>)>, String);

struct ParsedEvent {
    props: Vec<ParsedProperty>,
}

impl ParsedEvent {
    fn get(&self, name: &str) -> &str {
        let found: Vec<_> = self.props.iter().filter(|p| p.0 == name).collect();
        assert_eq!(found.len(), 1, "exactly one {name}");
        &found[0].2
    }

    fn is_date(&self, name: &str) -> bool {
        self.props.iter().any(|p| {
            p.0 == name
                && p.1
                    .iter()
                    .any(|(k, v)| k == "VALUE" && v.iter().any(|x| x == "DATE"))
        })
    }

    fn date(&self, name: &str) -> NaiveDate {
        assert!(self.is_date(name), "{name} is an all-day DATE value");
        NaiveDate::parse_from_str(self.get(name), "%Y%m%d").unwrap()
    }
}

fn parse_ics(bytes: &[u8]) -> (Vec<(String, String)>, Vec<ParsedEvent>) {
    let mut parser = ical::IcalParser::new(std::io::BufReader::new(bytes));
    let cal = parser.next().expect("one calendar").expect("parses");
    assert!(parser.next().is_none(), "only one calendar");
    let cal_props = cal
        .properties
        .iter()
        .map(|p| (p.name.clone(), p.value.clone().unwrap_or_default()))
        .collect();
    let events = cal
        .events
        .iter()
        .map(|e| ParsedEvent {
            props: e
                .properties
                .iter()
                .map(|p| {
                    (
                        p.name.clone(),
                        p.params.clone().unwrap_or_default(),
                        p.value.clone().unwrap_or_default(),
                    )
                })
                .collect(),
        })
        .collect();
    (cal_props, events)
}

#[test]
fn ics_parses_with_an_independent_parser_and_every_event_checks_out() {
    let plan = fixture();
    let bytes = render(&plan, Format::Ics, &file_opts()).unwrap();
    let (cal, events) = parse_ics(&bytes);
    assert!(cal.contains(&("VERSION".to_string(), "2.0".to_string())));
    assert!(cal.iter().any(|(k, _)| k == "PRODID"));

    let scheduled: Vec<_> = plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
        .collect();
    // Each test's run and result in plan order, then each interim look
    // (every look but the last) of the tests with looks.
    let looks: Vec<(&str, usize, NaiveDate)> = scheduled
        .iter()
        .flat_map(|e| {
            let l = e.looks.as_ref();
            let dates = l.map_or(&[][..], |l| &l.dates[..l.dates.len() - 1]);
            let n = l.map_or(0, |l| l.dates.len());
            dates.iter().map(move |d| (e.id.as_str(), n, d.date))
        })
        .collect();
    assert!(!looks.is_empty(), "the fixture has a test with looks");
    assert_eq!(events.len(), 2 * scheduled.len() + looks.len());
    for (k, (id, n, date)) in looks.iter().enumerate() {
        let ev = &events[2 * scheduled.len() + k];
        let summary = ics_unescape(ev.get("SUMMARY"));
        assert!(
            summary.starts_with(&format!("Interim look {} of {n}, may stop early: ", k + 1)),
            "{summary}"
        );
        assert!(summary.ends_with(&format!("[{id}]")), "{summary}");
        assert_eq!(ev.date("DTSTART"), *date);
        assert_eq!(ev.date("DTEND"), *date + Duration::days(1));
        assert!(ev.get("UID").starts_with(&format!("look-{}.{id}.", k + 1)));
    }
    let mut uids = std::collections::BTreeSet::new();
    for (i, e) in scheduled.iter().enumerate() {
        let run = &events[2 * i];
        let result = &events[2 * i + 1];
        let Run {
            start,
            end,
            result_date: due,
            share,
            ..
        } = e.run.unwrap();

        // The run: all day from start, DTEND exclusive (RFC 5545 §3.6.1).
        assert_eq!(run.date("DTSTART"), start, "{}", e.id);
        assert_eq!(run.date("DTEND"), end + Duration::days(1), "{}", e.id);
        assert!(ics_unescape(run.get("SUMMARY")).contains(&e.title));
        // The result: one all-day event on the result date.
        assert_eq!(result.date("DTSTART"), due, "{}", e.id);
        assert_eq!(result.date("DTEND"), due + Duration::days(1), "{}", e.id);
        assert!(ics_unescape(result.get("SUMMARY")).starts_with("Result due: "));

        for ev in [run, result] {
            let desc = ics_unescape(ev.get("DESCRIPTION"));
            assert!(
                desc.contains(&format!("({})", e.pools.join(", "))),
                "pool in {desc}"
            );
            let share = format!("{:.0}%", share.fraction() * 100.0);
            assert!(desc.contains(&share), "share {share} in {desc}");
            let units = e.units_needed.to_string();
            let grouped = desc.replace(',', "");
            assert!(grouped.contains(&units), "units {units} in {desc}");
            // Deterministic stamp: the plan's today, not the clock.
            assert_eq!(
                ev.get("DTSTAMP"),
                format!("{}T000000Z", plan.today.format("%Y%m%d"))
            );
            assert!(uids.insert(ev.get("UID").to_string()), "UIDs are unique");
            assert!(ev.get("UID").contains(&e.id));
            assert!(ev.get("UID").contains(&plan.portfolio));
        }
    }
}

#[test]
fn ics_lines_are_crlf_and_folded_to_75_octets() {
    let mut plan = fixture();
    plan.experiments[0].title =
        "A very long title ".repeat(12) + "with ünïcode, commas; and semicolons";
    let bytes = render(&plan, Format::Ics, &file_opts()).unwrap();
    let text = String::from_utf8(bytes.clone()).unwrap();
    assert!(text.ends_with("END:VCALENDAR\r\n"));
    for line in text.split("\r\n") {
        assert!(!line.contains('\n'), "bare LF in {line:?}");
        assert!(line.len() <= 75, "{} octets: {line:?}", line.len());
    }
    // The long title survives folding and escaping. Unfolded here by the
    // rule of RFC 5545 §3.1 (drop CRLF followed by one space or tab): the
    // `ical` parser also trims trailing spaces of each physical line, which
    // loses a space that falls just before a fold.
    let unfolded = text.replace("\r\n ", "").replace("\r\n\t", "");
    let summary = unfolded
        .split("\r\n")
        .find(|l| l.starts_with("SUMMARY:Test running: A very"))
        .unwrap();
    assert_eq!(
        ics_unescape(&summary["SUMMARY:".len()..]),
        format!("Test running: {} [hero-copy]", plan.experiments[0].title)
    );
    let (_, events) = parse_ics(&bytes);
    // Five runs, five results, two interim looks.
    assert_eq!(events.len(), 12);
}

#[test]
fn ics_uids_stay_the_same_when_the_schedule_moves() {
    // Re-planning moves dates; the UIDs must not move with them, so a
    // calendar client updates the events instead of adding new ones.
    let plan = fixture();
    let mut moved = fixture();
    for e in &mut moved.experiments {
        if let Some(r) = &mut e.run {
            r.start += Duration::days(7);
            r.end += Duration::days(7);
            r.result_date += Duration::days(7);
        }
    }
    let uids = |p: &Plan| -> Vec<String> {
        let (_, events) = parse_ics(&render(p, Format::Ics, &file_opts()).unwrap());
        events.iter().map(|e| e.get("UID").to_string()).collect()
    };
    assert_eq!(uids(&plan), uids(&moved));
}

#[test]
fn renderers_read_the_result_date_rather_than_derive_it() {
    // Give one test a result date three days after its end (a plan whose
    // analysis takes longer): every format must show that date as it is.
    let mut plan = fixture();
    let run = plan.experiments[0].run.as_mut().unwrap();
    let due = run.end + Duration::days(3);
    run.result_date = due;
    let (_, events) = parse_ics(&render(&plan, Format::Ics, &file_opts()).unwrap());
    assert_eq!(events[1].date("DTSTART"), due);
    for format in [Format::Text, Format::Csv, Format::Html, Format::Md] {
        let out = render_str(&plan, format, &text_at(160));
        let shown = if format == Format::Md {
            due.format("%a %-d %b %Y").to_string()
        } else {
            due.to_string()
        };
        assert!(out.contains(&shown), "{format} shows {shown}");
    }
}

/// Checks well-formedness with quick-xml (every element closed and nested,
/// attributes quoted, entities known) and returns the start tags seen.
fn xml_elements(html: &str) -> Vec<(String, Vec<(String, String)>)> {
    use quick_xml::events::Event;
    let mut reader = quick_xml::Reader::from_str(html);
    reader.config_mut().check_end_names = true;
    let mut depth = 0usize;
    let mut roots = 0usize;
    let mut seen = Vec::new();
    loop {
        match reader.read_event() {
            Ok(Event::Start(e)) => {
                if depth == 0 {
                    roots += 1;
                }
                depth += 1;
                seen.push(tag(&e));
            }
            Ok(Event::Empty(e)) => {
                if depth == 0 {
                    roots += 1;
                }
                seen.push(tag(&e));
            }
            Ok(Event::End(_)) => depth -= 1,
            Ok(Event::GeneralRef(r)) => {
                // Only XML's own entities and character references: HTML's
                // named entities (`&nbsp;`) would break an XML parser.
                if r.is_char_ref() {
                    r.resolve_char_ref().expect("valid character reference");
                } else {
                    let name: &str = &r;
                    assert!(
                        ["amp", "lt", "gt", "quot", "apos"].contains(&name),
                        "unknown entity &{name};"
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
    seen
}

fn tag(e: &quick_xml::events::BytesStart) -> (String, Vec<(String, String)>) {
    let name = AsRef::<str>::as_ref(&e.name()).to_string();
    let attrs = e
        .attributes()
        .map(|a| {
            let a = a.expect("attribute well-formed");
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

#[test]
fn html_is_well_formed_xml_with_the_expected_parts() {
    let plan = fixture();
    let html = render_str(&plan, Format::Html, &file_opts());
    assert!(html.starts_with("<!DOCTYPE html>"));
    let elements = xml_elements(&html);
    let count = |name: &str| elements.iter().filter(|(n, _)| n == name).count();
    let with_class = |class: &str| {
        elements
            .iter()
            .filter(|(_, a)| a.iter().any(|(k, v)| k == "class" && v == class))
            .count()
    };
    let scheduled = plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
        .count();
    // The calendar: an axis and a drawing per row (a test on two pools has
    // a row in each), one chart per pool, and the legend's seven icons.
    let rows = elements
        .iter()
        .filter(|(n, a)| n == "div" && a.iter().any(|(k, _)| k == "data-test"))
        .count();
    let on_pools: usize = plan.experiments.iter().map(|e| e.pools.len()).sum();
    assert_eq!(rows, on_pools, "a calendar row per test and pool");
    assert_eq!(with_class("icon"), 7, "the legend's marks");
    assert_eq!(count("svg"), 1 + rows + plan.pools.len() + 7);
    let bars_on_rows: usize = plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
        .map(|e| e.pools.len())
        .sum();
    assert_eq!(
        with_class("bar"),
        bars_on_rows,
        "one labelled bar per scheduled test on each of its rows"
    );
    assert!(scheduled > 0);
    assert_eq!(with_class("today-label"), 1, "today's label");
    // Every row draws the week grid and today's line from the axis.
    let uses = |href: &str| {
        elements
            .iter()
            .filter(|(n, a)| n == "use" && a.iter().any(|(k, v)| k == "href" && v == href))
            .count()
    };
    assert_eq!(uses("#cal-grid"), rows);
    assert_eq!(uses("#cal-today"), rows);
    // Blackouts: the all-pool one shades both pools' rows and both pool
    // charts; the storefront one shades one of each.
    let shades = elements
        .iter()
        .filter(|(n, a)| {
            n == "rect"
                && a.iter()
                    .any(|(k, v)| k == "fill" && v.starts_with("url(#shade"))
        })
        .count();
    // The legend shows both kinds of shade once more.
    assert_eq!(shades, 3 + 3 + 2);
    // Tables: a row per experiment, and a row of numbers per test with a run.
    let with_run = plan.experiments.iter().filter(|e| e.run.is_some()).count();
    assert_eq!(count("tr"), 1 + plan.experiments.len() + 1 + with_run);
    // Each unscheduled test is listed with its reason.
    for e in plan.experiments.iter().filter(|e| e.reason.is_some()) {
        assert!(html.contains(&format!("<code>{}</code>", e.id)), "{}", e.id);
    }
    assert!(html.contains("@media print"));
    assert!(html.contains("independent randomisation units"));
    assert!(html.contains("pricing, health or vulnerable users"));
}

#[test]
fn html_bar_tooltips_carry_each_tests_numbers() {
    let plan = fixture();
    let html = render_str(&plan, Format::Html, &file_opts());
    for e in plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
    {
        let start = html.find(&format!(
            "<g class=\"bar\"><title>{}",
            sluice::render::html::esc(&e.title)
        ));
        let start = start.unwrap_or_else(|| panic!("no bar for {}", e.id));
        let title_end = start + html[start..].find("</title>").unwrap();
        let tip = &html[start..title_end];
        let run = e.run.unwrap();
        assert!(tip.contains(&run.result_date.to_string()), "{tip}");
        assert!(tip.contains(&format!("{} days", run.days)), "{tip}");
    }
}

#[test]
fn html_escapes_hostile_text_everywhere() {
    let mut plan = fixture();
    plan.portfolio = "q1 <script>alert(1)</script> & co".to_string();
    plan.experiments[0].title = "</title><svg onload=\"x\">".to_string();
    plan.experiments[5].reason = Some("a ' \" < > & reason".into());
    plan.pools[0].label = "<b>bold</b>".to_string();
    plan.blackouts[0].note = "]]> <!-- -->".to_string();
    let html = render_str(&plan, Format::Html, &file_opts());
    xml_elements(&html);
    assert!(!html.contains("<script"));
    assert!(!html.contains("<svg onload"));
    assert!(!html.contains("<b>bold"));
    assert!(!html.contains("<!-- -->"));
}

// -------------------------------------------------------------- terminal

fn assert_fits(text: &str, width: usize) {
    for line in text.lines() {
        assert!(line.width() <= width, "{} > {width}: {line}", line.width());
    }
}

#[test]
fn wide_terminal_shows_every_column_and_days() {
    let text = render_str(&fixture(), Format::Text, &text_at(160));
    assert_fits(&text, 160);
    for column in ["title", "end", "days", "units needed", "status"] {
        assert!(text.contains(column), "{column}");
    }
    assert!(text.contains("1 character = 1 day"));
}

#[test]
fn narrow_terminal_keeps_the_essentials_and_fits() {
    let plan = fixture();
    let text = render_str(&plan, Format::Text, &text_at(60));
    assert_fits(&text, 60);
    for e in &plan.experiments {
        assert!(text.contains(&e.id[..10.min(e.id.len())]), "{}", e.id);
    }
    for e in plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Scheduled)
    {
        assert!(
            text.contains(&e.run.unwrap().result_date.to_string()),
            "{}",
            e.id
        );
    }
    assert!(text.contains("Does not fit"));
}

#[test]
fn a_year_long_window_compresses_weeks_on_a_narrow_terminal() {
    let mut plan = fixture();
    plan.window.end = plan.window.start + Duration::days(7 * 52 - 1);
    let text = render_str(&plan, Format::Text, &text_at(60));
    assert_fits(&text, 60);
    assert!(text.contains("1 character = 2 weeks"), "{text}");
}

#[test]
fn colour_follows_the_options() {
    let plan = fixture();
    let plain = render_str(&plan, Format::Text, &text_at(100));
    assert!(!plain.contains('\x1b'));
    let coloured = render_str(
        &plan,
        Format::Text,
        &RenderOptions {
            width: Some(100),
            colour: true,
        },
    );
    assert!(coloured.contains("\x1b["));
    // File formats never carry colour, whatever the options say.
    for format in [
        Format::Json,
        Format::Csv,
        Format::Ics,
        Format::Html,
        Format::Md,
    ] {
        let out = render(
            &plan,
            format,
            &RenderOptions {
                width: Some(100),
                colour: true,
            },
        )
        .unwrap();
        assert!(!out.contains(&0x1b), "{format}");
    }
}

// ------------------------------------------------------------ edge cases

#[test]
fn an_empty_plan_renders_in_every_format() {
    let mut plan = fixture();
    plan.experiments.clear();
    plan.pools.clear();
    plan.blackouts.clear();
    for format in Format::ALL {
        for opts in [text_at(40), text_at(200)] {
            let out = render(&plan, format, &opts).unwrap();
            assert!(!out.is_empty(), "{format}");
        }
    }
    xml_elements(&render_str(&plan, Format::Html, &file_opts()));
}

#[test]
fn a_plan_with_half_a_run_is_refused_when_read() {
    // A run is all six facts or none, and only scheduled and running tests
    // have one: a plan file that breaks this does not parse, and the error
    // names the experiment and the fact.
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/plan-small.json"
    ))
    .unwrap();
    let mut value: serde_json::Value = serde_json::from_str(&text).unwrap();
    let read = |v: &serde_json::Value| serde_json::from_value::<Plan>(v.clone());
    assert!(read(&value).is_ok());
    let trust = &mut value["experiments"][2];
    assert_eq!(trust["id"], "trust-badges");
    trust["share"] = serde_json::Value::Null;
    let err = read(&value).unwrap_err().to_string();
    assert!(
        err.contains("`trust-badges`") && err.contains("`share`"),
        "{err}"
    );
    let mut value: serde_json::Value = serde_json::from_str(&text).unwrap();
    let out = value["experiments"]
        .as_array_mut()
        .unwrap()
        .iter_mut()
        .find(|e| e["status"] == "unscheduled")
        .unwrap();
    out["start"] = serde_json::json!("2027-01-04");
    let id = out["id"].as_str().unwrap().to_string();
    let err = read(&value).unwrap_err().to_string();
    assert!(
        err.contains(&format!("`{id}`")) && err.contains("`start`"),
        "{err}"
    );
}

// ------------------------------------------------------------------ docs

fn plan_json_doc() -> String {
    std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/docs/plan-json.md")).unwrap()
}

fn collect_keys(value: &serde_json::Value, keys: &mut std::collections::BTreeSet<String>) {
    match value {
        serde_json::Value::Object(map) => {
            for (k, v) in map {
                keys.insert(k.clone());
                collect_keys(v, keys);
            }
        }
        serde_json::Value::Array(items) => items.iter().for_each(|v| collect_keys(v, keys)),
        _ => {}
    }
}

#[test]
fn docs_plan_json_documents_every_key() {
    let doc = plan_json_doc();
    let value: serde_json::Value =
        serde_json::from_slice(&render(&fixture(), Format::Json, &file_opts()).unwrap()).unwrap();
    let mut keys = std::collections::BTreeSet::new();
    collect_keys(&value, &mut keys);
    for key in keys {
        assert!(
            doc.contains(&format!("| `{key}` |")),
            "docs/plan-json.md has no table row for `{key}`"
        );
    }
}

#[test]
fn docs_plan_json_example_is_a_valid_plan() {
    let doc = plan_json_doc();
    let start = doc.find("```json\n").unwrap() + "```json\n".len();
    let end = start + doc[start..].find("```").unwrap();
    let plan: Plan = serde_json::from_str(&doc[start..end]).unwrap();
    assert_eq!(plan.experiments.len(), 2);
}
