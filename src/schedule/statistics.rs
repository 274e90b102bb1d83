//! The numbers behind each test's dates, added to a plan after the solve:
//! the statistics of its size ([`TestStatistics`]), the dates of its
//! interim looks ([`LookDates`]) and, for a test that does not fit, what
//! the traffic left could detect ([`Detectable`]).
//!
//! Facts only, no wording: renderers word them. Look dates follow the
//! plan's own day-by-day run rule ([`Series::run_end`]: the forecast at the
//! test's share, the minimum run and whole weeks), so a look's date is the
//! day the run could first be read at that information fraction. The
//! detectable effects are the sizing inverse
//! ([`sizing::minimum_detectable_effect`]) at the units in hand; a test
//! with looks reaches at its maximum sample the power a fixed test reaches
//! at the maximum over the inflation factor, so the units are deflated by
//! it first.

use crate::forecast::Series;
use crate::plan::{
    Detectable, LookDate, LookDates, PlannedExperiment, PoolDay, PoolPlan, Run, SecondaryEffect,
    TestStatistics,
};
use crate::portfolio::{BlackoutKind, Experiment, Portfolio, Role};
use crate::share::Share;
use crate::sizing::{self, Design, Effect, Metric};
use chrono::{Duration, NaiveDate};

/// An effect in the design's kind as (relative, absolute); the relative
/// one is `None` for a zero baseline.
fn both(d: &Design, effect: f64) -> (Option<f64>, f64) {
    let base = d.metric.control_value();
    let relative = |abs: f64| (base != 0.0).then(|| abs / base);
    let tidy = crate::words::tidy;
    match d.effect {
        Effect::Relative(_) => (Some(effect), tidy(effect * base)),
        Effect::Absolute(_) => (relative(effect).map(tidy), effect),
    }
}

/// The statistics behind `ex`'s size, from its first primary metric.
pub fn statistics(ex: &Experiment) -> TestStatistics {
    let d = &ex.design;
    let planned = match d.effect {
        Effect::Relative(x) | Effect::Absolute(x) => x,
    };
    let (mde, mde_abs) = both(d, planned);
    let primary = ex
        .metrics
        .iter()
        .find(|m| m.role == Role::Primary)
        .map_or_else(|| "primary".to_string(), |m| m.name.clone());
    let secondary = ex
        .metrics
        .iter()
        .filter(|m| m.role == Role::Secondary)
        .map(|m| {
            let (mde, mde_abs) = match m.detectable {
                Some(x) => {
                    let (r, a) = both(&m.design, x);
                    (r, Some(a))
                }
                None => (None, None),
            };
            SecondaryEffect {
                name: m.name.clone(),
                mde,
                mde_abs,
            }
        })
        .collect();
    TestStatistics {
        metric: primary,
        kind: match d.metric {
            Metric::Rate { .. } => "rate".into(),
            Metric::Mean { .. } => "mean".into(),
        },
        baseline: d.metric.control_value(),
        sd: match d.metric {
            Metric::Rate { .. } => None,
            Metric::Mean { sd, .. } => Some(sd),
        },
        mde,
        mde_abs,
        alpha: d.alpha,
        power: d.power,
        sides: d.sides,
        arms: d.arms,
        ratio: d.ratio,
        per_comparison: (d.arms > 2).then(|| crate::plan::PerComparison {
            alpha: d.comparison_alpha(),
            correction: d.correction.name().to_string(),
        }),
        looks: ex
            .looks
            .as_ref()
            .map_or(1, |l| l.design.information.len() as u32),
        boundary: ex.looks.as_ref().map(|l| l.boundary),
        driver: ex.driver.clone(),
        secondary,
    }
}

/// The effect (in the primary's kind, with its sign) that `units` over all
/// arms detect at the planned power; `None` when too few for any. Looks
/// deflate the units by their inflation factor (see the module doc).
pub fn detectable_effect(ex: &Experiment, units: f64) -> Option<f64> {
    if ex.sample_size_given {
        // A given sample size carries no effect to invert.
        return None;
    }
    let d = &ex.design;
    let inflation = ex.looks.as_ref().map_or(1.0, |l| l.design.inflation);
    let per_control = units / (1.0 + f64::from(d.arms - 1) * d.ratio) / inflation;
    sizing::minimum_detectable_effect(d, per_control).ok()
}

/// The day after the run from `run.start` at its share (after its ramp)
/// has collected `need` units under the plan's run rule, never after its
/// result date; `series` is [`Series::of_test`] from the run's start.
fn read_on(series: &Series, ex: &Experiment, run: &Run, need: f64) -> NaiveDate {
    let end = series.ramped_end(
        0,
        &ex.ramp_steps(),
        ex.ramp_counts,
        run.share.fraction(),
        need,
        ex.min_days,
        ex.whole_weeks,
    );
    match end {
        Some(i) => (run.start + Duration::days(i as i64 + 1)).min(run.result_date),
        None => run.result_date,
    }
}

/// The dates of `ex`'s looks in `run`; `None` for a single read at the end.
pub fn look_dates(p: &Portfolio, e: usize, run: &Run) -> Option<LookDates> {
    let ex = &p.experiments[e];
    let looks = ex.looks.as_ref()?;
    let series = Series::of_test(ex, &p.pools, run.start, run.end);
    let max = ex.need.total as f64;
    let count = looks.design.information.len();
    let dates: Vec<LookDate> = looks
        .design
        .information
        .iter()
        .zip(&looks.design.stop_probabilities)
        .enumerate()
        .map(|(k, (&t, &stop))| LookDate {
            look: k as u32 + 1,
            information: t,
            date: if k + 1 == count {
                run.result_date
            } else {
                read_on(&series, ex, run, t * max)
            },
            stop_probability: stop,
        })
        .collect();
    let expected = read_on(&series, ex, run, looks.design.expected_fraction_h1 * max);
    // A look whose day is a later look's (or the result's) has no read of
    // its own: the later one reads the same data.
    let idle: Vec<u32> = dates
        .windows(2)
        .filter(|w| w[0].date >= w[1].date)
        .map(|w| w[0].look)
        .collect();
    Some(LookDates {
        earliest: dates.first().map_or(run.result_date, |l| l.date),
        expected,
        latest: run.result_date,
        added_sample: (!idle.is_empty()).then_some(looks.design.inflation - 1.0),
        idle,
        dates,
    })
}

/// What experiment `e` could detect with its pools' traffic from `from`
/// to its deadline (or the window's end) at `share`, in the longest
/// stretch of those days that no `no_running` blackout of its pools
/// interrupts; `None` when no day is left.
pub fn detectable(p: &Portfolio, e: usize, from: NaiveDate, share: Share) -> Option<Detectable> {
    detectable_where(p, e, from, share, &|_| true)
}

/// What unscheduled experiment `e` could detect in the room `pools` (a
/// plan's daily use of each pool) leaves it from `from` to its deadline
/// or the window's end: at the share level, up to its largest, whose
/// longest stretch of days with that share free on every one of its pools
/// (a split pool's shares within its capacity, every pool below its
/// `max_concurrent`) collects the most units; `None` when no level is free
/// on any day.
pub fn detectable_in_room(
    p: &Portfolio,
    e: usize,
    from: NaiveDate,
    pools: &[PoolPlan],
) -> Option<Detectable> {
    let ex = &p.experiments[e];
    let top = p.top_share(ex);
    fn day_of(pool: &PoolPlan, start: NaiveDate, date: NaiveDate) -> Option<&PoolDay> {
        pool.days
            .get((date - start).num_days().max(0) as usize)
            .filter(|d| d.date == date)
    }
    p.share_levels
        .up_to(top)
        .filter_map(|share| {
            let free = |date: NaiveDate| {
                ex.pools.iter().all(|&k| {
                    day_of(&pools[k], p.window.start, date)
                        .is_some_and(|d| p.pools[k].has_room(d.share_used, d.running, share))
                })
            };
            detectable_where(p, e, from, share, &free)
        })
        .filter(|d| d.units > 0.0)
        // The most units; of equals, the smaller share.
        .fold(None, |best: Option<Detectable>, d| match best {
            Some(b) if b.units >= d.units => Some(b),
            _ => Some(d),
        })
}

/// [`detectable`] over the days `open` allows as well.
fn detectable_where(
    p: &Portfolio,
    e: usize,
    from: NaiveDate,
    share: Share,
    open: &dyn Fn(NaiveDate) -> bool,
) -> Option<Detectable> {
    let ex = &p.experiments[e];
    let to = ex.deadline.unwrap_or(p.window.end).min(p.window.end);
    if from > to {
        return None;
    }
    let series = Series::of_test(ex, &p.pools, from, to);
    // A run is one contiguous span and never crosses a no-running
    // blackout: the stretches between them.
    let blocked = |i: usize| {
        let date = from + Duration::days(i as i64);
        !open(date) || p.forbids(BlackoutKind::NoRunning, date, &ex.pools)
    };
    // In each, the runs the plan's rules allow: a start on the grid and
    // outside `no_starts`, at least the minimum run, whole weeks when the
    // test asks for them, to the stretch's end at most. The most units.
    let mut best: Option<(usize, usize, f64)> = None;
    let mut i = 0;
    while i < series.len() {
        if blocked(i) {
            i += 1;
            continue;
        }
        let mut j = i;
        while j + 1 < series.len() && !blocked(j + 1) {
            j += 1;
        }
        for s in i..=j {
            let mut days = j - s + 1;
            if ex.whole_weeks {
                days -= days % 7;
            }
            if days == 0 || days < ex.min_days as usize {
                // Later starts only leave fewer days.
                break;
            }
            if !super::options::may_start_on(p, e, from + Duration::days(s as i64)) {
                continue;
            }
            let total = series.total(s, s + days - 1);
            if best.is_none_or(|(_, _, t)| total > t) {
                best = Some((s, s + days - 1, total));
            }
        }
        i = j + 1;
    }
    let (first, last, total) = best?;
    Some(detectable_of(
        ex,
        from + Duration::days(first as i64),
        from + Duration::days(last as i64),
        share,
        share.fraction() * total,
        None,
    ))
}

/// What `ex` can detect with `units` collected from `from` to `to` at
/// `share`; `confidence` when `units` are the plan's lower quantile.
fn detectable_of(
    ex: &Experiment,
    from: NaiveDate,
    to: NaiveDate,
    share: Share,
    units: f64,
    confidence: Option<f64>,
) -> Detectable {
    let effect = (units > 0.0)
        .then(|| detectable_effect(ex, units))
        .flatten();
    let (mde, mde_abs) = match effect {
        Some(x) => {
            let (r, a) = both(&ex.design, x);
            (r, Some(a))
        }
        None => (None, None),
    };
    Detectable {
        from,
        to,
        share,
        units,
        mde,
        mde_abs,
        confidence,
    }
}

/// `d` counted at a plan's `confidence`: its units times `factor`, the
/// test's true need over the units the plan asked for it (see
/// `planning.confidence`), so the effect is what the traffic delivers on
/// that share of its paths.
pub(crate) fn at_confidence(
    ex: &Experiment,
    d: &Detectable,
    factor: f64,
    confidence: f64,
) -> Detectable {
    detectable_of(
        ex,
        d.from,
        d.to,
        d.share,
        d.units * factor,
        Some(confidence),
    )
}

/// Fills every sized experiment's statistics (a given sample size has
/// none), the look dates of those with a run, and the detectable effect
/// of the unscheduled ones, which may start from `first_start[e]` on, in
/// the room the plan's `pools` leave them.
pub(crate) fn fill(
    p: &Portfolio,
    experiments: &mut [PlannedExperiment],
    first_start: &[NaiveDate],
    pools: &[PoolPlan],
) {
    for (e, out) in experiments.iter_mut().enumerate() {
        let ex = &p.experiments[e];
        if ex.sample_size_given {
            // No design behind the size: nothing to state or invert.
            continue;
        }
        out.statistics = Some(statistics(ex));
        if let Some(run) = &out.run {
            out.looks = look_dates(p, e, run);
        } else if out.status == crate::plan::Status::Unscheduled {
            out.detectable = detectable_in_room(p, e, first_start[e], pools);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::load_str;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    /// One flat pool of 10,000 units a day; `extra` lands under the test.
    fn portfolio(extra: &str) -> Portfolio {
        let text = format!(
            "window: {{start: 2027-01-04, end: 2027-04-04}}\n\
             pools:\n  - {{id: p, daily: 10000, max_concurrent: 2}}\n\
             experiments:\n  - id: t\n    pool: p\n    baseline: 0.2\n    mde: 0.05\n{extra}"
        );
        load_str(&text, "t.yaml").unwrap_or_else(|e| panic!("{e}"))
    }

    fn run(p: &Portfolio, share: f64) -> Run {
        let ex = &p.experiments[0];
        let start = d("2027-01-04");
        let series = Series::new(&p.pools[0], start, p.window.end);
        let end = series
            .run_end(0, share, ex.need.total as f64, ex.min_days, ex.whole_weeks)
            .unwrap();
        let end = start + Duration::days(end as i64);
        Run {
            start,
            end,
            result_date: end + Duration::days(1),
            share: Share::from_fraction(share),
            days: (end - start).num_days() as u32 + 1,
            units_expected: 0.0,
        }
    }

    #[test]
    fn statistics_give_the_mde_both_ways_and_the_driver() {
        let p = portfolio("    arms: 3\n");
        let s = statistics(&p.experiments[0]);
        assert_eq!(s.kind, "rate");
        assert_eq!(s.baseline, 0.2);
        assert_eq!(s.mde, Some(0.05));
        assert!((s.mde_abs - 0.01).abs() < 1e-12);
        assert_eq!((s.arms, s.ratio, s.looks, s.boundary), (3, 1.0, 1, None));
        assert_eq!(s.driver, "primary");
        assert_eq!((s.alpha, s.power), (0.05, 0.8));
    }

    #[test]
    fn looks_fall_where_their_fraction_of_the_maximum_is_collected() {
        // 10,000 a day at 100% with no minimum run or whole weeks: the
        // look at t is read the day after ceil(t x max / 10,000) days.
        let p = portfolio(
            "    looks: 4\n    boundary: obrien-fleming\n    min_days: 1\n    whole_weeks: false\n",
        );
        let ex = &p.experiments[0];
        let r = run(&p, 1.0);
        let l = look_dates(&p, 0, &r).expect("looks");
        assert_eq!(l.dates.len(), 4);
        let max = ex.need.total as f64;
        for (k, look) in l.dates.iter().enumerate().take(3) {
            let days = ((k as f64 + 1.0) / 4.0 * max / 10_000.0).ceil() as i64;
            assert_eq!(
                look.date,
                d("2027-01-04") + Duration::days(days),
                "look {k}"
            );
        }
        assert_eq!(l.dates[3].date, r.result_date);
        assert_eq!(l.latest, r.result_date);
        assert_eq!(l.earliest, l.dates[0].date);
        // The expected sample under the planned effect lies between the
        // first look and the end.
        assert!(l.earliest <= l.expected && l.expected <= l.latest);
        let days = (ex.looks.as_ref().unwrap().design.expected_fraction_h1 * max / 10_000.0).ceil();
        assert_eq!(l.expected, d("2027-01-04") + Duration::days(days as i64));
        let total: f64 = l.dates.iter().map(|x| x.stop_probability).sum();
        assert!((total - 0.8).abs() < 0.01, "{total}");
    }

    #[test]
    fn whole_weeks_put_looks_on_whole_weeks() {
        let p = portfolio("    looks: 3\n");
        let r = run(&p, 0.5);
        let l = look_dates(&p, 0, &r).unwrap();
        for look in &l.dates {
            assert_eq!((look.date - r.start).num_days() % 7, 0, "{look:?}");
        }
        assert!(l.dates.windows(2).all(|w| w[0].date <= w[1].date));
    }

    #[test]
    fn a_fixed_horizon_test_has_no_look_dates() {
        let p = portfolio("");
        assert_eq!(look_dates(&p, 0, &run(&p, 1.0)), None);
    }

    #[test]
    fn the_detectable_effect_inverts_the_size() {
        // The units the test needs detect its own MDE; half as many detect
        // a larger one.
        let p = portfolio("");
        let ex = &p.experiments[0];
        let need = ex.need.control_exact * 2.0;
        assert!((detectable_effect(ex, need).unwrap() - 0.05).abs() < 1e-6);
        assert!(detectable_effect(ex, need / 2.0).unwrap() > 0.07);
        // With looks the maximum sample detects the same MDE.
        let p = portfolio("    looks: 3\n");
        let ex = &p.experiments[0];
        let max = ex.need.control_exact * 2.0;
        assert!((detectable_effect(ex, max).unwrap() - 0.05).abs() < 1e-6);
    }

    #[test]
    fn detectable_counts_the_traffic_from_the_start_to_the_deadline() {
        let p = portfolio("    deadline: 2027-01-17\n");
        let got = detectable(&p, 0, d("2027-01-04"), Share::from_fraction(0.5)).unwrap();
        assert_eq!(got.to, d("2027-01-17"));
        assert!((got.units - 70_000.0).abs() < 1e-6);
        let effect = detectable_effect(&p.experiments[0], 70_000.0).unwrap();
        assert_eq!(got.mde, Some(effect));
        assert!((got.mde_abs.unwrap() - effect * 0.2).abs() < 1e-12);
        assert_eq!(
            detectable(&p, 0, d("2027-01-18"), Share::from_fraction(0.5)),
            None
        );
    }

    #[test]
    fn detectable_takes_the_longest_stretch_between_no_running_blackouts() {
        let p = portfolio(
            "blackouts:\n  - {from: 2027-01-11, to: 2027-01-17, kind: no_running, note: sale}\n",
        );
        let got = detectable(&p, 0, d("2027-01-04"), Share::WHOLE).unwrap();
        assert_eq!((got.from, got.to), (d("2027-01-18"), d("2027-04-04")));
        assert!((got.units - 77.0 * 10_000.0).abs() < 1e-6);
    }

    #[test]
    fn a_test_left_out_could_detect_only_in_the_room_the_plan_leaves() {
        // One split pool of 1,000 a day for six weeks. `big` (priority 10)
        // holds all of it for the first four weeks; `late` cannot fit at
        // all (150,000 units). Alone it could collect 42 x 1,000 = 42,000;
        // beside the plan only the last two weeks, 14 x 1,000 = 14,000.
        let text = "window: {start: 2027-01-04, end: 2027-02-14}\n\
             pools:\n  - {id: p, daily: 1000, max_concurrent: 2}\n\
             experiments:\n\
             \x20 - {id: big, pool: p, sample_size: 14000, priority: 10, min_days: 28}\n\
             \x20 - {id: late, pool: p, baseline: 0.2, mde: 0.01, priority: 1}\n";
        let p = load_str(text, "t.yaml").unwrap_or_else(|e| panic!("{e}"));
        let plan = crate::schedule::plan(&p, &crate::schedule::PlanRequest::default());
        let big = plan.experiments[0].run.expect("big runs");
        assert_eq!((big.start, big.end), (d("2027-01-04"), d("2027-01-31")));
        let late = plan.experiments[1]
            .detectable
            .clone()
            .expect("room is left");
        assert_eq!((late.from, late.to), (d("2027-02-01"), d("2027-02-14")));
        assert_eq!(late.share, Share::WHOLE);
        assert!((late.units - 14_000.0).abs() < 1e-6, "{}", late.units);
        let alone = detectable(&p, 1, d("2027-01-04"), Share::WHOLE).unwrap();
        assert!((alone.units - 42_000.0).abs() < 1e-6, "{}", alone.units);
        assert!(late.mde.unwrap() > alone.mde.unwrap());
    }
}
