//! Why each test left out of the calendar is out, as the facts of a
//! [`Reason`] (worded by `render::words`): a missing predecessor, a run longer than the window, a deadline
//! that cannot be met, running tests that hold its pool, blackouts in the
//! way, a `not_with` partner (in time or on traffic), or a pool full of
//! tests the plan preferred (named, with their priorities; for a test on
//! several pools, the first of its pools that is full). Each names the real cause, and
//! suggests only changes that are not already at their limit (no larger
//! share for a test at the largest level, no later deadline for a test
//! without one).

use super::options::{Instance, Role};
use super::state::State;
use crate::day::Day;
use crate::reason::{BlackoutSpan, Held, Helps, Limit, Reason, ShareOf, Span};
use crate::share::Share;
use chrono::{Duration, NaiveDate};

/// The reason of every unscheduled test; `None` for the scheduled.
pub(crate) fn explain(inst: &Instance, state: &State) -> Vec<Option<Reason>> {
    (0..inst.roles.len())
        .map(|e| match &inst.roles[e] {
            Role::Fixed { .. } => None,
            Role::Excluded { reason, .. } => Some(reason.clone()),
            Role::Free if state.choice[e].is_some() => None,
            Role::Free => Some(why(inst, state, e)),
        })
        .collect()
}

/// Days a run at `share` from `start` needs, on the forecast, counted
/// past the window if need be (up to about three years); `None` if never.
fn days_needed(inst: &Instance, e: usize, start: NaiveDate, share: Share) -> Option<i64> {
    let p = inst.portfolio;
    let ex = &p.experiments[e];
    let limit = p.window.end + Duration::days(3 * 366);
    let series = crate::forecast::Series::of_test(ex, &p.pools, start, limit);
    series
        .test_end(ex, 0, share.fraction())
        .map(|end| end as i64 + 1)
}

/// The ids of the pools of test `e`.
fn pool_ids(inst: &Instance, e: usize) -> Vec<String> {
    let p = inst.portfolio;
    p.experiments[e]
        .pools
        .iter()
        .map(|&i| p.pools[i].id.clone())
        .collect()
}

/// Whether `pool` cannot take test `e` on `day` at `share` beside the
/// runs in `state`: its cap reached, or (split) its share used up.
fn pool_full(inst: &Instance, state: &State, pool: usize, day: usize, share: Share) -> bool {
    let def = &inst.portfolio.pools[pool];
    state.count_on(inst, pool, day) >= def.max_concurrent
        || (def.sharing == crate::portfolio::Sharing::Split
            && state.share_on(inst, pool, day) + super::millionths::micro(share)
                > super::millionths::room(def))
}

/// Test `e` at `share` of its pools, with what limits the units it
/// collects beside its share: the share of its units its targeting
/// admits, and its pools' largest holdout, which caps the share of a split
/// pool and thins every test's units on an overlap pool.
fn share_of(inst: &Instance, e: usize, share: Share) -> ShareOf {
    let p = inst.portfolio;
    let ex = &p.experiments[e];
    ShareOf {
        share,
        pools: pool_ids(inst, e),
        eligible: ex.eligible,
        held_out: ex
            .pools
            .iter()
            .map(|&k| p.pools[k].holdout)
            .fold(0.0, f64::max),
    }
}

fn why(inst: &Instance, state: &State, e: usize) -> Reason {
    let p = inst.portfolio;
    let w = p.window;
    let ex = &p.experiments[e];
    // Predecessors.
    for pre in &ex.after {
        let pid = &p.experiments[pre.experiment].id;
        match &inst.roles[pre.experiment] {
            Role::Excluded { ended: None, .. } => {
                return Reason::PrerequisiteLeft {
                    prerequisite: pid.clone(),
                }
            }
            Role::Free if state.choice[pre.experiment].is_none() => {
                return Reason::PrerequisiteUnscheduled {
                    prerequisite: pid.clone(),
                }
            }
            _ => {}
        }
    }
    let shares = inst.shares(e);
    let Some(&top) = shares.last() else {
        return Reason::NoShareLevel {
            max_share: ex.max_share,
        };
    };
    // Alone: the earliest start on the grid at its largest share.
    let lo = inst.lo_start[e];
    if lo >= inst.days as i64 {
        return Reason::EarliestStartPastWindow {
            earliest: w.date(lo),
        };
    }
    let first = (lo.max(0) as usize..inst.days).find(|&d| inst.on_grid(d));
    let Some(first) = first else {
        return Reason::NoStartDayAfter { after: w.date(lo) };
    };
    let start = w.date(first as i64);
    // Days from its first start to the last it may end on: its deadline
    // when that comes before the window's end.
    let last = inst.last_end(e);
    let left = (last - first as i64 + 1).max(0);
    let by_deadline = last < inst.days as i64 - 1;
    match days_needed(inst, e, start, top) {
        None => {
            return Reason::NeverDelivers {
                units: ex.need.total,
                at: share_of(inst, e, top),
            }
        }
        Some(n) if n > left && by_deadline => {
            let dl = w.date(last);
            return if first == 0 {
                Reason::DeadlineFromFirstDay {
                    deadline: dl,
                    at: share_of(inst, e, top),
                    end: start + Duration::days(n - 1),
                }
            } else {
                Reason::DeadlineTooClose {
                    deadline: dl,
                    days: n,
                    at: share_of(inst, e, top),
                    start,
                    left,
                }
            };
        }
        Some(n) if n > left => {
            return Reason::LongerThanWindow {
                days: n,
                at: share_of(inst, e, top),
                from: (first != 0).then_some(start),
                left,
            };
        }
        Some(_) => {}
    }
    if inst.options[e].is_empty() {
        return why_no_option(inst, e, first, top);
    }
    // It fits alone: find what blocks each option now.
    let mut partners: Vec<usize> = Vec::new();
    let mut late_preds: Vec<usize> = Vec::new();
    let mut traffic: Vec<usize> = Vec::new();
    let mut blocking: Option<usize> = None;
    let (mut span_lo, mut span_hi) = (usize::MAX, 0usize);
    for o in &inst.options[e] {
        span_lo = span_lo.min(o.start);
        span_hi = span_hi.max(o.end);
        for &b in &ex.not_with {
            let overlap = match &inst.roles[b] {
                Role::Fixed { start, end, .. } => {
                    *start <= Day::from(o.end) && Day::from(o.start) <= *end
                }
                Role::Free => state
                    .opt(inst, b)
                    .is_some_and(|bo| bo.start <= o.end && o.start <= bo.end),
                Role::Excluded { .. } => false,
            };
            if overlap && !partners.contains(&b) {
                partners.push(b);
            }
        }
        for &b in &ex.apart_traffic {
            if !state.apart_fits(inst, e, o, b) && !traffic.contains(&b) {
                traffic.push(b);
            }
        }
        for &(pre, gap) in &inst.preds[e] {
            if let Some(po) = state.opt(inst, pre) {
                if po.end + 1 + gap as usize > o.start && !late_preds.contains(&pre) {
                    late_preds.push(pre);
                }
            }
        }
        // The first of its pools that cannot take this run.
        if blocking.is_none() {
            blocking = ex.pools.iter().copied().find(|&pool| {
                (o.start..=o.end).any(|d| pool_full(inst, state, pool, d, inst.share_at(e, o, d)))
            });
        }
    }
    if let Some(bp) = blocking {
        // The days, among those its runs could use, on which the pool
        // cannot take even its smallest share, and the tests holding them.
        let pool = &p.pools[bp];
        let least = ex
            .ramp
            .iter()
            .map(|s| s.share)
            .min()
            .unwrap_or(shares[0])
            .min(shares[0]);
        let full: Vec<usize> = (span_lo..=span_hi)
            .filter(|&d| pool_full(inst, state, bp, d, least))
            .collect();
        let (from_d, to_d) = match (full.first(), full.last()) {
            (Some(&a), Some(&b)) => (a, b),
            _ => (span_lo, span_hi),
        };
        let runs_on = |b: usize, d: usize| -> bool {
            match &inst.roles[b] {
                Role::Fixed { start, end, .. } => *start <= Day::from(d) && Day::from(d) <= *end,
                Role::Free => state
                    .opt(inst, b)
                    .is_some_and(|bo| bo.start <= d && d <= bo.end),
                Role::Excluded { .. } => false,
            }
        };
        let days: &[usize] = if full.is_empty() { &[] } else { &full };
        let mut holders: Vec<usize> = (0..inst.roles.len())
            .filter(|&b| p.experiments[b].uses(bp) && b != e)
            .filter(|&b| {
                if days.is_empty() {
                    (span_lo..=span_hi).any(|d| runs_on(b, d))
                } else {
                    days.iter().any(|&d| runs_on(b, d))
                }
            })
            .collect();
        holders.sort_by(|&a, &b| {
            p.experiments[b]
                .priority
                .total_cmp(&p.experiments[a].priority)
                .then(a.cmp(&b))
        });
        return Reason::PoolFull {
            pool: pool.id.clone(),
            from: w.date(from_d as i64),
            to: w.date(to_d as i64),
            gaps: !(full.is_empty() || full.len() == to_d - from_d + 1),
            higher: holders
                .iter()
                .all(|&b| p.experiments[b].priority >= ex.priority),
            holders: holders
                .iter()
                .map(|&b| Held {
                    id: p.experiments[b].id.clone(),
                    priority: p.experiments[b].priority,
                })
                .collect(),
            apart: partners
                .iter()
                .map(|&b| p.experiments[b].id.clone())
                .collect(),
        };
    }
    // Each test of `list` with its run's days.
    let with_spans = |list: &[usize]| -> Vec<Span> {
        list.iter()
            .map(|&b| {
                let (from, to) = match (&inst.roles[b], state.opt(inst, b)) {
                    (Role::Fixed { start, end, .. }, _) => (w.date(*start), w.date(*end)),
                    (_, Some(bo)) => (w.date(bo.start as i64), w.date(bo.end as i64)),
                    _ => (w.start, w.start),
                };
                Span {
                    id: p.experiments[b].id.clone(),
                    from,
                    to,
                }
            })
            .collect()
    };
    if !partners.is_empty() {
        return Reason::KeptApartInTime {
            partners: with_spans(&partners),
        };
    }
    if !traffic.is_empty() {
        return Reason::KeptApartOnTraffic {
            partners: with_spans(&traffic),
        };
    }
    if !late_preds.is_empty() {
        return Reason::WaitsFor {
            prerequisites: late_preds
                .iter()
                .map(|&b| {
                    let end = state
                        .opt(inst, b)
                        .map(|o| w.date(o.end as i64))
                        .unwrap_or(w.start);
                    (p.experiments[b].id.clone(), end)
                })
                .collect(),
        };
    }
    // Nothing above applies.
    Reason::NoRunFits
}

/// Why test `e` has no option at all although a run at its largest share
/// `top` is short enough for the window: the real cause, and only changes
/// that are not already at their limit.
fn why_no_option(inst: &Instance, e: usize, first: usize, top: Share) -> Reason {
    use crate::portfolio::BlackoutKind;
    let p = inst.portfolio;
    let w = p.window;
    let ex = &p.experiments[e];
    let solo = inst.earliest_solo(e, top, first);
    if let Some((s, _)) = solo.run {
        // It fits alone: the running tests hold the pool.
        let holders: Vec<usize> = (0..inst.roles.len())
            .filter(|&b| p.experiments[b].pools.iter().any(|&q| ex.uses(q)))
            .filter(|&b| match &inst.roles[b] {
                Role::Fixed { end, .. } => Day::from(s) <= *end,
                _ => false,
            })
            .collect();
        let until = holders
            .iter()
            .filter_map(|&b| match &inst.roles[b] {
                Role::Fixed { end, .. } => Some(w.date(*end)),
                _ => None,
            })
            .max();
        return Reason::RunningHold {
            pools: pool_ids(inst, e),
            holders: holders
                .iter()
                .map(|&b| p.experiments[b].id.clone())
                .collect(),
            until,
            past_window: until.is_some_and(|u| u > w.end),
            alone_from: w.date(s as i64),
        };
    }
    let spans = |kind: BlackoutKind| -> Vec<BlackoutSpan> {
        p.blackouts
            .iter()
            .filter(|b| {
                b.kind == kind && (b.pools.is_empty() || b.pools.iter().any(|&q| ex.uses(q)))
            })
            .map(|b| BlackoutSpan {
                from: b.from,
                to: b.to,
                note: b.note.clone(),
            })
            .collect()
    };
    // Changes that could help, only where not already at their limit.
    let largest = p.share_levels.all().last().copied();
    let helps = Helps {
        larger_than: largest.filter(|&l| l > top).map(|_| top),
        later_deadline: ex.deadline.is_some(),
    };
    let limit = match ex.deadline {
        Some(dl) => Limit::Deadline(dl),
        None => Limit::WindowEnd(w.end),
    };
    if solo.crossed {
        return Reason::BlackoutInTheWay {
            limit,
            spans: spans(BlackoutKind::NoRunning),
            helps,
        };
    }
    if !solo.any_start {
        return Reason::NoFreeStartDay {
            from: w.date(first as i64),
            spans: spans(BlackoutKind::NoStarts),
            limit,
        };
    }
    Reason::NoRunByLimit {
        limit,
        share: top,
        helps,
    }
}
