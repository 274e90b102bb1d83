//! Why each test left out of the calendar is out, in words a planner can
//! act on: a missing predecessor, a run longer than the window, a deadline
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
use crate::share::Share;
pub(crate) use crate::words::thousands;
use chrono::{Datelike, Duration, NaiveDate};

/// A priority as people read it: at most three decimals, no trailing zeros.
fn number(x: f64) -> String {
    crate::words::trimmed(x, 3)
}

/// The reason of every unscheduled test; `None` for the scheduled.
pub(crate) fn explain(inst: &Instance, state: &State) -> Vec<Option<String>> {
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

/// The pools of test `e` as a reason names them: "`home`", or
/// "each of `home`, `search`".
fn pools_named(inst: &Instance, e: usize) -> String {
    let p = inst.portfolio;
    let names: Vec<String> = p.experiments[e]
        .pools
        .iter()
        .map(|&i| format!("`{}`", p.pools[i].id))
        .collect();
    if names.len() == 1 {
        names[0].clone()
    } else {
        format!("each of {}", names.join(", "))
    }
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

/// What limits the units test `e` collects beside its share, as
/// ` (30% of its units eligible, 5% held out)`, or nothing: the share of
/// its units its targeting admits, and its pool's holdout, which caps the
/// share of a split pool and thins every test's units on an overlap pool.
fn limits(inst: &Instance, e: usize) -> String {
    let p = inst.portfolio;
    let ex = &p.experiments[e];
    let mut notes = Vec::new();
    if ex.eligible < 1.0 {
        notes.push(format!(
            "{} of its units eligible",
            crate::words::percent(ex.eligible)
        ));
    }
    // On several pools, the largest holdout among them.
    let holdout = ex
        .pools
        .iter()
        .map(|&k| p.pools[k].holdout)
        .fold(0.0, f64::max);
    if holdout > 0.0 {
        notes.push(format!("{} held out", crate::words::percent(holdout)));
    }
    if notes.is_empty() {
        String::new()
    } else {
        format!(" ({})", notes.join(", "))
    }
}

/// `75% of `product``, or `75% of each of `home`, `search``, with its
/// [`limits`].
fn share_of(inst: &Instance, e: usize, share: Share) -> String {
    format!("{share} of {}{}", pools_named(inst, e), limits(inst, e))
}

fn why(inst: &Instance, state: &State, e: usize) -> String {
    let p = inst.portfolio;
    let w = p.window;
    let ex = &p.experiments[e];
    // Predecessors.
    for pre in &ex.after {
        let pid = &p.experiments[pre.experiment].id;
        match &inst.roles[pre.experiment] {
            Role::Excluded { ended: None, .. } => {
                return format!("depends on `{pid}`, which left the queue without finishing")
            }
            Role::Free if state.choice[pre.experiment].is_none() => {
                return format!("depends on `{pid}`, which is not scheduled")
            }
            _ => {}
        }
    }
    let shares = inst.shares(e);
    let Some(&top) = shares.last() else {
        return format!(
            "no share level is at or below its maximum share of {}; add a smaller level or raise it",
            ex.max_share
        );
    };
    // Alone: the earliest start on the grid at its largest share.
    let lo = inst.lo_start[e];
    if lo >= inst.days as i64 {
        return format!(
            "its earliest possible start, {}, is past the window",
            w.date(lo)
        );
    }
    let first = (lo.max(0) as usize..inst.days).find(|&d| inst.on_grid(d));
    let Some(first) = first else {
        return format!("no start day on the grid is left after {}", w.date(lo));
    };
    let start = w.date(first as i64);
    // Days from its first start to the last it may end on: its deadline
    // when that comes before the window's end.
    let last = inst.last_end(e);
    let left = (last - first as i64 + 1).max(0);
    let by_deadline = last < inst.days as i64 - 1;
    match days_needed(inst, e, start, top) {
        None => {
            return format!(
                "needs {} units; at {} the forecast does not deliver them within three years",
                thousands(ex.need.total),
                share_of(inst, e, top)
            )
        }
        Some(n) if n > left && by_deadline => {
            let dl = w.date(last);
            return if first == 0 {
                let end = start + Duration::days(n - 1);
                format!(
                    "deadline {dl} cannot be met: at its maximum share of {top}{} the earliest end is {end}",
                    limits(inst, e)
                )
            } else {
                format!(
                    "deadline {dl} cannot be met: needs {n} days at {}; from its earliest start on {start} to its deadline there are {left}",
                    share_of(inst, e, top)
                )
            };
        }
        Some(n) if n > left => {
            return if first == 0 {
                format!(
                    "needs {n} days at {}; the window has {left}",
                    share_of(inst, e, top)
                )
            } else {
                format!(
                    "needs {n} days at {}; from its earliest start on {start} the window has {left}",
                    share_of(inst, e, top)
                )
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
        let names: Vec<String> = holders
            .iter()
            .map(|&b| {
                format!(
                    "{} ({})",
                    p.experiments[b].id,
                    number(p.experiments[b].priority)
                )
            })
            .collect();
        let higher = holders
            .iter()
            .all(|&b| p.experiments[b].priority >= ex.priority);
        let from = w.date(from_d as i64);
        let to = w.date(to_d as i64);
        let whom = if higher {
            "tests of higher priority"
        } else {
            "tests worth more to the plan together"
        };
        let gaps = if full.is_empty() || full.len() == to_d - from_d + 1 {
            ""
        } else {
            " (with gaps too short for it)"
        };
        let mut text = format!(
            "fits alone, but `{}` is full from {from} to {to}{gaps} with {whom}: {}",
            pool.id,
            names.join(", ")
        );
        if !partners.is_empty() {
            let ps: Vec<String> = partners
                .iter()
                .map(|&b| format!("`{}`", p.experiments[b].id))
                .collect();
            text.push_str(&format!(
                "; it also must not run alongside {}",
                ps.join(", ")
            ));
        }
        return text;
    }
    // "`x` (2027-01-04 to 2027-01-17)" for each test of `list`.
    let with_spans = |list: &[usize]| -> String {
        list.iter()
            .map(|&b| {
                let (s, t) = match (&inst.roles[b], state.opt(inst, b)) {
                    (Role::Fixed { start, end, .. }, _) => (w.date(*start), w.date(*end)),
                    (_, Some(bo)) => (w.date(bo.start as i64), w.date(bo.end as i64)),
                    _ => (w.start, w.start),
                };
                format!("`{}` ({s} to {t})", p.experiments[b].id)
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    if !partners.is_empty() {
        return format!(
            "fits alone, but must not run alongside {}, which the plan keeps",
            with_spans(&partners)
        );
    }
    if !traffic.is_empty() {
        return format!(
            "fits alone, but is kept apart on traffic from {}, which the plan keeps, and no share level fits beside it",
            with_spans(&traffic)
        );
    }
    if !late_preds.is_empty() {
        let ps: Vec<String> = late_preds
            .iter()
            .map(|&b| {
                let end = state
                    .opt(inst, b)
                    .map(|o| w.date(o.end as i64))
                    .unwrap_or(w.start);
                format!("`{}` (ends {end})", p.experiments[b].id)
            })
            .collect();
        return format!(
            "must wait for {}, which leaves too little time after it",
            ps.join(", ")
        );
    }
    // Nothing above applies: say what was tried.
    let _ = start.weekday();
    "no run fits beside the scheduled tests".to_string()
}

/// Why test `e` has no option at all although a run at its largest share
/// `top` is short enough for the window: the real cause, and only changes
/// that are not already at their limit.
fn why_no_option(inst: &Instance, e: usize, first: usize, top: Share) -> String {
    use crate::portfolio::BlackoutKind;
    let p = inst.portfolio;
    let w = p.window;
    let ex = &p.experiments[e];
    let on = pools_named(inst, e);
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
        let names: Vec<String> = holders
            .iter()
            .map(|&b| format!("`{}`", p.experiments[b].id))
            .collect();
        let when = match until {
            Some(u) if u > w.end => format!("past the window's end (until {u})"),
            Some(u) => format!("until {u}"),
            None => String::new(),
        };
        return if names.is_empty() {
            format!(
                "the tests already running on {} leave no room for it in time",
                on
            )
        } else {
            format!(
                "the running tests {} hold {} {when}, leaving no room for it in time; alone it could run from {}",
                names.join(", "),
                on,
                w.date(s as i64)
            )
        };
    }
    let spans = |kind: BlackoutKind| -> Vec<String> {
        p.blackouts
            .iter()
            .filter(|b| {
                b.kind == kind && (b.pools.is_empty() || b.pools.iter().any(|&q| ex.uses(q)))
            })
            .map(|b| {
                if b.note.is_empty() {
                    format!("{}..{}", b.from, b.to)
                } else {
                    format!("{}..{}, {}", b.from, b.to, b.note)
                }
            })
            .collect()
    };
    // Changes that could help, only where not already at their limit.
    let mut helps: Vec<String> = Vec::new();
    let largest = p.share_levels.all().last().copied();
    if largest.is_some_and(|l| l > top) {
        helps.push(format!("a larger `max_share` than {top}"));
    }
    if ex.deadline.is_some() {
        helps.push("a later deadline".to_string());
    }
    let help = if helps.is_empty() {
        String::new()
    } else {
        format!("; {} would help", helps.join(" or "))
    };
    let limit = match ex.deadline {
        Some(dl) => format!("its deadline {dl}"),
        None => format!("the window's end {}", w.end),
    };
    if solo.crossed {
        return format!(
            "every run that ends by {limit} meets a no-running blackout ({}){help}",
            spans(BlackoutKind::NoRunning).join("; ")
        );
    }
    if !solo.any_start {
        return format!(
            "no start day from {} is free of the no-starts blackouts ({}) in time for {limit}",
            w.date(first as i64),
            spans(BlackoutKind::NoStarts).join("; ")
        );
    }
    format!("no run from an allowed start ends by {limit} at its largest share of {top}{help}")
}
