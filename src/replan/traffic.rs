//! Re-plans use what was observed: a progress file's `traffic` gives a
//! pool's actual daily units so far, and [`refit`] makes the re-plan's
//! forecast from them instead of a guessed `--scale` (which stays for
//! what-ifs, applied on top).
//!
//! For each pool with traffic, in order of preference:
//!
//! - with a `history` that the traffic continues (it starts no later
//!   than the day after the history's last day), the history up to the
//!   traffic's first day and then the traffic are fitted again
//!   ([`crate::forecast::fit`], with the history's `trend` and the events
//!   of both);
//! - else, with four weeks of traffic or more, the traffic alone is
//!   fitted (without a trend);
//! - else the forecast's level is scaled by the actual over the forecast
//!   units of the traffic's days, or of the days since a shift when the
//!   daily ratios of actual to forecast show one
//!   ([`crate::forecast::shift`]).
//!
//! A refit replaces the pool's level, weekday pattern, path and (unless
//! the portfolio gives `uncertainty`) its spread; `adjustments` and
//! what-if scales still apply on top. Each pool's report says how far its
//! traffic ran from the forecast the portfolio gave those days, since the
//! start and over the last 14 days, and any shift found.

use super::progress::{Observed, Progress};
use crate::forecast::fit::{self, robust_sd};
use crate::forecast::{shift, units_on};
use crate::plan::{LevelRule, Refit, TrafficShift, TrafficSoFar};
use crate::portfolio::{event_days, History, Pool, Portfolio};
use chrono::Duration;

/// Days of the most recent comparison of traffic and forecast.
pub const RECENT_DAYS: usize = 14;

/// `portfolio` with each pool that `progress` gives traffic for refitted,
/// and what each pool's traffic did against its forecast, in the file's
/// order. Without traffic, the portfolio as it is and no reports.
pub fn refit(portfolio: &Portfolio, progress: &Progress) -> (Portfolio, Vec<TrafficSoFar>) {
    let mut out = portfolio.clone();
    let mut reports = Vec::new();
    for obs in &progress.traffic {
        let pool = &mut out.pools[obs.pool];
        let skip = event_days(obs.start, obs.units.len(), &obs.events);
        let forecast: Vec<f64> = (0..obs.units.len())
            .map(|i| units_on(pool, obs.start + Duration::days(i as i64)))
            .collect();
        let ratio_over = |from: usize| {
            let (mut a, mut f) = (0.0, 0.0);
            for i in (from..obs.units.len()).filter(|&i| !skip[i]) {
                a += obs.units[i];
                f += forecast[i];
            }
            (f > 0.0).then(|| a / f)
        };
        let ratio = ratio_over(0);
        let recent = ratio_over(obs.units.len().saturating_sub(RECENT_DAYS));
        let (how, level, shift) = refit_pool(pool, obs, &skip, &forecast);
        reports.push(TrafficSoFar {
            pool: pool.id.clone(),
            from: obs.start,
            to: obs.end(),
            units: obs.units.iter().sum(),
            forecast: forecast.iter().sum(),
            difference: ratio.map_or(0.0, |r| r - 1.0),
            refit: how,
            last_14_days: recent.map_or(0.0, |r| r - 1.0),
            shift,
            level,
        });
    }
    (out, reports)
}

/// Refits `pool` from `obs` (see the module's rules); `skip` marks its
/// event days, `forecast` the portfolio's forecast of its days.
fn refit_pool(
    pool: &mut Pool,
    obs: &Observed,
    skip: &[bool],
    forecast: &[f64],
) -> (Refit, LevelRule, Option<TrafficShift>) {
    let f = &mut pool.forecast;
    let joined = f.history.as_ref().and_then(|h| {
        let keep = (obs.start - h.start).num_days();
        (keep >= 0 && obs.start <= h.end() + Duration::days(1)).then(|| {
            let mut units = h.units[..keep as usize].to_vec();
            units.extend(&obs.units);
            let mut events: Vec<_> = h
                .events
                .iter()
                .filter(|e| e.from < obs.start)
                .cloned()
                .collect();
            events.extend(obs.events.iter().cloned());
            (
                h.start,
                units,
                h.trend,
                events,
                format!("{} and traffic", h.file),
                Refit::HistoryAndTraffic,
            )
        })
    });
    let series = joined.or_else(|| {
        (obs.units.len() >= fit::MIN_DAYS).then(|| {
            (
                obs.start,
                obs.units.clone(),
                false,
                obs.events.clone(),
                "traffic".to_string(),
                Refit::Traffic,
            )
        })
    });
    if let Some((start, units, trend, events, file, how)) = series {
        let skip = event_days(start, units.len(), &events);
        if let Ok(fitted) = fit::fit(start, &units, trend, &skip) {
            f.daily = fitted.level;
            f.weekday = fitted.weekday_pattern;
            f.level_path = fitted.path.clone();
            let (rule, shift) = (
                fitted.level_rule,
                fitted.shift.map(|s| TrafficShift {
                    date: s.date,
                    change: s.change,
                }),
            );
            f.history = Some(History {
                file,
                start,
                units,
                trend,
                events,
                fit: fitted,
            });
            return (how, rule, shift);
        }
    }
    // Too short to fit: the daily log ratios of actual to forecast, searched
    // for a shift; the level is scaled by the ratio since it, or overall.
    let days: Vec<usize> = (0..obs.units.len())
        .filter(|&i| !skip[i] && obs.units[i] > 0.0 && forecast[i] > 0.0)
        .collect();
    let logs: Vec<f64> = days
        .iter()
        .map(|&i| (obs.units[i] / forecast[i]).ln())
        .collect();
    let steps: Vec<f64> = logs.windows(2).map(|w| w[1] - w[0]).collect();
    let found = shift::find(&logs, robust_sd(&steps) / 2f64.sqrt(), 0);
    let from = found.shift.map_or(0, |(p, _)| p);
    let (mut a, mut fc) = (0.0, 0.0);
    for &i in &days[from.min(days.len())..] {
        a += obs.units[i];
        fc += forecast[i];
    }
    if fc > 0.0 {
        f.daily *= a / fc;
    }
    let shift = found.shift.map(|(p, c)| TrafficShift {
        date: obs.start + Duration::days(days[p] as i64),
        change: c.exp_m1(),
    });
    let rule = match found.shift {
        Some((p, _)) if days.len() - p < fit::FULL_WEEK => LevelRule::ShortSinceShift,
        Some(_) => LevelRule::SinceShift,
        None => LevelRule::Recent,
    };
    (Refit::Level, rule, shift)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::Portfolio;
    use chrono::NaiveDate;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn quickstart() -> Portfolio {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/portfolios/quickstart.yaml");
        Portfolio::load(std::path::Path::new(path)).unwrap()
    }

    fn progress(traffic: Vec<Observed>) -> Progress {
        Progress {
            as_of: d("2027-02-15"),
            entries: Vec::new(),
            traffic,
            warnings: Vec::new(),
        }
    }

    fn observed(start: NaiveDate, units: Vec<f64>) -> Observed {
        Observed {
            pool: 0,
            start,
            units,
            events: Vec::new(),
        }
    }

    /// The forecast of pool `p` over `days` days from `start`, times `k`.
    fn scaled(p: &Portfolio, pool: usize, start: NaiveDate, days: usize, k: f64) -> Vec<f64> {
        (0..days)
            .map(|i| k * units_on(&p.pools[pool], start + Duration::days(i as i64)))
            .collect()
    }

    #[test]
    fn four_weeks_at_80_percent_refit_the_level_to_80_percent() {
        let p = quickstart();
        let start = p.window.start;
        let units = scaled(&p, 0, start, 35, 0.8);
        let (q, reports) = refit(&p, &progress(vec![observed(start, units)]));
        let r = &reports[0];
        assert_eq!(r.refit, Refit::Traffic);
        assert!((r.difference + 0.2).abs() < 1e-9, "{r:?}");
        assert!((r.last_14_days + 0.2).abs() < 1e-9, "{r:?}");
        assert_eq!(r.shift, None);
        // Without noise the fit gives back the scaled forecast.
        let later = d("2027-03-10");
        let (before, after) = (units_on(&p.pools[0], later), units_on(&q.pools[0], later));
        assert!((after / before - 0.8).abs() < 0.01, "{before} -> {after}");
        // Other pools keep their forecast.
        assert_eq!(q.pools[1], p.pools[1]);
    }

    #[test]
    fn a_short_traffic_scales_the_level() {
        let p = quickstart();
        let start = p.window.start;
        let units = scaled(&p, 0, start, 10, 1.1);
        let (q, reports) = refit(&p, &progress(vec![observed(start, units)]));
        assert_eq!(reports[0].refit, Refit::Level);
        assert!((reports[0].difference - 0.1).abs() < 1e-9);
        assert!((q.pools[0].forecast.daily / p.pools[0].forecast.daily - 1.1).abs() < 1e-9);
    }

    #[test]
    fn a_short_traffic_with_a_drop_takes_the_level_after_it() {
        // Three weeks on forecast, then nine days 30% down: the level
        // follows the drop, and the last 14 days show most of it.
        let p = quickstart();
        let start = p.window.start;
        let mut units = scaled(&p, 0, start, 21, 1.0);
        units.extend(scaled(&p, 0, start + Duration::days(21), 9, 0.7));
        let (q, reports) = refit(&p, &progress(vec![observed(start, units)]));
        let r = &reports[0];
        assert_eq!(
            (r.refit, r.level),
            (Refit::Traffic, LevelRule::SinceShift),
            "{r:?}"
        );
        let s = r.shift.expect("a shift");
        assert_eq!(s.date, start + Duration::days(21));
        assert!((s.change + 0.3).abs() < 0.03, "{s:?}");
        let later = d("2027-03-10");
        let k = units_on(&q.pools[0], later) / units_on(&p.pools[0], later);
        assert!((k - 0.7).abs() < 0.02, "{k}");
        assert!(
            r.last_14_days < -0.15 && r.last_14_days > r.difference - 0.2,
            "{r:?}"
        );
    }

    #[test]
    fn without_traffic_the_portfolio_is_unchanged() {
        let p = quickstart();
        let (q, reports) = refit(&p, &progress(Vec::new()));
        assert_eq!(q, p);
        assert!(reports.is_empty());
    }
}
