//! The `forecast` report: each pool's fitted model, its error on the last
//! four weeks held out, and the days a chart of history and forecast
//! draws. Facts only; `cli::forecast` words them.

use crate::fit::backtest::Backtest;
use crate::fit::{self, LevelRule, Shift};
use crate::portfolio::{Pool, Portfolio};
use chrono::{Duration, NaiveDate};
use serde::Serialize;

/// Weeks of history the chart shows.
pub const CHART_HISTORY_WEEKS: usize = 8;
/// Weeks of forecast the chart shows.
pub const CHART_FORECAST_WEEKS: usize = 4;

/// The report: every pool in file order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ForecastReport {
    /// One per pool (or the one asked for).
    pub pools: Vec<PoolForecast>,
}

/// One pool's forecast model.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PoolForecast {
    /// The pool's id.
    pub id: String,
    /// The pool's label.
    pub label: String,
    /// The history file, when the forecast was fitted from one.
    pub history: Option<HistorySpan>,
    /// Units on an average day: fitted at the history's last day, or the
    /// portfolio's `daily`.
    pub level: f64,
    /// Multipliers, Monday first: fitted (averaging 1) or the portfolio's.
    pub weekday_pattern: [f64; 7],
    /// Relative change of the level per week; 0 without a trend.
    pub trend_per_week: f64,
    /// How the trend is carried forward: `damped` (less than a year of
    /// history), `yearly` (growth year over year with the yearly season)
    /// or `none`.
    pub trend_kind: &'static str,
    /// Whether the yearly season shapes the forecast (a year of history
    /// or more).
    pub yearly_season: bool,
    /// How much the trend alone moves the planning window's total units,
    /// relative (0 without a trend).
    pub trend_effect: f64,
    /// A recent shift of the level found in the history; `null` when none.
    pub shift: Option<Shift>,
    /// Which days the level was taken from.
    pub level_rule: LevelRule,
    /// The newest days set aside as too few to tell a shift from a
    /// holiday.
    pub newest_set_aside: usize,
    /// Known events in the history, left out of the fit.
    pub events: usize,
    /// Day-to-day noise as a coefficient of variation (with a history).
    pub daily_cv: Option<f64>,
    /// The level's error over four weeks as a coefficient of variation
    /// (with a history).
    pub level_cv: Option<f64>,
    /// How that error's spread grows further out: `max(1, t/28)^growth`
    /// on a day t days after the history (with a history).
    pub level_growth: Option<f64>,
    /// Mean absolute percentage error of a fit on all but the last four
    /// weeks, over those weeks (with at least eight weeks of history).
    pub mape: Option<f64>,
    /// Portfolio keys that replace fitted values (`daily`,
    /// `weekday_pattern`).
    pub overridden: Vec<&'static str>,
    /// The forecast's total over the 4 weeks after the history's last day
    /// (with a history).
    pub total_4w: Option<f64>,
    /// The same over 13 weeks.
    pub total_13w: Option<f64>,
    /// The backtest from rolling origins (with `--backtest`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub backtest: Option<Backtest>,
    /// The chart: the last weeks of history and the first weeks of the
    /// forecast after them (with a history).
    #[serde(skip)]
    pub chart: Option<Chart>,
}

/// Where a pool's history came from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HistorySpan {
    /// The file as the portfolio names it.
    pub file: String,
    /// The first day.
    pub from: NaiveDate,
    /// The last day.
    pub to: NaiveDate,
    /// Days in the file.
    pub days: usize,
}

/// Daily units for a chart: history up to its last day, then the
/// pool's forecast (weekday pattern, trend and adjustments).
#[derive(Debug, Clone, PartialEq)]
pub struct Chart {
    /// The history's last days.
    pub history: Vec<f64>,
    /// The forecast's first days after the history.
    pub forecast: Vec<f64>,
}

/// The share of the window's total that the trend alone may move before
/// `sluice forecast` warns.
pub const TREND_WARNING: f64 = 0.10;

/// The report for `p`'s pools, or only `pool` when given (which must
/// exist); `backtest` adds each fitted pool's backtest.
pub fn report(p: &Portfolio, pool: Option<usize>, backtest: bool) -> ForecastReport {
    let pools = p
        .pools
        .iter()
        .enumerate()
        .filter(|(i, _)| pool.is_none_or(|k| k == *i))
        .map(|(_, pool)| {
            let mut f = pool_forecast(pool, p.window.start, p.window.end);
            if !backtest {
                f.backtest = None;
            }
            f
        })
        .collect();
    ForecastReport { pools }
}

/// The relative change of the pool's total over `from..=to` that its
/// trend makes (the season and everything else kept).
fn trend_effect(pool: &Pool, from: NaiveDate, to: NaiveDate) -> f64 {
    let Some(path) = &pool.forecast.level_path else {
        return 0.0;
    };
    if path.per_week == 0.0 {
        return 0.0;
    }
    let mut flat = pool.clone();
    if let Some(p) = &mut flat.forecast.level_path {
        p.per_week = 0.0;
    }
    let total = |pool: &Pool| -> f64 {
        let days = (to - from).num_days().max(0);
        (0..=days)
            .map(|k| super::units_on(pool, from + Duration::days(k)))
            .sum()
    };
    let base = total(&flat);
    if base > 0.0 {
        total(pool) / base - 1.0
    } else {
        0.0
    }
}

fn pool_forecast(pool: &Pool, from: NaiveDate, to: NaiveDate) -> PoolForecast {
    let f = &pool.forecast;
    let Some(h) = &f.history else {
        return PoolForecast {
            id: pool.id.clone(),
            label: pool.label.clone(),
            history: None,
            level: f.daily,
            weekday_pattern: f.weekday,
            trend_per_week: 0.0,
            trend_kind: "none",
            yearly_season: false,
            trend_effect: 0.0,
            shift: None,
            level_rule: LevelRule::Recent,
            newest_set_aside: 0,
            events: 0,
            daily_cv: None,
            level_cv: None,
            level_growth: None,
            mape: None,
            overridden: Vec::new(),
            total_4w: None,
            total_13w: None,
            backtest: None,
            chart: None,
        };
    };
    let mut overridden = Vec::new();
    if f.daily != h.fit.level {
        overridden.push("daily");
    }
    if f.weekday != h.fit.weekday_pattern {
        overridden.push("weekday_pattern");
    }
    let end = h.end();
    let ahead = |days: i64| -> f64 {
        (1..=days)
            .map(|k| super::units_on(pool, end + Duration::days(k)))
            .sum()
    };
    let shown = (CHART_HISTORY_WEEKS * 7).min(h.units.len());
    let chart = Chart {
        history: h.units[h.units.len() - shown..].to_vec(),
        forecast: (1..=CHART_FORECAST_WEEKS as i64 * 7)
            .map(|k| super::units_on(pool, end + Duration::days(k)))
            .collect(),
    };
    PoolForecast {
        id: pool.id.clone(),
        label: pool.label.clone(),
        history: Some(HistorySpan {
            file: h.file.clone(),
            from: h.start,
            to: end,
            days: h.units.len(),
        }),
        level: h.fit.level,
        weekday_pattern: h.fit.weekday_pattern,
        trend_per_week: h.fit.trend_per_week,
        trend_kind: match (h.fit.trend_per_week != 0.0, h.fit.yearly_season) {
            (false, _) => "none",
            (true, true) => "yearly",
            (true, false) => "damped",
        },
        yearly_season: h.fit.yearly_season,
        trend_effect: trend_effect(pool, from, to),
        shift: h.fit.shift,
        level_rule: h.fit.level_rule,
        newest_set_aside: h.fit.newest_set_aside,
        events: h.events.len(),
        daily_cv: Some(h.fit.daily_cv),
        level_cv: Some(h.fit.level_cv),
        level_growth: Some(h.fit.level_growth),
        mape: fit::holdout_mape(h.start, &h.units, h.trend, &h.skipped()),
        overridden,
        total_4w: Some(ahead(28)),
        total_13w: Some(ahead(91)),
        backtest: h.fit.backtest.clone(),
        chart: Some(chart),
    }
}
