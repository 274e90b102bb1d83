//! Forecast: a pool's eligible units on each calendar day, and the
//! day-by-day run length of a test that takes a constant share of them.
//!
//! Pure functions of a [`Pool`] and dates. The rule for a day: the pool's
//! daily level (moved along its fitted path, a damped trend or the yearly
//! season, if it has one) times
//! the weekday multiplier (Monday first); then the adjustments covering
//! the day compose: the last `level` among them (in file order) replaces
//! that value, and every `multiply` among them scales it, all multiplied
//! together (a campaign x1.3 inside a seasonal dip x0.8 gives x1.04). Last,
//! every what-if scale whose date has come multiplies the result. Every later computation (check, plan,
//! re-plan, renderers) reads traffic through this module. [`fit`] fits the
//! level, pattern, trend and season from a pool's daily history, with
//! [`shift`] finding a recent change of level and [`backtest`] scoring the
//! fit from rolling origins and calibrating its spread (all three live in
//! [`crate::fit`], below the portfolio, whose loader fits each history,
//! and are re-exported here); [`report`] is what `sluice forecast` shows
//! of it.

pub mod report;
pub mod uncertainty;

/// The fit of a pool's history lives below the portfolio, in
/// [`crate::fit`]; the forecast's readers find it here too.
pub use crate::fit::{self, backtest, shift};

use crate::portfolio::{Change, Experiment, Pool};
use chrono::{Datelike, Duration, NaiveDate};

/// Eligible units of `pool` on `date`.
pub fn units_on(pool: &Pool, date: NaiveDate) -> f64 {
    let f = &pool.forecast;
    let level = match &f.level_path {
        Some(path) => f.daily * path.factor(date),
        None => f.daily,
    };
    let base = level * f.weekday[date.weekday().num_days_from_monday() as usize];
    let scale: f64 = f
        .scales
        .iter()
        .filter(|s| s.from <= date)
        .map(|s| s.factor)
        .product();
    // Adjustments compose: the last `level` covering the day replaces the
    // weekday forecast, then every `multiply` covering it applies.
    let covering = || {
        f.adjustments
            .iter()
            .filter(move |a| a.from <= date && date <= a.to)
    };
    let value = covering()
        .rev()
        .find_map(|a| match a.change {
            Change::Level(level) => Some(level),
            Change::Multiply(_) => None,
        })
        .unwrap_or(base);
    let value = covering()
        .filter_map(|a| match a.change {
            Change::Multiply(m) => Some(m),
            Change::Level(_) => None,
        })
        .fold(value, |v, m| v * m);
    value * scale
}

/// The model's [`crate::portfolio::entering`], re-exported for the
/// forecast's readers: the one place a test's units from one pool are
/// worked out.
pub use crate::portfolio::entering;

/// The units `experiment` receives from `pool` on `date` at `share`.
pub fn test_units_on(experiment: &Experiment, pool: &Pool, date: NaiveDate, share: f64) -> f64 {
    share * entering(experiment, pool) * units_on(pool, date)
}

/// A pool's forecast over a span of days, with running totals, for fast
/// run-length queries (or a test's units summed over its pools).
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// The first day of the span.
    pub start: NaiveDate,
    /// Units per day; `units[i]` is for `start + i`.
    pub units: Vec<f64>,
    /// `cumulative[i]` = sum of `units[..i]`; one longer than `units`.
    pub cumulative: Vec<f64>,
}

impl Series {
    /// The forecast of `pool` from `start` to `end`, inclusive.
    pub fn new(pool: &Pool, start: NaiveDate, end: NaiveDate) -> Series {
        let n = ((end - start).num_days() + 1).max(0) as usize;
        let units: Vec<f64> = (0..n)
            .map(|i| units_on(pool, start + Duration::days(i as i64)))
            .collect();
        Series::from_units(start, units)
    }

    /// Number of days covered.
    pub fn len(&self) -> usize {
        self.units.len()
    }

    /// Whether no day is covered.
    pub fn is_empty(&self) -> bool {
        self.units.is_empty()
    }

    /// Units from day index `from` to `to`, inclusive.
    pub fn total(&self, from: usize, to: usize) -> f64 {
        if from > to || from >= self.units.len() {
            return 0.0;
        }
        let to = to.min(self.units.len() - 1);
        self.cumulative[to + 1] - self.cumulative[from]
    }

    /// Last day index of a run starting at day index `start` with a constant
    /// `share`, once it has collected `need` units: never shorter than
    /// `min_days`, and a whole number of weeks when `whole_weeks`. `None`
    /// when the span ends first.
    pub fn run_end(
        &self,
        start: usize,
        share: f64,
        need: f64,
        min_days: u32,
        whole_weeks: bool,
    ) -> Option<usize> {
        self.run_end_from(
            start as i64,
            start,
            start,
            share,
            need,
            min_days,
            whole_weeks,
        )
    }

    /// [`Series::run_end`] for a run that may already be under way: it
    /// began on day index `start` (negative before the span), counts `need`
    /// more units from day index `from`, and ends no earlier than
    /// `not_before`; its minimum run and whole weeks count from `start`.
    /// A run with nothing left to collect reaches its need on `not_before`.
    #[allow(clippy::too_many_arguments)]
    pub fn run_end_from(
        &self,
        start: i64,
        from: usize,
        not_before: usize,
        share: f64,
        need: f64,
        min_days: u32,
        whole_weeks: bool,
    ) -> Option<usize> {
        if from >= self.units.len() || share <= 0.0 {
            return None;
        }
        let reached = if need > 0.0 {
            // First index k >= from with share x (cum[k + 1] - cum[from]) >= need.
            let target = need / share + self.cumulative[from];
            // Tolerate rounding noise in the running totals.
            let target = target - 1e-9 * target.abs().max(1.0);
            let tail = &self.cumulative[from + 1..];
            let k = tail.partition_point(|&c| c < target);
            if k >= tail.len() {
                return None;
            }
            (from + k).max(not_before)
        } else {
            not_before
        };
        let days = (reached as i64 - start + 1).max(1) as u64;
        let days = crate::sizing::round_days(days, min_days, whole_weeks) as i64;
        let end = start + days - 1;
        (end >= 0 && (end as usize) < self.units.len()).then_some(end as usize)
    }

    /// Last day index of a run starting at day index `start` that first
    /// holds each `(share, days)` step of `ramp` in order, then `share`
    /// for at least one day until it has `need` units: the ramp's units
    /// count only when `counts`. Never shorter than `min_days` (ramp days
    /// included), a whole number of weeks from `start` when `whole_weeks`;
    /// `None` when the span ends first. Without a ramp, [`Series::run_end`].
    #[allow(clippy::too_many_arguments)]
    pub fn ramped_end(
        &self,
        start: usize,
        ramp: &[(f64, usize)],
        counts: bool,
        share: f64,
        need: f64,
        min_days: u32,
        whole_weeks: bool,
    ) -> Option<usize> {
        if ramp.is_empty() {
            return self.run_end(start, share, need, min_days, whole_weeks);
        }
        if start >= self.units.len() || share <= 0.0 {
            return None;
        }
        let mut main = start;
        let mut got = 0.0;
        for &(s, days) in ramp {
            if main + days > self.units.len() {
                return None;
            }
            if counts {
                got += s * (self.cumulative[main + days] - self.cumulative[main]);
            }
            main += days;
        }
        if main >= self.units.len() {
            return None;
        }
        let base = self.cumulative[main];
        let target = (need - got).max(0.0) / share + base;
        let target = target - 1e-9 * target.abs().max(1.0);
        let tail = &self.cumulative[main + 1..];
        // At least one day at the planned share.
        let k = tail.partition_point(|&c| c < target);
        if k >= tail.len() {
            return None;
        }
        let raw = (main - start + k + 1) as u64;
        let days = crate::sizing::round_days(raw, min_days, whole_weeks) as usize;
        let end = start + days - 1;
        (end < self.units.len()).then_some(end)
    }

    /// The units `experiment` receives at a whole share from `from` to
    /// `to`: each of its pools' forecasts through [`entering`], summed.
    pub fn of_test(
        experiment: &Experiment,
        pools: &[Pool],
        from: NaiveDate,
        to: NaiveDate,
    ) -> Series {
        let parts: Vec<(Series, f64)> = experiment
            .pools
            .iter()
            .map(|&k| {
                (
                    Series::new(&pools[k], from, to),
                    entering(experiment, &pools[k]),
                )
            })
            .collect();
        Series::summed(parts.iter().map(|(s, f)| (s, *f)))
    }

    /// The sum of `parts`, each a series over the same days times a factor.
    pub fn summed<'s>(parts: impl IntoIterator<Item = (&'s Series, f64)>) -> Series {
        let mut start = None;
        let mut units: Vec<f64> = Vec::new();
        for (s, factor) in parts {
            start.get_or_insert(s.start);
            if units.is_empty() {
                units = vec![0.0; s.units.len()];
            }
            for (u, v) in units.iter_mut().zip(&s.units) {
                *u += factor * v;
            }
        }
        Series::from_units(start.unwrap_or(NaiveDate::MIN), units)
    }

    /// A series of `units` from `start`, with its running totals.
    fn from_units(start: NaiveDate, units: Vec<f64>) -> Series {
        let mut cumulative = Vec::with_capacity(units.len() + 1);
        let mut total = 0.0;
        cumulative.push(0.0);
        for u in &units {
            total += u;
            cumulative.push(total);
        }
        Series {
            start,
            units,
            cumulative,
        }
    }

    /// The last day index of `experiment`'s run from `start` at `share`
    /// on this series (its units summed over its pools): its ramp, need,
    /// minimum run and whole weeks, as [`Series::ramped_end`] counts them.
    pub fn test_end(&self, experiment: &Experiment, start: usize, share: f64) -> Option<usize> {
        self.ramped_end(
            start,
            &experiment.ramp_steps(),
            experiment.ramp_counts,
            share,
            experiment.need.total as f64,
            experiment.min_days,
            experiment.whole_weeks,
        )
    }
}

/// Last day of a run of `pool` that starts on `start` at a constant `share`
/// and needs `need` units in total, searching until `limit` inclusive.
pub fn run_end(
    pool: &Pool,
    start: NaiveDate,
    share: f64,
    need: f64,
    min_days: u32,
    whole_weeks: bool,
    limit: NaiveDate,
) -> Option<NaiveDate> {
    let series = Series::new(pool, start, limit);
    series
        .run_end(0, share, need, min_days, whole_weeks)
        .map(|i| start + Duration::days(i as i64))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::{Adjustment, Forecast, Sharing};

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn pool(daily: f64, weekday: [f64; 7], adjustments: Vec<Adjustment>) -> Pool {
        Pool {
            id: "p".into(),
            label: "P".into(),
            forecast: Forecast {
                daily,
                weekday,
                adjustments,
                scales: Vec::new(),
                level_path: None,
                history: None,
                uncertainty: None,
            },
            sharing: Sharing::Split,
            max_concurrent: 3,
            holdout: 0.0,
        }
    }

    #[test]
    fn weekday_pattern_is_monday_first() {
        let p = pool(1000.0, [1.0, 1.1, 1.2, 1.3, 1.4, 0.5, 0.6], vec![]);
        // 2027-01-04 is a Monday; 2027-01-09 a Saturday; 2027-01-10 a Sunday.
        assert_eq!(units_on(&p, d("2027-01-04")), 1000.0);
        assert!((units_on(&p, d("2027-01-09")) - 500.0).abs() < 1e-9);
        assert!((units_on(&p, d("2027-01-10")) - 600.0).abs() < 1e-9);
    }

    #[test]
    fn a_level_replaces_the_forecast_and_multipliers_still_apply() {
        let adj = vec![
            Adjustment {
                from: d("2026-12-20"),
                to: d("2027-01-03"),
                change: Change::Multiply(0.5),
                note: "holiday dip".into(),
            },
            Adjustment {
                from: d("2026-12-31"),
                to: d("2027-01-01"),
                change: Change::Level(100.0),
                note: "new year".into(),
            },
            Adjustment {
                from: d("2027-01-01"),
                to: d("2027-01-01"),
                change: Change::Level(300.0),
                note: "the later level wins".into(),
            },
        ];
        let p = pool(1000.0, [1.0; 7], adj);
        assert_eq!(units_on(&p, d("2026-12-19")), 1000.0);
        assert_eq!(units_on(&p, d("2026-12-30")), 500.0);
        // 100 units replace the forecast; the dip still halves them.
        assert_eq!(units_on(&p, d("2026-12-31")), 50.0);
        // Two levels: the later (300) replaces, then x0.5.
        assert_eq!(units_on(&p, d("2027-01-01")), 150.0);
        assert_eq!(units_on(&p, d("2027-01-02")), 500.0);
        assert_eq!(units_on(&p, d("2027-01-04")), 1000.0);
    }

    #[test]
    fn multipliers_covering_a_day_compose() {
        // A campaign x1.3 during a seasonal dip x0.8: 1.3 x 0.8 = 1.04, so
        // a Friday of the 2,000-unit pool with weekday factor 0.9 gets
        // 2,000 x 0.9 x 1.04 = 1,872 units; outside the campaign
        // 2,000 x 0.9 x 0.8 = 1,440.
        let adj = vec![
            Adjustment {
                from: d("2027-02-01"),
                to: d("2027-02-28"),
                change: Change::Multiply(0.8),
                note: "seasonal dip".into(),
            },
            Adjustment {
                from: d("2027-02-08"),
                to: d("2027-02-14"),
                change: Change::Multiply(1.3),
                note: "campaign".into(),
            },
        ];
        let p = pool(2000.0, [1.0, 1.0, 1.0, 1.0, 0.9, 1.0, 1.0], adj);
        // 2027-02-12 and 2027-02-05 are Fridays.
        assert!((units_on(&p, d("2027-02-12")) - 1872.0).abs() < 1e-9);
        assert!((units_on(&p, d("2027-02-05")) - 1440.0).abs() < 1e-9);
        assert!((units_on(&p, d("2027-03-05")) - 1800.0).abs() < 1e-9);
    }

    #[test]
    fn scales_compound_with_adjustments_from_their_date() {
        let adj = vec![Adjustment {
            from: d("2027-02-01"),
            to: d("2027-02-07"),
            change: Change::Multiply(0.5),
            note: "dip".into(),
        }];
        let mut p = pool(1000.0, [1.0; 7], adj);
        p.forecast.scales.push(crate::portfolio::Scale {
            from: d("2027-02-03"),
            factor: 0.7,
        });
        assert_eq!(units_on(&p, d("2027-02-02")), 500.0);
        assert!((units_on(&p, d("2027-02-03")) - 350.0).abs() < 1e-9);
        assert!((units_on(&p, d("2027-02-10")) - 700.0).abs() < 1e-9);
    }

    #[test]
    fn series_crosses_a_year_end_and_a_leap_day() {
        let p = pool(10.0, [1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 2.0], vec![]);
        let s = Series::new(&p, d("2027-12-30"), d("2028-03-01"));
        // 2027-12-30 .. 2028-03-01 is 2 + 31 + 29 + 1 = 63 days (2028 is a leap year).
        assert_eq!(s.len(), 63);
        let feb29 = (d("2028-02-29") - d("2027-12-30")).num_days() as usize;
        // 2028-02-29 is a Tuesday.
        assert_eq!(s.units[feb29], 10.0);
        // 63 days are nine whole weeks of 5 x 10 + 2 x 20 units.
        assert!((s.total(0, 62) - 9.0 * 90.0).abs() < 1e-9);
    }

    #[test]
    fn run_end_counts_day_by_day_with_minimum_and_whole_weeks() {
        let p = pool(100.0, [1.0; 7], vec![]);
        let s = Series::new(&p, d("2027-01-04"), d("2027-03-31"));
        // 1,000 units at 50%: 50 a day, 20 days; whole weeks make it 21.
        assert_eq!(s.run_end(0, 0.5, 1000.0, 14, true), Some(20));
        assert_eq!(s.run_end(0, 0.5, 1000.0, 14, false), Some(19));
        // A small need still runs the minimum.
        assert_eq!(s.run_end(0, 1.0, 10.0, 14, false), Some(13));
        // Too big for the span.
        assert_eq!(s.run_end(0, 0.1, 1e6, 14, true), None);
        // Exactly reaching the need on a day ends on that day.
        assert_eq!(s.run_end(3, 1.0, 1500.0, 1, false), Some(17));
    }

    #[test]
    fn a_run_under_way_counts_from_its_reading_and_ends_no_earlier_than_today() {
        let p = pool(100.0, [1.0; 7], vec![]);
        let s = Series::new(&p, d("2027-01-04"), d("2027-03-31"));
        // Began 3 days before the span; 500 more units at 50% from day 2
        // reach on day 11; 15 days from its start, whole weeks make 21.
        assert_eq!(s.run_end_from(-3, 2, 2, 0.5, 500.0, 14, false), Some(11));
        assert_eq!(s.run_end_from(-3, 2, 2, 0.5, 500.0, 14, true), Some(17));
        // Nothing left to collect: it ends on `not_before` or its minimum.
        assert_eq!(s.run_end_from(0, 5, 20, 0.5, 0.0, 14, false), Some(20));
        assert_eq!(s.run_end_from(0, 5, 5, 0.5, 0.0, 14, false), Some(13));
        // From its start it is `run_end`.
        assert_eq!(
            s.run_end_from(3, 3, 3, 1.0, 1500.0, 1, false),
            s.run_end(3, 1.0, 1500.0, 1, false)
        );
    }

    #[test]
    fn a_ramp_holds_its_steps_first_and_counts_only_when_asked() {
        // 10,000 a day; two days at 5%, then 50%; 20,500 units.
        // Not counted: 2 + 5 days (4 x 5,000 = 20,000 falls short): day 6.
        // Counted: 1,000 from the ramp, 19,500 in 4 days: day 5.
        let p = pool(10_000.0, [1.0; 7], vec![]);
        let s = Series::new(&p, d("2027-01-04"), d("2027-02-28"));
        let ramp = [(0.05, 2)];
        assert_eq!(
            s.ramped_end(0, &ramp, false, 0.5, 20_500.0, 1, false),
            Some(6)
        );
        assert_eq!(
            s.ramped_end(0, &ramp, true, 0.5, 20_500.0, 1, false),
            Some(5)
        );
        // At least one day at the planned share, even with the need met.
        assert_eq!(s.ramped_end(0, &ramp, true, 0.5, 500.0, 1, false), Some(2));
        // The minimum run and whole weeks count the ramp days.
        assert_eq!(
            s.ramped_end(0, &ramp, false, 0.5, 20_500.0, 1, true),
            Some(6)
        );
        assert_eq!(
            s.ramped_end(3, &ramp, false, 0.5, 20_500.0, 10, false),
            Some(12)
        );
        // No ramp: the constant-share end.
        assert_eq!(
            s.ramped_end(0, &[], false, 0.5, 20_500.0, 1, false),
            s.run_end(0, 0.5, 20_500.0, 1, false)
        );
    }

    #[test]
    fn summed_series_add_their_pools_day_by_day() {
        let a = Series::new(
            &pool(1000.0, [1.0; 7], vec![]),
            d("2027-01-04"),
            d("2027-01-31"),
        );
        let b = Series::new(
            &pool(500.0, [1.0, 1.0, 1.0, 1.0, 1.0, 2.0, 2.0], vec![]),
            d("2027-01-04"),
            d("2027-01-31"),
        );
        let s = Series::summed([(&a, 1.0), (&b, 1.0)]);
        assert_eq!(s.units[0], 1500.0);
        assert_eq!(s.units[5], 2000.0);
        // A week: 7,000 + 5 x 500 + 2 x 1,000.
        assert_eq!(s.total(0, 6), 11_500.0);
        assert_eq!(s.start, d("2027-01-04"));
    }

    #[test]
    fn run_end_follows_a_dip() {
        // Zero traffic for a week in the middle stretches the run by a week.
        let adj = vec![Adjustment {
            from: d("2027-01-11"),
            to: d("2027-01-17"),
            change: Change::Level(0.0),
            note: "outage".into(),
        }];
        let p = pool(100.0, [1.0; 7], adj);
        let end = run_end(&p, d("2027-01-04"), 1.0, 1400.0, 1, false, d("2027-06-30"));
        assert_eq!(end, Some(d("2027-01-24")));
    }
}
