//! The outlook of each running test in a re-plan: its new end from the
//! units still needed and the forecast from the day the counts were read,
//! and, when it can no longer finish inside the window, the rescue advice
//! (a larger share, or the effect it can still detect by the window's end,
//! the sizing inverse).

use crate::forecast::units_on;
use crate::plan::RunningOutlook;
use crate::portfolio::Portfolio;
use crate::share::Share;
use crate::sizing::{self, round_days};
use crate::words::thousands;
use chrono::{Duration, NaiveDate};

/// How far past the window a running test's end is searched (ten years).
pub(super) const HORIZON_DAYS: i64 = 3653;

/// A running test as the progress file gives it.
#[derive(Debug, Clone, Copy)]
pub(super) struct Run {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    pub start: NaiveDate,
    /// The share it has run at so far.
    pub share: Share,
    /// Units over all arms collected up to the end of the day before `as_of`.
    pub collected: u64,
    pub as_of: NaiveDate,
}

impl Run {
    /// Its share on `day` when it runs at `from_today` from `today` on.
    fn share_on(&self, day: NaiveDate, from_today: Share, today: NaiveDate) -> f64 {
        if day < today {
            self.share.fraction()
        } else {
            from_today.fraction()
        }
    }
}

/// A running test's last day of data when it runs at `share` from `today`
/// on (at its old share before): counted from `as_of` with the units
/// already collected, never before `today`, at least its minimum run from
/// its start, and whole weeks from its start when asked. A test already
/// past its need therefore ends today, or on the last day of the week (from
/// its start) that today falls in. `None` past the ten-year horizon.
pub(super) fn running_end(
    portfolio: &Portfolio,
    run: &Run,
    share: Share,
    today: NaiveDate,
) -> Option<NaiveDate> {
    let e = &portfolio.experiments[run.experiment];
    let pool = &portfolio.pools[e.pool];
    let need = e.need.total.saturating_sub(run.collected) as f64;
    let first = run.as_of.max(run.start);
    let mut reached = first - Duration::days(1);
    if need > 0.0 {
        let mut total = 0.0;
        let mut day = first;
        let limit = first + Duration::days(HORIZON_DAYS);
        loop {
            total += run.share_on(day, share, today) * units_on(pool, day);
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
    let days = (end - run.start).num_days() as u64 + 1;
    let days = round_days(days, e.min_days, e.whole_weeks);
    Some(run.start + Duration::days(days as i64 - 1))
}

/// Units a running test will have by the window's end at `share` from today.
fn units_by_window_end(portfolio: &Portfolio, run: &Run, share: Share, today: NaiveDate) -> f64 {
    let e = &portfolio.experiments[run.experiment];
    let pool = &portfolio.pools[e.pool];
    let mut day = run.as_of.max(run.start);
    let mut total = run.collected as f64;
    while day <= portfolio.window.end {
        total += run.share_on(day, share, today) * units_on(pool, day);
        day += Duration::days(1);
    }
    total
}

/// The outlook of one running test at `share` from today, and a rescue
/// when it cannot finish inside the window.
pub(super) fn outlook(
    portfolio: &Portfolio,
    run: &Run,
    share: Share,
    today: NaiveDate,
) -> RunningOutlook {
    let e = &portfolio.experiments[run.experiment];
    let end = running_end(portfolio, run, share, today);
    let fits = end.is_some_and(|d| d <= portfolio.window.end);
    let mut outlook = RunningOutlook {
        id: e.id.clone(),
        started: run.start,
        share,
        collected: run.collected,
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
        .up_to(e.max_share)
        .filter(|&s| s > share)
        .find(|&s| {
            running_end(portfolio, run, s, today).is_some_and(|d| d <= portfolio.window.end)
        });
    // The effect the units in hand by the window's end can detect.
    let by_end = units_by_window_end(portfolio, run, share, today);
    let d = &e.design;
    let per_control = by_end / (1.0 + f64::from(d.arms - 1) * d.ratio);
    outlook.detectable_effect = sizing::minimum_detectable_effect(d, per_control).ok();
    let when = match end {
        Some(day) => format!(
            "at {} it would reach its {} units on {day}",
            share,
            thousands(e.need.total)
        ),
        None => format!(
            "at {} it would not reach its {} units within ten years",
            share,
            thousands(e.need.total)
        ),
    };
    let mut advice = format!(
        "cannot reach its sample by the window's end ({}): {when}",
        portfolio.window.end
    );
    match outlook.rescue_share {
        Some(s) => advice.push_str(&format!(
            "; a share of {s} from today would finish it in time",
        )),
        None => advice.push_str(&format!(
            "; no share up to its maximum of {} finishes it in time",
            e.max_share
        )),
    }
    match outlook.detectable_effect {
        Some(effect) => {
            let (kind, planned) = match d.effect {
                sizing::Effect::Relative(x) => (
                    format!("a relative effect of {:.1}%", effect * 100.0),
                    format!("{:.1}%", x * 100.0),
                ),
                sizing::Effect::Absolute(x) => {
                    (format!("an absolute effect of {effect:.4}"), format!("{x}"))
                }
            };
            advice.push_str(&format!(
                "; stopped at the window's end it can detect {kind} (planned MDE: {planned})"
            ));
        }
        None => advice.push_str(
            "; stopped at the window's end it has too few units to detect any effect at the planned power",
        ),
    }
    outlook.advice = Some(advice);
    outlook
}
