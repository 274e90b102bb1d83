//! The text of `sluice forecast`: each pool's traffic model (level,
//! weekday pattern, trend and spread), the error on held-out weeks, and a
//! sparkline of the last weeks of history and the first of forecast. The
//! facts come from [`crate::forecast::report`].

use crate::forecast::fit::LevelRule;
use crate::forecast::report::{self, Chart, ForecastReport, PoolForecast};
use crate::words::{percent, trimmed, units, Count};

const WEEKDAYS: [&str; 7] = ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"];

/// The text report: one block per pool.
pub fn text(r: &ForecastReport) -> String {
    let blocks: Vec<String> = r.pools.iter().map(pool_text).collect();
    blocks.join("\n")
}

fn pool_text(p: &PoolForecast) -> String {
    let mut out = format!("{} ({})\n", p.id, p.label);
    let pattern = p
        .weekday_pattern
        .iter()
        .zip(WEEKDAYS)
        .map(|(m, d)| format!("{d} {m:.2}"))
        .collect::<Vec<_>>()
        .join("  ");
    let Some(h) = &p.history else {
        out.push_str(&format!(
            "  no history: the forecast is typed in the portfolio\n  \
             level            {} units a day\n  weekday pattern  {pattern}\n",
            units(p.level)
        ));
        return out;
    };
    let row = |out: &mut String, name: &str, value: String| {
        out.push_str(&format!("  {name:<16} {value}\n"));
    };
    row(
        &mut out,
        "history",
        format!("{}, {} to {} ({} days)", h.file, h.from, h.to, h.days),
    );
    row(
        &mut out,
        "level",
        format!("{} units on an average day at {}", units(p.level), h.to),
    );
    row(&mut out, "weekday pattern", pattern);
    if let Some(s) = &p.shift {
        row(
            &mut out,
            "shift",
            format!(
                "the level changed by {} from {} ({} usable days since)",
                signed_percent(s.change),
                s.date,
                s.days_after
            ),
        );
    }
    row(&mut out, "level from", level_words(p));
    row(
        &mut out,
        "trend",
        match p.trend_kind {
            "yearly" => format!(
                "{} a year (growth year over year), carried forward",
                signed_percent((1.0 + p.trend_per_week).powi(52) - 1.0)
            ),
            "damped" => format!(
                "{}% a week at the history's end, damped by a tenth each week",
                format_args!(
                    "{}{}",
                    sign(p.trend_per_week),
                    trimmed(p.trend_per_week.abs() * 100.0, 2)
                )
            ),
            _ => "none".to_string(),
        },
    );
    if p.yearly_season {
        row(
            &mut out,
            "season",
            "yearly: the coming weeks follow the same weeks of earlier years".to_string(),
        );
    }
    if p.trend_effect.abs() > report::TREND_WARNING {
        row(
            &mut out,
            "warning",
            format!(
                "the trend alone moves the window's total by {}; check it before planning on it",
                signed_percent(p.trend_effect)
            ),
        );
    }
    if let (Some(d), Some(l)) = (p.daily_cv, p.level_cv) {
        let growth = match p.level_growth {
            Some(g) if g > 0.0 => format!(
                ", widening to {} thirteen weeks out",
                percent(l * crate::forecast::uncertainty::grown(91, g))
            ),
            _ => String::new(),
        };
        row(
            &mut out,
            "spread",
            format!(
                "{} day to day (daily_cv), {} on the level four weeks out (level_cv){growth}; from the backtest",
                percent(d),
                percent(l)
            ),
        );
    }
    row(
        &mut out,
        "held-out error",
        match p.mape {
            Some(m) => format!(
                "{} MAPE on the last four weeks, fitted without them",
                percent(m)
            ),
            None => "needs eight weeks of history (four to fit, four to hold out)".to_string(),
        },
    );
    if let Some(b) = &p.backtest {
        let mape = |m: Option<f64>| m.map_or("-".to_string(), percent);
        row(
            &mut out,
            "backtest",
            format!(
                "from {} weekly origins: MAPE {} one week ahead, {} four weeks, {} thirteen weeks",
                b.origins,
                mape(b.mape_1w),
                mape(b.mape_4w),
                mape(b.mape_13w)
            ),
        );
        let held = |c: Option<f64>| c.map_or("-".to_string(), percent);
        row(
            &mut out,
            "",
            format!(
                "the P10-P90 range held the real total {} of the time over four weeks, {} over thirteen",
                held(b.coverage_4w),
                held(b.coverage_13w)
            ),
        );
    }
    if !p.overridden.is_empty() {
        let keys: Vec<String> = p.overridden.iter().map(|k| format!("`{k}`")).collect();
        row(
            &mut out,
            "overridden",
            format!(
                "the portfolio's {} replace the fitted values in plans",
                keys.join(" and ")
            ),
        );
    }
    if let Some(c) = &p.chart {
        row(&mut out, "chart", chart(c));
        row(
            &mut out,
            "",
            format!(
                "{} days of history | {} days of forecast, one bar a day, lowest to highest day",
                c.history.len(),
                c.forecast.len()
            ),
        );
    }
    out
}

/// Which days the level came from.
fn level_words(p: &PoolForecast) -> String {
    let mut w = match p.level_rule {
        LevelRule::Recent => "the last four weeks".to_string(),
        LevelRule::SinceShift => "the days since the shift".to_string(),
        LevelRule::ShortSinceShift => {
            "the days since the shift: fewer than a week, so a rough level".to_string()
        }
    };
    if p.events > 0 {
        w.push_str(&format!(
            "; {} {} left out of the fit",
            p.events,
            Count("event", p.events)
        ));
    }
    if p.newest_set_aside > 0 {
        w.push_str(&format!(
            "; the last {} {} set aside (too few to tell a shift from a holiday)",
            p.newest_set_aside,
            Count("day", p.newest_set_aside)
        ));
    }
    w
}

/// A relative change with its sign, e.g. `-30%`.
fn signed_percent(x: f64) -> String {
    format!("{}{}", sign(x), percent(x.abs()))
}

fn sign(x: f64) -> &'static str {
    if x < 0.0 {
        "-"
    } else {
        "+"
    }
}

/// History and forecast as one sparkline on a common scale from the
/// smallest to the largest day shown, split by `|`.
fn chart(c: &Chart) -> String {
    let all = || c.history.iter().chain(&c.forecast).copied();
    let min = all().fold(f64::INFINITY, f64::min);
    let max = all().fold(f64::NEG_INFINITY, f64::max);
    let bars = |xs: &[f64]| -> String { xs.iter().map(|&x| bar(x, min, max)).collect() };
    format!("{}|{}", bars(&c.history), bars(&c.forecast))
}

/// One of eight block heights for `x` on a scale from `min` to `max`.
fn bar(x: f64, min: f64, max: f64) -> char {
    const BARS: [char; 8] = ['▁', '▂', '▃', '▄', '▅', '▆', '▇', '█'];
    if max <= min || !x.is_finite() {
        return BARS[0];
    }
    let k = ((x - min) / (max - min) * 7.0).round().clamp(0.0, 7.0) as usize;
    BARS[k]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bars_span_zero_to_the_largest_day() {
        let c = Chart {
            history: vec![10.0, 60.0, 110.0],
            forecast: vec![110.0, 10.0],
        };
        assert_eq!(chart(&c), "▁▅█|█▁");
        // A flat chart is a flat line.
        assert_eq!(bar(5.0, 5.0, 5.0), '▁');
    }
}
