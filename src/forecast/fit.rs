//! A pool's forecast fitted from its daily history: a multiplicative
//! weekday pattern, a level at the history's end, an optional linear trend
//! and the spread of what the model does not explain.
//!
//! The method, step by step:
//!
//! 1. **Decompose.** The logarithm of the daily units (a day below one
//!    unit counts as one, so an outage of zeros stays finite) is split
//!    into seasonal, trend and remainder by STL, the seasonal-trend
//!    decomposition by loess (Cleveland, Cleveland, McRae & Terpenning
//!    1990, "STL: A Seasonal-Trend Decomposition Procedure Based on
//!    Loess", Journal of Official Statistics 6(1), 3-73), with its
//!    robustness iterations, so that a holiday or an outage gets little
//!    weight. The `stlrs` crate (a port of the authors' Fortran) does the
//!    decomposition; the parameters are [`STL`], and the reference check
//!    (tests/reference/check_forecast.py) gives statsmodels' `STL` the
//!    same ones. Working on logarithms makes the season multiplicative.
//! 2. **Weekday pattern.** The exponent of the seasonal component,
//!    averaged per weekday over the last [`PATTERN_DAYS`] days, scaled to
//!    average 1.
//! 3. **Level and trend.** Each day's units divided by its weekday
//!    multiplier is that day's level. Without a trend the level is the
//!    median of the last [`LEVEL_DAYS`] days' levels; with one, a
//!    Theil-Sen line (Theil 1950; Sen 1968, JASA 63, 1379-1389: the median
//!    of all pairwise slopes, then the median intercept) through the last
//!    [`TREND_DAYS`] days, read at the last day. Medians break down only
//!    when about a third of the days are wrong, so a holiday week barely
//!    moves the level. Medians of lognormal noise sit exp(s^2 / 2) below
//!    the mean (s the daily log spread of step 4); the level is scaled up
//!    by that, so it is the units of an average day. The trend is linear in units, reported relative to
//!    the level: `trend_per_week` 0.01 adds 1% of the level each week.
//! 4. **Spread.** `daily_cv`: day-to-day noise over the whole history
//!    (a stable property, and a robust spread needs many days): each
//!    day's log level less the mean of the seven
//!    days centred on it, its spread as 1.4826 x the median absolute
//!    deviation (a robust standard deviation for normal data) times
//!    sqrt(7/6) (the centred mean takes a seventh of iid noise's
//!    variance), turned into a lognormal coefficient of variation
//!    `sqrt(exp(s^2) - 1)`. `level_cv`: how far a four-week total strays
//!    from what the model forecast four weeks before, by rolling origin
//!    (every week from the fifth on): the robust spread of the log ratio
//!    of actual to forecast totals, less the part daily noise explains
//!    (s_D^2 / 28), as a lognormal coefficient of variation; with fewer
//!    than [`MIN_ORIGINS`] origins, the standard error of a median level
//!    instead (1.2533 x s_D / sqrt(28), the median's efficiency for normal
//!    data).
//!
//! [`holdout_mape`] fits on all but the last four weeks and scores the
//! forecast of those weeks by the mean absolute percentage error.

use chrono::{Datelike, Duration, NaiveDate};
use serde::Serialize;

/// STL's parameters: period, seasonal, trend and low-pass smoother lengths,
/// inner and outer (robustness) iterations. The smoothers are locally
/// linear and evaluated at every point (jumps of 1), as statsmodels'
/// defaults.
pub const STL: StlSettings = StlSettings {
    period: 7,
    seasonal: 13,
    trend: 15,
    low_pass: 9,
    inner: 2,
    outer: 15,
};

/// The shortest history that can be fitted: four weeks.
pub const MIN_DAYS: usize = 28;
/// Days whose seasonal component makes the weekday pattern.
pub const PATTERN_DAYS: usize = 84;
/// Days whose median is the level when there is no trend.
pub const LEVEL_DAYS: usize = 28;
/// Days the trend line runs through.
pub const TREND_DAYS: usize = 84;
/// The held-out span and the horizon of `level_cv`: four weeks.
pub const HOLDOUT_DAYS: usize = 28;
/// Fewest rolling origins for `level_cv` from forecast errors.
pub const MIN_ORIGINS: usize = 4;
/// Median absolute deviation to standard deviation for normal data.
const MAD_TO_SD: f64 = 1.4826;

/// The settings of the decomposition (see [`STL`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct StlSettings {
    /// Days in a season.
    pub period: usize,
    /// Seasonal smoother length, in seasons.
    pub seasonal: usize,
    /// Trend smoother length, in days.
    pub trend: usize,
    /// Low-pass filter length, in days.
    pub low_pass: usize,
    /// Inner loop iterations.
    pub inner: usize,
    /// Robustness iterations.
    pub outer: usize,
}

/// A fitted model of a pool's daily units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fit {
    /// Units on an average day at the history's last day.
    pub level: f64,
    /// Multipliers, Monday first, averaging 1.
    pub weekday_pattern: [f64; 7],
    /// Relative change of the level per week (0 without a trend).
    pub trend_per_week: f64,
    /// Day-to-day noise as a coefficient of variation.
    pub daily_cv: f64,
    /// The forecast's level error over four weeks, as a coefficient of
    /// variation.
    pub level_cv: f64,
}

/// Why a history cannot be fitted.
#[derive(Debug, Clone, PartialEq)]
pub enum FitError {
    /// Fewer than [`MIN_DAYS`] days.
    TooShort {
        /// Days the history has.
        days: usize,
    },
    /// Every day of the recent weeks has no units.
    NoTraffic,
    /// The decomposition refused the series (its message).
    Decomposition(String),
}

impl std::fmt::Display for FitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            FitError::TooShort { days } => write!(
                f,
                "the history has {days} days; a fit needs at least {MIN_DAYS} (four weeks)"
            ),
            FitError::NoTraffic => f.write_str("the history's recent weeks have no units"),
            FitError::Decomposition(e) => write!(f, "the decomposition failed: {e}"),
        }
    }
}

impl Fit {
    /// The forecast for `date`, where `last` is the history's last day:
    /// level x (1 + trend per week x weeks since `last`) x the weekday's
    /// multiplier, never below 0.
    pub fn units_on(&self, last: NaiveDate, date: NaiveDate) -> f64 {
        let weeks = (date - last).num_days() as f64 / 7.0;
        let wd = date.weekday().num_days_from_monday() as usize;
        (self.level * (1.0 + self.trend_per_week * weeks)).max(0.0) * self.weekday_pattern[wd]
    }
}

/// Fits the daily `units` whose first day is `start`.
pub fn fit(start: NaiveDate, units: &[f64], trend: bool) -> Result<Fit, FitError> {
    let n = units.len();
    if n < MIN_DAYS {
        return Err(FitError::TooShort { days: n });
    }
    let logs: Vec<f64> = units.iter().map(|&u| u.max(1.0).ln()).collect();
    let stl = decompose(&logs)?;
    let weekday = |i: usize| weekday_of(start, i);

    // 2. The weekday pattern from the recent seasonal component.
    let mut sum = [0.0; 7];
    let mut count = [0usize; 7];
    for i in n.saturating_sub(PATTERN_DAYS)..n {
        sum[weekday(i)] += stl.seasonal[i].exp();
        count[weekday(i)] += 1;
    }
    let mut pattern = [1.0; 7];
    for d in 0..7 {
        pattern[d] = sum[d] / count[d] as f64;
    }
    let mean = pattern.iter().sum::<f64>() / 7.0;
    for m in &mut pattern {
        *m /= mean;
    }

    // 3. Level and trend from the deseasonalised days.
    let levels: Vec<f64> = (0..n).map(|i| units[i] / pattern[weekday(i)]).collect();
    let (median_level, median_slope) = level_and_slope(&levels, trend);
    if median_level <= 0.0 {
        return Err(FitError::NoTraffic);
    }

    // 4. The spread.
    let logs: Vec<f64> = (0..n)
        .map(|i| (units[i].max(1.0) / pattern[weekday(i)]).ln())
        .collect();
    let s_daily = daily_spread(&logs);
    // The medians are of lognormal noise: exp(s^2 / 2) turns them into
    // means, so `level` is the units of an average day.
    let to_mean = (s_daily * s_daily / 2.0).exp();
    let (level, slope) = (median_level * to_mean, median_slope * to_mean);
    let daily_cv = lognormal_cv(s_daily);
    let level_cv = level_cv(&levels, trend, s_daily);

    Ok(Fit {
        level,
        weekday_pattern: pattern,
        trend_per_week: if trend { 7.0 * slope / level } else { 0.0 },
        daily_cv,
        level_cv,
    })
}

/// The mean absolute percentage error of the fit on all but the last four
/// weeks, over those weeks (days with no units left out); `None` when the
/// rest is shorter than [`MIN_DAYS`] or cannot be fitted.
pub fn holdout_mape(start: NaiveDate, units: &[f64], trend: bool) -> Option<f64> {
    let n = units.len();
    if n < MIN_DAYS + HOLDOUT_DAYS {
        return None;
    }
    let cut = n - HOLDOUT_DAYS;
    let f = fit(start, &units[..cut], trend).ok()?;
    let last = start + Duration::days(cut as i64 - 1);
    let (mut total, mut days) = (0.0, 0usize);
    for (i, &actual) in units.iter().enumerate().skip(cut) {
        if actual > 0.0 {
            let predicted = f.units_on(last, start + Duration::days(i as i64));
            total += (actual - predicted).abs() / actual;
            days += 1;
        }
    }
    (days > 0).then(|| total / days as f64)
}

struct Decomposition {
    seasonal: Vec<f64>,
}

fn decompose(series: &[f64]) -> Result<Decomposition, FitError> {
    let s = STL;
    let r = stlrs::Stl::params()
        .seasonal_length(s.seasonal)
        .trend_length(s.trend)
        .low_pass_length(s.low_pass)
        .seasonal_degree(1)
        .trend_degree(1)
        .low_pass_degree(1)
        .seasonal_jump(1)
        .trend_jump(1)
        .low_pass_jump(1)
        .inner_loops(s.inner)
        .outer_loops(s.outer)
        .robust(true)
        .fit(series, s.period)
        .map_err(|e| FitError::Decomposition(e.to_string()))?;
    let (seasonal, _trend, _remainder, _weights) = r.into_parts();
    Ok(Decomposition { seasonal })
}

fn weekday_of(start: NaiveDate, i: usize) -> usize {
    ((start.weekday().num_days_from_monday() as usize) + i) % 7
}

/// The level at the last day and the slope per day (0 without a trend).
fn level_and_slope(levels: &[f64], trend: bool) -> (f64, f64) {
    let n = levels.len();
    if !trend {
        return (median(&levels[n.saturating_sub(LEVEL_DAYS)..]), 0.0);
    }
    let from = n.saturating_sub(TREND_DAYS);
    let (level, slope) = theil_sen(&levels[from..]);
    (level, slope)
}

/// Theil-Sen line through `y` at x = 0, 1, ...: the median pairwise slope
/// and the median intercept, returned as the line's value at the last x
/// and its slope.
fn theil_sen(y: &[f64]) -> (f64, f64) {
    let n = y.len();
    let mut slopes = Vec::with_capacity(n * (n - 1) / 2);
    for i in 0..n {
        for j in i + 1..n {
            slopes.push((y[j] - y[i]) / (j - i) as f64);
        }
    }
    let slope = median(&slopes);
    let last = (n - 1) as f64;
    let at_last: Vec<f64> = y
        .iter()
        .enumerate()
        .map(|(i, &v)| v + slope * (last - i as f64))
        .collect();
    (median(&at_last), slope)
}

/// `level_cv` by rolling origin (see the module notes).
fn level_cv(levels: &[f64], trend: bool, s_daily: f64) -> f64 {
    let n = levels.len();
    let mut errors = Vec::new();
    let mut origin = MIN_DAYS;
    while origin + HOLDOUT_DAYS <= n {
        let (level, slope) = level_and_slope(&levels[..origin], trend);
        let forecast: f64 = (0..HOLDOUT_DAYS)
            .map(|k| (level + slope * (k + 1) as f64).max(0.0))
            .sum();
        let actual: f64 = levels[origin..origin + HOLDOUT_DAYS].iter().sum();
        if forecast > 0.0 && actual > 0.0 {
            errors.push((actual / forecast).ln());
        }
        origin += 7;
    }
    let noise = s_daily * s_daily / HOLDOUT_DAYS as f64;
    if errors.len() >= MIN_ORIGINS {
        let spread = MAD_TO_SD * median(&errors.iter().map(|e| e.abs()).collect::<Vec<_>>());
        lognormal_cv((spread * spread - noise).max(0.0).sqrt())
    } else {
        lognormal_cv(1.2533 * s_daily / (LEVEL_DAYS as f64).sqrt())
    }
}

/// The robust sd of each day's log level about the mean of the
/// seven days centred on it, scaled by sqrt(7 / 6) (for iid noise that
/// difference has variance 6/7 of the noise's).
fn daily_spread(logs: &[f64]) -> f64 {
    let n = logs.len();
    let from = 3;
    let deviations: Vec<f64> = (from..n.saturating_sub(3))
        .map(|t| logs[t] - logs[t - 3..=t + 3].iter().sum::<f64>() / 7.0)
        .collect();
    robust_sd(&deviations) * (7.0f64 / 6.0).sqrt()
}

/// 1.4826 x the median absolute deviation from the median.
fn robust_sd(x: &[f64]) -> f64 {
    let m = median(x);
    MAD_TO_SD * median(&x.iter().map(|v| (v - m).abs()).collect::<Vec<_>>())
}

/// The coefficient of variation of a lognormal whose log has sd `s`.
fn lognormal_cv(s: f64) -> f64 {
    (s * s).exp_m1().sqrt()
}

fn median(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    let mut v = x.to_vec();
    v.sort_by(f64::total_cmp);
    let k = v.len() / 2;
    if v.len() % 2 == 1 {
        v[k]
    } else {
        (v[k - 1] + v[k]) / 2.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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

    /// `days` of history starting on a Monday: `level` at the last day,
    /// a linear trend of `trend` of the level per week, lognormal daily
    /// noise with coefficient of variation `cv`.
    fn history(days: usize, level: f64, trend: f64, cv: f64, seed: u64) -> Vec<f64> {
        let mut rng = Rng(seed);
        let s = (1.0 + cv * cv).ln().sqrt();
        let p = pattern();
        (0..days)
            .map(|i| {
                let weeks = (i as f64 - (days - 1) as f64) / 7.0;
                let noise = (s * rng.normal() - s * s / 2.0).exp();
                level * (1.0 + trend * weeks) * p[i % 7] * noise
            })
            .collect()
    }

    fn monday() -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 6, 1).unwrap()
    }

    // Tolerances. With daily noise of coefficient of variation c, a
    // weekday's multiplier rests on the 12 recent weeks (standard error
    // about c / sqrt(12)) and the level on the median of 28 days (about
    // 1.25 c / sqrt(28)); at c = 2% both are near 0.6%, so 2% is over three
    // standard errors, checked on five seeds each.

    #[test]
    fn recovers_pattern_and_level_without_a_trend() {
        for seed in 1..=5 {
            let h = history(182, 20_000.0, 0.0, 0.02, seed);
            let f = fit(monday(), &h, false).unwrap();
            for (got, want) in f.weekday_pattern.iter().zip(pattern()) {
                assert!((got / want - 1.0).abs() < 0.02, "seed {seed}: {f:?}");
            }
            assert!(
                (f.level / 20_000.0 - 1.0).abs() < 0.02,
                "seed {seed}: {f:?}"
            );
            assert_eq!(f.trend_per_week, 0.0);
            // No level wander was put in: the level error is small.
            assert!(f.level_cv < 0.01, "seed {seed}: {f:?}");
            let mean = f.weekday_pattern.iter().sum::<f64>() / 7.0;
            assert!((mean - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn recovers_the_daily_noise() {
        // From a year of days the estimate's standard error is about 8% of
        // the truth (measured over 40 seeds, no bias beyond 3%); 25% is
        // three of them.
        for (cv, seed) in [(0.03, 1), (0.08, 2), (0.15, 3), (0.08, 4)] {
            let h = history(364, 20_000.0, 0.0, cv, seed);
            let f = fit(monday(), &h, false).unwrap();
            assert!((f.daily_cv / cv - 1.0).abs() < 0.25, "cv {cv}: {f:?}");
        }
    }

    #[test]
    fn recovers_a_linear_trend() {
        // +1.5% of the final level per week over 26 weeks; the trend within
        // 0.2 percentage points a week (Theil-Sen over 12 weeks), the level
        // and the pattern within 2%.
        for seed in 1..=5 {
            let h = history(182, 10_000.0, 0.015, 0.02, seed);
            let f = fit(monday(), &h, true).unwrap();
            assert!(
                (f.trend_per_week - 0.015).abs() < 0.002,
                "seed {seed}: {f:?}"
            );
            assert!(
                (f.level / 10_000.0 - 1.0).abs() < 0.02,
                "seed {seed}: {f:?}"
            );
            for (got, want) in f.weekday_pattern.iter().zip(pattern()) {
                assert!((got / want - 1.0).abs() < 0.02, "seed {seed}: {f:?}");
            }
        }
    }

    #[test]
    fn a_holiday_and_an_outage_barely_move_the_level() {
        let clean = history(126, 8_000.0, 0.0, 0.04, 7);
        let mut h = clean.clone();
        // A three-day holiday at 40% and a two-day tracking outage (zeros)
        // in the last four weeks.
        for u in &mut h[105..108] {
            *u *= 0.4;
        }
        h[115] = 0.0;
        h[116] = 0.0;
        let a = fit(monday(), &clean, false).unwrap();
        let b = fit(monday(), &h, false).unwrap();
        assert!((b.level / a.level - 1.0).abs() < 0.02, "{a:?} {b:?}");
        for (x, y) in a.weekday_pattern.iter().zip(b.weekday_pattern) {
            assert!((x / y - 1.0).abs() < 0.03, "{a:?} {b:?}");
        }
        // A mean of the same days would have dropped by about 9%.
        let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
        assert!(mean(&h[98..]) / mean(&clean[98..]) < 0.93);
    }

    #[test]
    fn level_wander_shows_in_level_cv_not_daily_cv() {
        // Each week's level is off by a lognormal factor with cv 0.08.
        let mut rng = Rng(99);
        let mut h = history(364, 5_000.0, 0.0, 0.03, 3);
        let s = (1.0f64 + 0.08 * 0.08).ln().sqrt();
        for week in h.chunks_mut(7) {
            let f = (s * rng.normal()).exp();
            week.iter_mut().for_each(|u| *u *= f);
        }
        let f = fit(monday(), &h, false).unwrap();
        assert!(f.level_cv > 0.04 && f.level_cv < 0.2, "{f:?}");
        assert!(f.daily_cv < 0.06, "{f:?}");
    }

    #[test]
    fn holdout_mape_matches_the_noise() {
        // With 5% lognormal noise and no wander the held-out MAPE is about
        // 5% x sqrt(2 / pi) = 4%.
        let h = history(140, 12_000.0, 0.0, 0.05, 11);
        let m = holdout_mape(monday(), &h, false).unwrap();
        assert!(m > 0.025 && m < 0.06, "{m}");
        assert_eq!(holdout_mape(monday(), &h[..50], false), None);
    }

    #[test]
    fn the_forecast_follows_trend_and_pattern() {
        let f = Fit {
            level: 1000.0,
            weekday_pattern: [1.4, 1.0, 1.0, 1.0, 1.0, 0.8, 0.8],
            trend_per_week: 0.1,
            daily_cv: 0.0,
            level_cv: 0.0,
        };
        let last = NaiveDate::from_ymd_opt(2026, 6, 7).unwrap(); // a Sunday
        let next_monday = last + Duration::days(1);
        assert!((f.units_on(last, next_monday) - 1000.0 * (1.0 + 0.1 / 7.0) * 1.4).abs() < 1e-9);
        assert!((f.units_on(last, last + Duration::days(14)) - 1200.0 * 0.8).abs() < 1e-9);
        // A falling trend stops at zero.
        let down = Fit {
            trend_per_week: -0.5,
            ..f
        };
        assert_eq!(down.units_on(last, last + Duration::days(28)), 0.0);
    }

    #[test]
    fn short_or_empty_histories_are_refused() {
        assert_eq!(
            fit(monday(), &[100.0; 27], false),
            Err(FitError::TooShort { days: 27 })
        );
        assert_eq!(fit(monday(), &[0.0; 60], false), Err(FitError::NoTraffic));
    }
}
