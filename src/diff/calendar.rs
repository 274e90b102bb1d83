//! The calendar history of a re-plan: which events changed (SEQUENCE),
//! which tests left the calendar, and which published looks are
//! cancelled, from the previous plan and this one alone.
//!
//! An event changed when what a calendar shows of it changed. What it
//! shows is the calendar format's business (its summary and description
//! are worded): the format hands it over as a [`CalendarView`], and this
//! module compares the views and keeps the facts ([`CalendarHistory`]).
//! `render::ics::Shown` is the iCalendar view.

use crate::plan::{
    CalendarHistory, DroppedLook, EventSequence, KeptEvents, LookSequence, PastLooks, Plan,
    PlannedExperiment, Status,
};
use chrono::NaiveDate;

/// What a calendar shows of a plan's events, as its format words them.
pub trait CalendarView {
    /// One event as the calendar shows it: equal when nothing shown
    /// changed.
    type Event: PartialEq;
    /// The run and result events of `e` while it is planned: none once it
    /// has finished or been cancelled, or when it is not in the calendar.
    fn planned(&self, plan: &Plan, e: &PlannedExperiment) -> Option<[Self::Event; 2]>;
    /// The run and result events of `e`: planned, or as it ran.
    fn run_events(&self, plan: &Plan, e: &PlannedExperiment) -> Option<[Self::Event; 2]>;
    /// Whether `e`'s own planned looks give any event.
    fn has_planned_looks(&self, e: &PlannedExperiment) -> bool;
    /// The interim look events of `e` in `plan`, by look.
    fn look_events(&self, plan: &Plan, e: &PlannedExperiment) -> Vec<(u32, Self::Event)>;
    /// Every interim look event of `plan`'s calendar, in the order written.
    fn every_look(&self, plan: &Plan) -> Vec<LookEvent<Self::Event>>;
}

/// One interim look's event in a plan's calendar.
pub struct LookEvent<E> {
    /// The experiment's id.
    pub id: String,
    /// The look, from 1.
    pub look: u32,
    /// The test's looks, the final read included.
    pub looks: u32,
    /// The look's day.
    pub date: NaiveDate,
    /// What the calendar shows of it.
    pub event: E,
}

/// The interim looks' part of [`calendar_history`]: each look event of
/// `plan` keeps its sequence when its content is unchanged and gains one
/// when it changed, came back or is kept (cancelled or confirmed).
fn look_history<V: CalendarView>(
    view: &V,
    previous: &Plan,
    plan: &Plan,
    history: &mut CalendarHistory,
) {
    let before = |id: &str, look: u32| {
        previous
            .experiments
            .iter()
            .find(|o| o.id == id)
            .and_then(|o| {
                view.look_events(previous, o)
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
        for (look, now) in view.look_events(&with_past, e) {
            let base = previous.look_sequence(&e.id, look);
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
            let base = previous.look_sequence(&id, look);
            push(&id, look, if new { base + 1 } else { base });
        }
    }
    // A dropped look changes once, when it is first published cancelled.
    let before_all = view.every_look(previous);
    let with_dropped = Plan {
        calendar: Some(CalendarHistory {
            dropped_looks: history.dropped_looks.clone(),
            ..CalendarHistory::default()
        }),
        ..plan.clone()
    };
    let dropped: Vec<LookEvent<V::Event>> = view
        .every_look(&with_dropped)
        .into_iter()
        .filter(|l| {
            history
                .dropped_looks
                .iter()
                .any(|d| d.id == l.id && d.look == l.look)
        })
        .collect();
    for l in dropped {
        let base = previous.look_sequence(&l.id, l.look);
        let same = before_all
            .iter()
            .any(|b| b.id == l.id && b.look == l.look && b.event == l.event);
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
pub fn calendar_history<V: CalendarView>(
    view: &V,
    previous: &Plan,
    plan: &Plan,
) -> CalendarHistory {
    let prev_kept: Vec<&KeptEvents> = previous.calendar.iter().flat_map(|c| &c.kept).collect();
    let now_in = |id: &str| {
        plan.experiments
            .iter()
            .any(|e| e.id == id && view.run_events(plan, e).is_some())
    };
    let mut history = CalendarHistory::default();
    for e in &plan.experiments {
        let Some(now) = view.run_events(plan, e) else {
            continue;
        };
        let before_e = previous.experiments.iter().find(|o| o.id == e.id);
        // The interim looks published for a test that has now closed.
        if view.planned(plan, e).is_none() {
            // By look: every interim look of the design, and those never
            // published for want of a day of their own.
            let published: (Vec<NaiveDate>, Vec<u32>) = match before_e
                .filter(|o| view.has_planned_looks(o))
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
        let base = previous.event_sequence(&e.id);
        let before = before_e.and_then(|o| view.run_events(previous, o));
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
            sequence: previous.event_sequence(&o.id) + 1,
            looks: o.published_looks().map_or_else(Vec::new, |l| {
                l.all_interim().iter().map(|d| d.date).collect()
            }),
            idle: o
                .published_looks()
                .map_or_else(Vec::new, |l| l.idle.clone()),
        });
    }
    for k in prev_kept {
        if !now_in(&k.id) && history.kept.iter().all(|h| h.id != k.id) {
            history.kept.push(k.clone());
        }
    }
    history.dropped_looks = dropped_looks(view, previous, plan, &history);
    look_history(view, previous, plan, &mut history);
    history
}

/// The looks `previous`'s calendar published that `plan`'s, with the
/// rest of `history`, would leave out: each is published again cancelled.
fn dropped_looks<V: CalendarView>(
    view: &V,
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
    let written: Vec<(String, u32)> = view
        .every_look(&now)
        .into_iter()
        .map(|l| (l.id, l.look))
        .collect();
    view.every_look(previous)
        .into_iter()
        .filter(|l| !written.iter().any(|(id, k)| *id == l.id && *k == l.look))
        .map(|l| DroppedLook {
            id: l.id,
            look: l.look,
            looks: l.looks,
            date: l.date,
        })
        .collect()
}
