//! The fitted model's types, below everything that fits, backtests or
//! reads them: the [`Fit`] a portfolio's pool keeps with its history, the
//! level's [`LevelPath`] after it, the [`Backtest`] summary with its
//! [`OriginRange`]s, and how the level's spread grows ([`grown`]).

use chrono::{Datelike, NaiveDate};
use serde::{Deserialize, Serialize};

/// A fitted model of a pool's daily units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Fit {
    /// Units on an average day at the history's last day.
    pub level: f64,
    /// Multipliers, Monday first, averaging 1.
    pub weekday_pattern: [f64; 7],
    /// Relative change of the level per week at the history's end (0
    /// without a trend); with a year of history, growth year over year
    /// spread over its weeks.
    pub trend_per_week: f64,
    /// The path of the level after the history (trend and season); `None`
    /// when flat.
    pub path: Option<LevelPath>,
    /// Whether the yearly season shapes the forecast.
    pub yearly_season: bool,
    /// A recent shift of the level, when one was found.
    pub shift: Option<Shift>,
    /// How the level was made.
    pub level_rule: LevelRule,
    /// The newest days set aside as too few to tell a shift from a
    /// holiday (at most three).
    pub newest_set_aside: usize,
    /// Day-to-day noise as a coefficient of variation.
    pub daily_cv: f64,
    /// The forecast's level error four weeks out, as a coefficient of
    /// variation, calibrated by the backtest.
    pub level_cv: f64,
    /// How the level error's spread grows further out: on a day t days
    /// after the history, `max(1, t/28)^level_growth` times four weeks'
    /// (calibrated by the backtest; 0 without one).
    pub level_growth: f64,
    /// The backtest from rolling origins, when the history has room for it.
    pub backtest: Option<Backtest>,
}

/// A change of a pool's level.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Shift {
    /// The first day at the new level.
    pub date: NaiveDate,
    /// The relative change: −0.3 is a 30% drop.
    pub change: f64,
    /// Usable days since it, up to the history's last day.
    pub days_after: usize,
}

/// How a fit's level was made.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LevelRule {
    /// The median of the last four weeks' days.
    Recent,
    /// The median of the days since a shift, a week of them or more.
    SinceShift,
    /// The median of the four to six days since a shift: fewer than a
    /// week, so each weekday is seen at most once and the level is rough.
    ShortSinceShift,
}

impl Fit {
    /// The forecast for `date` (after the history's last day): level x the
    /// path's factor x the weekday's multiplier.
    pub fn units_on(&self, date: NaiveDate) -> f64 {
        let wd = date.weekday().num_days_from_monday() as usize;
        let path = self.path.as_ref().map_or(1.0, |p| p.factor(date));
        self.level * path * self.weekday_pattern[wd]
    }
}

/// The path of a pool's level after its history's last day, fitted from
/// the history: a trend (damped when the history is shorter than a year)
/// and, with a year or more of history, the yearly season. On `date` the
/// level is `daily x` [`LevelPath::factor`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LevelPath {
    /// The day the level is `daily` (the history's last day).
    pub from: NaiveDate,
    /// The trend: the log of the level's change per week at `from`.
    pub per_week: f64,
    /// The trend's damping per week (Gardner & McKenzie 1985): week w
    /// after `from` adds `per_week x damping^w`; 1 keeps it constant.
    pub damping: f64,
    /// The yearly season: the log of the level on day `from + 1 + i`
    /// against `from`, for a year; later days repeat it. Empty without
    /// one.
    #[serde(skip)]
    pub season: Vec<f64>,
}

impl LevelPath {
    /// The level on `date` over the level on `from`. Before `from` the
    /// trend runs back undamped and the season is left out.
    pub fn factor(&self, date: NaiveDate) -> f64 {
        let days = (date - self.from).num_days();
        let weeks = days as f64 / 7.0;
        let trend = if days <= 0 || self.damping >= 1.0 {
            self.per_week * weeks
        } else {
            let phi = self.damping;
            self.per_week * phi * (1.0 - phi.powf(weeks)) / (1.0 - phi)
        };
        let season = match (days, self.season.len()) {
            (d, len) if d > 0 && len > 0 => self.season[(d as usize - 1) % len],
            _ => 0.0,
        };
        (trend + season).exp()
    }
}

/// A pool's backtest, in the JSON of `sluice forecast`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Backtest {
    /// The origins forecast from.
    pub origins: usize,
    /// Mean absolute percentage error of the daily forecast one week ahead.
    pub mape_1w: Option<f64>,
    /// The same four weeks ahead.
    pub mape_4w: Option<f64>,
    /// The same thirteen weeks ahead.
    pub mape_13w: Option<f64>,
    /// The share of origins whose four-week total fell in its P10-P90
    /// range.
    pub coverage_4w: Option<f64>,
    /// The same for thirteen-week totals.
    pub coverage_13w: Option<f64>,
    /// Each origin's four-week total against its range, oldest first (for
    /// the chart).
    #[serde(skip)]
    pub ranges: Vec<OriginRange>,
}

/// One origin's four-week total: forecast, P10-P90 range and what came.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct OriginRange {
    /// The first day forecast.
    pub from: NaiveDate,
    /// The last day forecast.
    pub to: NaiveDate,
    /// The forecast total.
    pub forecast: f64,
    /// Its P10.
    pub low: f64,
    /// Its P90.
    pub high: f64,
    /// The actual total.
    pub actual: f64,
}

/// How much the level's spread has grown `days` days after the forecast's
/// origin: `max(1, days / 28)^growth`.
pub fn grown(days: i64, growth: f64) -> f64 {
    (days as f64 / 28.0).max(1.0).powf(growth)
}
