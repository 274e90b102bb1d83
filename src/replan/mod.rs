//! Re-planning mid-quarter: the tests that run keep their start and share
//! (the trade's practice: a running test is never paused, and its arms'
//! split never changes), finished and cancelled tests free their pool, and
//! every other test is planned again from today around the running ones.
//!
//! [`replan`] turns a [`Progress`] into a [`PlanRequest`] (each running
//! test held to its new end), calls the scheduler and marks the statuses.
//! `progress` loads the progress file; `outlook` works out each running
//! test's new end and, for one that can no longer finish inside the window
//! when it would, the smallest change that would rescue it (a larger
//! share, or the effect it can still detect by the window's end, the sizing
//! inverse); `scale` parses `--scale` and builds the scaled portfolio.

pub mod counts;
mod outlook;
pub mod progress;
pub mod scale;
pub mod traffic;

pub use progress::{load_progress, load_progress_str, Progress};
pub use scale::{with_scales, ScaleArg};

use crate::plan::{Plan, Ran, Reason, RunningFlag, RunningOutlook, Status};
use crate::portfolio::{Portfolio, Sharing};
use crate::schedule::{self, Excluded, FixedRun, PlanRequest};
use crate::share::Share;
use chrono::{Duration, NaiveDate};
use outlook::{advice, outlook, running_end, units_by, Overload, Rescue, Run, HORIZON_DAYS};
use progress::State;
use std::fmt;

/// Why a re-plan could not be made.
#[derive(Debug, Clone, PartialEq)]
pub enum ReplanError {
    /// A `--scale` names a pool the portfolio does not define.
    UnknownScalePool {
        /// The pool named.
        pool: String,
        /// The defined pools, closest to `pool` first.
        closest: Vec<String>,
    },
}

impl fmt::Display for ReplanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ReplanError::UnknownScalePool { pool, closest } => {
                let ids: Vec<&str> = closest.iter().map(String::as_str).collect();
                write!(
                    f,
                    "`--scale`: pool `{pool}` is not defined; defined pools, closest first: {}",
                    crate::diagnostic::list(&ids)
                )
            }
        }
    }
}

impl std::error::Error for ReplanError {}

/// One running test on its way through [`replan`].
struct Live {
    /// Index into `Progress::entries`.
    entry: usize,
    run: Run,
    outlook: RunningOutlook,
    rescue: Rescue,
}

/// The day index of `date` in the window, clamped to `0..=days`.
fn index(portfolio: &Portfolio, date: NaiveDate) -> usize {
    let days = portfolio.window.days() as i64;
    portfolio.window.offset(date).offset().clamp(0, days) as usize
}

/// The last day a running test holds its pool: its end, or past the
/// horizon the window's end plus the horizon.
fn held_to(portfolio: &Portfolio, o: &RunningOutlook) -> NaiveDate {
    o.end
        .unwrap_or(portfolio.window.end + Duration::days(HORIZON_DAYS))
}

/// Share (in millionths) the running tests of `pool` hold on each window
/// day from `today`, at their outlooks' shares.
fn held(portfolio: &Portfolio, live: &[Live], pool: usize, today: NaiveDate) -> Vec<i64> {
    let days = portfolio.window.days();
    let mut held = vec![0i64; days];
    for l in live {
        if !portfolio.experiments[l.run.experiment].uses(pool) {
            continue;
        }
        let from = index(portfolio, today.max(l.run.start));
        let to = index(
            portfolio,
            held_to(portfolio, &l.outlook) + Duration::days(1),
        );
        for h in &mut held[from..to] {
            *h += i64::from(l.outlook.share.millionths());
        }
    }
    held
}

/// How the running tests of `pool`, at the shares the progress file gives
/// them, overload it on their own: `None` when they do not.
fn input_overload(portfolio: &Portfolio, live: &[Live], pool: usize) -> Option<Overload> {
    let p = &portfolio.pools[pool];
    let w = portfolio.window;
    let mut out: Option<Overload> = None;
    for d in 0..w.days() {
        let date = w.date(d as i64);
        let (mut share, mut count) = (Share::ZERO, 0u32);
        for l in live {
            if portfolio.experiments[l.run.experiment].uses(pool)
                && l.run.start <= date
                && date <= held_to(portfolio, &l.outlook)
            {
                share = share.plus(l.run.share);
                count += 1;
            }
        }
        if p.overloaded(share, count) {
            let share = share.fraction();
            let o = out.get_or_insert(Overload {
                from: date,
                peak_share: 0.0,
                peak_count: 0,
            });
            o.peak_share = o.peak_share.max(share);
            o.peak_count = o.peak_count.max(count);
        }
    }
    out
}

/// Re-plans `portfolio` (from [`with_scales`] when there are `--scale`s) from `today`
/// given `progress`. Running tests keep their start and share, unless the
/// portfolio allows re-sharing running tests: then a test that cannot
/// finish in the window takes the smallest share level that rescues it,
/// from today, where its pool has room beside the other running tests.
/// The rescue advice of one pool is worked out jointly, in priority order,
/// so that all of it can be followed at once.
pub fn replan(
    portfolio: &Portfolio,
    progress: &Progress,
    today: NaiveDate,
    base: &PlanRequest,
) -> (Plan, PlanRequest) {
    // The pools' actual traffic so far, when given, makes their forecasts.
    let (refitted, traffic) = traffic::refit(portfolio, progress);
    let portfolio = &refitted;
    let mut request = PlanRequest {
        today: Some(today),
        fixed: Vec::new(),
        excluded: Vec::new(),
        ..base.clone()
    };
    let mut live: Vec<Live> = Vec::new();
    for (k, entry) in progress.entries.iter().enumerate() {
        let ran =
            |started: &Option<NaiveDate>, ended: &Option<NaiveDate>, share: &Option<Share>| {
                started.map(|start| {
                    Ran::new(
                        start,
                        ended.unwrap_or(today - Duration::days(1)).max(start),
                        *share,
                    )
                })
            };
        match &entry.state {
            State::Running {
                started,
                share,
                units,
                units_per_arm,
            } => {
                let run = Run {
                    experiment: entry.experiment,
                    start: *started,
                    share: *share,
                    collected: *units,
                    as_of: progress.as_of,
                };
                let mut outlook = outlook(portfolio, &run, *share, today);
                sample_ratio(
                    portfolio,
                    entry.experiment,
                    units_per_arm.as_deref(),
                    &mut outlook,
                );
                live.push(Live {
                    entry: k,
                    outlook,
                    run,
                    rescue: Rescue::None,
                });
            }
            State::Finished {
                started,
                ended,
                share,
                stopped_at_look,
                outcome,
                units_per_arm,
            } => {
                let ran = ran(started, ended, share).map(|r| {
                    let design = &portfolio.experiments[entry.experiment];
                    let (sample_ratio, mismatch) =
                        sample_ratio_of(portfolio, entry.experiment, units_per_arm.as_deref());
                    Ran {
                        stopped_at_look: *stopped_at_look,
                        looks: design
                            .looks
                            .as_ref()
                            .map(|l| l.design.information.len() as u32),
                        outcome: *outcome,
                        sample_ratio,
                        sample_ratio_mismatch: mismatch,
                        ..r
                    }
                });
                request.excluded.push(Excluded {
                    experiment: entry.experiment,
                    ended: Some(ended.unwrap_or(today - Duration::days(1))),
                    reason: Reason::Finished { ended: *ended },
                    ran,
                })
            }
            State::Cancelled {
                note,
                started,
                ended,
                share,
            } => request.excluded.push(Excluded {
                experiment: entry.experiment,
                ended: None,
                reason: Reason::Cancelled { note: note.clone() },
                ran: ran(started, ended, share),
            }),
        }
    }
    // Rescues, pool by pool, in priority order: each takes only the room
    // its pool has beside the other running tests as they stand (and the
    // rescues before it), so the advice of one pool can all be followed.
    let mut order: Vec<usize> = (0..live.len())
        .filter(|&i| live[i].outlook.flags.contains(&RunningFlag::CannotFinish))
        .collect();
    let prio = |i: usize| portfolio.experiments[live[i].run.experiment].priority;
    order.sort_by(|&a, &b| {
        prio(b)
            .total_cmp(&prio(a))
            .then(live[a].run.experiment.cmp(&live[b].run.experiment))
    });
    let today_i = index(portfolio, today);
    for i in order {
        let e = live[i].run.experiment;
        // A multi-pool test needs the room on each of its split pools.
        let mine_to = index(
            portfolio,
            held_to(portfolio, &live[i].outlook) + Duration::days(1),
        );
        let others: Vec<(Vec<i64>, Share)> = portfolio.experiments[e]
            .pools
            .iter()
            .filter(|&&pool| portfolio.pools[pool].sharing == Sharing::Split)
            .map(|&pool| {
                let mut others = held(portfolio, &live, pool, today);
                for h in &mut others[today_i.min(mine_to)..mine_to] {
                    *h -= i64::from(live[i].outlook.share.millionths());
                }
                (others, portfolio.pools[pool].capacity())
            })
            .collect();
        let run = live[i].run;
        let current = live[i].outlook.share;
        let room_for = |s: Share, end: NaiveDate| {
            let to = index(portfolio, end + Duration::days(1));
            others.iter().all(|(others, cap)| {
                others[today_i.min(to)..to]
                    .iter()
                    .all(|&h| s.fits_beside(Share::from_millionths(h.max(0) as u32), *cap))
            })
        };
        let found = portfolio
            .share_levels
            .up_to(portfolio.experiments[e].max_share)
            .filter(|&s| s > current)
            .find_map(|s| {
                running_end(portfolio, &run, s, today)
                    .filter(|&end| end <= portfolio.window.end && room_for(s, end))
                    .map(|_| s)
            });
        let l = &mut live[i];
        match (found, l.outlook.rescue_share) {
            (Some(s), _) if portfolio.planning.reshare_running => {
                l.outlook = outlook(portfolio, &run, s, today);
                l.rescue = Rescue::Reshared { from: current };
            }
            (Some(s), _) => {
                l.rescue = Rescue::Advise(s);
                l.outlook.rescue_share = Some(s);
                // Reserve the room it would take, so the next advice on this
                // pool leaves it be.
                l.outlook.share = s;
                l.outlook.end = running_end(portfolio, &run, s, today);
            }
            (None, Some(needed)) => {
                l.outlook.rescue_share = None;
                l.rescue = Rescue::NoRoom {
                    needed,
                    holders: Vec::new(),
                };
            }
            (None, None) => l.rescue = Rescue::Nothing,
        }
    }
    // Advice that reserved room gets its own share and end back.
    for l in &mut live {
        if let Rescue::Advise(_) = l.rescue {
            let fresh = outlook(portfolio, &l.run, l.run.share, today);
            l.outlook.share = fresh.share;
            l.outlook.end = fresh.end;
        }
    }
    // Who holds a full pool from today, for the advice that found no room.
    let holders_of = |live: &[Live], pool: usize| -> Vec<(String, Share)> {
        live.iter()
            .filter(|l| portfolio.experiments[l.run.experiment].uses(pool))
            .filter(|l| held_to(portfolio, &l.outlook) >= today)
            .map(|l| (l.outlook.id.clone(), l.outlook.share))
            .collect()
    };
    let mut outlooks = Vec::new();
    for i in 0..live.len() {
        let pools = &portfolio.experiments[live[i].run.experiment].pools;
        if let Rescue::NoRoom { needed, .. } = live[i].rescue {
            let mut holders: Vec<(String, Share)> = Vec::new();
            for &pool in pools {
                for h in holders_of(&live, pool) {
                    if !holders.contains(&h) {
                        holders.push(h);
                    }
                }
            }
            live[i].rescue = Rescue::NoRoom { needed, holders };
        }
        let overload = pools
            .iter()
            .find_map(|&pool| input_overload(portfolio, &live, pool));
        let l = &mut live[i];
        if overload.is_some_and(|x| {
            x.from <= held_to(portfolio, &l.outlook) && l.run.start <= portfolio.window.end
        }) {
            l.outlook.flags.push(RunningFlag::InputOverload);
        }
        l.outlook.advice =
            advice(portfolio, &l.run, &l.outlook, &l.rescue, today, overload).map(Into::into);
        request.fixed.push(FixedRun {
            experiment: l.run.experiment,
            start: l.run.start,
            share: l.outlook.share,
            share_before: l.run.share,
            end: held_to(portfolio, &l.outlook),
            so_far: Some(crate::forecast::uncertainty::SoFar {
                as_of: l.run.as_of,
                units: l.run.collected,
            }),
        });
        outlooks.push(l.outlook.clone());
    }
    let mut plan = schedule::plan(portfolio, &request);
    for entry in &progress.entries {
        let pe = &mut plan.experiments[entry.experiment];
        pe.status = match entry.state {
            State::Running { .. } => Status::Running,
            State::Finished { .. } => Status::Finished,
            State::Cancelled { .. } => Status::Cancelled,
        };
    }
    for l in &live {
        let pe = &mut plan.experiments[l.run.experiment];
        if let Some(advice) = &l.outlook.advice {
            pe.reason = Some(crate::reason::Reason::Running(advice.facts().clone()).into());
        }
        // What it collected, plus the forecast from the day the counts were read.
        if let Some(r) = &mut pe.run {
            r.units_expected = units_by(portfolio, &l.run, l.outlook.share, today, r.end);
        }
        let _ = l.entry;
    }
    plan.running = outlooks;
    plan.traffic = traffic;
    (plan, request)
}

/// The tests `previous` ended before `today` (their last day of data
/// before it) that `progress` does not mention and the portfolio still
/// holds: without a word in the progress file they are planned again from
/// today, which is rarely what happened. In the previous plan's order.
pub fn missing_progress(
    previous: &Plan,
    progress: &Progress,
    portfolio: &Portfolio,
    today: NaiveDate,
) -> Vec<String> {
    previous
        .experiments
        .iter()
        .filter(|e| e.run.is_some_and(|r| r.end < today))
        .filter_map(|e| {
            let k = portfolio.experiments.iter().position(|x| x.id == e.id)?;
            progress.entry(k).is_none().then(|| e.id.clone())
        })
        .collect()
}

/// Checks a running test's per-arm counts against its design's split
/// (`crate::sizing::srm`) and flags a mismatch below
/// `planning.srm_alpha`.
fn sample_ratio(
    portfolio: &Portfolio,
    experiment: usize,
    per_arm: Option<&[u64]>,
    outlook: &mut RunningOutlook,
) {
    let (check, mismatch) = sample_ratio_of(portfolio, experiment, per_arm);
    outlook.sample_ratio = check;
    if mismatch {
        outlook.flags.push(RunningFlag::SampleRatioMismatch);
        outlook.flags.sort();
    }
}

/// The sample-ratio check of a test's per-arm counts against its design's
/// split, and whether it falls below `planning.srm_alpha`.
fn sample_ratio_of(
    portfolio: &Portfolio,
    experiment: usize,
    per_arm: Option<&[u64]>,
) -> (Option<crate::sizing::srm::SampleRatio>, bool) {
    let Some(counts) = per_arm else {
        return (None, false);
    };
    let design = &portfolio.experiments[experiment].design;
    let weights = crate::sizing::srm::weights(design.arms, design.ratio);
    let check = crate::sizing::srm::check(counts, &weights);
    let mismatch = check
        .as_ref()
        .is_some_and(|r| r.p_value < portfolio.planning.srm_alpha);
    (check, mismatch)
}

#[cfg(test)]
mod tests {
    use super::outlook::running_end;
    use super::progress::Entry;
    use super::*;
    use crate::forecast::units_on;
    use crate::share::Share;
    use crate::sizing;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    /// One flat pool of 1,000 units a day (no weekday pattern, no
    /// adjustments), so every expected date below is plain arithmetic.
    fn flat(whole_weeks: bool, min_days: u32, reshare: bool) -> Portfolio {
        let text = format!(
            "name: flat\nwindow: {{start: 2027-01-04, end: 2027-04-04}}\n\
             defaults: {{min_days: {min_days}, whole_weeks: {whole_weeks}}}\n\
             planning: {{reshare_running: {reshare}}}\n\
             pools:\n  - {{id: shop, daily: 1000, sharing: split, max_concurrent: 2}}\n\
             experiments:\n  - {{id: hero, pool: shop, baseline: 0.1, mde: 0.1}}\n\
             \x20 - {{id: banner, pool: shop, baseline: 0.1, mde: 0.2}}\n"
        );
        crate::portfolio::load_str(&text, "flat.yaml").unwrap()
    }

    fn need(p: &Portfolio) -> u64 {
        p.experiments[0].need.total
    }

    fn run(start: &str, share: f64, collected: u64, as_of: &str) -> Run {
        Run {
            experiment: 0,
            start: d(start),
            share: Share::from_fraction(share),
            collected,
            as_of: d(as_of),
        }
    }

    #[test]
    fn with_scales_names_an_unknown_pool_and_defaults_to_today() {
        let p = flat(false, 1, false);
        let e = with_scales(&p, &["shoop=0.5".parse().unwrap()], d("2027-02-01")).unwrap_err();
        assert_eq!(
            e,
            ReplanError::UnknownScalePool {
                pool: "shoop".into(),
                closest: vec!["shop".into()],
            }
        );
        assert!(e.to_string().contains("pool `shoop` is not defined"), "{e}");
        assert!(e.to_string().contains("`shop`"), "{e}");
        let scaled = with_scales(&p, &["shop=0.5".parse().unwrap()], d("2027-02-01")).unwrap();
        let pool = &scaled.pools[0];
        assert_eq!(units_on(pool, d("2027-01-31")), 1000.0);
        assert_eq!(units_on(pool, d("2027-02-01")), 500.0);
        // The portfolio it was made from keeps its forecast.
        assert!(p.pools[0].forecast.scales.is_empty());
        assert_eq!(units_on(&p.pools[0], d("2027-02-01")), 1000.0);
    }

    #[test]
    fn running_end_counts_the_remaining_need_from_as_of() {
        // 500 units a day at 50%; 10 days of need left from 2027-02-01 are
        // in on 2027-02-10, day 38 from the start on 2027-01-04.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-10"))
        );
        // Whole weeks: 38 days round up to 42, the last on 2027-02-14.
        let p = flat(true, 14, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-14"))
        );
    }

    #[test]
    fn a_running_test_counts_only_its_eligible_units_and_an_overlap_holdout() {
        // 30% eligible at 50% of 1,000 a day: 150 units a day. 3,000 left
        // from 2027-02-01 take 20 days, in on 2027-02-20.
        let mut p = flat(false, 1, false);
        p.experiments[0].eligible = 0.3;
        let r = run("2027-01-04", 0.5, need(&p) - 3000, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-20"))
        );
        // On an overlap pool with a 25% holdout as well: 0.5 x 0.3 x 0.75
        // x 1,000 = 112.5 a day, 3,000 in 26.7 days, in on 2027-02-27.
        p.pools[0].sharing = crate::portfolio::Sharing::Overlap;
        p.pools[0].holdout = 0.25;
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-27"))
        );
    }

    #[test]
    fn running_end_projects_from_the_day_the_counts_were_read() {
        // Counts read on 2027-01-30 with 5 days left: in on 2027-02-03,
        // even though the re-plan is made on 2027-02-01.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 2500, "2027-01-30");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-03"))
        );
        // The same counts read on the day of the re-plan end two days later.
        let r = run("2027-01-04", 0.5, need(&p) - 2500, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-05"))
        );
    }

    #[test]
    fn a_new_share_applies_from_today_not_from_as_of() {
        // Read on 2027-01-30 with 4,000 units to go; at 50% until today
        // (2027-02-01: 1,000 in two days), then 100%: 3,000 more by 2027-02-03.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 4000, "2027-01-30");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(1.0), d("2027-02-01")),
            Some(d("2027-02-03"))
        );
    }

    #[test]
    fn running_end_keeps_the_minimum_run_from_the_start() {
        // Started 2027-01-25 and nearly done: the 14-day minimum from its
        // start ends it on 2027-02-07, not on 2027-02-01.
        let p = flat(false, 14, false);
        let r = run("2027-01-25", 0.5, need(&p) - 100, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            Some(d("2027-02-07"))
        );
    }

    #[test]
    fn a_test_past_its_need_is_ready_to_read_unless_its_minimum_run_is_ahead() {
        // Past its need and past its minimum run: ready to read, its last
        // day of data yesterday, whole weeks or not (docs/progress.md).
        for p in [flat(false, 1, false), flat(true, 14, false)] {
            for collected in [need(&p), need(&p) + 10] {
                let r = run("2027-01-04", 0.5, collected, "2027-02-03");
                assert_eq!(
                    running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-03")),
                    Some(d("2027-02-02"))
                );
                let o = outlook(&p, &r, Share::from_fraction(0.5), d("2027-02-03"));
                assert_eq!(o.flags, vec![RunningFlag::PastNeed]);
                assert!(o.fits_window);
            }
        }
        // Started 2027-01-25 with a 14-day minimum: it runs to 2027-02-07.
        let p = flat(false, 14, false);
        let r = run("2027-01-25", 0.5, need(&p) + 10, "2027-02-03");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-03")),
            Some(d("2027-02-07"))
        );
    }

    /// The advice for one running test alone on its pool.
    fn advice_alone(p: &Portfolio, r: &Run, o: &RunningOutlook, today: NaiveDate) -> String {
        let rescue = match o.rescue_share {
            Some(s) => Rescue::Advise(s),
            None => Rescue::Nothing,
        };
        advice(p, r, o, &rescue, today, None)
            .map(|a| crate::render::words::advice(&a))
            .unwrap()
    }

    #[test]
    fn a_pool_without_traffic_never_finishes_a_run() {
        let p = with_scales(
            &flat(false, 1, false),
            &["shop=0".parse().unwrap()],
            d("2027-02-01"),
        )
        .unwrap();
        let r = run("2027-01-04", 0.5, need(&p) / 2, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, Share::from_fraction(0.5), d("2027-02-01")),
            None
        );
        let o = outlook(&p, &r, Share::from_fraction(0.5), d("2027-02-01"));
        assert!(!o.fits_window);
        assert_eq!(o.rescue_share, None);
        let advice = advice_alone(&p, &r, &o, d("2027-02-01"));
        assert!(advice.contains("within ten years"), "{advice}");
        assert!(
            advice.contains("no share up to its maximum of 100%"),
            "{advice}"
        );
    }

    /// Started 2027-01-04 at 10% (100 a day) with 28 days in: far from
    /// done by the window's end on 2027-04-04.
    fn slow() -> Run {
        run("2027-01-04", 0.1, 2800, "2027-02-01")
    }

    #[test]
    fn a_test_that_cannot_finish_gets_its_date_a_rescue_share_and_its_detectable_effect() {
        let p = flat(false, 1, false);
        let today = d("2027-02-01");
        let r = slow();
        let remaining = need(&p) - 2800;
        let o = outlook(&p, &r, Share::from_fraction(0.1), today);
        assert!(!o.fits_window);
        // At 100 a day, the need is in after ceil(remaining / 100) days.
        let days = remaining.div_ceil(100) as i64;
        assert_eq!(o.end, Some(today + Duration::days(days - 1)));
        assert!(o.end.unwrap() > p.window.end);
        // The window has 63 days from today (2027-02-01..2027-04-04): the
        // smallest level with share x 1,000 x 63 >= remaining rescues it.
        let left = 63.0 * 1000.0;
        let rescue = p
            .share_levels
            .all()
            .iter()
            .copied()
            .find(|s| s.fraction() * left >= remaining as f64)
            .expect("some level fits");
        assert_eq!(o.rescue_share, Some(rescue));
        let below: Vec<Share> = p
            .share_levels
            .all()
            .iter()
            .copied()
            .filter(|s| s.fraction() > 0.1 && *s < rescue)
            .collect();
        for s in below {
            assert!(running_end(&p, &r, s, today).unwrap() > p.window.end, "{s}");
        }
        // By the window's end it has 2,800 + 63 x 100 = 9,100 units, 4,550
        // an arm: the effect those detect at the planned power, cross-checked
        // by the forward formula giving back (about) the same units.
        let mde = o.detectable_effect.unwrap();
        let design = &p.experiments[0].design;
        assert_eq!(
            mde,
            sizing::minimum_detectable_effect(design, 4550.0).unwrap()
        );
        assert!(mde > 0.1, "a larger effect than planned: {mde}");
        let back = sizing::sample_size(&sizing::Design {
            effect: sizing::Effect::Relative(mde),
            ..*design
        })
        .unwrap();
        assert!(
            (4550..=4551).contains(&back.control),
            "sample_size of the detectable effect gives {} an arm",
            back.control
        );
        let advice = advice_alone(&p, &r, &o, today);
        assert!(
            advice.contains(&format!("on {}", o.end.unwrap())),
            "{advice}"
        );
        assert!(
            advice.contains(&format!(
                "a share of {:.0}% from today would finish it in time",
                rescue.fraction() * 100.0
            )),
            "{advice}"
        );
        assert!(
            advice.contains(&format!("a relative effect of {:.1}%", mde * 100.0)),
            "{advice}"
        );
        assert!(advice.contains("(planned MDE: 10.0%)"), "{advice}");
    }

    #[test]
    fn a_test_that_fits_gets_no_advice() {
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        let o = outlook(&p, &r, Share::from_fraction(0.5), d("2027-02-01"));
        assert!(o.fits_window);
        assert!(o.flags.is_empty());
        assert_eq!(
            advice(&p, &r, &o, &Rescue::None, d("2027-02-01"), None),
            None
        );
        assert_eq!(o.rescue_share, None);
        assert_eq!(o.detectable_effect, None);
    }

    fn progress_of(r: &Run) -> Progress {
        Progress {
            as_of: r.as_of,
            entries: vec![Entry {
                experiment: r.experiment,
                state: State::Running {
                    started: r.start,
                    share: r.share,
                    units: r.collected,
                    units_per_arm: None,
                },
            }],
            traffic: Vec::new(),
            warnings: Vec::new(),
        }
    }

    #[test]
    fn reshare_running_applies_the_rescue_share_only_where_allowed() {
        let today = d("2027-02-01");
        // Not allowed: the test keeps 10% and runs past the window.
        let p = flat(false, 1, false);
        let r = slow();
        let rescue = outlook(&p, &r, Share::from_fraction(0.1), today)
            .rescue_share
            .unwrap();
        let (plan, request) = replan(&p, &progress_of(&r), today, &PlanRequest::default());
        assert_eq!(request.fixed[0].share, Share::from_fraction(0.1));
        assert!(request.fixed[0].end > p.window.end);
        assert_eq!(plan.experiments[0].status, Status::Running);
        assert_eq!(
            plan.experiments[0].run.map(|r| r.start),
            Some(d("2027-01-04"))
        );
        assert_eq!(
            plan.experiments[0].run.map(|r| r.share),
            Some(Share::from_fraction(0.1))
        );
        assert!(!plan.running[0].fits_window);
        assert!(plan.experiments[0]
            .reason
            .as_deref()
            .unwrap()
            .contains("cannot reach its sample"));
        schedule::verify(&p, &request, &plan).unwrap();

        // Allowed: it takes the rescue share from today and ends in time.
        let p = flat(false, 1, true);
        let (plan, request) = replan(&p, &progress_of(&r), today, &PlanRequest::default());
        let fixed = &request.fixed[0];
        assert_eq!(fixed.share, rescue);
        assert_eq!(fixed.start, d("2027-01-04"));
        assert_eq!(Some(fixed.end), running_end(&p, &r, rescue, today));
        assert!(fixed.end <= p.window.end);
        assert_eq!(plan.experiments[0].run.map(|r| r.share), Some(rescue));
        assert_eq!(
            plan.experiments[0].run.map(|r| r.start),
            Some(d("2027-01-04"))
        );
        let o = &plan.running[0];
        assert!(o.fits_window);
        assert_eq!(o.share, rescue);
        assert!(o.advice.as_deref().unwrap().contains(&format!(
            "re-shared from 10% to {:.0}% from 2027-02-01",
            rescue.fraction() * 100.0
        )));
        schedule::verify(&p, &request, &plan).unwrap();
    }

    #[test]
    fn finished_and_cancelled_tests_free_their_pool() {
        let p = flat(false, 1, false);
        let today = d("2027-02-01");
        let progress = Progress {
            as_of: today,
            entries: vec![
                Entry {
                    experiment: 0,
                    state: State::Finished {
                        started: Some(d("2027-01-04")),
                        ended: None,
                        share: Some(Share::from_fraction(0.5)),
                        stopped_at_look: None,
                        outcome: None,
                        units_per_arm: None,
                    },
                },
                Entry {
                    experiment: 1,
                    state: State::Cancelled {
                        note: "legal review".into(),
                        started: None,
                        ended: None,
                        share: None,
                    },
                },
            ],
            traffic: Vec::new(),
            warnings: Vec::new(),
        };
        let (plan, request) = replan(&p, &progress, today, &PlanRequest::default());
        assert_eq!(plan.experiments[0].status, Status::Finished);
        assert_eq!(plan.experiments[1].status, Status::Cancelled);
        assert_eq!(request.excluded[0].ended, Some(d("2027-01-31")));
        assert_eq!(
            request.excluded[1].reason,
            Reason::Cancelled {
                note: "legal review".into()
            }
        );
        assert_eq!(
            crate::render::words::reason(&request.excluded[1].reason),
            "cancelled: legal review"
        );
        // Nothing holds the pool from today; before today the finished
        // test is drawn as it ran (the cancelled one never started).
        for day in &plan.pools[0].days {
            let ran = day.date < today;
            assert_eq!(day.running, u32::from(ran), "{}", day.date);
            assert_eq!(
                day.share_used.fraction(),
                if ran { 0.5 } else { 0.0 },
                "{}",
                day.date
            );
        }
        assert_eq!(
            plan.experiments[0].ran,
            Some(Ran::new(
                d("2027-01-04"),
                d("2027-01-31"),
                Some(Share::from_fraction(0.5))
            ))
        );
        assert_eq!(plan.experiments[1].ran, None);
        schedule::verify(&p, &request, &plan).unwrap();
    }
}
