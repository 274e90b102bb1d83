//! The fit at one point in time (steps 1 to 7 of [`super`]'s method,
//! without the backtest): what planning uses, and what the backtest makes
//! at each of its origins.

use super::model::{Fit, LevelPath, LevelRule, Shift};
use super::shift::{self, median};
use chrono::{Datelike, Duration, NaiveDate};

/// The shortest history that can be fitted: four weeks.
pub const MIN_DAYS: usize = 28;
/// Days whose ratios make the weekday pattern: a year.
pub const PATTERN_DAYS: usize = 364;
/// Usable days whose median is the level.
pub const LEVEL_DAYS: usize = 28;
/// Days the trend line runs through (less than a year of history).
pub const TREND_DAYS: usize = 84;
/// The recent days searched for a shift.
pub const SHIFT_DAYS: usize = 112;
/// Days in the yearly season (52 weeks, so weekdays line up).
pub const YEAR: usize = 364;
/// Days after a shift that make a full week of levels.
pub const FULL_WEEK: usize = 7;
/// The damping of a trend per week (less than a year of history).
pub const DAMPING: f64 = 0.9;
/// The largest trend per week (less than a year of history), as a log.
pub const MAX_TREND: f64 = 0.02;
/// The largest growth a year (a year of history or more), relative.
pub const MAX_GROWTH: f64 = 0.5;
/// Median absolute deviation to standard deviation for normal data.
const MAD_TO_SD: f64 = 1.4826;
/// Half the yearly smoother's width, in days.
const SMOOTH_HALF: usize = 10;

/// Why a history cannot be fitted.
#[derive(Debug, Clone, PartialEq)]
pub enum FitError {
    /// Fewer than [`MIN_DAYS`] days.
    TooShort {
        /// Days the history has.
        days: usize,
    },
    /// No recent day has units (or every one is left out).
    NoTraffic,
}

impl std::fmt::Display for FitError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            FitError::TooShort { days } => write!(
                f,
                "the history has {days} days; a fit needs at least {MIN_DAYS} (four weeks)"
            ),
            FitError::NoTraffic => {
                f.write_str("the history's recent weeks have no units outside its events")
            }
        }
    }
}

/// The fit without the backtest: `level_cv` from the median's standard
/// error. The backtest calls this at each origin.
pub fn fit_point(
    start: NaiveDate,
    units: &[f64],
    trend: bool,
    skip: &[bool],
) -> Result<Fit, FitError> {
    let n = units.len();
    if n < MIN_DAYS {
        return Err(FitError::TooShort { days: n });
    }
    // 1. Usable days.
    let usable: Vec<bool> = (0..n)
        .map(|i| units[i] > 0.0 && units[i].is_finite() && !skip.get(i).copied().unwrap_or(false))
        .collect();
    if !usable[n.saturating_sub(2 * LEVEL_DAYS)..]
        .iter()
        .any(|&u| u)
    {
        return Err(FitError::NoTraffic);
    }
    let weekday = |i: usize| weekday_of(start, i);

    // 2. The weekday pattern.
    let pattern = weekday_pattern(start, units, &usable);

    // 3. The deseasonalised logs, and the yearly season.
    let y: Vec<f64> = (0..n)
        .map(|i| (units[i].max(1.0) / pattern[weekday(i)]).ln())
        .collect();
    let s_daily = daily_spread(&y, &usable);
    let yearly = n >= YEAR + LEVEL_DAYS;
    let smooth = if yearly {
        smoothed(&y, &usable)
    } else {
        Vec::new()
    };
    let year_ago = |i: usize| -> Option<f64> {
        i.checked_sub(YEAR)
            .and_then(|j| smooth.get(j).copied().flatten())
    };
    let now_ago = year_ago(n - 1);
    // Each day's level on the last day's footing of the season.
    let ya: Vec<f64> = (0..n)
        .map(|i| match (year_ago(i), now_ago) {
            (Some(then), Some(now)) => y[i] - (then - now),
            _ => y[i],
        })
        .collect();

    // 4. A recent shift.
    let recent: Vec<usize> = (0..n).filter(|&i| usable[i]).collect();
    let search_from = recent.partition_point(|&i| i < n.saturating_sub(SHIFT_DAYS));
    let found = shift::find(
        &recent.iter().map(|&i| ya[i]).collect::<Vec<_>>(),
        s_daily,
        search_from,
    );
    let mut used = usable.clone();
    for &p in &found.set_aside {
        used[recent[p]] = false;
    }
    let shift = found.shift.map(|(p, c)| (recent[p], c));
    // `y` with the shift taken out (the old level carried on): for trends.
    let steady = |i: usize| ya[i] - steady_shift(shift, i);
    let days: Vec<usize> = (0..n).filter(|&i| used[i]).collect();

    // 6. The trend, as a log slope per day. Growth year over year is
    // measured with a year of history whether or not a trend is asked
    // for: the season's offsets carry it and must lose it without one.
    let growth = if yearly {
        let g: Vec<f64> = days
            .iter()
            .rev()
            .take(TREND_DAYS)
            .filter_map(|&i| year_ago(i).map(|then| y[i] - steady_shift(shift, i) - then))
            .collect();
        median(&g).clamp(-MAX_GROWTH_LOG, MAX_GROWTH_LOG) / YEAR as f64
    } else {
        0.0
    };
    let slope = if !trend {
        0.0
    } else if yearly {
        growth
    } else {
        let from = days.len().saturating_sub(TREND_DAYS);
        let pts: Vec<(f64, f64)> = days[from..]
            .iter()
            .map(|&i| (i as f64, steady(i)))
            .collect();
        theil_sen_slope(&pts).clamp(-MAX_TREND / 7.0, MAX_TREND / 7.0)
    };

    // 5. The level.
    let (level_days, rule): (Vec<usize>, LevelRule) = match shift {
        Some((k, _)) => {
            let after: Vec<usize> = days.iter().copied().filter(|&i| i >= k).collect();
            let rule = if after.len() >= FULL_WEEK {
                LevelRule::SinceShift
            } else {
                LevelRule::ShortSinceShift
            };
            (after, rule)
        }
        None => (days.clone(), LevelRule::Recent),
    };
    let last = (n - 1) as f64;
    let at_last: Vec<f64> = level_days
        .iter()
        .rev()
        .take(LEVEL_DAYS)
        .map(|&i| ya[i] + slope * (last - i as f64))
        .collect();
    let to_mean = s_daily * s_daily / 2.0;
    let level = (median(&at_last) + to_mean).exp();

    // The path after the last day.
    let season: Vec<f64> = if yearly {
        season_offsets(&smooth, n, growth)
    } else {
        Vec::new()
    };
    let per_week = 7.0 * slope;
    let end = start + Duration::days(n as i64 - 1);
    let path = (per_week != 0.0 || !season.is_empty()).then_some(LevelPath {
        from: end,
        per_week,
        damping: if yearly { 1.0 } else { DAMPING },
        season,
    });

    Ok(Fit {
        level,
        weekday_pattern: pattern,
        trend_per_week: per_week.exp_m1(),
        path,
        yearly_season: yearly,
        shift: shift.map(|(k, c)| Shift {
            date: start + Duration::days(k as i64),
            change: c.exp_m1(),
            days_after: level_days.len(),
        }),
        level_rule: rule,
        newest_set_aside: found.newest_set_aside,
        daily_cv: lognormal_cv(s_daily),
        level_cv: lognormal_cv(1.2533 * s_daily / (LEVEL_DAYS as f64).sqrt()),
        level_growth: 0.0,
        backtest: None,
    })
}

/// [`MAX_GROWTH`] as a log.
const MAX_GROWTH_LOG: f64 = 0.405_465_108_108_164_4; // ln(1.5)

/// The shift's log change on day `i` when it is after the shift, else 0.
fn steady_shift(shift: Option<(usize, f64)>, i: usize) -> f64 {
    match shift {
        Some((k, c)) if i >= k => c,
        _ => 0.0,
    }
}

/// The season for the year after day `n - 1`: for each day `h` ahead,
/// the mean over the years the history covers of the smoothed level a
/// whole number of years before `n - 1 + h` against the same years'
/// level on day `n - 1`, less `growth` per day (the growth year over year
/// those offsets carry; the trend adds it back when asked for).
fn season_offsets(smooth: &[Option<f64>], n: usize, growth: f64) -> Vec<f64> {
    (1..=YEAR)
        .map(|h| {
            let (mut sum, mut count) = (0.0, 0usize);
            let mut k = 1;
            while YEAR * k < n {
                let (j, r) = (n - 1 + h - YEAR * k, n - 1 - YEAR * k);
                if let (Some(Some(a)), Some(Some(b))) = (smooth.get(j), smooth.get(r)) {
                    sum += a - b;
                    count += 1;
                }
                k += 1;
            }
            let o = if count > 0 { sum / count as f64 } else { 0.0 };
            o - growth * h as f64
        })
        .collect()
}

/// The mean absolute percentage error of the fit on all but the last four
/// weeks, over those weeks (days with no units or under an event left
/// out); `None` when the rest is shorter than [`MIN_DAYS`] or cannot be
/// fitted.
pub fn holdout_mape(start: NaiveDate, units: &[f64], trend: bool, skip: &[bool]) -> Option<f64> {
    const HOLDOUT_DAYS: usize = 28;
    let n = units.len();
    if n < MIN_DAYS + HOLDOUT_DAYS {
        return None;
    }
    let cut = n - HOLDOUT_DAYS;
    let f = fit_point(start, &units[..cut], trend, &skip[..cut.min(skip.len())]).ok()?;
    let (mut total, mut days) = (0.0, 0usize);
    for (i, &actual) in units.iter().enumerate().skip(cut) {
        if actual > 0.0 && !skip.get(i).copied().unwrap_or(false) {
            let predicted = f.units_on(start + Duration::days(i as i64));
            total += (actual - predicted).abs() / actual;
            days += 1;
        }
    }
    (days > 0).then(|| total / days as f64)
}

fn weekday_of(start: NaiveDate, i: usize) -> usize {
    ((start.weekday().num_days_from_monday() as usize) + i) % 7
}

/// Step 2: each usable day's units over the mean of the seven usable days
/// centred on it, 10% trimmed mean per weekday, scaled to average 1.
fn weekday_pattern(start: NaiveDate, units: &[f64], usable: &[bool]) -> [f64; 7] {
    let n = units.len();
    let mut ratios: [Vec<f64>; 7] = Default::default();
    for t in n.saturating_sub(PATTERN_DAYS).max(3)..n.saturating_sub(3) {
        if !usable[t - 3..=t + 3].iter().all(|&u| u) {
            continue;
        }
        let mean = units[t - 3..=t + 3].iter().sum::<f64>() / 7.0;
        ratios[weekday_of(start, t)].push(units[t] / mean);
    }
    let mut pattern = [1.0; 7];
    for (d, r) in ratios.iter_mut().enumerate() {
        if !r.is_empty() {
            pattern[d] = trimmed_mean(r, 0.1);
        }
    }
    let mean = pattern.iter().sum::<f64>() / 7.0;
    pattern.map(|m| m / mean)
}

/// The mean of `x` without the lowest and highest `trim` of its values.
fn trimmed_mean(x: &mut [f64], trim: f64) -> f64 {
    x.sort_by(f64::total_cmp);
    let cut = (x.len() as f64 * trim).floor() as usize;
    let kept = &x[cut..x.len() - cut];
    kept.iter().sum::<f64>() / kept.len() as f64
}

/// The smoothed log level: for each day, the median of the usable `y`
/// within [`SMOOTH_HALF`] days of it (`None` with fewer than seven).
fn smoothed(y: &[f64], usable: &[bool]) -> Vec<Option<f64>> {
    let n = y.len();
    (0..n)
        .map(|j| {
            let from = j.saturating_sub(SMOOTH_HALF);
            let to = (j + SMOOTH_HALF).min(n - 1);
            let v: Vec<f64> = (from..=to).filter(|&i| usable[i]).map(|i| y[i]).collect();
            (v.len() >= 7).then(|| median(&v))
        })
        .collect()
}

/// Theil-Sen slope: the median of all pairwise slopes.
fn theil_sen_slope(pts: &[(f64, f64)]) -> f64 {
    let mut slopes = Vec::with_capacity(pts.len() * pts.len() / 2);
    for (i, a) in pts.iter().enumerate() {
        for b in &pts[i + 1..] {
            if b.0 != a.0 {
                slopes.push((b.1 - a.1) / (b.0 - a.0));
            }
        }
    }
    median(&slopes)
}

/// The robust sd of each usable day's `y` about the mean of the seven
/// usable days centred on it, scaled by sqrt(7 / 6) (for iid noise that
/// difference has variance 6/7 of the noise's).
fn daily_spread(y: &[f64], usable: &[bool]) -> f64 {
    let n = y.len();
    let deviations: Vec<f64> = (3..n.saturating_sub(3))
        .filter(|&t| usable[t - 3..=t + 3].iter().all(|&u| u))
        .map(|t| y[t] - y[t - 3..=t + 3].iter().sum::<f64>() / 7.0)
        .collect();
    robust_sd(&deviations) * (7.0f64 / 6.0).sqrt()
}

/// 1.4826 x the median absolute deviation from the median.
pub(crate) fn robust_sd(x: &[f64]) -> f64 {
    let m = median(x);
    MAD_TO_SD * median(&x.iter().map(|v| (v - m).abs()).collect::<Vec<_>>())
}

/// The coefficient of variation of a lognormal whose log has sd `s`.
pub(crate) fn lognormal_cv(s: f64) -> f64 {
    (s * s).exp_m1().sqrt()
}
