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
//! A re-plan with `--previous` carries a [`CalendarHistory`]
//! ([`calendar_history`]): each changed event gets a higher SEQUENCE
//! (RFC 5545 §3.8.7.4), and the events of tests that left the calendar
//! (cancelled, finished early, no longer fitting, dropped) are published
//! again with STATUS:CANCELLED (§3.8.1.11), so that importing the re-plan
//! updates calendars that imported an earlier plan.
//! All-day events end on the day after their last day, as RFC 5545 §3.6.1
//! defines DTEND for DATE values (exclusive).

use super::common::{cut_short_note, pools_label, ramp_words, thousands, units};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::{
    CalendarHistory, DroppedLook, EventSequence, KeptEvents, LookSequence, PastLooks, Plan,
    PlannedExperiment, Run, Status,
};
use chrono::{Duration, NaiveDate, NaiveTime};
use icalendar::{Calendar, Component, Event, EventLike, EventStatus, Property};

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

/// The result range's lines for the result event's description (empty
/// without a range): the P10 to P90 dates, the median and the on-time share.
fn range_note(e: &PlannedExperiment) -> String {
    match &e.result_range {
        Some(r) => format!(
            "\nResult range (P10–P90): {}; median {}; {}\nThe range covers traffic off its forecast, not a wrong baseline or variance.",
            crate::render::common::range_words(r),
            r.p50.map_or("later".to_string(), |d| d.to_string()),
            crate::render::common::chance_words(r)
        ),
        None => String::new(),
    }
}

fn description(plan: &Plan, e: &PlannedExperiment, run: &Run) -> String {
    let mut text = format!(
        "Experiment: {} ({})\n\
         Owner: {}\n\
         Pool: {} ({})\n\
         Share of the pool: {}\n\
         Runs: {} to {} ({} days)\n\
         Result due: {}\n\
         Units needed: {}\n\
         Units expected: {}\n\
         {}\
         Portfolio: {}\n\
         Planned by sluice; dates are estimates from a traffic forecast.",
        e.title,
        e.id,
        e.owner,
        &pools_label(plan, e),
        e.pools.join(", "),
        super::common::share_words(e, run.share),
        run.start,
        run.end,
        run.days,
        run.result_date,
        if e.sample_size_given {
            format!("{} (a given sample size)", thousands(e.units_needed))
        } else {
            thousands(e.units_needed)
        },
        units(run.units_expected),
        numbers_lines(e),
        plan.portfolio,
    );
    text.push_str(&range_note(e));
    if let Some(ramp) = ramp_words(e) {
        text.push_str(&format!("\nRamp before that share: {ramp}"));
    }
    if let Some(note) = cut_short_note(plan) {
        text.push('\n');
        text.push_str(&note.replace('`', ""));
    }
    text
}

/// The numbers behind the test (its design, its looks), a line each with
/// its line end; backticks dropped.
fn numbers_lines(e: &PlannedExperiment) -> String {
    super::numbers::sentences(e)
        .iter()
        .map(|line| format!("{}\n", line.replace('`', "")))
        .collect()
}

/// The events of a scheduled test's interim looks (every look but the
/// last, which is its result): one all-day event each on the look's date.
fn look_contents(e: &PlannedExperiment) -> Vec<(u32, Content)> {
    let (Some(l), true) = (&e.looks, e.status.in_calendar()) else {
        return Vec::new();
    };
    let n = l.dates.len();
    l.interim()
        .map(|d| {
            (
                d.look,
                Content {
                    summary: format!(
                        "Interim look {} of {n}, may stop early: {} [{}]",
                        d.look, e.title, e.id
                    ),
                    description: format!(
                        "Experiment: {} ({})\nInterim look {} of {n}, at {} of the maximum sample. \
                         The test stops early only if it crosses its planned boundary here \
                         (chance under the planned effect: {}); otherwise it runs on.\n\
                         Earliest result {}, expected {}, latest {}.",
                        e.title,
                        e.id,
                        d.look,
                        crate::words::percent(d.information),
                        crate::words::percent(d.stop_probability),
                        l.earliest,
                        l.expected,
                        l.latest
                    ),
                    start: d.date,
                    end: d.date,
                    status: EventStatus::Tentative,
                },
            )
        })
        .collect()
}

/// The look events of a finished or cancelled test whose looks an
/// earlier plan published (`CalendarHistory::past_looks`): a look that
/// took place is confirmed, the look that stopped it is confirmed on its
/// result day, and a look that will not come is cancelled.
fn past_look_contents(plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Content)> {
    let (Some(ran), Some(past)) = (
        e.ran.as_ref().filter(|_| e.run.is_none()),
        plan.calendar
            .iter()
            .flat_map(|c| &c.past_looks)
            .find(|p| p.id == e.id),
    ) else {
        return Vec::new();
    };
    let n = past.looks;
    past.dates
        .iter()
        .enumerate()
        .filter(|(i, _)| !past.idle.contains(&(*i as u32 + 1)))
        .map(|(i, &date)| {
            let k = i as u32 + 1;
            let head = format!("Experiment: {} ({})\n", e.title, e.id);
            let tail = format!("\nPortfolio: {}", plan.portfolio);
            let content = |summary: String, what: String, date: NaiveDate, status| Content {
                summary,
                description: format!("{head}{what}{tail}"),
                start: date,
                end: date,
                status,
            };
            let stopped = ran.stopped_at_look;
            let held = match stopped {
                Some(at) => k < at,
                None => date <= ran.end,
            };
            let c = if stopped == Some(k) {
                content(
                    format!("Interim look {k} of {n} stopped the test: {} [{}]", e.title, e.id),
                    format!(
                        "Interim look {k} of {n} crossed its boundary: the test stopped early, with data to {}.{}",
                        ran.end,
                        ran.outcome
                            .map(|o| format!(" Outcome: {}.", super::common::outcome_words(o)))
                            .unwrap_or_default()
                    ),
                    ran.result_date(),
                    EventStatus::Confirmed,
                )
            } else if held {
                content(
                    format!("Interim look {k} of {n} held: {} [{}]", e.title, e.id),
                    format!("Interim look {k} of {n} took place on {date}; the test ran on."),
                    date,
                    EventStatus::Confirmed,
                )
            } else {
                let why = match (e.status, stopped) {
                    (Status::Cancelled, _) => format!("the test was cancelled after {}", ran.end),
                    (_, Some(at)) => format!("the test stopped at look {at}"),
                    _ => format!("the test finished on {}", ran.end),
                };
                content(
                    format!("Interim look {k} of {n}, not held: {} [{}]", e.title, e.id),
                    format!("This look will not take place: {why}."),
                    date,
                    EventStatus::Cancelled,
                )
            };
            (k, c)
        })
        .collect()
}

/// Every look event of `e` in `plan`: a planned test's interim looks, or
/// the published looks of a test that has finished or was cancelled.
fn look_events(plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Content)> {
    let planned = look_contents(e);
    if planned.is_empty() {
        past_look_contents(plan, e)
    } else {
        planned
    }
}

/// What a calendar shows of one event; two plans that give an event the
/// same content leave it unchanged.
#[derive(Debug, Clone, PartialEq, Eq)]
struct Content {
    summary: String,
    description: String,
    /// First day.
    start: NaiveDate,
    /// Last day (inclusive; DTEND is the day after).
    end: NaiveDate,
    /// Tentative while planned, confirmed once it took place, cancelled
    /// when it will not.
    status: EventStatus,
}

/// One event as written: its content, UID and SEQUENCE.
struct Spec {
    uid: String,
    content: Content,
    sequence: u32,
}

/// The two events of a test: its run from `start` to `end`, and the day its
/// result is due.
fn event_pair(
    title: &str,
    id: &str,
    description: String,
    (start, end, result_date): (NaiveDate, NaiveDate, NaiveDate),
    status: EventStatus,
) -> [Content; 2] {
    [
        Content {
            summary: format!("Test running: {title} [{id}]"),
            description: description.clone(),
            start,
            end,
            status,
        },
        Content {
            summary: format!("Result due: {title} [{id}]"),
            description,
            start: result_date,
            end: result_date,
            status,
        },
    ]
}

/// The run and result events of an experiment in the calendar.
fn contents(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
    if !e.status.in_calendar() {
        return None;
    }
    let run = e.run?;
    let description = description(plan, e, &run);
    Some(event_pair(
        &e.title,
        &e.id,
        description,
        (run.start, run.end, run.result_date),
        EventStatus::Tentative,
    ))
}

/// The events of a test that left the calendar, as kept.
fn kept_contents(plan: &Plan, k: &KeptEvents) -> [Content; 2] {
    let why = match k.why.as_str() {
        "finished" => "It has finished.",
        "finished_early" => "It finished early; these dates no longer hold.",
        "cancelled" => "It was cancelled.",
        "unscheduled" => "It no longer fits the calendar.",
        "dropped" => "It is no longer in the portfolio.",
        _ => "It is no longer in the calendar.",
    };
    let description = format!(
        "Experiment: {} ({})\nRan from {} to {}; result due {}.\n{why}\nPortfolio: {}",
        k.title, k.id, k.start, k.end, k.result_date, plan.portfolio
    );
    let status = if k.cancelled {
        EventStatus::Cancelled
    } else {
        EventStatus::Confirmed
    };
    event_pair(
        &k.title,
        &k.id,
        description,
        (k.start, k.end, k.result_date),
        status,
    )
}

/// The events of a finished or cancelled test at the dates it really ran,
/// when the re-plan knows them, in the past tense: a finished test's run
/// and the day its result came (confirmed), with the look that stopped it
/// and what it found; a cancelled test's run, whose result never comes
/// (both cancelled).
fn closed_contents(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
    let ran = e.ran.as_ref().filter(|_| e.run.is_none())?;
    let (t, id) = (&e.title, &e.id);
    let at = ran.share.map(|s| format!(" at {s}")).unwrap_or_default();
    let mut lines = vec![
        format!("Experiment: {t} ({id})"),
        format!("Ran from {} to {}{at}.", ran.start, ran.end),
    ];
    let (run_summary, result_summary, status) = match e.status {
        Status::Finished => {
            if let Some(stop) = super::common::stop_words(ran) {
                lines.push(format!("It {stop}."));
            }
            lines.push(format!("Its result came on {}.", ran.result_date()));
            if let Some(o) = ran.outcome {
                lines.push(format!("Outcome: {}.", super::common::outcome_words(o)));
            }
            let found = ran
                .outcome
                .map(|o| format!(" ({})", super::common::outcome_words(o)))
                .unwrap_or_default();
            (
                format!("Test ran: {t} [{id}]"),
                format!("Result in{found}: {t} [{id}]"),
                EventStatus::Confirmed,
            )
        }
        Status::Cancelled => {
            lines.push(match e.reason.as_deref() {
                Some(r) if r != "cancelled" => format!("It was {r}; no result will come."),
                _ => "It was cancelled; no result will come.".to_string(),
            });
            (
                format!("Test cancelled: {t} [{id}]"),
                format!("No result: {t} [{id}]"),
                EventStatus::Cancelled,
            )
        }
        _ => return None,
    };
    if ran.sample_ratio_mismatch {
        lines.push(
            "Its arms' counts miss the planned split (a sample-ratio mismatch): check the assignment before trusting its result."
                .to_string(),
        );
    }
    lines.push(format!("Portfolio: {}", plan.portfolio));
    let description = lines.join("\n");
    let result = ran.result_date();
    Some([
        Content {
            summary: run_summary,
            description: description.clone(),
            start: ran.start,
            end: ran.end,
            status,
        },
        Content {
            summary: result_summary,
            description,
            start: result,
            end: result,
            status,
        },
    ])
}

/// The run and result events of `e` in `plan`: planned, or as it ran.
fn run_events(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
    contents(plan, e).or_else(|| closed_contents(plan, e))
}

/// The SEQUENCE of an experiment's events in `plan` (0 unless a re-plan's
/// calendar history raised it).
fn sequence_of(plan: &Plan, id: &str) -> u32 {
    plan.calendar.as_ref().map_or(0, |c| {
        c.sequences
            .iter()
            .find(|s| s.id == id)
            .map(|s| s.sequence)
            .or_else(|| c.kept.iter().find(|k| k.id == id).map(|k| k.sequence))
            .unwrap_or(0)
    })
}

/// The SEQUENCE of an interim look's event in `plan` (0 unless a re-plan's
/// calendar history raised it).
fn look_sequence_of(plan: &Plan, id: &str, look: u32) -> u32 {
    plan.calendar.as_ref().map_or(0, |c| {
        c.looks
            .iter()
            .find(|s| s.id == id && s.look == look)
            .map_or(0, |s| s.sequence)
    })
}

/// The interim looks' part of [`calendar_history`]: each look event of
/// `plan` keeps its sequence when its content is unchanged and gains one
/// when it changed, came back or is kept (cancelled or confirmed).
fn look_history(previous: &Plan, plan: &Plan, history: &mut CalendarHistory) {
    let before = |id: &str, look: u32| {
        previous
            .experiments
            .iter()
            .find(|o| o.id == id)
            .and_then(|o| {
                look_events(previous, o)
                    .into_iter()
                    .find(|(k, _)| *k == look)
            })
            .map(|(_, c)| c)
    };
    let was_kept = |id: &str, look: u32| {
        previous
            .calendar
            .iter()
            .flat_map(|c| &c.kept)
            .any(|k| k.id == id && k.looks.len() >= look as usize && !k.idle.contains(&look))
    };
    // `plan` with this history's past looks, so a closed test's looks
    // are worded as they will be written.
    let with_past = Plan {
        calendar: Some(CalendarHistory {
            past_looks: history.past_looks.clone(),
            ..CalendarHistory::default()
        }),
        ..plan.clone()
    };
    let mut push = |id: &str, look: u32, sequence: u32| {
        if sequence > 0 {
            history.looks.push(LookSequence {
                id: id.to_string(),
                look,
                sequence,
            });
        }
    };
    for e in &plan.experiments {
        for (look, now) in look_events(&with_past, e) {
            let base = look_sequence_of(previous, &e.id, look);
            let sequence = match before(&e.id, look) {
                Some(b) if b == now => base,
                Some(_) => base + 1,
                None if was_kept(&e.id, look) => base + 1,
                None => base,
            };
            push(&e.id, look, sequence);
        }
    }
    let kept: Vec<(String, usize, Vec<u32>, bool)> = history
        .kept
        .iter()
        .map(|k| {
            let new = !previous
                .calendar
                .iter()
                .flat_map(|c| &c.kept)
                .any(|p| p.id == k.id);
            (k.id.clone(), k.looks.len(), k.idle.clone(), new)
        })
        .collect();
    for (id, n, idle, new) in kept {
        for look in (1..=n as u32).filter(|k| !idle.contains(k)) {
            let base = look_sequence_of(previous, &id, look);
            push(&id, look, if new { base + 1 } else { base });
        }
    }
    // A dropped look changes once, when it is first published cancelled.
    let before_all = look_specs(previous);
    let with_dropped = Plan {
        calendar: Some(CalendarHistory {
            dropped_looks: history.dropped_looks.clone(),
            ..CalendarHistory::default()
        }),
        ..plan.clone()
    };
    let dropped: Vec<LookSpec> = look_specs(&with_dropped)
        .into_iter()
        .filter(|l| {
            history
                .dropped_looks
                .iter()
                .any(|d| d.id == l.id && d.look == l.look)
        })
        .collect();
    for l in dropped {
        let base = look_sequence_of(previous, &l.id, l.look);
        let same = before_all
            .iter()
            .any(|b| b.id == l.id && b.look == l.look && b.content == l.content);
        push(&l.id, l.look, if same { base } else { base + 1 });
    }
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
            push(&e.id, cs, sequence_of(plan, &e.id));
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
            push(&e.id, cs, sequence_of(plan, &e.id));
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
            sequence: look_sequence_of(plan, &l.id, l.look),
            content: l.content,
        });
    }
    out
}

/// The calendar history of `plan`, a re-plan of `previous`: which events
/// changed, and which tests left the calendar.
///
/// SEQUENCE (RFC 5545 §3.8.7.4) counts the re-plans at which an event
/// changed. A plan without `--previous` writes every event at 0. A re-plan
/// of `previous` gives each experiment's two events the sequence they had
/// there (from its `calendar`, else 0), plus one when what a calendar
/// shows of them differs (summary, description, first and last day,
/// status) or when they come back after leaving. A finished or cancelled
/// test whose real dates the progress file gives is written as it ran
/// (confirmed, or cancelled), in place of its planned events; the interim
/// looks an earlier plan published for it stay (`past_looks`): those that
/// took place confirmed, those that will not come cancelled. A test that
/// was in the previous calendar and is not in this one is kept with its
/// last dates: cancelled (sequence plus one) unless it finished as
/// planned, i.e. its last planned day came before this plan's today (then
/// it stays as it was, its sequence plus one for the new wording). Tests
/// already kept by `previous` stay kept as they were. So the sequence is
/// a function of the two plans alone, and strictly increases for every
/// changed event along a chain of re-plans.
pub fn calendar_history(previous: &Plan, plan: &Plan) -> CalendarHistory {
    let prev_kept: Vec<&KeptEvents> = previous.calendar.iter().flat_map(|c| &c.kept).collect();
    let now_in = |id: &str| {
        plan.experiments
            .iter()
            .any(|e| e.id == id && run_events(plan, e).is_some())
    };
    let mut history = CalendarHistory::default();
    for e in &plan.experiments {
        let Some(now) = run_events(plan, e) else {
            continue;
        };
        let before_e = previous.experiments.iter().find(|o| o.id == e.id);
        // The interim looks published for a test that has now closed.
        if contents(plan, e).is_none() {
            // By look: every interim look of the design, and those never
            // published for want of a day of their own.
            let published: (Vec<NaiveDate>, Vec<u32>) = match before_e
                .filter(|o| !look_contents(o).is_empty())
                .and_then(|o| o.looks.as_ref())
            {
                Some(l) => (
                    l.all_interim().iter().map(|d| d.date).collect(),
                    l.idle.clone(),
                ),
                None => previous
                    .calendar
                    .iter()
                    .flat_map(|c| &c.past_looks)
                    .find(|p| p.id == e.id)
                    .map_or_else(Default::default, |p| (p.dates.clone(), p.idle.clone())),
            };
            if !published.0.is_empty() {
                let (dates, idle) = published;
                history.past_looks.push(PastLooks {
                    id: e.id.clone(),
                    looks: dates.len() as u32 + 1,
                    dates,
                    idle,
                });
            }
        }
        let base = sequence_of(previous, &e.id);
        let before = before_e.and_then(|o| run_events(previous, o));
        let sequence = match before {
            Some(before) if before == now => base,
            Some(_) => base + 1,
            // Back after leaving: the kept events are replaced.
            None if prev_kept.iter().any(|k| k.id == e.id) => base + 1,
            None => base,
        };
        if sequence > 0 {
            history.sequences.push(EventSequence {
                id: e.id.clone(),
                sequence,
            });
        }
    }
    for o in &previous.experiments {
        let Some(run) = o.run.filter(|_| o.status.in_calendar()) else {
            continue;
        };
        if now_in(&o.id) {
            continue;
        }
        let status = plan
            .experiments
            .iter()
            .find(|e| e.id == o.id)
            .map(|e| e.status);
        let why = match status {
            Some(Status::Finished) if run.end < plan.today => "finished",
            Some(Status::Finished) => "finished_early",
            Some(Status::Cancelled) => "cancelled",
            Some(_) => "unscheduled",
            None => "dropped",
        };
        history.kept.push(KeptEvents {
            id: o.id.clone(),
            title: o.title.clone(),
            why: why.to_string(),
            cancelled: why != "finished",
            start: run.start,
            end: run.end,
            result_date: run.result_date,
            sequence: sequence_of(previous, &o.id) + 1,
            looks: published_looks(o).map_or_else(Vec::new, |l| {
                l.all_interim().iter().map(|d| d.date).collect()
            }),
            idle: published_looks(o).map_or_else(Vec::new, |l| l.idle.clone()),
        });
    }
    for k in prev_kept {
        if !now_in(&k.id) && history.kept.iter().all(|h| h.id != k.id) {
            history.kept.push(k.clone());
        }
    }
    history.dropped_looks = dropped_looks(previous, plan, &history);
    look_history(previous, plan, &mut history);
    history
}

/// The looks of `o` its calendar published: `None` when it published none
/// (no looks, or none with a day of its own).
fn published_looks(o: &PlannedExperiment) -> Option<&crate::plan::LookDates> {
    o.looks.as_ref().filter(|l| l.interim().next().is_some())
}

/// The looks `previous`'s calendar published that `plan`'s, with the
/// rest of `history`, would leave out: each is published again cancelled.
fn dropped_looks(previous: &Plan, plan: &Plan, history: &CalendarHistory) -> Vec<DroppedLook> {
    let now = Plan {
        calendar: Some(CalendarHistory {
            dropped_looks: Vec::new(),
            ..history.clone()
        }),
        ..plan.clone()
    };
    let written: Vec<(String, u32)> = look_specs(&now)
        .into_iter()
        .map(|l| (l.id, l.look))
        .collect();
    look_specs(previous)
        .into_iter()
        .filter(|l| !written.iter().any(|(id, k)| *id == l.id && *k == l.look))
        .map(|l| DroppedLook {
            id: l.id,
            look: l.look,
            looks: l.looks,
            date: l.content.start,
        })
        .collect()
}

/// One interim look's event in a plan's calendar.
struct LookSpec {
    id: String,
    look: u32,
    /// The test's looks, the final read included.
    looks: u32,
    content: Content,
}

/// Every interim look event of `plan`'s calendar, in the order written:
/// kept tests' looks, the experiments' own, then dropped looks.
fn look_specs(plan: &Plan) -> Vec<LookSpec> {
    let mut out = Vec::new();
    let calendar = plan.calendar.as_ref();
    let kept: Vec<&KeptEvents> = calendar.iter().flat_map(|c| &c.kept).collect();
    for k in &kept {
        let status = if k.cancelled {
            EventStatus::Cancelled
        } else {
            EventStatus::Confirmed
        };
        let n = k.looks.len() as u32 + 1;
        for (i, &date) in k.looks.iter().enumerate() {
            let look = i as u32 + 1;
            if k.idle.contains(&look) {
                continue;
            }
            out.push(LookSpec {
                id: k.id.clone(),
                look,
                looks: n,
                content: Content {
                    summary: format!(
                        "Interim look {look} of {n}, may stop early: {} [{}]",
                        k.title, k.id
                    ),
                    description: format!(
                        "Experiment: {} ({})\n{}\nPortfolio: {}",
                        k.title,
                        k.id,
                        if k.cancelled {
                            "This look no longer holds."
                        } else {
                            "The test has finished."
                        },
                        plan.portfolio
                    ),
                    start: date,
                    end: date,
                    status,
                },
            });
        }
    }
    for e in plan
        .experiments
        .iter()
        .filter(|e| kept.iter().all(|k| k.id != e.id))
    {
        let n = e.looks.as_ref().map_or(1, |l| l.dates.len() as u32);
        for (look, content) in look_events(plan, e) {
            let n = calendar
                .iter()
                .flat_map(|c| &c.past_looks)
                .find(|p| p.id == e.id && e.run.is_none())
                .map_or(n, |p| p.looks);
            out.push(LookSpec {
                id: e.id.clone(),
                look,
                looks: n,
                content,
            });
        }
    }
    for d in calendar.iter().flat_map(|c| &c.dropped_looks) {
        let title = plan
            .experiments
            .iter()
            .find(|e| e.id == d.id)
            .map_or(d.id.as_str(), |e| e.title.as_str());
        out.push(LookSpec {
            id: d.id.clone(),
            look: d.look,
            looks: d.looks,
            content: Content {
                summary: format!(
                    "Interim look {} of {}, not held: {title} [{}]",
                    d.look, d.looks, d.id
                ),
                description: format!(
                    "Experiment: {title} ({})\nThis look will not take place: the test's run \
                     no longer holds it on a day of its own, so a later look or the result \
                     reads the same data.\nPortfolio: {}",
                    d.id, plan.portfolio
                ),
                start: d.date,
                end: d.date,
                status: EventStatus::Cancelled,
            },
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
