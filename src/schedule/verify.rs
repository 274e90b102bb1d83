//! The independent plan verifier.
//!
//! It re-derives every rule from the portfolio, the request and the
//! forecast, sharing no code with the planner beyond the validated model
//! and [`units_on`] (a pool's forecast on a day); what enters a test from
//! a pool and a split pool's room it works out itself. It recomputes each run's end by its own day-by-day
//! loop, rebuilds every pool's daily occupancy from the listed runs, and
//! recomputes the objective. The search never uses it; `schedule::plan`
//! runs it once on the finished plan as a guard, the tests run it on every
//! plan they make, and so may a re-planner on its results.

use super::request::PlanRequest;
use crate::forecast::units_on;
use crate::plan::{Plan, Status};
use crate::portfolio::{BlackoutKind, Experiment, Portfolio, Sharing, StartGrid};
use crate::share::Share;
use chrono::{Datelike, Duration, NaiveDate};

const TOL: f64 = 1e-6;

/// The last day of a run at `share` from `start`: the first day its units
/// reach `need`, at least `min_days` long, whole weeks when asked; `None`
/// if not reached by `limit`.
fn own_end(
    portfolio: &Portfolio,
    ex: &Experiment,
    start: NaiveDate,
    share: f64,
    limit: NaiveDate,
) -> Option<NaiveDate> {
    let need = ex.need.total as f64;
    let (min_days, whole_weeks) = (ex.min_days, ex.whole_weeks);
    let ramp: i64 = ex.ramp.iter().map(|s| i64::from(s.days)).sum();
    let mut total = 0.0;
    let mut day = start;
    let mut n: i64 = 0;
    loop {
        if day > limit {
            return None;
        }
        // Every pool's units on the day, at the day's share; ramp days
        // only when they count.
        let on_ramp = n < ramp;
        let today_share = ramp_share(ex, n).unwrap_or(share);
        if !on_ramp || ex.ramp_counts {
            for &pool in &ex.pools {
                let def = &portfolio.pools[pool];
                total += today_share * entering(ex, def) * units_on(def, day);
            }
        }
        n += 1;
        // At least one day past the ramp at the planned share.
        if n > ramp && total >= need * (1.0 - 1e-9) {
            break;
        }
        day += Duration::days(1);
    }
    let mut days = n.max(i64::from(min_days)).max(1);
    if whole_weeks {
        days = (days + 6) / 7 * 7;
    }
    let end = start + Duration::days(days - 1);
    (end <= limit).then_some(end)
}

/// The most a split pool's shares may add up to on a day (the one place
/// the verifier reads it): what its holdout leaves.
fn split_capacity(pool: &crate::portfolio::Pool) -> f64 {
    1.0 - pool.holdout
}

/// What enters a test of the units under its share of `pool`, worked out
/// here apart from the planner: the targeting's fraction, and on an
/// overlap pool what its holdout leaves.
fn entering(ex: &Experiment, pool: &crate::portfolio::Pool) -> f64 {
    let open = if pool.sharing == Sharing::Overlap {
        1.0 - pool.holdout
    } else {
        1.0
    };
    ex.eligible * open
}

/// The share of a ramp step on the `n`-th day of a run (0 first), or
/// `None` past the ramp.
fn ramp_share(ex: &Experiment, n: i64) -> Option<f64> {
    let mut until = 0i64;
    for step in &ex.ramp {
        until += i64::from(step.days);
        if n < until {
            return Some(step.share.fraction());
        }
    }
    None
}

/// The share a run of `ex` from `start` at `share` holds on `day`.
fn share_that_day(ex: &Experiment, start: NaiveDate, share: f64, day: NaiveDate) -> f64 {
    ramp_share(ex, (day - start).num_days()).unwrap_or(share)
}

/// Checks `plan` against every rule; `Err` lists each violation found.
/// `Ok` lists the facts of the input worth a look that are not the plan's
/// doing: a pool its running tests alone overload at the shares the
/// progress file gives them.
pub fn verify(
    portfolio: &Portfolio,
    request: &PlanRequest,
    plan: &Plan,
) -> Result<Vec<String>, Vec<String>> {
    let p = portfolio;
    let w = p.window;
    let mut bad: Vec<String> = Vec::new();
    if plan.experiments.len() != p.experiments.len() {
        bad.push(format!(
            "the plan lists {} experiments; the portfolio has {}",
            plan.experiments.len(),
            p.experiments.len()
        ));
        return Err(bad);
    }
    // Runs by experiment index: (start, end, share).
    let mut runs: Vec<Option<(NaiveDate, NaiveDate, f64)>> = vec![None; p.experiments.len()];
    for (i, (ex, pe)) in p.experiments.iter().zip(&plan.experiments).enumerate() {
        if pe.id != ex.id {
            bad.push(format!("entry {i} is `{}`, expected `{}`", pe.id, ex.id));
            continue;
        }
        let ids: Vec<&str> = ex.pools.iter().map(|&k| p.pools[k].id.as_str()).collect();
        if pe.pools != ids {
            bad.push(format!(
                "`{}` is listed on pools {:?}; it runs on {:?}",
                ex.id, pe.pools, ids
            ));
        }
        if pe.eligible != ex.eligible || pe.sample_size_given != ex.sample_size_given {
            bad.push(format!(
                "`{}` lists eligible {} and a given sample size {}; the portfolio says {} and {}",
                ex.id, pe.eligible, pe.sample_size_given, ex.eligible, ex.sample_size_given
            ));
        }
        if pe.units_needed != ex.need.total {
            bad.push(format!(
                "`{}` lists {} units needed; it needs {}",
                ex.id, pe.units_needed, ex.need.total
            ));
        }
        match pe.status {
            Status::Scheduled | Status::Running => match &pe.run {
                Some(r) => {
                    runs[i] = Some((r.start, r.end, r.share.fraction()));
                    let mut d = r.start;
                    let mut steps = Vec::new();
                    for step in &ex.ramp {
                        let last = d + Duration::days(i64::from(step.days) - 1);
                        steps.push((d, last, step.share));
                        d = last + Duration::days(1);
                    }
                    let listed: Vec<(NaiveDate, NaiveDate, Share)> =
                        pe.ramp.iter().map(|s| (s.start, s.end, s.share)).collect();
                    if listed != steps {
                        bad.push(format!("`{}` lists a ramp other than its own", ex.id));
                    }
                }
                None => bad.push(format!(
                    "`{}` is scheduled without a start, end and share",
                    ex.id
                )),
            },
            Status::Unscheduled | Status::Finished | Status::Cancelled => {
                if pe.run.is_some() {
                    bad.push(format!("`{}` is unscheduled but has a run", ex.id));
                }
                if pe.reason.as_deref().is_none_or(|r| r.trim().is_empty()) {
                    bad.push(format!("`{}` is unscheduled without a reason", ex.id));
                }
            }
        }
    }
    let fixed = |i: usize| request.fixed.iter().find(|f| f.experiment == i);
    let excluded = |i: usize| request.excluded.iter().find(|x| x.experiment == i);
    let today = request.today.unwrap_or(w.start);
    for (i, ex) in p.experiments.iter().enumerate() {
        if let Some(f) = fixed(i) {
            if runs[i] != Some((f.start, f.end, f.share.fraction())) {
                bad.push(format!("running `{}` was not kept as given", ex.id));
            }
            if f.share != f.share_before {
                // A re-share: only where the portfolio allows it, upwards,
                // to a share level within the test's maximum.
                if !p.planning.reshare_running {
                    bad.push(format!(
                        "running `{}` was re-shared, which the portfolio does not allow",
                        ex.id
                    ));
                }
                if f.share < f.share_before
                    || !p.share_levels.contains(f.share)
                    || f.share > ex.max_share
                {
                    bad.push(format!(
                        "running `{}` was re-shared from {} to {}, not a larger share level within its maximum",
                        ex.id, f.share_before, f.share
                    ));
                }
            }
            continue;
        }
        if let Some(x) = excluded(i) {
            if runs[i].is_some() {
                bad.push(format!("`{}` left the queue but is scheduled", ex.id));
            }
            if plan.experiments.get(i).map(|pe| &pe.ran) != Some(&x.ran) {
                bad.push(format!(
                    "`{}` does not show what it ran as the progress gives it",
                    ex.id
                ));
            }
            continue;
        }
        let Some((start, end, share)) = runs[i] else {
            continue;
        };
        let id = &ex.id;
        if start < w.start || end > w.end {
            bad.push(format!("`{id}` runs {start}..{end}, outside the window"));
        }
        if let Some(today) = request.today {
            if start < today {
                bad.push(format!("`{id}` starts {start}, before today {today}"));
            }
        }
        if let Some(es) = ex.earliest_start {
            if start < es {
                bad.push(format!(
                    "`{id}` starts {start}, before its earliest start {es}"
                ));
            }
        }
        if let Some(dl) = ex.deadline {
            if end > dl {
                bad.push(format!("`{id}` ends {end}, after its deadline {dl}"));
            }
        }
        if p.planning.grid == StartGrid::Weekly && start.weekday() != p.planning.start_weekday {
            bad.push(format!(
                "`{id}` starts on a {}, off the weekly grid",
                start.weekday()
            ));
        }
        if !p.share_levels.contains(Share::from_fraction(share)) {
            bad.push(format!("`{id}` takes share {share}, not a share level"));
        }
        if Share::from_fraction(share) > ex.max_share {
            bad.push(format!(
                "`{id}` takes share {share}, above its maximum {}",
                ex.max_share.fraction()
            ));
        }
        match own_end(p, ex, start, share, w.end) {
            Some(e) if e == end => {}
            Some(e) => bad.push(format!(
                "`{id}` ends {end}; its units and run rules give {e}"
            )),
            None => bad.push(format!("`{id}` cannot reach its units inside the window")),
        }
        for b in &p.blackouts {
            // A blackout of any of its pools applies to it.
            let mine = b.pools.is_empty() || b.pools.iter().any(|q| ex.pools.contains(q));
            match b.kind {
                BlackoutKind::NoStarts if mine && b.from <= start && start <= b.to => {
                    bad.push(format!("`{id}` starts {start} inside a no-starts blackout"))
                }
                BlackoutKind::NoRunning if mine && b.from <= end && start <= b.to => {
                    bad.push(format!(
                        "`{id}` runs through a no-running blackout {}..{}",
                        b.from, b.to
                    ))
                }
                _ => {}
            }
        }
        for pre in &ex.after {
            let pred_end = if let Some(f) = fixed(pre.experiment) {
                Some(f.end)
            } else if let Some(x) = excluded(pre.experiment) {
                x.ended
            } else {
                runs[pre.experiment].map(|r| r.1)
            };
            let pid = &p.experiments[pre.experiment].id;
            match pred_end {
                None => bad.push(format!("`{id}` runs but its predecessor `{pid}` does not")),
                Some(pe) => {
                    let first = pe + Duration::days(1 + i64::from(pre.gap_days));
                    if start < first {
                        bad.push(format!(
                            "`{id}` starts {start}, before `{pid}` ends plus gap ({first})"
                        ));
                    }
                }
            }
        }
        if let Some(pe) = plan.experiments.get(i) {
            if pe.run.map(|r| r.result_date) != Some(end + Duration::days(1)) {
                bad.push(format!(
                    "`{id}` has a result date that is not the day after its end"
                ));
            }
        }
    }
    // not_with, for every pair with both running.
    for (a, ex) in p.experiments.iter().enumerate() {
        for &b in &ex.not_with {
            if b <= a {
                continue;
            }
            if let (Some(ra), Some(rb)) = (runs[a], runs[b]) {
                if ra.0 <= rb.1 && rb.0 <= ra.1 {
                    bad.push(format!(
                        "`{}` and `{}` must not run together but overlap",
                        ex.id, p.experiments[b].id
                    ));
                }
            }
        }
    }
    // Apart on traffic: on every day both run, their shares of each pool
    // they share add up to at most 1.
    for (a, ex) in p.experiments.iter().enumerate() {
        for &b in &ex.apart_traffic {
            if b <= a {
                continue;
            }
            let other = &p.experiments[b];
            let shared = ex.pools.iter().any(|q| other.pools.contains(q));
            let (Some(ra), Some(rb)) = (runs[a], runs[b]) else {
                continue;
            };
            if !shared {
                continue;
            }
            let mut day = ra.0.max(rb.0);
            while day <= ra.1.min(rb.1) {
                let sum =
                    share_that_day(ex, ra.0, ra.2, day) + share_that_day(other, rb.0, rb.2, day);
                if sum > 1.0 + TOL {
                    bad.push(format!(
                        "`{}` and `{}` are kept apart on traffic but take {sum:.4} of a shared pool on {day}",
                        ex.id, other.id
                    ));
                    break;
                }
                day += Duration::days(1);
            }
        }
    }
    // Pools day by day. Running tests of a re-plan are facts, not
    // choices: a day their shares as given overload on their own is the
    // input's doing (reported in `Ok`); any more than that, whether from a
    // planned test or from a re-share, is the plan's.
    let mut facts: Vec<String> = Vec::new();
    for (pi, pool) in p.pools.iter().enumerate() {
        let pp = plan.pools.get(pi);
        if pp.is_some_and(|pp| pp.holdout != pool.holdout) {
            bad.push(format!(
                "the plan gives `{}` a holdout its portfolio does not",
                pool.id
            ));
        }
        let mut day = w.start;
        let mut k = 0usize;
        // First and last day of the input's overload, and its peak.
        let mut input_over: Option<(NaiveDate, NaiveDate, f64, u32)> = None;
        while day <= w.end {
            let mut used = 0.0;
            let mut given = 0.0;
            let mut count = 0u32;
            let mut planned = false;
            for (i, ex) in p.experiments.iter().enumerate() {
                if !ex.pools.contains(&pi) {
                    continue;
                }
                if let Some((s, e, sh)) = runs[i] {
                    if s <= day && day <= e {
                        count += 1;
                        match fixed(i) {
                            Some(f) => {
                                // A running test keeps its ramp unless re-shared.
                                let held = if f.share != f.share_before && day >= today {
                                    f.share.fraction()
                                } else {
                                    share_that_day(ex, s, f.share_on(day, today).fraction(), day)
                                };
                                used += held;
                                given += share_that_day(ex, s, f.share_before.fraction(), day);
                            }
                            None => {
                                used += share_that_day(ex, s, sh, day);
                                planned = true;
                            }
                        }
                    }
                } else if let Some(r) = excluded(i).and_then(|x| x.ran.as_ref()) {
                    if r.start <= day && day <= r.end {
                        // As it ran: its ramp's steps, then its share.
                        let sh = ramp_share(ex, (day - r.start).num_days())
                            .or(r.share.map(Share::fraction))
                            .unwrap_or(0.0);
                        used += sh;
                        given += sh;
                        count += 1;
                    }
                }
            }
            let over_share = pool.sharing == Sharing::Split && used > split_capacity(pool) + TOL;
            let over_count = count > pool.max_concurrent;
            let excused = !planned && used <= given + TOL;
            if over_share && !excused {
                bad.push(format!(
                    "`{}` is shared {:.4} on {day}, over {}",
                    pool.id,
                    used,
                    split_capacity(pool)
                ));
            }
            if over_count && planned {
                bad.push(format!(
                    "`{}` runs {count} tests on {day}, over its cap {}",
                    pool.id, pool.max_concurrent
                ));
            }
            if (over_share || over_count) && excused {
                let (from, peak, most) = match input_over {
                    Some((from, _, peak, most)) => (from, peak.max(used), most.max(count)),
                    None => (day, used, count),
                };
                input_over = Some((from, day, peak, most));
            }
            match pp.and_then(|pp| pp.days.get(k)) {
                Some(pd)
                    if pd.date == day
                        && pd.running == count
                        && (pd.share_used.fraction() - used).abs() < TOL => {}
                _ => bad.push(format!(
                    "the plan's day {day} of `{}` does not match its runs",
                    pool.id
                )),
            }
            day += Duration::days(1);
            k += 1;
        }
        if let Some((from, to, peak, most)) = input_over {
            facts.push(format!(
                "`{}` is overloaded by its running tests as the input gives them, on days from {from} to {to} (up to {peak:.4} of it, {most} tests; cap {}): a fact of the input, not of the plan",
                pool.id, pool.max_concurrent
            ));
        }
    }
    // The objective.
    let n = w.days();
    let mut value = 0.0;
    for (i, ex) in p.experiments.iter().enumerate() {
        if let Some((_, end, _)) = runs[i] {
            let t = if n > 1 {
                (end - w.start).num_days() as f64 / (n - 1) as f64
            } else {
                0.0
            };
            value += ex.priority * (1.0 - p.planning.lateness_weight * t);
        }
    }
    let scale = value.abs().max(1.0);
    if (value - plan.solver.value).abs() > 1e-6 * scale {
        bad.push(format!(
            "the plan claims value {}, its runs are worth {value}",
            plan.solver.value
        ));
    }
    if plan.solver.bound < plan.solver.value - 1e-6 * scale {
        bad.push(format!(
            "the bound {} is below the value {}",
            plan.solver.bound, plan.solver.value
        ));
    }
    if bad.is_empty() {
        Ok(facts)
    } else {
        Err(bad)
    }
}
