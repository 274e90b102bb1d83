//! What each event of a plan's calendar shows: its summary, description,
//! days and status, for runs, results and interim looks.

use super::*;
use crate::diff::{CalendarView, LookEvent};
use crate::plan::{KeptEvents, Plan, PlannedExperiment, Run, Status};
use chrono::NaiveDate;
use icalendar::EventStatus;

/// The result range's lines for the result event's description (empty
/// without a range): the P10 to P90 dates, the median and the on-time share.
pub(super) fn range_note(e: &PlannedExperiment) -> String {
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

pub(super) fn description(plan: &Plan, e: &PlannedExperiment, run: &Run) -> String {
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
        crate::render::common::share_words(e, run.share),
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
pub(super) fn numbers_lines(e: &PlannedExperiment) -> String {
    crate::render::numbers::sentences(e)
        .iter()
        .map(|line| format!("{}\n", line.replace('`', "")))
        .collect()
}

/// The events of a scheduled test's interim looks (every look but the
/// last, which is its result): one all-day event each on the look's date.
pub(super) fn look_contents(e: &PlannedExperiment) -> Vec<(u32, Content)> {
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
pub(super) fn past_look_contents(plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Content)> {
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
                            .map(|o| format!(" Outcome: {}.", crate::render::common::outcome_words(o)))
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
pub(super) fn look_events(plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Content)> {
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
pub struct Content {
    /// SUMMARY: the event's title line.
    pub summary: String,
    /// DESCRIPTION: its text, line by line.
    pub description: String,
    /// First day.
    pub start: NaiveDate,
    /// Last day (inclusive; DTEND is the day after).
    pub end: NaiveDate,
    /// Tentative while planned, confirmed once it took place, cancelled
    /// when it will not.
    pub status: EventStatus,
}

/// One event as written: its content, UID and SEQUENCE.
pub(super) struct Spec {
    pub(super) uid: String,
    pub(super) content: Content,
    pub(super) sequence: u32,
}

/// The two events of a test: its run from `start` to `end`, and the day its
/// result is due.
pub(super) fn event_pair(
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
pub(super) fn contents(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
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
pub(super) fn kept_contents(plan: &Plan, k: &KeptEvents) -> [Content; 2] {
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
pub(super) fn closed_contents(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
    let ran = e.ran.as_ref().filter(|_| e.run.is_none())?;
    let (t, id) = (&e.title, &e.id);
    let at = ran.share.map(|s| format!(" at {s}")).unwrap_or_default();
    let mut lines = vec![
        format!("Experiment: {t} ({id})"),
        format!("Ran from {} to {}{at}.", ran.start, ran.end),
    ];
    let (run_summary, result_summary, status) = match e.status {
        Status::Finished => {
            if let Some(stop) = crate::render::common::stop_words(ran) {
                lines.push(format!("It {stop}."));
            }
            lines.push(format!("Its result came on {}.", ran.result_date()));
            if let Some(o) = ran.outcome {
                lines.push(format!(
                    "Outcome: {}.",
                    crate::render::common::outcome_words(o)
                ));
            }
            let found = ran
                .outcome
                .map(|o| format!(" ({})", crate::render::common::outcome_words(o)))
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
pub(super) fn run_events(plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
    contents(plan, e).or_else(|| closed_contents(plan, e))
}

/// Every interim look event of `plan`'s calendar, in the order written:
/// kept tests' looks, the experiments' own, then dropped looks.
pub(super) fn look_specs(plan: &Plan) -> Vec<LookEvent<Content>> {
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
            out.push(LookEvent {
                id: k.id.clone(),
                look,
                looks: n,
                date,
                event: Content {
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
            out.push(LookEvent {
                id: e.id.clone(),
                look,
                looks: n,
                date: content.start,
                event: content,
            });
        }
    }
    for d in calendar.iter().flat_map(|c| &c.dropped_looks) {
        let title = plan
            .experiments
            .iter()
            .find(|e| e.id == d.id)
            .map_or(d.id.as_str(), |e| e.title.as_str());
        out.push(LookEvent {
            id: d.id.clone(),
            look: d.look,
            looks: d.looks,
            date: d.date,
            event: Content {
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

/// What an iCalendar shows of a plan's events: the view the calendar
/// history compares to tell which events changed.
pub struct Shown;

impl CalendarView for Shown {
    type Event = Content;

    fn planned(&self, plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
        contents(plan, e)
    }

    fn run_events(&self, plan: &Plan, e: &PlannedExperiment) -> Option<[Content; 2]> {
        run_events(plan, e)
    }

    fn has_planned_looks(&self, e: &PlannedExperiment) -> bool {
        !look_contents(e).is_empty()
    }

    fn look_events(&self, plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Content)> {
        look_events(plan, e)
    }

    fn every_look(&self, plan: &Plan) -> Vec<LookEvent<Content>> {
        look_specs(plan)
    }
}
