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
//!   ([`crate::forecast::fit`], with the history's `trend`);
//! - else, with four weeks of traffic or more, the traffic alone is
//!   fitted (without a trend);
//! - else the forecast's level is scaled by the actual over the forecast
//!   units of the traffic's days.
//!
//! A refit replaces the pool's level, weekday pattern, trend and (unless
//! the portfolio gives `uncertainty`) its spread; `adjustments` and
//! what-if scales still apply on top. Each pool's report says how far its
//! traffic ran from the forecast the portfolio gave those days.

use super::progress::{Observed, Progress};
use crate::forecast::{fit, units_on};
use crate::plan::{Refit, TrafficSoFar};
use crate::portfolio::{History, Pool, Portfolio, Trend};
use chrono::Duration;

/// `portfolio` with each pool that `progress` gives traffic for refitted,
/// and what each pool's traffic did against its forecast, in the file's
/// order. Without traffic, the portfolio as it is and no reports.
pub fn refit(portfolio: &Portfolio, progress: &Progress) -> (Portfolio, Vec<TrafficSoFar>) {
    let mut out = portfolio.clone();
    let mut reports = Vec::new();
    for obs in &progress.traffic {
        let pool = &mut out.pools[obs.pool];
        let forecast: f64 = (0..obs.units.len())
            .map(|i| units_on(pool, obs.start + Duration::days(i as i64)))
            .sum();
        let units: f64 = obs.units.iter().sum();
        let ratio = if forecast > 0.0 {
            units / forecast
        } else {
            1.0
        };
        let how = refit_pool(pool, obs, ratio);
        reports.push(TrafficSoFar {
            pool: pool.id.clone(),
            from: obs.start,
            to: obs.end(),
            units,
            forecast,
            difference: if forecast > 0.0 { ratio - 1.0 } else { 0.0 },
            refit: how,
        });
    }
    (out, reports)
}

/// Refits `pool` from `obs` (see the module's rules); `ratio` is its
/// actual over forecast units.
fn refit_pool(pool: &mut Pool, obs: &Observed, ratio: f64) -> Refit {
    let f = &mut pool.forecast;
    let joined = f.history.as_ref().and_then(|h| {
        let keep = (obs.start - h.start).num_days();
        (keep >= 0 && obs.start <= h.end() + Duration::days(1)).then(|| {
            let mut units = h.units[..keep as usize].to_vec();
            units.extend(&obs.units);
            (
                h.start,
                units,
                h.trend,
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
                "traffic".to_string(),
                Refit::Traffic,
            )
        })
    });
    if let Some((start, units, trend, file, how)) = series {
        if let Ok(fitted) = fit::fit(start, &units, trend) {
            let end = start + Duration::days(units.len() as i64 - 1);
            f.daily = fitted.level;
            f.weekday = fitted.weekday_pattern;
            f.trend = trend.then_some(Trend {
                from: end,
                per_week: fitted.trend_per_week,
            });
            f.history = Some(History {
                file,
                start,
                units,
                trend,
                fit: fitted,
            });
            return how;
        }
    }
    f.daily *= ratio;
    Refit::Level
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
        let (q, reports) = refit(
            &p,
            &progress(vec![Observed {
                pool: 0,
                start,
                units,
            }]),
        );
        let r = &reports[0];
        assert_eq!(r.refit, Refit::Traffic);
        assert!((r.difference + 0.2).abs() < 1e-9, "{r:?}");
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
        let (q, reports) = refit(
            &p,
            &progress(vec![Observed {
                pool: 0,
                start,
                units,
            }]),
        );
        assert_eq!(reports[0].refit, Refit::Level);
        assert!((reports[0].difference - 0.1).abs() < 1e-9);
        assert!((q.pools[0].forecast.daily / p.pools[0].forecast.daily - 1.1).abs() < 1e-9);
    }

    #[test]
    fn without_traffic_the_portfolio_is_unchanged() {
        let p = quickstart();
        let (q, reports) = refit(&p, &progress(Vec::new()));
        assert_eq!(q, p);
        assert!(reports.is_empty());
    }
}
