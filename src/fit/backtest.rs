//! The backtest: how well the fit of [`super`] forecast a pool's own
//! history, and the calibration of the spread behind result ranges.
//!
//! From rolling origins (every week over the last year of the history,
//! each with at least [`MIN_FIT_DAYS`] days before it) the fit that
//! planning uses (`fit_point` in `point.rs`, never a copy of it) is made
//! on the days before the origin only, and forecasts the next 13 weeks.
//! The forecast is scored as in Hyndman & Athanasopoulos ("Forecasting:
//! Principles and Practice", 3rd ed. 2021, §5.10, time series
//! cross-validation): the mean absolute percentage error of the daily
//! forecasts in the 1st, 4th and 13th week ahead, and, for the 4- and
//! 13-week totals, the log ratio of actual to forecast. Days with no units
//! or under an event count in neither.
//!
//! `level_cv` is then calibrated on those totals' errors: the level
//! spread σL for which the P10-P90 range of a total (lognormal, log sd
//! `sqrt(σL² + σD² / days)`, mean 1, as the simulation of result ranges
//! draws it) holds a share of the real totals closest to 80% at both
//! horizons (the larger of the two distances from 80% is the least; the
//! smallest such σL). The coverage reported is that range's, on the same
//! origins.

pub use super::model::{Backtest, OriginRange};

use super::model::grown;
use super::point::{fit_point, lognormal_cv};
use chrono::{Duration, NaiveDate};

/// The fewest days a backtest origin fits on.
pub const MIN_FIT_DAYS: usize = 56;
/// The most origins: a year of weeks.
pub const MAX_ORIGINS: usize = 52;
/// The fewest four-week totals that calibrate `level_cv`.
pub const MIN_ORIGINS: usize = 4;
/// The standard normal's 90% quantile.
const Z90: f64 = 1.281_551_565_544_600_4;

/// One total's error: log(actual / forecast), its horizon in days and
/// the days it counts.
struct TotalError {
    error: f64,
    horizon: usize,
    days: usize,
    from: NaiveDate,
    forecast: f64,
    actual: f64,
}

/// The backtest of `units` from `start`, and the calibrated `level_cv`
/// and `level_growth` (`None` with fewer than [`MIN_ORIGINS`] four-week
/// totals).
pub fn run(
    start: NaiveDate,
    units: &[f64],
    trend: bool,
    skip: &[bool],
    daily_cv: f64,
) -> (Option<Backtest>, Option<(f64, f64)>) {
    let n = units.len();
    let usable = |i: usize| units[i] > 0.0 && !skip.get(i).copied().unwrap_or(false);
    let mut weeks: [Vec<f64>; 3] = Default::default();
    let mut totals = Vec::new();
    let mut origins = 0;
    let mut o = n.saturating_sub(7);
    while o >= MIN_FIT_DAYS && origins < MAX_ORIGINS {
        if let Ok(f) = fit_point(start, &units[..o], trend, &skip[..o.min(skip.len())]) {
            origins += 1;
            let ahead = (n - o).min(91);
            let forecast: Vec<f64> = (0..ahead)
                .map(|k| f.units_on(start + Duration::days((o + k) as i64)))
                .collect();
            for (w, week) in [1usize, 4, 13].iter().enumerate() {
                for k in 7 * (week - 1)..(7 * week).min(ahead) {
                    if usable(o + k) {
                        weeks[w].push((units[o + k] - forecast[k]).abs() / units[o + k]);
                    }
                }
            }
            for horizon in [28usize, 91] {
                if ahead < horizon {
                    continue;
                }
                let (mut a, mut fc, mut days) = (0.0, 0.0, 0);
                for k in (0..horizon).filter(|&k| usable(o + k)) {
                    a += units[o + k];
                    fc += forecast[k];
                    days += 1;
                }
                if a > 0.0 && fc > 0.0 {
                    totals.push(TotalError {
                        error: (a / fc).ln(),
                        horizon,
                        days,
                        from: start + Duration::days(o as i64),
                        forecast: fc,
                        actual: a,
                    });
                }
            }
        }
        o -= 7;
    }
    if origins == 0 {
        return (None, None);
    }
    let mean = |v: &[f64]| (!v.is_empty()).then(|| v.iter().sum::<f64>() / v.len() as f64);
    let s_daily = (1.0 + daily_cv * daily_cv).ln().sqrt();
    let four = totals.iter().filter(|t| t.horizon == 28).count();
    let spread = (four >= MIN_ORIGINS).then(|| calibrate(&totals, s_daily));
    let coverage = |h: usize| {
        let s = spread?;
        let of: Vec<&TotalError> = totals.iter().filter(|t| t.horizon == h).collect();
        (!of.is_empty())
            .then(|| of.iter().filter(|t| covered(t, s, s_daily)).count() as f64 / of.len() as f64)
    };
    let mut ranges: Vec<OriginRange> = totals
        .iter()
        .filter(|t| t.horizon == 28)
        .map(|t| {
            let (level, growth) = spread.unwrap_or((0.0, 0.0));
            let l = level * mean_growth(t, growth);
            let st = (l * l + s_daily * s_daily / t.days.max(1) as f64).sqrt();
            OriginRange {
                from: t.from,
                to: t.from + Duration::days(t.horizon as i64 - 1),
                forecast: t.forecast,
                low: t.forecast * (-Z90 * st - st * st / 2.0).exp(),
                high: t.forecast * (Z90 * st - st * st / 2.0).exp(),
                actual: t.actual,
            }
        })
        .collect();
    ranges.reverse();
    let summary = Backtest {
        origins,
        mape_1w: mean(&weeks[0]),
        mape_4w: mean(&weeks[1]),
        mape_13w: mean(&weeks[2]),
        coverage_4w: coverage(28),
        coverage_13w: coverage(91),
        ranges,
    };
    (Some(summary), spread.map(|(s, g)| (lognormal_cv(s), g)))
}

/// The ranges a chart of the history from `first` on shows: four weeks
/// apart, counted back from the latest, each wholly on or after `first`.
pub fn shown(b: &Backtest, first: NaiveDate) -> Vec<OriginRange> {
    let mut out: Vec<OriginRange> = b
        .ranges
        .iter()
        .rev()
        .step_by(4)
        .filter(|r| r.from >= first)
        .copied()
        .collect();
    out.reverse();
    out
}

/// The level's growth averaged over the days of total `t`: each day's
/// `max(1, k/28)^growth`, as the simulation draws them (one draw for all).
fn mean_growth(t: &TotalError, growth: f64) -> f64 {
    if growth == 0.0 {
        return 1.0;
    }
    (1..=t.horizon)
        .map(|k| grown(k as i64, growth))
        .sum::<f64>()
        / t.horizon as f64
}

/// Whether `t` fell in its P10-P90 range when the level's log sd over its
/// days is `level` and the days' own is `daily`.
fn held(t: &TotalError, level: f64, daily: f64) -> bool {
    let s = (level * level + daily * daily / t.days.max(1) as f64).sqrt();
    let centre = -s * s / 2.0;
    (t.error - centre).abs() <= Z90 * s
}

/// Whether `t` fell in its P10-P90 range at level spread `(σ, growth)`.
fn covered(t: &TotalError, (level, growth): (f64, f64), daily: f64) -> bool {
    held(t, level * mean_growth(t, growth), daily)
}

/// The most steps of the calibration's search of σ: up to 1 (a
/// coefficient of variation of 1.3), past which a forecast says nothing.
const MAX_STEPS: usize = 2000;
/// The growths tried, in tenths: 0 to 1 (1: the spread grows in
/// proportion to the days ahead).
const GROWTHS: usize = 10;

/// The level spread `(σ, growth)` (σ in steps of 0.0005, growth in
/// tenths; the smallest growth, then σ, among equals) whose coverage of
/// each horizon's totals lies closest to 80%: the largest distance from
/// 80% over the horizons is the least, then their sum.
fn calibrate(totals: &[TotalError], daily: f64) -> (f64, f64) {
    // Each total's mean growth at each growth tried, worked out once.
    let grown: Vec<Vec<f64>> = totals
        .iter()
        .map(|t| {
            (0..=GROWTHS)
                .map(|g| mean_growth(t, g as f64 / GROWTHS as f64))
                .collect()
        })
        .collect();
    let share = |(level, g): (f64, usize), h: usize| {
        let of: Vec<usize> = (0..totals.len())
            .filter(|&i| totals[i].horizon == h)
            .collect();
        if of.is_empty() {
            return None;
        }
        let n = of
            .iter()
            .filter(|&&i| held(&totals[i], level * grown[i][g], daily))
            .count();
        Some(n as f64 / of.len() as f64)
    };
    // The largest and the summed distance from 80%, compared in that order.
    let miss = |spread: (f64, usize)| {
        let misses: Vec<f64> = [28, 91]
            .iter()
            .filter_map(|&h| share(spread, h))
            .map(|c| (c - 0.8).abs())
            .collect();
        (
            misses.iter().copied().fold(0.0, f64::max),
            misses.iter().sum::<f64>(),
        )
    };
    // A coarse pass every tenth step, then every step about the best;
    // among equals the smallest growth, then the smallest spread.
    let mut best = ((0usize, 0usize), (f64::INFINITY, f64::INFINITY));
    let consider = |best: &mut ((usize, usize), (f64, f64)), step: usize, g: usize| {
        let m = miss((step as f64 * 0.0005, g));
        let (at, was) = *best;
        let equal = (m.0 - was.0).abs() < 1e-12 && (m.1 - was.1).abs() < 1e-12;
        let better = m.0 < was.0 - 1e-12
            || ((m.0 - was.0).abs() < 1e-12 && m.1 < was.1 - 1e-12)
            || (equal && (g, step) < (at.1, at.0));
        if better {
            *best = ((step, g), m);
        }
    };
    for g in 0..=GROWTHS {
        for step in (0..=MAX_STEPS).step_by(10) {
            consider(&mut best, step, g);
        }
    }
    let (coarse, g) = best.0;
    for step in coarse.saturating_sub(10)..=(coarse + 10).min(MAX_STEPS) {
        consider(&mut best, step, g);
    }
    let best = best.0;
    (best.0 as f64 * 0.0005, best.1 as f64 / GROWTHS as f64)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t(error: f64, horizon: usize) -> TotalError {
        TotalError {
            error,
            horizon,
            days: horizon,
            from: NaiveDate::from_ymd_opt(2026, 1, 5).unwrap(),
            forecast: 1.0,
            actual: error.exp(),
        }
    }

    #[test]
    fn calibration_covers_four_in_five_totals() {
        // Ten four-week errors from -10% to +10% in log; no daily noise.
        let totals: Vec<TotalError> = (0..10)
            .map(|i| t(-0.1 + 0.02 * i as f64 + 0.01, 28))
            .collect();
        let s = calibrate(&totals, 0.0);
        let held = totals.iter().filter(|x| covered(x, s, 0.0)).count();
        assert_eq!(held, 8, "{s:?}");
        // One horizon alone needs no growth.
        assert_eq!(s.1, 0.0);
        // A smaller spread holds fewer.
        let fewer = totals
            .iter()
            .filter(|x| covered(x, (s.0 - 0.002, s.1), 0.0))
            .count();
        assert!(fewer < 8);
    }

    #[test]
    fn calibration_grows_the_spread_when_far_errors_are_wider() {
        // Thirteen-week errors twice as wide as four-week ones: one spread
        // cannot cover 80% of both (it covers all the near totals and too
        // few far ones), so the spread grows with the days ahead and
        // covers eight in ten of each.
        let mut totals: Vec<TotalError> = (0..10)
            .map(|i| t(0.5 * (-0.1 + 0.02 * i as f64 + 0.01), 28))
            .collect();
        totals.extend((0..10).map(|i| t(-0.1 + 0.02 * i as f64 + 0.01, 91)));
        let s = calibrate(&totals, 0.0);
        let held = |h: usize| {
            totals
                .iter()
                .filter(|x| x.horizon == h && covered(x, s, 0.0))
                .count()
        };
        assert_eq!((held(28), held(91)), (8, 8), "{s:?}");
        assert!(s.1 > 0.0, "{s:?}");
    }
}
