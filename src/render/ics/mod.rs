//! iCalendar (RFC 5545): for each scheduled experiment, an all-day event
//! spanning its run and an all-day "result due" event on its result date.
//!
//! Writing, line folding and text escaping are left to the `icalendar`
//! crate. Everything that calendar clients use to match events is derived
//! from the plan alone, so the same plan always gives the same bytes and a
//! re-imported calendar updates its events rather than duplicating them:
//! UIDs come from the portfolio's `id` (not its display name), the
//! experiment id and the event kind, and DTSTAMP is the plan's `today` at
//! midnight UTC (not the clock).
//!
//! A re-plan with `--previous` carries a [`CalendarHistory`](crate::plan::CalendarHistory)
//! ([`crate::diff::calendar_history`], comparing the events as [`Shown`]
//! words them): each changed event gets a higher SEQUENCE
//! (RFC 5545 §3.8.7.4), and the events of tests that left the calendar
//! (cancelled, finished early, no longer fitting, dropped) are published
//! again with STATUS:CANCELLED (§3.8.1.11), so that importing the re-plan
//! updates calendars that imported an earlier plan.
//! All-day events end on the day after their last day, as RFC 5545 §3.6.1
//! defines DTEND for DATE values (exclusive).

use super::common::{cut_short_note, pools_label, ramp_words, thousands, units};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::Plan;
use chrono::{Duration, NaiveTime};
use icalendar::{Calendar, Component, Event, EventLike, Property};

mod content;

use content::{closed_contents, contents, kept_contents, look_specs, Spec};
pub use content::{Content, Shown};

/// The iCalendar renderer.
pub struct Ics;

/// PRODID of every calendar sluice writes (RFC 5545 §3.7.3).
pub const PRODID: &str = "-//sluice//experiment plan//EN";

/// The kinds of event per scheduled experiment: its run and result, and
/// one for each interim look of a test with looks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EventKind {
    /// The span the test runs, first to last day.
    Run,
    /// The day its result is due.
    Result,
    /// The day its interim look `k` (from 1) can be read.
    Look(u32),
}

impl EventKind {
    fn tag(self) -> String {
        match self {
            EventKind::Run => "run".into(),
            EventKind::Result => "result".into(),
            EventKind::Look(k) => format!("look-{k}"),
        }
    }
}

/// The stable UID of one event: `<kind>.<experiment>.<portfolio>@sluice`.
/// Characters other than ASCII letters, digits and `-` are written as `_`
/// followed by their UTF-8 bytes in hex, so distinct ids never collide.
pub fn uid(portfolio: &str, experiment: &str, kind: EventKind) -> String {
    format!(
        "{}.{}.{}@sluice",
        kind.tag(),
        uid_part(experiment),
        uid_part(portfolio)
    )
}

fn uid_part(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        if c.is_ascii_alphanumeric() || c == '-' {
            out.push(c);
        } else {
            let mut buf = [0u8; 4];
            for b in c.encode_utf8(&mut buf).bytes() {
                out.push_str(&format!("_{b:02X}"));
            }
        }
    }
    out
}

/// Every event of the plan's calendar, in plan order, then the kept ones.
fn specs(plan: &Plan) -> Vec<Spec> {
    let mut out = Vec::new();
    let mut push = |id: &str, events: [Content; 2], sequence: u32| {
        for (content, kind) in events.into_iter().zip([EventKind::Run, EventKind::Result]) {
            out.push(Spec {
                uid: uid(&plan.id, id, kind),
                content,
                sequence,
            });
        }
    };
    for e in &plan.experiments {
        if let Some(cs) = contents(plan, e) {
            push(&e.id, cs, plan.event_sequence(&e.id));
        }
    }
    // Finished and cancelled tests at their real dates, unless a re-plan's
    // calendar history keeps their events as last published.
    let kept = |id: &str| {
        plan.calendar
            .iter()
            .flat_map(|c| &c.kept)
            .any(|k| k.id == id)
    };
    for e in plan.experiments.iter().filter(|e| !kept(&e.id)) {
        if let Some(cs) = closed_contents(plan, e) {
            push(&e.id, cs, plan.event_sequence(&e.id));
        }
    }
    for k in plan.calendar.iter().flat_map(|c| &c.kept) {
        push(&k.id, kept_contents(plan, k), k.sequence);
    }
    // Interim looks last, so the run and result events keep their places;
    // a kept test's looks go as its run and result do.
    for l in look_specs(plan) {
        out.push(Spec {
            uid: uid(&plan.id, &l.id, EventKind::Look(l.look)),
            sequence: plan.look_sequence(&l.id, l.look),
            content: l.event,
        });
    }
    out
}

impl Renderer for Ics {
    fn render(&self, plan: &Plan, _opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let stamp = plan.today.and_time(NaiveTime::MIN).and_utc();
        let mut cal = Calendar::empty();
        cal.append_property(Property::new("VERSION", "2.0"));
        cal.append_property(Property::new("PRODID", PRODID));
        cal.append_property(Property::new("CALSCALE", "GREGORIAN"));
        cal.append_property(Property::new("METHOD", "PUBLISH"));
        // `Calendar::name` writes NAME (RFC 7986 §5.1, a TEXT value)
        // without escaping it; escaped here, X-WR-CALNAME by the crate.
        let name = format!("Experiment plan: {}", plan.portfolio);
        cal.append_property(Property::new("NAME", escape_text(&name)));
        cal.append_property(Property::new("X-WR-CALNAME", &name));
        for spec in specs(plan) {
            let c = &spec.content;
            let mut event = Event::new();
            event
                .uid(&spec.uid)
                .timestamp(stamp)
                .summary(&c.summary)
                .description(&c.description)
                .starts(c.start)
                .ends(c.end + Duration::days(1))
                .status(c.status)
                .add_property("SEQUENCE", spec.sequence.to_string())
                .add_property("TRANSP", "TRANSPARENT");
            cal.push(event.done());
        }
        Ok(refold(&cal.to_string()).into_bytes())
    }
}

/// Escapes a TEXT value (RFC 5545 §3.3.11): backslash, semicolon, comma
/// and line breaks.
fn escape_text(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '\\' | ';' | ',' => {
                out.push('\\');
                out.push(c);
            }
            '\n' => out.push_str("\\n"),
            '\r' => {}
            c => out.push(c),
        }
    }
    out
}

/// Most octets in a content line, line break excluded (RFC 5545 §3.1).
const LINE_LIMIT: usize = 75;

/// Folds the calendar's content lines again, within [`LINE_LIMIT`] octets.
///
/// The `icalendar` crate (0.17) folds long lines, but its last piece can be
/// one octet over the limit, and it may fold right after a space, which
/// parsers that trim line ends (the `ical` crate among them) then lose. So
/// the crate's folds are undone (CRLF followed by one space: the crate
/// escapes line breaks inside values, so no other CRLF-space occurs) and
/// each line is folded again by the rule of RFC 5545 §3.1 (CRLF, then one
/// space), on UTF-8 character boundaries and never beside a space or tab.
fn refold(ics: &str) -> String {
    let unfolded = ics.replace("\r\n ", "");
    let mut out = String::with_capacity(ics.len());
    for line in unfolded.split_inclusive("\r\n") {
        let body = line.strip_suffix("\r\n").unwrap_or(line);
        let mut rest = body;
        let mut first = true;
        while rest.len() > LINE_LIMIT - usize::from(!first) {
            let room = LINE_LIMIT - usize::from(!first);
            let mut cut = room;
            while cut > 1
                && (!rest.is_char_boundary(cut)
                    || rest[..cut].ends_with([' ', '\t'])
                    || rest[cut..].starts_with([' ', '\t']))
            {
                cut -= 1;
            }
            if cut <= 1 {
                cut = room;
                while !rest.is_char_boundary(cut) {
                    cut -= 1;
                }
            }
            if !first {
                out.push(' ');
            }
            out.push_str(&rest[..cut]);
            out.push_str("\r\n");
            rest = &rest[cut..];
            first = false;
        }
        if !first {
            out.push(' ');
        }
        out.push_str(rest);
        if line.len() > body.len() {
            out.push_str("\r\n");
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn unfold(s: &str) -> String {
        s.replace("\r\n ", "")
    }

    #[test]
    fn refold_keeps_every_line_within_75_octets_and_the_content_intact() {
        // The shape the crate left one octet over: a continuation line of
        // a space and 75 octets.
        let long = format!("DESCRIPTION:{}\r\n {}\r\n", "a".repeat(63), "b".repeat(75));
        let folded = refold(&long);
        for line in folded.split("\r\n") {
            assert!(line.len() <= LINE_LIMIT, "{} octets: {line:?}", line.len());
        }
        assert_eq!(unfold(&folded), unfold(&long));
        assert!(folded.ends_with("\r\n"));

        // Multi-byte characters are never split, and no piece starts or
        // ends with a space.
        let words = format!("SUMMARY:{}end\r\n", "thé café au lait ".repeat(12));
        let folded = refold(&words);
        for line in folded.split("\r\n") {
            assert!(line.len() <= LINE_LIMIT);
            assert!(!line.ends_with(' '), "{line:?}");
            assert!(!line.starts_with("  "), "{line:?}");
        }
        assert_eq!(unfold(&folded), words);

        // A fold after a space is moved, so no piece ends with one.
        let spaced = format!(
            "DESCRIPTION:{}Units \r\n needed: 302\\,400\r\n",
            "c".repeat(57)
        );
        let folded = refold(&spaced);
        assert!(
            folded.split("\r\n").all(|l| !l.ends_with(' ')),
            "{folded:?}"
        );
        assert_eq!(unfold(&folded), unfold(&spaced));

        // Short lines pass through untouched.
        let short = "BEGIN:VCALENDAR\r\nVERSION:2.0\r\n";
        assert_eq!(refold(short), short);
    }

    #[test]
    fn rendered_lines_stay_within_the_limit() {
        let mut plan = crate::render::fixture::plan();
        for (i, e) in plan.experiments.iter_mut().enumerate() {
            // Titles of every length shift where the folds fall.
            e.title = format!("{} {}", e.title, "x".repeat(i * 7 + 40));
        }
        let bytes = Ics.render(&plan, &RenderOptions::default()).unwrap();
        let text = String::from_utf8(bytes).unwrap();
        for line in text.split("\r\n") {
            assert!(line.len() <= LINE_LIMIT, "{} octets: {line:?}", line.len());
        }
    }

    #[test]
    fn the_calendar_name_is_escaped_text() {
        assert_eq!(escape_text("a, b; c\\d\ne"), "a\\, b\\; c\\\\d\\ne");
        let mut plan = crate::render::fixture::plan();
        plan.portfolio = "Larkspur & Loom, Q1; 2027".to_string();
        let text =
            String::from_utf8(Ics.render(&plan, &RenderOptions::default()).unwrap()).unwrap();
        let want = "Experiment plan: Larkspur & Loom\\, Q1\\; 2027\r\n";
        assert!(text.contains(&format!("\r\nNAME:{want}")), "{text}");
        assert!(text.contains(&format!("\r\nX-WR-CALNAME:{want}")), "{text}");
    }

    #[test]
    fn uids_are_stable_and_distinct() {
        assert_eq!(
            uid("fernbrook-tea-q1", "hero-copy", EventKind::Run),
            "run.hero-copy.fernbrook-tea-q1@sluice"
        );
        assert_ne!(
            uid("p", "a_b", EventKind::Run),
            uid("p", "a-b", EventKind::Run)
        );
        assert_ne!(
            uid("p", "a", EventKind::Run),
            uid("p", "a", EventKind::Result)
        );
        assert_eq!(
            uid("q 1", "é", EventKind::Result),
            "result._C3_A9.q_201@sluice"
        );
    }
}
