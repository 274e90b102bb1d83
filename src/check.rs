//! The `check` report: a validated portfolio's first answer to "which
//! tests fit this quarter", before any scheduling.
//!
//! Per experiment: its size, how long it runs at its largest share from
//! the window's first day, and whether it fits the window on its own (its
//! earliest start, deadline, start grid and blackouts respected, and its
//! `after` prerequisites' own solo runs plus gaps; every other test
//! ignored). The earliest solo run comes from the planner's own
//! `schedule::Instance::earliest_solo`, so `check` and `plan` apply one
//! start grid and one set of blackout rules. Per pool: the units the
//! window offers against the units its experiments need. Durations come day by day from
//! [`crate::forecast::Series::run_end`]. No formatting here: the CLI renders the
//! [`CheckReport`].

use crate::forecast::Series;
use crate::portfolio::{Experiment, Portfolio, Sharing};
use crate::reason::{Limit, Needs, Reason, Said, SoloFrom};
use crate::schedule::{Instance, PlanRequest};
use crate::share::Share;
use crate::sizing::Metric;
use chrono::{Duration, NaiveDate};
use serde::Serialize;

/// How far past the window's first day a run is followed to tell how long
/// it would take (five years).
pub const HORIZON_DAYS: i64 = 5 * 365 + 1;

/// The whole report; `sluice check --format json` prints it as is.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CheckReport {
    /// The portfolio's name.
    pub name: String,
    /// The window's first day.
    pub window_start: NaiveDate,
    /// The window's last day.
    pub window_end: NaiveDate,
    /// Days in the window, both ends counted.
    pub window_days: usize,
    /// The window's first start day (on the start grid): no test's days
    /// count from earlier.
    pub first_start: NaiveDate,
    /// `planning.confidence`: durations and solo fits are then on the
    /// lower quantile of the forecast, as the plan makes them.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub confidence: Option<f64>,
    /// In portfolio order.
    pub experiments: Vec<ExperimentCheck>,
    /// In portfolio order.
    pub pools: Vec<PoolCheck>,
    /// How many experiments fit the window on their own.
    pub fit_alone: usize,
    /// How many cannot fit even with the pool to themselves.
    pub cannot_fit: usize,
}

/// One experiment's size and solo fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExperimentCheck {
    /// The experiment's id.
    pub id: String,
    /// Its title.
    pub title: String,
    /// The ids of the pools it runs on (one for most tests).
    pub pools: Vec<String>,
    /// `rate` or `mean`; `given` when the portfolio gives its sample size.
    pub metric: String,
    /// The fraction of its pool's units its targeting admits.
    pub eligible: f64,
    /// The name of the metric whose need is the test's (`primary` for the
    /// short form; see `metrics` in docs/portfolio.md).
    pub driver: String,
    /// Control plus treatments.
    pub arms: u32,
    /// Units in the control arm.
    pub control_units: u64,
    /// Units in each treatment arm.
    pub treatment_units: u64,
    /// Units over all arms.
    pub total_units: u64,
    /// The share the durations assume: the largest share level not above
    /// the experiment's `max_share` (nor, on a split pool, its room
    /// beside the holdout).
    pub share: Share,
    /// Days its run takes at `share` from its first start day (the first
    /// day on the start grid, outside `no_starts`, on or after its
    /// earliest start and its prerequisites): its solo run when it fits
    /// alone (which steps around blackouts), else the days the traffic
    /// alone needs (minimum run and whole weeks included); `None` when
    /// that would take longer than [`HORIZON_DAYS`].
    pub days_from_first_start: Option<u32>,
    /// The last day of that run; `None` as above.
    pub end_from_first_start: Option<NaiveDate>,
    /// Whether some start fits the window alone (see `reason` when not).
    pub fits_alone: bool,
    /// The earliest solo run that fits: first day.
    pub solo_start: Option<NaiveDate>,
    /// The earliest solo run that fits: last day.
    pub solo_end: Option<NaiveDate>,
    /// Why it cannot fit even alone (a string in JSON).
    pub reason: Option<Said<Reason>>,
    /// The statistics behind its size, as a plan records them; `None` for
    /// a sample size given from elsewhere.
    pub statistics: Option<crate::plan::TestStatistics>,
    /// A test that cannot fit even alone: what its pool's traffic from
    /// its earliest start to its deadline (or the window's end) could
    /// detect at `share`; `None` otherwise, and when no day is left.
    pub detectable: Option<crate::plan::Detectable>,
    /// The look dates of its solo run, for a test planned with interim
    /// looks that fits alone: `looks.idle` names looks the run is too
    /// short to hold on days of their own.
    pub looks: Option<crate::plan::LookDates>,
}

/// One pool's supply against demand over the window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PoolCheck {
    /// The pool's id.
    pub id: String,
    /// Its label.
    pub label: String,
    /// How its tests share its units.
    pub sharing: Sharing,
    /// Most tests running at once.
    pub max_concurrent: u32,
    /// The fraction of its units no test may receive.
    pub holdout: f64,
    /// How many experiments use it.
    pub experiments: usize,
    /// Forecast units over the window that tests may receive: the
    /// forecast less the holdout.
    pub offered_units: f64,
    /// Units of the pool its experiments take up, summed: each test's need
    /// divided by its `eligible` (a test that admits 30% of the units
    /// under its share takes up the other 70% too), rounded up.
    pub needed_units: u64,
    /// `needed_units / offered_units` (infinite when the pool offers none).
    pub ratio: f64,
    /// How to read the ratio for this pool's sharing rule (a string in
    /// JSON).
    pub note: Said<PoolNote>,
}

/// How to read a pool's needed-over-offered ratio, as facts (worded by
/// `render::words::pool_note`).
#[derive(Debug, Clone, PartialEq)]
pub enum PoolNote {
    /// Already in words.
    Worded(String),
    /// The pool's sharing rule, its cap and its holdout.
    Ratio {
        /// How its tests share its units.
        sharing: Sharing,
        /// Most tests running at once.
        max_concurrent: u32,
        /// The fraction of its units no test may receive.
        holdout: f64,
    },
}

/// Builds the report for a validated portfolio.
pub fn check(p: &Portfolio) -> CheckReport {
    let w = p.window;
    // At a confidence, every solo run is sized as the plan's first round
    // sizes it: on the lower quantile of its pools' forecast.
    let asked = p
        .planning
        .confidence
        .map(|c| crate::schedule::at_confidence(p, c));
    let q = asked.as_ref().unwrap_or(p);
    let first_start = (0..w.days() as i64)
        .map(|d| w.date(d))
        .find(|&d| crate::schedule::on_grid(p, d))
        .unwrap_or(w.start);
    let horizon_end = w.start + Duration::days(HORIZON_DAYS - 1);
    let series: Vec<Series> = p
        .pools
        .iter()
        .map(|pool| Series::new(pool, w.start, horizon_end.max(w.end)))
        .collect();
    // The planner's view of the portfolio, for its start grid and blackouts.
    let inst = Instance::new(q, &PlanRequest::default());
    // Prerequisites first, so each test can start after theirs end.
    let mut done: Vec<Option<ExperimentCheck>> = vec![None; p.experiments.len()];
    for &i in &p.after_order {
        let e = &p.experiments[i];
        let start = earliest(p, e, &done);
        let summed = Series::summed(
            e.pools
                .iter()
                .map(|&k| (&series[k], crate::portfolio::entering(e, &p.pools[k]))),
        );
        done[i] = Some(experiment(&inst, e, i, &summed, start, first_start));
    }
    let experiments: Vec<ExperimentCheck> = done.into_iter().flatten().collect();
    let pools = p
        .pools
        .iter()
        .enumerate()
        .map(|(i, pool)| {
            let last = w.days().saturating_sub(1);
            let offered = series[i].total(0, last) * (1.0 - pool.holdout);
            let mine: Vec<&Experiment> = p.experiments.iter().filter(|e| e.uses(i)).collect();
            // A multi-pool test needs from each of its pools that pool's
            // part of the units it offers it (the same share on each);
            // divided by `eligible`, the pool's units it takes up.
            let needed: f64 = mine
                .iter()
                .map(|e| {
                    let part = |k: usize| {
                        crate::portfolio::entering(e, &p.pools[k]) * series[k].total(0, last)
                    };
                    let all: f64 = e.pools.iter().map(|&k| part(k)).sum();
                    let fraction = if all > 0.0 {
                        part(i) / all
                    } else {
                        1.0 / e.pools.len() as f64
                    };
                    e.need.total as f64 * fraction / e.eligible
                })
                .sum();
            // Rounding noise must not add a unit.
            let needed = (needed - 1e-9 * needed).ceil() as u64;
            let ratio = if offered > 0.0 {
                needed as f64 / offered
            } else if needed == 0 {
                0.0
            } else {
                f64::INFINITY
            };
            let note = Said::new(PoolNote::Ratio {
                sharing: pool.sharing,
                max_concurrent: pool.max_concurrent,
                holdout: pool.holdout,
            });
            PoolCheck {
                id: pool.id.clone(),
                label: pool.label.clone(),
                sharing: pool.sharing,
                max_concurrent: pool.max_concurrent,
                holdout: pool.holdout,
                experiments: mine.len(),
                offered_units: offered,
                needed_units: needed,
                ratio,
                note,
            }
        })
        .collect();
    let fit_alone = experiments.iter().filter(|e| e.fits_alone).count();
    CheckReport {
        name: p.name.clone(),
        window_start: w.start,
        window_end: w.end,
        window_days: w.days(),
        first_start,
        confidence: p.planning.confidence,
        cannot_fit: experiments.len() - fit_alone,
        fit_alone,
        experiments,
        pools,
    }
}

/// The first day a solo run of `e` may start, and why not earlier.
#[derive(Debug, Clone, PartialEq)]
enum Earliest {
    /// From this day; the string names the prerequisite that sets it.
    From(NaiveDate, Option<String>),
    /// A prerequisite cannot fit, so neither can this test.
    Blocked(String),
}

fn earliest(p: &Portfolio, e: &Experiment, done: &[Option<ExperimentCheck>]) -> Earliest {
    let w = p.window;
    let mut first = e.earliest_start.unwrap_or(w.start).max(w.start);
    let mut because = None;
    for pre in &e.after {
        let Some(c) = &done[pre.experiment] else {
            continue;
        };
        match c.solo_end {
            Some(end) => {
                let from = end + Duration::days(1 + i64::from(pre.gap_days));
                if from > first {
                    first = from;
                    because = Some(c.id.clone());
                }
            }
            None => return Earliest::Blocked(c.id.clone()),
        }
    }
    Earliest::From(first, because)
}

/// Experiment `i` (`truth`, its true need; the instance's portfolio may
/// ask more of it at a confidence) checked from `start`, with its
/// duration counted from the window's `first_start` day.
fn experiment(
    inst: &Instance,
    truth: &Experiment,
    i: usize,
    series: &Series,
    start: Earliest,
    first_start: NaiveDate,
) -> ExperimentCheck {
    let p = inst.portfolio;
    let e = &p.experiments[i];
    let w = p.window;
    let share = p.top_share(e);
    let first = match &start {
        Earliest::From(first, _) => Some(*first),
        Earliest::Blocked(_) => None,
    };
    // Its days count from the first day it may start on: on the grid,
    // outside `no_starts`, not before its earliest start or prerequisites.
    let from = first_day(inst, i, first.unwrap_or(first_start).max(first_start));
    let (days, end) = match series.test_end(e, from, share.fraction()) {
        Some(j) => (Some((j - from) as u32 + 1), Some(w.date(j as i64))),
        None => (None, None),
    };
    let (solo, mut reason) = match start {
        Earliest::From(first, because) => solo_fit(inst, i, series, share, first, because),
        Earliest::Blocked(pre) => (None, Some(Reason::PrerequisiteMisfit { prerequisite: pre })),
    };
    let margin = p
        .planning
        .confidence
        .filter(|_| e.need.total > truth.need.total);
    if let Some(c) = margin {
        reason = reason.map(|r| r.at_confidence(c, e.need.total));
    }
    let detectable = first
        .filter(|_| solo.is_none() && !e.sample_size_given)
        .and_then(|first| crate::schedule::statistics::detectable(p, i, first, share))
        .map(|d| match margin {
            Some(c) => crate::schedule::statistics::at_confidence(
                truth,
                &d,
                truth.need.total as f64 / e.need.total as f64,
                c,
            ),
            None => d,
        });
    // The looks of its solo run, on the days the plan would give them.
    let looks = solo.and_then(|(start, end)| {
        let (a, b) = (w.offset(start).offset(), w.offset(end).offset());
        let run = crate::plan::Run {
            start,
            end,
            result_date: end + Duration::days(1),
            share,
            days: (b - a + 1) as u32,
            units_expected: share.fraction() * series.total(a as usize, b as usize),
        };
        crate::schedule::statistics::look_dates(p, i, &run)
    });
    ExperimentCheck {
        id: e.id.clone(),
        title: e.title.clone(),
        pools: e.pools.iter().map(|&k| p.pools[k].id.clone()).collect(),
        metric: match e.design.metric {
            _ if e.sample_size_given => "given".into(),
            Metric::Rate { .. } => "rate".into(),
            Metric::Mean { .. } => "mean".into(),
        },
        eligible: e.eligible,
        driver: e.driver.clone(),
        arms: truth.need.arms,
        control_units: truth.need.control,
        treatment_units: truth.need.treatment,
        total_units: truth.need.total,
        share,
        // A test that fits alone counts its solo run (which steps around
        // blackouts); one that does not, its days on the traffic alone.
        days_from_first_start: solo.map(|(a, b)| (b - a).num_days() as u32 + 1).or(days),
        end_from_first_start: solo.map(|s| s.1).or(end),
        fits_alone: solo.is_some(),
        solo_start: solo.map(|s| s.0),
        solo_end: solo.map(|s| s.1),
        reason: reason.map(Said::new),
        statistics: (!e.sample_size_given).then(|| crate::schedule::statistics::statistics(e)),
        detectable,
        looks,
    }
}

/// The index of the first day from `from` on that test `i` may start on
/// (the start grid, `no_starts`); `from`'s own when none is left.
fn first_day(inst: &Instance, i: usize, from: NaiveDate) -> usize {
    let w = inst.portfolio.window;
    let from = w.offset(from).offset().max(0) as usize;
    (from..w.days())
        .find(|&d| inst.may_start(d, i))
        .unwrap_or(from)
}

/// The earliest run of experiment `i` alone that fits, as the planner's
/// `Instance` finds it from `first` on, or why none does.
fn solo_fit(
    inst: &Instance,
    i_ex: usize,
    series: &Series,
    share: Share,
    first: NaiveDate,
    because: Option<String>,
) -> (Option<(NaiveDate, NaiveDate)>, Option<Reason>) {
    let p = inst.portfolio;
    let e = &p.experiments[i_ex];
    let w = p.window;
    let last = e.deadline.unwrap_or(w.end).min(w.end);
    let solo = inst.earliest_solo(i_ex, share, w.offset(first).offset().max(0) as usize);
    if let Some((start, end)) = solo.run {
        return (Some((w.date(start as i64), w.date(end as i64))), None);
    }
    let until = if e.deadline.is_some_and(|d| d < w.end) {
        Limit::Deadline(last)
    } else {
        Limit::WindowEnd(last)
    };
    let reason = if first > last {
        Reason::StartsTooLate {
            first,
            after: because,
            until,
        }
    } else if !solo.any_start {
        Reason::NoAllowedStart {
            from: first,
            to: last,
        }
    } else if solo.crossed {
        Reason::SoloCrossesBlackout { share, until }
    } else if solo.ran_out {
        // Counted from the first day it may start on (the grid, freezes).
        let i = first_day(inst, i_ex, first);
        let day = w.date(i as i64);
        let start = match (because, day > w.start) {
            (Some(pre), _) => SoloFrom::AfterPrerequisite(day, pre),
            (None, true) if first > w.start => SoloFrom::EarliestStart(day),
            (None, true) => SoloFrom::FirstStartDay(day),
            (None, false) => SoloFrom::WindowStart,
        };
        let needs = match series.test_end(e, i, share.fraction()) {
            Some(j) => Needs::Days {
                days: j - i + 1,
                end: w.date(j as i64),
            },
            None => Needs::Years(HORIZON_DAYS / 365),
        };
        Reason::SoloTooLong {
            share,
            needs,
            from: start,
            until,
        }
    } else {
        Reason::NoSoloRun { share, until }
    };
    (None, Some(reason))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::load_str;
    use proptest::prelude::*;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    /// One pool of 1,000 units a day, flat; `extra` lands under the
    /// experiment, `tail` at the end.
    fn portfolio(extra: &str, tail: &str) -> Portfolio {
        let text = format!(
            "window: {{start: 2027-01-04, end: 2027-04-04}}\n\
             pools:\n  - {{id: p, daily: 1000, max_concurrent: 2}}\n\
             experiments:\n  - id: t\n    pool: p\n    baseline: 0.2\n    mde: 0.1\n{extra}{tail}"
        );
        load_str(&text, "t.yaml").unwrap_or_else(|e| panic!("{e}"))
    }

    #[test]
    fn the_share_is_the_largest_level_under_max_share() {
        let p = portfolio("    max_share: 0.3\n", "");
        assert_eq!(p.top_share(&p.experiments[0]), Share::from_fraction(0.25));
        let p = portfolio("", "");
        assert_eq!(p.top_share(&p.experiments[0]), Share::WHOLE);
    }

    #[test]
    fn days_come_from_the_forecast_day_by_day() {
        let p = portfolio("", "");
        let r = check(&p);
        let e = &r.experiments[0];
        let need = p.experiments[0].need.total as f64;
        // 1,000 units a day at 100%: ceil(need / 1000) days, in whole weeks.
        let days = ((need / 1000.0).ceil() as u32).max(14).div_ceil(7) * 7;
        assert_eq!(e.days_from_first_start, Some(days));
        assert_eq!(
            e.end_from_first_start,
            Some(d("2027-01-04") + Duration::days(i64::from(days) - 1))
        );
        assert!(e.fits_alone);
        assert_eq!(e.solo_start, Some(d("2027-01-04")));
        assert_eq!(r.pools[0].offered_units, 91_000.0);
        assert_eq!(r.pools[0].needed_units, p.experiments[0].need.total);
        assert!((r.pools[0].ratio - need / 91_000.0).abs() < 1e-12);
    }

    #[test]
    fn a_run_too_long_for_the_window_says_how_long_it_would_take() {
        let p = portfolio("    max_share: 0.1\n", "");
        let e = &check(&p).experiments[0];
        assert!(!e.fits_alone);
        let days = e.days_from_first_start.unwrap();
        assert!(days > 91);
        let reason = e.reason.as_deref().unwrap();
        assert!(
            reason.starts_with(&format!("at 10% it needs {days} days")),
            "{reason}"
        );
        assert!(
            reason.ends_with("after the window's end 2027-04-04"),
            "{reason}"
        );
    }

    #[test]
    fn beyond_the_horizon_there_is_no_day_count() {
        let p = portfolio("", "").clone();
        let mut p = p;
        p.pools[0].forecast.daily = 0.001;
        let e = &check(&p).experiments[0];
        assert_eq!(e.days_from_first_start, None);
        assert!(e.reason.as_deref().unwrap().contains("more than 5 years"));
    }

    #[test]
    fn a_deadline_is_the_limit_when_it_comes_first() {
        let p = portfolio("    deadline: 2027-01-12\n", "");
        let e = &check(&p).experiments[0];
        assert!(!e.fits_alone);
        assert!(
            e.reason
                .as_deref()
                .unwrap()
                .contains("after its deadline 2027-01-12"),
            "{:?}",
            e.reason
        );
    }

    #[test]
    fn the_weekly_grid_moves_a_start_to_the_next_start_weekday() {
        // 2027-01-06 is a Wednesday; the next Monday is 2027-01-11.
        let p = portfolio("    earliest_start: 2027-01-06\n", "");
        let e = &check(&p).experiments[0];
        assert_eq!(e.solo_start, Some(d("2027-01-11")));
    }

    #[test]
    fn a_no_running_blackout_pushes_the_solo_run_past_it() {
        let p = portfolio(
            "",
            "blackouts:\n  - {from: 2027-01-10, to: 2027-01-11, kind: no_running}\n",
        );
        let e = &check(&p).experiments[0];
        assert!(e.fits_alone);
        // The first Monday after the blackout.
        assert_eq!(e.solo_start, Some(d("2027-01-18")));
        // The duration from the window's first day ignores blackouts.
        assert!(e.end_from_first_start.unwrap() >= d("2027-01-10"));
    }

    #[test]
    fn a_dependant_starts_after_its_prerequisite_and_the_gap() {
        let p = portfolio(
            "",
            "  - id: u\n    pool: p\n    baseline: 0.2\n    mde: 0.1\n    after: [{id: t, gap_days: 7}]\n",
        );
        let r = check(&p);
        let (t, u) = (&r.experiments[0], &r.experiments[1]);
        assert_eq!(t.solo_end, Some(d("2027-01-17")));
        // 2027-01-17 + 1 + 7 days is Monday 2027-01-25.
        assert_eq!(u.solo_start, Some(d("2027-01-25")));
        assert!(u.fits_alone);
    }

    #[test]
    fn a_dependant_of_a_test_that_cannot_fit_cannot_fit() {
        let p = portfolio(
            "    max_share: 0.1\n",
            "  - id: u\n    pool: p\n    baseline: 0.2\n    mde: 0.1\n    after: [t]\n",
        );
        let u = &check(&p).experiments[1];
        assert!(!u.fits_alone);
        assert_eq!(
            u.reason.as_deref(),
            Some("it runs after `t`, which cannot fit even alone")
        );
    }

    #[test]
    fn a_prerequisite_ending_late_leaves_no_start() {
        let p = portfolio(
            "    earliest_start: 2027-03-01\n",
            "  - id: u\n    pool: p\n    baseline: 0.2\n    mde: 0.1\n    after: [{id: t, gap_days: 30}]\n",
        );
        let u = &check(&p).experiments[1];
        assert!(!u.fits_alone);
        let reason = u.reason.as_deref().unwrap();
        assert!(reason.contains("after `t` ends"), "{reason}");
    }

    #[test]
    fn prerequisites_come_first_whatever_the_file_order() {
        let text = "window: {start: 2027-01-04, end: 2027-04-04}\n\
                    pools: [{id: p, daily: 1000, max_concurrent: 2}]\n\
                    experiments:\n\
                    \x20 - {id: c, pool: p, baseline: 0.2, mde: 0.1, after: [b]}\n\
                    \x20 - {id: b, pool: p, baseline: 0.2, mde: 0.1, after: [a]}\n\
                    \x20 - {id: a, pool: p, baseline: 0.2, mde: 0.1}\n";
        let p = load_str(text, "t.yaml").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(p.after_order, vec![2, 1, 0]);
        let r = check(&p);
        let ids: Vec<&str> = r.experiments.iter().map(|e| e.id.as_str()).collect();
        assert_eq!(ids, ["c", "b", "a"], "the report keeps file order");
        assert!(r.experiments[0].solo_start > r.experiments[1].solo_end);
        assert!(r.experiments[1].solo_start > r.experiments[2].solo_end);
    }

    #[test]
    fn a_freeze_over_every_start_day_leaves_no_start() {
        let p = portfolio(
            "",
            "blackouts:\n  - {from: 2027-01-04, to: 2027-04-04, kind: no_starts}\n",
        );
        let e = &check(&p).experiments[0];
        assert!(!e.fits_alone);
        assert!(e
            .reason
            .as_deref()
            .unwrap()
            .starts_with("no allowed start day"));
    }

    #[test]
    fn overlap_pools_explain_their_ratio() {
        let text = "window: {start: 2027-01-04, end: 2027-01-31}\n\
                    pools: [{id: s, daily: 500, sharing: overlap, max_concurrent: 4}]\n";
        let p = load_str(text, "t.yaml").unwrap();
        let r = check(&p);
        assert_eq!(r.pools[0].offered_units, 14_000.0);
        assert_eq!(r.pools[0].ratio, 0.0);
        assert!(r.pools[0].note.contains("up to 4 run at once"));
    }

    fn pick<T: Clone + std::fmt::Debug + 'static>(v: Vec<T>) -> impl Strategy<Value = T> {
        prop::sample::select(v)
    }

    /// Valid values three times as often as invalid ones, so that many
    /// cases load and reach the report.
    fn mostly(
        valid: Vec<&'static str>,
        invalid: Vec<&'static str>,
    ) -> impl Strategy<Value = &'static str> {
        prop_oneof![3 => pick(valid), 1 => pick(invalid)]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(128))]

        /// Schema-shaped portfolios with values at and past every edge:
        /// loading and checking return, whatever the numbers.
        #[test]
        fn odd_numbers_never_panic_loading_or_checking(
            daily in mostly(vec!["1", "1500", "2.5e5", "1e11", "0"], vec!["-3", ".nan", ".inf", "1e300"]),
            baseline in mostly(vec!["0.0001", "0.04", "0.5", "0.9999", "38.5", "-2"], vec!["1", "0", "1e-300"]),
            mde in mostly(vec!["0.0001", "0.05", "0.5", "-0.5", "3"], vec!["0", "1e-12", "-1"]),
            arms in mostly(vec!["2", "3", "50"], vec!["51", "0", "2.5"]),
            ratio in mostly(vec!["1", "0.001", "1000", "0.5"], vec!["1e-9"]),
            rho in mostly(vec!["0", "0.5", "0.999999"], vec!["1", "-0.1"]),
            share in mostly(vec!["1", "0.1", "0.33"], vec!["0.0001"]),
            metric in pick(vec!["rate", "mean"]),
            sd in pick(vec!["1", "1e-9", "1e9", "61"]),
            min_days in mostly(vec!["1", "14", "366"], vec!["367", "0"]),
        ) {
            let sd_line = if metric == "mean" { format!("    sd: {sd}\n") } else { String::new() };
            let text = [
                "window: {start: 2027-12-27, end: 2028-03-05}".to_string(),
                "pools:".into(),
                format!("  - {{id: p, daily: {daily}, max_concurrent: 2}}"),
                "experiments:".into(),
                "  - id: t".into(),
                "    pool: p".into(),
                format!("    metric: {metric}"),
                format!("    baseline: {baseline}"),
                format!("{sd_line}    mde: {mde}"),
                format!("    arms: {arms}"),
                format!("    ratio: {ratio}"),
                format!("    rho: {rho}"),
                format!("    max_share: {share}"),
                format!("    min_days: {min_days}"),
            ]
            .join("\n");
            match load_str(&text, "fuzz.yaml") {
                Ok(p) => {
                    let r = check(&p);
                    prop_assert_eq!(r.experiments.len(), 1);
                    prop_assert_eq!(r.window_days, 70);
                }
                Err(e) => prop_assert!(!e.diagnostics.is_empty()),
            }
        }
    }
}
