//! The outlook of each running test in a re-plan: its new end from the
//! units still needed and the forecast from the day the counts were read,
//! what stands out about it (the flags of [`RunningFlag`]), and the advice
//! as facts ([`Advice`], worded by `render::words`): when it can no longer finish inside the window, the rescue
//! (a larger share where its pool has room, or the effect it can still
//! detect by the window's end, the sizing inverse); when its run reaches a
//! `no_running` span, the choice of stopping before it or ending later;
//! when it has its sample, that it is ready to read.
//!
//! Units on a `no_running` day of its pool never count towards a test: the
//! traffic of such a day does not represent normal behaviour.

use crate::advice::{self, Advice, Detect, Note};
use crate::forecast::test_units_on;
use crate::plan::{NoRunningChoice, RunningFlag, RunningOutlook};
use crate::portfolio::{BlackoutKind, Portfolio};
use crate::share::Share;
use crate::sizing::round_days;
use chrono::{Duration, NaiveDate};

/// How far past the window a running test's end is searched (ten years).
pub(super) const HORIZON_DAYS: i64 = 3653;

/// A running test as the progress file gives it.
#[derive(Debug, Clone, Copy)]
pub(super) struct Run {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    pub start: NaiveDate,
    /// The share it has run at so far.
    pub share: Share,
    /// Units over all arms collected up to the end of the day before `as_of`.
    pub collected: u64,
    pub as_of: NaiveDate,
}

impl Run {
    /// Its share on `day` when it runs at `from_today` from `today` on:
    /// a ramp step's share on the ramp's days unless re-shared.
    fn share_on(
        &self,
        e: &crate::portfolio::Experiment,
        day: NaiveDate,
        from_today: Share,
        today: NaiveDate,
    ) -> f64 {
        if day >= today && from_today != self.share {
            return from_today.fraction();
        }
        let into = (day - self.start).num_days().max(0) as u32;
        e.share_on_day(into, self.share).fraction()
    }
}

/// Whether a `no_running` blackout covers `day` on `pool`.
fn no_running(portfolio: &Portfolio, pool: usize, day: NaiveDate) -> bool {
    portfolio.forbids(BlackoutKind::NoRunning, day, &[pool])
}

/// Units that count towards `run` on `day` at `share` from `today`: none
/// on a `no_running` day of its pool.
fn units_counted(
    portfolio: &Portfolio,
    run: &Run,
    day: NaiveDate,
    share: Share,
    today: NaiveDate,
) -> f64 {
    let e = &portfolio.experiments[run.experiment];
    if e.pools.iter().any(|&pool| no_running(portfolio, pool, day)) {
        return 0.0;
    }
    let into = (day - run.start).num_days();
    if !e.ramp_counts && into < i64::from(e.ramp_days()) {
        return 0.0;
    }
    let s = run.share_on(e, day, share, today);
    e.pools
        .iter()
        .map(|&pool| test_units_on(e, &portfolio.pools[pool], day, s))
        .sum()
}

/// Units `run` will have at the end of `last` at `share` from today: the
/// count in hand plus the forecast from `as_of` on.
pub(super) fn units_by(
    portfolio: &Portfolio,
    run: &Run,
    share: Share,
    today: NaiveDate,
    last: NaiveDate,
) -> f64 {
    let mut day = run.as_of.max(run.start);
    let mut total = run.collected as f64;
    while day <= last {
        total += units_counted(portfolio, run, day, share, today);
        day += Duration::days(1);
    }
    total
}

/// Whether it has collected its sample and run its minimum before today:
/// then its result can be read now.
fn ready_to_read(portfolio: &Portfolio, run: &Run, today: NaiveDate) -> bool {
    let e = &portfolio.experiments[run.experiment];
    run.collected >= e.need.total && (today - run.start).num_days() >= i64::from(e.min_days)
}

/// A running test's last day of data when it runs at `share` from `today`
/// on (at its old share before): counted from `as_of` with the units
/// already collected, never before `today`, at least its minimum run from
/// its start, and whole weeks from its start when asked; units on its
/// pool's `no_running` days do not count. A test already past its need
/// that has run its minimum is ready to read: its last day of data was
/// yesterday, and its share is free from today (whole weeks are not asked
/// of a sample already in). One past its need that has not ends at its
/// minimum run. `None` past the ten-year horizon.
pub(super) fn running_end(
    portfolio: &Portfolio,
    run: &Run,
    share: Share,
    today: NaiveDate,
) -> Option<NaiveDate> {
    let e = &portfolio.experiments[run.experiment];
    if ready_to_read(portfolio, run, today) {
        return Some((today - Duration::days(1)).max(run.start));
    }
    let need = e.need.total.saturating_sub(run.collected) as f64;
    let first = run.as_of.max(run.start);
    let mut reached = first - Duration::days(1);
    if need > 0.0 {
        let mut total = 0.0;
        let mut day = first;
        let limit = first + Duration::days(HORIZON_DAYS);
        loop {
            total += units_counted(portfolio, run, day, share, today);
            if total >= need * (1.0 - 1e-9) {
                break;
            }
            day += Duration::days(1);
            if day > limit {
                return None;
            }
        }
        reached = day;
    }
    let end = reached.max(today);
    let days = (end - run.start).num_days() as u64 + 1;
    let days = round_days(days, e.min_days, e.whole_weeks);
    Some(run.start + Duration::days(days as i64 - 1))
}

/// The effect the design can detect with `units` over all arms at the
/// planned power (the sizing inverse); `None` when too few for any.
fn detectable(portfolio: &Portfolio, experiment: usize, units: f64) -> Option<f64> {
    crate::schedule::statistics::detectable_effect(&portfolio.experiments[experiment], units)
}

/// What test `experiment` can detect with `effect` worked out for it.
fn can_detect(portfolio: &Portfolio, experiment: usize, effect: Option<f64>) -> Detect {
    let e = &portfolio.experiments[experiment];
    if e.sample_size_given {
        return Detect::SampleGiven;
    }
    match effect {
        Some(effect) => Detect::Effect {
            effect,
            planned: e.design.effect,
        },
        None => Detect::TooFew,
    }
}

/// The first `no_running` span of its pool that its run from today to
/// `reach` meets.
fn first_no_running<'p>(
    portfolio: &'p Portfolio,
    run: &Run,
    today: NaiveDate,
    reach: NaiveDate,
) -> Option<&'p crate::portfolio::Blackout> {
    let e = &portfolio.experiments[run.experiment];
    let from = today.max(run.start);
    portfolio
        .blackouts
        .iter()
        .filter(|b| b.kind == BlackoutKind::NoRunning)
        .filter(|b| b.pools.is_empty() || b.pools.iter().any(|&k| e.uses(k)))
        .filter(|b| b.from <= reach && from <= b.to)
        .min_by_key(|b| (b.from, b.to))
}

/// The facts of one running test at `share` from today: its end, its
/// flags (all but `input_overload`, which needs the whole pool), the
/// `no_running` choice, the smallest share level that would finish it in
/// the window were its pool's room no limit, and the effect it can detect
/// by the window's end. No advice yet: see [`advice`].
pub(super) fn outlook(
    portfolio: &Portfolio,
    run: &Run,
    share: Share,
    today: NaiveDate,
) -> RunningOutlook {
    let e = &portfolio.experiments[run.experiment];
    let end = running_end(portfolio, run, share, today);
    let fits = end.is_some_and(|d| d <= portfolio.window.end);
    let mut outlook = RunningOutlook {
        id: e.id.clone(),
        started: run.start,
        share,
        collected: run.collected,
        units_needed: e.need.total,
        end,
        fits_window: fits,
        rescue_share: None,
        detectable_effect: None,
        advice: None,
        share_before: Some(run.share),
        flags: Vec::new(),
        no_running: None,
        sample_ratio: None,
    };
    if !fits {
        outlook.flags.push(RunningFlag::CannotFinish);
    }
    let reach = end.unwrap_or(portfolio.window.end + Duration::days(HORIZON_DAYS));
    if let Some(b) = first_no_running(portfolio, run, today, reach) {
        outlook.flags.push(RunningFlag::CrossesNoRunning);
        let stop_end = (b.from - Duration::days(1)).max(today - Duration::days(1));
        let units = units_by(portfolio, run, share, today, stop_end);
        outlook.no_running = Some(NoRunningChoice {
            from: b.from,
            to: b.to,
            note: b.note.clone(),
            stop_end,
            stop_effect: detectable(portfolio, run.experiment, units),
        });
    }
    if run.collected >= e.need.total {
        outlook.flags.push(RunningFlag::PastNeed);
    }
    if fits {
        return outlook;
    }
    outlook.rescue_share = portfolio
        .share_levels
        .up_to(e.max_share)
        .filter(|&s| s > share)
        .find(|&s| {
            running_end(portfolio, run, s, today).is_some_and(|d| d <= portfolio.window.end)
        });
    let by_end = units_by(portfolio, run, share, today, portfolio.window.end);
    outlook.detectable_effect = detectable(portfolio, run.experiment, by_end);
    outlook
}

/// How the running tests alone, at the shares the progress file gives
/// them, overload a pool.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Overload {
    /// The first day over.
    pub from: NaiveDate,
    /// The largest sum of shares on a day (split pools; else the largest sum).
    pub peak_share: f64,
    /// The most tests on a day.
    pub peak_count: u32,
}

/// What the joint pass over a pool decided about a running test's share.
#[derive(Debug, Clone, PartialEq)]
pub(super) enum Rescue {
    /// It finishes as it runs: nothing to rescue.
    None,
    /// Re-shared from its old share (`planning.reshare_running`).
    Reshared { from: Share },
    /// The pool has room for this share, which would finish it in time.
    Advise(Share),
    /// This share would finish it, but the pool has no room for it: the
    /// running tests holding the pool from today, with their shares.
    NoRoom {
        needed: Share,
        holders: Vec<(String, Share)>,
    },
    /// No share up to its maximum finishes it in time.
    Nothing,
}

/// The advice for one running test, from its facts, the joint rescue,
/// and the pool's overload by the input (its peak and a day); `None` when
/// there is nothing to tell. `render::words::advice` words it.
pub(super) fn advice(
    portfolio: &Portfolio,
    run: &Run,
    o: &RunningOutlook,
    rescue: &Rescue,
    today: NaiveDate,
    overload: Option<Overload>,
) -> Option<Advice> {
    let e = &portfolio.experiments[run.experiment];
    let pools: Vec<String> = e
        .pools
        .iter()
        .map(|&k| portfolio.pools[k].id.clone())
        .collect();
    let mut notes: Vec<Note> = Vec::new();
    if let Rescue::Reshared { from } = rescue {
        notes.push(Note::Reshared {
            from: *from,
            to: o.share,
            today,
        });
    }
    if o.past_need() {
        match o.end {
            Some(end) if end < today => notes.push(Note::ReadyToRead {
                collected: o.collected,
                needed: o.units_needed,
                last_day: end,
                share: o.share,
                pools: pools.clone(),
            }),
            Some(end) => notes.push(Note::RunsToMinimum {
                collected: o.collected,
                needed: o.units_needed,
                min_days: e.min_days,
                end,
            }),
            None => {}
        }
    }
    if o.flags.contains(&RunningFlag::CannotFinish) {
        notes.push(Note::CannotFinish {
            window_end: portfolio.window.end,
            share: o.share,
            need: e.need.total,
            end: o.end,
            rescue: match rescue {
                Rescue::Advise(s) => advice::Rescue::Share(*s),
                Rescue::NoRoom { needed, holders } => advice::Rescue::NoRoom {
                    needed: *needed,
                    pools: pools.clone(),
                    holders: holders.clone(),
                },
                Rescue::Nothing => advice::Rescue::Nothing {
                    max_share: e.max_share,
                },
                Rescue::None | Rescue::Reshared { .. } => advice::Rescue::Unsaid,
            },
            detect: can_detect(portfolio, run.experiment, o.detectable_effect),
        });
    }
    if let Some(c) = &o.no_running {
        notes.push(Note::NoRunning {
            from: c.from,
            to: c.to,
            note: c.note.clone(),
            pools: pools.clone(),
            stop_end: c.stop_end,
            detect: can_detect(portfolio, run.experiment, c.stop_effect),
            end: o.end,
        });
    }
    if let Some(x) = overload {
        notes.push(Note::Overload {
            pools,
            from: x.from,
            peak_share: x.peak_share,
            peak_count: x.peak_count,
            max_concurrent: e
                .pools
                .iter()
                .map(|&k| portfolio.pools[k].max_concurrent)
                .min()
                .unwrap_or(0),
        });
    }
    (!notes.is_empty()).then_some(Advice::Notes(notes))
}
