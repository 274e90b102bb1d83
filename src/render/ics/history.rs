//! The calendar history of a re-plan: which events changed (SEQUENCE),
//! which tests left the calendar, and which published looks are
//! cancelled, from the previous plan and this one alone.

use super::content::*;
use crate::plan::{
    CalendarHistory, DroppedLook, EventSequence, KeptEvents, LookSequence, PastLooks, Plan,
    PlannedExperiment, Status,
};
use chrono::NaiveDate;

/// The SEQUENCE of an experiment's events in `plan` (0 unless a re-plan's
/// calendar history raised it).
pub(super) fn sequence_of(plan: &Plan, id: &str) -> u32 {
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
pub(super) fn look_sequence_of(plan: &Plan, id: &str, look: u32) -> u32 {
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
pub(super) fn look_history(previous: &Plan, plan: &Plan, history: &mut CalendarHistory) {
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
pub(super) fn published_looks(o: &PlannedExperiment) -> Option<&crate::plan::LookDates> {
    o.looks.as_ref().filter(|l| l.interim().next().is_some())
}

/// The looks `previous`'s calendar published that `plan`'s, with the
/// rest of `history`, would leave out: each is published again cancelled.
pub(super) fn dropped_looks(
    previous: &Plan,
    plan: &Plan,
    history: &CalendarHistory,
) -> Vec<DroppedLook> {
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
