//! Re-planning mid-quarter: the tests that run keep their start and share
//! (the trade's practice: a running test is never paused, and its arms'
//! split never changes), finished and cancelled tests free their pool, and
//! every other test is planned again from today around the running ones.
//!
//! This module turns a [`Progress`] into a [`PlanRequest`] (each running
//! test's new end from its remaining need and the forecast from the day the
//! counts were read), calls the scheduler, marks the statuses, and says for
//! every running test that can no longer finish inside the window when it
//! would, and the smallest change that would rescue it: a larger share, or
//! the effect it can still detect by the window's end (the sizing inverse).

use crate::forecast::units_on;
use crate::plan::{Plan, RunningOutlook, Status};
use crate::portfolio::progress::{Progress, State};
use crate::portfolio::{Portfolio, Scale};
use crate::schedule::{self, Excluded, FixedRun, PlanRequest};
use crate::sizing::{self, round_days};
use chrono::{Duration, NaiveDate};
use std::fmt;

/// How far past the window a running test's end is searched (ten years).
const HORIZON_DAYS: i64 = 3653;

/// `--scale POOL=FACTOR[@FROM]`: a lasting change of a pool's traffic.
#[derive(Debug, Clone, PartialEq)]
pub struct ScaleArg {
    pub pool: String,
    pub factor: f64,
    /// From this day on; the re-plan's today when not given.
    pub from: Option<NaiveDate>,
}

impl std::str::FromStr for ScaleArg {
    type Err = String;

    fn from_str(s: &str) -> Result<ScaleArg, String> {
        let hint = "write POOL=FACTOR or POOL=FACTOR@YYYY-MM-DD, e.g. `checkout=0.7@2027-02-01`";
        let (pool, rest) = s
            .split_once('=')
            .ok_or_else(|| format!("`{s}` has no `=`; {hint}"))?;
        let (factor, from) = match rest.split_once('@') {
            Some((f, d)) => (f, Some(d)),
            None => (rest, None),
        };
        let factor: f64 = factor
            .trim()
            .parse()
            .map_err(|_| format!("`{factor}` is not a number; {hint}"))?;
        if !(factor.is_finite() && factor >= 0.0) {
            return Err(format!(
                "the factor must be a number >= 0 (0.7 for a 30% drop); {hint}"
            ));
        }
        let from = match from {
            Some(d) => Some(
                NaiveDate::parse_from_str(d.trim(), "%Y-%m-%d")
                    .map_err(|_| format!("`{d}` is not a date; {hint}"))?,
            ),
            None => None,
        };
        let pool = pool.trim().to_string();
        if pool.is_empty() {
            return Err(format!("the pool is missing; {hint}"));
        }
        Ok(ScaleArg { pool, factor, from })
    }
}

/// Why a re-plan could not be made.
#[derive(Debug, Clone, PartialEq)]
pub struct ReplanError(pub String);

impl fmt::Display for ReplanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ReplanError {}

/// Applies `--scale` what-ifs to the portfolio's forecasts.
pub fn apply_scales(
    portfolio: &mut Portfolio,
    scales: &[ScaleArg],
    today: NaiveDate,
) -> Result<(), ReplanError> {
    for s in scales {
        let Some(i) = portfolio.pool_index(&s.pool) else {
            let ids: Vec<&str> = portfolio.pools.iter().map(|p| p.id.as_str()).collect();
            let ids = crate::diagnostic::closest_first(&s.pool, &ids);
            return Err(ReplanError(format!(
                "`--scale`: pool `{}` is not defined; defined pools, closest first: {}",
                s.pool,
                crate::diagnostic::list(&ids)
            )));
        };
        portfolio.pools[i].forecast.scales.push(Scale {
            from: s.from.unwrap_or(today),
            factor: s.factor,
        });
    }
    Ok(())
}

/// A running test's end at `share`: counted from `as_of` with `collected`
/// units already in, never before `today`, at least its minimum run from
/// `start` and whole weeks from `start` when asked. `None` past the horizon.
#[allow(clippy::too_many_arguments)]
fn running_end(
    portfolio: &Portfolio,
    experiment: usize,
    start: NaiveDate,
    share: f64,
    collected: u64,
    as_of: NaiveDate,
    today: NaiveDate,
) -> Option<NaiveDate> {
    let e = &portfolio.experiments[experiment];
    let pool = &portfolio.pools[e.pool];
    let need = e.need.total.saturating_sub(collected) as f64;
    let mut reached = as_of.max(start) - Duration::days(1);
    if need > 0.0 {
        let mut total = 0.0;
        let mut day = as_of.max(start);
        let limit = as_of + Duration::days(HORIZON_DAYS);
        loop {
            total += share * units_on(pool, day);
            if total >= need * (1.0 - 1e-9) {
                break;
            }
            day += Duration::days(1);
            if day > limit {
                return None;
            }
        }
        reached = day;
    }
    let end = reached.max(today);
    let days = (end - start).num_days() as u64 + 1;
    let days = round_days(days, e.min_days, e.whole_weeks);
    Some(start + Duration::days(days as i64 - 1))
}

/// Units a running test will have by the window's end at `share`.
fn units_by_window_end(
    portfolio: &Portfolio,
    experiment: usize,
    start: NaiveDate,
    share: f64,
    collected: u64,
    as_of: NaiveDate,
) -> f64 {
    let e = &portfolio.experiments[experiment];
    let pool = &portfolio.pools[e.pool];
    let mut day = as_of.max(start);
    let mut total = collected as f64;
    while day <= portfolio.window.end {
        total += share * units_on(pool, day);
        day += Duration::days(1);
    }
    total
}

/// The outlook of one running test, and a rescue when it cannot finish.
fn outlook(
    portfolio: &Portfolio,
    experiment: usize,
    start: NaiveDate,
    share: f64,
    collected: u64,
    as_of: NaiveDate,
    today: NaiveDate,
) -> RunningOutlook {
    let e = &portfolio.experiments[experiment];
    let end = running_end(portfolio, experiment, start, share, collected, as_of, today);
    let fits = end.is_some_and(|d| d <= portfolio.window.end);
    let mut outlook = RunningOutlook {
        id: e.id.clone(),
        started: start,
        share,
        collected,
        units_needed: e.need.total,
        end,
        fits_window: fits,
        rescue_share: None,
        detectable_effect: None,
        advice: None,
    };
    if fits {
        return outlook;
    }
    // The smallest allowed share level above the current one that ends in time.
    outlook.rescue_share = portfolio
        .share_levels
        .iter()
        .copied()
        .filter(|&s| s > share + 1e-9 && s <= e.max_share + 1e-9)
        .find(|&s| {
            running_end(portfolio, experiment, start, s, collected, as_of, today)
                .is_some_and(|d| d <= portfolio.window.end)
        });
    // The effect the units in hand by the window's end can detect.
    let by_end = units_by_window_end(portfolio, experiment, start, share, collected, as_of);
    let d = &e.design;
    let per_control = by_end / (1.0 + f64::from(d.arms - 1) * d.ratio);
    outlook.detectable_effect = sizing::minimum_detectable_effect(d, per_control).ok();
    let when = match end {
        Some(day) => format!("it would reach its {} units on {day}", e.need.total),
        None => format!(
            "at {:.0}% it would not reach its {} units within ten years",
            share * 100.0,
            e.need.total
        ),
    };
    let mut advice = format!(
        "cannot reach its sample by the window's end {}: {when}",
        portfolio.window.end
    );
    match outlook.rescue_share {
        Some(s) => advice.push_str(&format!(
            "; a share of {:.0}% from today would finish it in time",
            s * 100.0
        )),
        None => advice.push_str(&format!(
            "; no share up to its maximum of {:.0}% finishes it in time",
            e.max_share * 100.0
        )),
    }
    if let Some(effect) = outlook.detectable_effect {
        let kind = match d.effect {
            sizing::Effect::Relative(_) => format!("a {:.1}% relative effect", effect * 100.0),
            sizing::Effect::Absolute(_) => format!("an absolute effect of {effect:.4}"),
        };
        advice.push_str(&format!(
            "; stopped at the window's end it can detect {kind} (planned MDE: {})",
            match d.effect {
                sizing::Effect::Relative(x) => format!("{:.1}%", x * 100.0),
                sizing::Effect::Absolute(x) => format!("{x}"),
            }
        ));
    }
    outlook.advice = Some(advice);
    outlook
}

/// Re-plans `portfolio` (with any `--scale` already applied) from `today`
/// given `progress`. Running tests keep their start and share, unless the
/// portfolio allows re-sharing running tests: then a test that cannot
/// finish in the window takes the smallest share level that rescues it,
/// from today, where its pool has room.
pub fn replan(
    portfolio: &Portfolio,
    progress: &Progress,
    today: NaiveDate,
    base: &PlanRequest,
) -> Result<(Plan, PlanRequest), ReplanError> {
    let mut request = PlanRequest {
        today: Some(today),
        fixed: Vec::new(),
        excluded: Vec::new(),
        ..base.clone()
    };
    let mut outlooks = Vec::new();
    for entry in &progress.entries {
        match &entry.state {
            State::Running {
                started,
                share,
                units,
                ..
            } => {
                let mut o = outlook(
                    portfolio,
                    entry.experiment,
                    *started,
                    *share,
                    *units,
                    progress.as_of,
                    today,
                );
                let mut run_share = *share;
                if !o.fits_window && portfolio.planning.reshare_running {
                    if let Some(s) = o.rescue_share {
                        run_share = s;
                        o = outlook(
                            portfolio,
                            entry.experiment,
                            *started,
                            s,
                            *units,
                            progress.as_of,
                            today,
                        );
                        o.advice = Some(format!(
                            "re-shared from {:.0}% to {:.0}% from {today} so it finishes in the window",
                            share * 100.0,
                            s * 100.0
                        ));
                    }
                }
                // Past the horizon it still holds its traffic to the window's end.
                let end = o
                    .end
                    .unwrap_or(portfolio.window.end + Duration::days(HORIZON_DAYS));
                request.fixed.push(FixedRun {
                    experiment: entry.experiment,
                    start: *started,
                    share: run_share,
                    end,
                });
                outlooks.push(o);
            }
            State::Finished { ended, .. } => request.excluded.push(Excluded {
                experiment: entry.experiment,
                ended: Some(ended.unwrap_or(today - Duration::days(1))),
                reason: format!(
                    "finished{}",
                    match ended {
                        Some(d) => format!(" on {d}"),
                        None => String::new(),
                    }
                ),
            }),
            State::Cancelled { note } => request.excluded.push(Excluded {
                experiment: entry.experiment,
                ended: None,
                reason: if note.is_empty() {
                    "cancelled".to_string()
                } else {
                    format!("cancelled: {note}")
                },
            }),
        }
    }
    let mut plan = schedule::plan(portfolio, &request);
    for entry in &progress.entries {
        let pe = &mut plan.experiments[entry.experiment];
        pe.status = match entry.state {
            State::Running { .. } => Status::Running,
            State::Finished { .. } => Status::Finished,
            State::Cancelled { .. } => Status::Cancelled,
        };
        let id = &portfolio.experiments[entry.experiment].id;
        if let Some(advice) = outlooks
            .iter()
            .find(|o| &o.id == id)
            .and_then(|o| o.advice.clone())
        {
            pe.reason = Some(advice);
        }
    }
    plan.running = outlooks;
    Ok((plan, request))
}
