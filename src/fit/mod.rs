//! A pool's forecast fitted from its daily history: a multiplicative
//! weekday pattern, a level at the history's end (from the days after a
//! recent shift, when there was one), a damped trend or the yearly season,
//! and the spread of what the model does not explain.
//!
//! The method, step by step:
//!
//! 1. **Days left out.** Days an `event` covers (a campaign, an outage, a
//!    tracking fault) and days without units take no part in the fit.
//! 2. **Weekday pattern.** Classical decomposition (Persons 1919; the
//!    ratio-to-moving-average method, e.g. Makridakis, Wheelwright &
//!    Hyndman 1998, "Forecasting: Methods and Applications", ch. 3): each
//!    day's units over the mean of the seven days centred on it, averaged
//!    per weekday over the last [`PATTERN_DAYS`] days with a 10% trimmed
//!    mean (so a holiday barely counts), scaled to average 1. A centred
//!    week contains every weekday once, so a trend or a season cancels in
//!    it and the multipliers are not flattened. statsmodels'
//!    `seasonal_decompose` is the outside check.
//! 3. **The deseasonalised log series.** `y = ln(units / multiplier)`.
//!    With a year of history or more ([`YEAR`] + [`LEVEL_DAYS`] days),
//!    each recent day is also put on the last day's footing by the yearly
//!    season: last year's smoothed log level (a centred 21-day median) on
//!    the same day of the year against last year's on the last day's. A
//!    January surge and its decay are then season, not level or trend.
//! 4. **A recent shift** ([`shift`]): a change of level in the last
//!    [`SHIFT_DAYS`] days, found by PELT and told apart from episodes
//!    (holidays, outages) and drifts. Episodes are set aside.
//! 5. **Level.** The median of the last [`LEVEL_DAYS`] usable days' `y`
//!    (with a trend, each moved to the last day along it), or, after a
//!    shift, of the days since the shift only ([`LevelRule`]); scaled by
//!    `exp(s^2 / 2)` (s the daily log spread of step 7) so it is the units
//!    of an average day rather than a median one.
//! 6. **Trend** (`trend: true`). With a year of history: growth year over
//!    year, the median of each recent day's `y` against last year's
//!    smoothed level on the same day, carried forward undamped, bounded to
//!    ±[`MAX_GROWTH`] a year. With less: a Theil-Sen line (Theil 1950; Sen
//!    1968, JASA 63, 1379-1389) through the last [`TREND_DAYS`] days of `y`
//!    (a shift taken out), bounded to ±[`MAX_TREND`] a week and damped by
//!    [`DAMPING`] a week (Gardner & McKenzie 1985, "Forecasting trends in
//!    time series", Management Science 31(10), 1237-1246): its whole
//!    effect never exceeds nine weeks of the fitted slope.
//! 7. **Spread.** `daily_cv`: day-to-day noise, the robust spread (1.4826
//!    x the median absolute deviation) of each day's `y` less the mean of
//!    the seven days centred on it, times sqrt(7/6), as a lognormal
//!    coefficient of variation `sqrt(exp(s^2) - 1)`. `level_cv`: calibrated
//!    by the backtest ([`backtest`]) so that the P10-P90 range of a
//!    four- and a thirteen-week total held the real total on about 80% of
//!    the history's own rolling origins; with too few origins, the
//!    standard error of a median level (1.2533 x s / sqrt(28)).
//!
//! The model's types are in `model.rs`, below the rest; the fit at one
//! point in time is in `point.rs`, used as it is by the [`backtest`], and
//! [`fit`] joins the two. Nothing here reads a portfolio: the portfolio's
//! loader fits each pool's history through [`fit`], and the forecast
//! reads the result.

pub mod backtest;
mod model;
mod point;
pub mod shift;

pub use model::{grown, Fit, LevelPath, LevelRule, Shift};
pub(crate) use point::robust_sd;
pub use point::{
    holdout_mape, FitError, DAMPING, FULL_WEEK, LEVEL_DAYS, MAX_GROWTH, MAX_TREND, MIN_DAYS,
    PATTERN_DAYS, SHIFT_DAYS, TREND_DAYS, YEAR,
};

use chrono::NaiveDate;

/// Fits the daily `units` whose first day is `start`; `skip` marks the
/// days events cover (shorter than `units` means the rest are not).
pub fn fit(start: NaiveDate, units: &[f64], trend: bool, skip: &[bool]) -> Result<Fit, FitError> {
    let mut f = point::fit_point(start, units, trend, skip)?;
    let (summary, spread) = backtest::run(start, units, trend, skip, f.daily_cv);
    if let Some((cv, growth)) = spread {
        f.level_cv = cv;
        f.level_growth = growth;
    }
    f.backtest = summary;
    Ok(f)
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::Duration;

    /// A seeded generator (SplitMix64, Steele, Lea & Flood 2014) with
    /// standard normals by Box-Muller, for synthetic histories.
    struct Rng(u64);

    impl Rng {
        fn next(&mut self) -> f64 {
            self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = self.0;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            z ^= z >> 31;
            ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        }
        fn normal(&mut self) -> f64 {
            let (u, v) = (self.next(), self.next());
            (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
        }
    }

    const PATTERN: [f64; 7] = [1.06, 1.12, 1.10, 1.04, 0.96, 0.80, 0.92];

    fn pattern() -> [f64; 7] {
        let mean = PATTERN.iter().sum::<f64>() / 7.0;
        PATTERN.map(|m| m / mean)
    }

    /// `days` of history starting on a Monday: `level` at the last day
    /// times `shape(i)` on day i, the weekday pattern, and lognormal daily
    /// noise of coefficient of variation `cv`.
    fn history(
        days: usize,
        level: f64,
        cv: f64,
        seed: u64,
        shape: impl Fn(usize) -> f64,
    ) -> Vec<f64> {
        let mut rng = Rng(seed);
        let s = (1.0 + cv * cv).ln().sqrt();
        let p = pattern();
        (0..days)
            .map(|i| {
                let noise = (s * rng.normal() - s * s / 2.0).exp();
                level * shape(i) * p[i % 7] * noise
            })
            .collect()
    }

    /// A linear trend of `trend` of the final level per week.
    fn linear(days: usize, level: f64, trend: f64, cv: f64, seed: u64) -> Vec<f64> {
        history(days, level, cv, seed, |i| {
            1.0 + trend * (i as f64 - (days - 1) as f64) / 7.0
        })
    }

    fn monday() -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 6, 1).unwrap()
    }

    fn fitted(h: &[f64], trend: bool) -> Fit {
        fit(monday(), h, trend, &[]).unwrap()
    }

    // Tolerances. With daily noise of coefficient of variation c, a
    // weekday's multiplier rests on every week of the history (standard
    // error about c / sqrt(weeks)) and the level on the median of 28 days
    // (about 1.25 c / sqrt(28)); at c = 2% both are under 0.5%, so 2% is
    // over four standard errors, checked on five seeds each.

    #[test]
    fn recovers_pattern_and_level_without_a_trend() {
        for seed in 1..=5 {
            let h = linear(182, 20_000.0, 0.0, 0.02, seed);
            let f = fitted(&h, false);
            for (got, want) in f.weekday_pattern.iter().zip(pattern()) {
                assert!((got / want - 1.0).abs() < 0.02, "seed {seed}: {f:?}");
            }
            assert!(
                (f.level / 20_000.0 - 1.0).abs() < 0.02,
                "seed {seed}: {f:?}"
            );
            assert_eq!(
                (f.trend_per_week, f.path.clone(), f.shift),
                (0.0, None, None)
            );
            let mean = f.weekday_pattern.iter().sum::<f64>() / 7.0;
            assert!((mean - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn the_weekday_pattern_is_not_flattened_by_a_trend_and_noise() {
        // A Sunday at 0.75 of the week, a 1%-a-week trend, 10% daily noise
        // over 26 weeks. The standard error of one multiplier is about
        // 10% x sqrt(6/7) / sqrt(26) = 1.8% for any estimator, so one
        // seed's multipliers can stray that far; what must not happen is
        // a bias towards 1 (the flattening): the mean over ten seeds is
        // held to 1.2% (over two of its standard errors of 0.6%), each
        // seed to 6%.
        let truth = [1.05, 1.1, 1.08, 1.04, 1.0, 0.98, 0.75];
        let mean = truth.iter().sum::<f64>() / 7.0;
        let truth = truth.map(|m| m / mean);
        let mut sums = [0.0; 7];
        for seed in 1..=10 {
            let mut rng = Rng(seed);
            let s = (1.01f64).ln().sqrt();
            let h: Vec<f64> = (0..182)
                .map(|i| {
                    let noise = (s * rng.normal() - s * s / 2.0).exp();
                    10_000.0 * 1.01f64.powf(i as f64 / 7.0) * truth[i % 7] * noise
                })
                .collect();
            let f = fitted(&h, true);
            for d in 0..7 {
                assert!(
                    (f.weekday_pattern[d] / truth[d] - 1.0).abs() < 0.06,
                    "seed {seed}: {f:?}"
                );
                sums[d] += f.weekday_pattern[d] / 10.0;
            }
        }
        for d in 0..7 {
            assert!(
                (sums[d] / truth[d] - 1.0).abs() < 0.012,
                "{sums:?} {truth:?}"
            );
        }
    }

    #[test]
    fn recovers_the_daily_noise() {
        // From a year of days the estimate's standard error is about 8% of
        // the truth; 25% is three of them.
        for (cv, seed) in [(0.03, 1), (0.08, 2), (0.15, 3), (0.08, 4)] {
            let h = linear(364, 20_000.0, 0.0, cv, seed);
            let f = fitted(&h, false);
            assert!((f.daily_cv / cv - 1.0).abs() < 0.25, "cv {cv}: {f:?}");
        }
    }

    #[test]
    fn a_trend_is_recovered_then_damped() {
        // +1.5% of the final level per week over 26 weeks: the fitted
        // slope within 0.3 points, the level within 2%, and the forecast
        // grows less each week, never more than nine weeks of the slope.
        for seed in 1..=5 {
            let h = linear(182, 10_000.0, 0.015, 0.02, seed);
            let f = fitted(&h, true);
            assert!(
                (f.trend_per_week - 0.015).abs() < 0.003,
                "seed {seed}: {f:?}"
            );
            assert!(
                (f.level / 10_000.0 - 1.0).abs() < 0.02,
                "seed {seed}: {f:?}"
            );
            let path = f.path.clone().unwrap();
            let at = |w: i64| path.factor(path.from + Duration::days(7 * w));
            assert!(at(2) - at(1) < at(1) - at(0));
            assert!(at(52) < (9.0 * 0.0181f64).exp(), "{}", at(52));
        }
    }

    #[test]
    fn a_steep_trend_is_bounded() {
        // -5% a week is read as -2% at most, so thirteen weeks lose less
        // than a fifth of the level.
        let h = history(182, 10_000.0, 0.02, 3, |i| {
            0.95f64.powf((i as f64 - 181.0) / 7.0)
        });
        let f = fitted(&h, true);
        assert!((f.trend_per_week + 0.0198).abs() < 0.001, "{f:?}");
        let path = f.path.unwrap();
        assert!(path.factor(path.from + Duration::days(91)) > 0.83);
    }

    #[test]
    fn a_recent_step_sets_the_level() {
        // A clean 30% drop 14 days (within 5%) or 7 days (within 10%)
        // before the history ends, with and without a trend.
        for (days_after, tol) in [(14usize, 0.05), (7, 0.10)] {
            for seed in 1..=5 {
                let n = 182;
                let h = history(n, 10_000.0, 0.04, seed, |i| {
                    if i + days_after >= n {
                        0.7
                    } else {
                        1.0
                    }
                });
                for trend in [false, true] {
                    let f = fitted(&h, trend);
                    assert!(
                        (f.level / 7_000.0 - 1.0).abs() < tol,
                        "{days_after} d, seed {seed}: {f:?}"
                    );
                    let s = f.shift.expect("a shift");
                    assert_eq!(s.date, monday() + Duration::days((n - days_after) as i64));
                    assert!((s.change + 0.3).abs() < 0.05, "{s:?}");
                    assert_eq!(f.level_rule, LevelRule::SinceShift);
                }
            }
        }
    }

    #[test]
    fn episodes_barely_move_the_level() {
        // A one-day outage, a one-day spike, or a holiday of one to three
        // days at 40%, anywhere in the last four weeks (the very end
        // included): the level moves by less than 2%, and no shift.
        for seed in 1..=3 {
            let clean = linear(126, 8_000.0, 0.0, 0.04, seed);
            let base = fitted(&clean, false).level;
            for at in [100usize, 110, 118, 123, 125] {
                for (len, k) in [(1usize, 0.0), (1, 2.5), (2, 0.4), (3, 0.4)] {
                    let mut h = clean.clone();
                    for u in h.iter_mut().skip(at).take(len) {
                        *u *= k;
                    }
                    let f = fitted(&h, false);
                    assert!(
                        (f.level / base - 1.0).abs() < 0.02,
                        "seed {seed} at {at} x{len} {k}: {f:?}"
                    );
                    assert_eq!(f.shift, None, "seed {seed} at {at} x{len} {k}");
                }
            }
        }
    }

    #[test]
    fn a_campaign_that_ended_is_no_shift() {
        // Ten days at x1.25 that ended 20 days before the history's end:
        // back at the old level, the campaign is no shift, and its days are
        // set aside, so the level is the normal one: within 4% of the truth
        // (three standard errors of a 28-day median at 6% noise, 1.25 x 6%
        // / sqrt(28) = 1.4%; the level rests on other days than a clean
        // history's would).
        for seed in 1..=5 {
            let h = history(182, 10_000.0, 0.06, seed, |i| {
                if (152..162).contains(&i) {
                    1.25
                } else {
                    1.0
                }
            });
            let f = fitted(&h, false);
            assert_eq!(f.shift, None, "seed {seed}");
            assert!(
                (f.level / 10_000.0 - 1.0).abs() < 0.04,
                "seed {seed}: {f:?}"
            );
        }
    }

    #[test]
    fn a_step_is_found_through_heavy_noise() {
        // 9% daily noise, a 20% drop ten days before the end: within 10%.
        for seed in 1..=5 {
            let h = history(
                182,
                10_000.0,
                0.09,
                seed,
                |i| if i >= 172 { 0.8 } else { 1.0 },
            );
            let f = fitted(&h, false);
            assert!(f.shift.is_some(), "seed {seed}: {f:?}");
            assert!((f.level / 8_000.0 - 1.0).abs() < 0.1, "seed {seed}: {f:?}");
        }
    }

    #[test]
    fn a_slow_drift_is_not_a_step() {
        for seed in 1..=5 {
            for weekly in [-0.02, -0.01, 0.01, 0.03] {
                let h = history(182, 10_000.0, 0.04, seed, |i| {
                    (1.0f64 + weekly).powf((i as f64 - 181.0) / 7.0)
                });
                assert_eq!(fitted(&h, false).shift, None, "seed {seed}, {weekly}");
                assert_eq!(fitted(&h, true).shift, None, "seed {seed}, {weekly}");
            }
        }
    }

    /// Two years of daily units growing `growth` a year, with a surge at
    /// New Year (x1.5 decaying over eight weeks) each year: the history
    /// ends on `end` days after the first New Year.
    fn surging(growth: f64, seed: u64) -> Vec<f64> {
        history(364 + 120, 10_000.0, 0.03, seed, |i| {
            let year_pos = i % 364;
            let surge = if year_pos < 56 {
                1.0 + 0.5 * (1.0 - year_pos as f64 / 56.0)
            } else {
                1.0
            };
            (1.0 + growth).powf((i as f64 - 483.0) / 364.0) * surge
        })
    }

    #[test]
    fn a_season_is_not_read_as_a_trend() {
        // The history ends 120 days after a New-Year surge that decayed over
        // eight weeks: the growth read is the yearly one (8-28%), not the
        // decay, and the next thirteen weeks' total is within 5% of the
        // truth.
        for (growth, seed) in [(0.08, 1), (0.15, 2), (0.28, 3)] {
            let h = surging(growth, seed);
            let f = fitted(&h, true);
            assert!(f.yearly_season, "{f:?}");
            let per_year = (1.0 + f.trend_per_week).powf(52.0) - 1.0;
            assert!(
                (per_year - growth).abs() < 0.05,
                "{growth}: read {per_year}"
            );
            let last = monday() + Duration::days(h.len() as i64 - 1);
            let predicted: f64 = (1..=91).map(|k| f.units_on(last + Duration::days(k))).sum();
            let truth: f64 = (1..=91)
                .map(|k| {
                    let i = h.len() - 1 + k as usize;
                    10_000.0 * (1.0 + growth).powf((i as f64 - 483.0) / 364.0) * pattern()[i % 7]
                })
                .sum();
            assert!(
                (predicted / truth - 1.0).abs() < 0.05,
                "{growth}: {predicted} vs {truth}"
            );
        }
    }

    #[test]
    fn the_season_shapes_the_coming_surge() {
        // Ending 60 days before the next New Year, the forecast rises into
        // the surge, and without a trend the yearly growth is taken out.
        let h = history(364 + 304, 10_000.0, 0.03, 5, |i| {
            let p = i % 364;
            if p < 56 {
                1.0 + 0.5 * (1.0 - p as f64 / 56.0)
            } else {
                1.0
            }
        });
        let f = fitted(&h, false);
        let last = monday() + Duration::days(h.len() as i64 - 1);
        let path = f.path.clone().unwrap();
        let in_surge = path.factor(last + Duration::days(61));
        assert!((in_surge - 1.5).abs() < 0.1, "{in_surge}");
        assert!((path.factor(last + Duration::days(30)) - 1.0).abs() < 0.05);
    }

    #[test]
    fn event_days_are_left_out() {
        // A x1.25 campaign over the last ten days, marked as an event: the
        // level stays the normal one; unmarked, it is read as a shift.
        let clean = linear(140, 5_000.0, 0.0, 0.03, 4);
        let mut h = clean.clone();
        for u in &mut h[130..] {
            *u *= 1.25;
        }
        let skip: Vec<bool> = (0..140).map(|i| i >= 130).collect();
        let marked = fit(monday(), &h, false, &skip).unwrap();
        let base = fitted(&clean, false);
        assert!((marked.level / base.level - 1.0).abs() < 0.01, "{marked:?}");
        assert_eq!(marked.shift, None);
        assert!(fitted(&h, false).level / base.level > 1.15);
    }

    #[test]
    fn ranges_are_calibrated_by_the_backtest() {
        // Weekly level wander of 8%: the P10-P90 coverage of four- and
        // thirteen-week totals on the history's own origins is 70-90%.
        for seed in [3, 8, 13] {
            let mut rng = Rng(seed + 100);
            let mut h = linear(364, 5_000.0, 0.0, 0.03, seed);
            let s = (1.0f64 + 0.08 * 0.08).ln().sqrt();
            for week in h.chunks_mut(7) {
                let f = (s * rng.normal()).exp();
                week.iter_mut().for_each(|u| *u *= f);
            }
            let f = fitted(&h, false);
            let b = f.backtest.clone().unwrap();
            assert!(b.origins >= 40, "{b:?}");
            for c in [b.coverage_4w.unwrap(), b.coverage_13w.unwrap()] {
                assert!((0.7..=0.9).contains(&c), "seed {seed}: {b:?}");
            }
            assert!(f.level_cv > 0.02 && f.level_cv < 0.2, "{f:?}");
            assert!(f.daily_cv < 0.06, "{f:?}");
            assert!(b.mape_1w.unwrap() < b.mape_13w.unwrap() + 0.05, "{b:?}");
        }
    }

    #[test]
    fn holdout_mape_matches_the_noise() {
        // With 5% lognormal noise and no wander the held-out MAPE is about
        // 5% x sqrt(2 / pi) = 4%.
        let h = linear(140, 12_000.0, 0.0, 0.05, 11);
        let m = holdout_mape(monday(), &h, false, &[]).unwrap();
        assert!(m > 0.025 && m < 0.06, "{m}");
        assert_eq!(holdout_mape(monday(), &h[..50], false, &[]), None);
    }

    #[test]
    fn short_or_empty_histories_are_refused() {
        assert_eq!(
            fit(monday(), &[100.0; 27], false, &[]),
            Err(FitError::TooShort { days: 27 })
        );
        assert_eq!(
            fit(monday(), &[0.0; 60], false, &[]),
            Err(FitError::NoTraffic)
        );
    }
}
