//! The `check` report: a validated portfolio's first answer to "which
//! tests fit this quarter", before any scheduling.
//!
//! Per experiment: its size, how long it runs at its largest share from
//! the window's first day, and whether it fits the window on its own (its
//! earliest start, deadline, start grid and blackouts respected, every
//! other test ignored). Per pool: the units the window offers against the
//! units its experiments need. Durations come day by day from
//! [`forecast::Series::run_end`]. No formatting here: the CLI renders the
//! [`CheckReport`].

use crate::forecast::Series;
use crate::portfolio::{BlackoutKind, Experiment, Portfolio, Sharing, StartGrid};
use crate::sizing::Metric;
use chrono::{Datelike, Duration, NaiveDate};
use serde::Serialize;

/// How far past the window's first day a run is followed to tell how long
/// it would take (five years).
pub const HORIZON_DAYS: i64 = 5 * 365 + 1;

/// The whole report; `sluice check --format json` prints it as is.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CheckReport {
    pub name: String,
    pub window_start: NaiveDate,
    pub window_end: NaiveDate,
    /// Days in the window, both ends counted.
    pub window_days: usize,
    pub experiments: Vec<ExperimentCheck>,
    pub pools: Vec<PoolCheck>,
    /// How many experiments fit the window on their own.
    pub fit_alone: usize,
    /// How many cannot fit even with the pool to themselves.
    pub cannot_fit: usize,
}

/// One experiment's size and solo fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExperimentCheck {
    pub id: String,
    pub title: String,
    /// The pool's id.
    pub pool: String,
    /// `rate` or `mean`.
    pub metric: String,
    pub arms: u32,
    /// Units in the control arm.
    pub control_units: u64,
    /// Units in each treatment arm.
    pub treatment_units: u64,
    /// Units over all arms.
    pub total_units: u64,
    /// The share the durations assume: the largest share level not above
    /// the experiment's `max_share`.
    pub share: f64,
    /// Days the run takes at `share` when started on the window's first
    /// day (minimum run and whole weeks included); `None` when it would
    /// take longer than [`HORIZON_DAYS`].
    pub days_from_window_start: Option<u32>,
    /// The last day of that run; `None` as above.
    pub end_from_window_start: Option<NaiveDate>,
    /// Whether some start fits the window alone (see `reason` when not).
    pub fits_alone: bool,
    /// The earliest solo run that fits: first and last day.
    pub solo_start: Option<NaiveDate>,
    pub solo_end: Option<NaiveDate>,
    /// Why it cannot fit even alone.
    pub reason: Option<String>,
}

/// One pool's supply against demand over the window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PoolCheck {
    pub id: String,
    pub label: String,
    pub sharing: Sharing,
    pub max_concurrent: u32,
    pub experiments: usize,
    /// Forecast units over the window.
    pub offered_units: f64,
    /// Units its experiments need, summed.
    pub needed_units: u64,
    /// `needed_units / offered_units` (infinite when the pool offers none).
    pub ratio: f64,
    /// How to read the ratio for this pool's sharing rule.
    pub note: String,
}

/// Builds the report for a validated portfolio.
pub fn check(p: &Portfolio) -> CheckReport {
    let w = p.window;
    let horizon_end = w.start + Duration::days(HORIZON_DAYS - 1);
    let series: Vec<Series> = p
        .pools
        .iter()
        .map(|pool| Series::new(pool, w.start, horizon_end.max(w.end)))
        .collect();
    let experiments: Vec<ExperimentCheck> = p
        .experiments
        .iter()
        .map(|e| experiment(p, e, &series[e.pool]))
        .collect();
    let pools = p
        .pools
        .iter()
        .enumerate()
        .map(|(i, pool)| {
            let offered = series[i].total(0, w.days().saturating_sub(1));
            let mine: Vec<&Experiment> = p.experiments.iter().filter(|e| e.pool == i).collect();
            let needed: u64 = mine.iter().map(|e| e.need.total).sum();
            let ratio = if offered > 0.0 {
                needed as f64 / offered
            } else if needed == 0 {
                0.0
            } else {
                f64::INFINITY
            };
            let note = match pool.sharing {
                Sharing::Split => {
                    "split: tests take disjoint slices, so above 1 not all can finish in the window"
                        .to_string()
                }
                Sharing::Overlap => format!(
                    "overlap: each test may see every unit and up to {} run at once, so a ratio up to {} can fit",
                    pool.max_concurrent, pool.max_concurrent
                ),
            };
            PoolCheck {
                id: pool.id.clone(),
                label: pool.label.clone(),
                sharing: pool.sharing,
                max_concurrent: pool.max_concurrent,
                experiments: mine.len(),
                offered_units: offered,
                needed_units: needed,
                ratio,
                note,
            }
        })
        .collect();
    let fit_alone = experiments.iter().filter(|e| e.fits_alone).count();
    CheckReport {
        name: p.name.clone(),
        window_start: w.start,
        window_end: w.end,
        window_days: w.days(),
        cannot_fit: experiments.len() - fit_alone,
        fit_alone,
        experiments,
        pools,
    }
}

/// The largest share level not above `max_share` (validation guarantees one).
pub fn share_for(p: &Portfolio, e: &Experiment) -> f64 {
    p.share_levels
        .iter()
        .copied()
        .filter(|&s| s <= e.max_share + 1e-12)
        .fold(None, |acc: Option<f64>, s| {
            Some(acc.map_or(s, |a| a.max(s)))
        })
        .unwrap_or(e.max_share)
}

fn experiment(p: &Portfolio, e: &Experiment, series: &Series) -> ExperimentCheck {
    let w = p.window;
    let share = share_for(p, e);
    let need = e.need.total as f64;
    let from_start = series.run_end(0, share, need, e.min_days, e.whole_weeks);
    let (days, end) = match from_start {
        Some(i) => (Some(i as u32 + 1), Some(w.date(i as i64))),
        None => (None, None),
    };
    let pool = &p.pools[e.pool];
    let (solo, reason) = solo_fit(p, e, series, share);
    ExperimentCheck {
        id: e.id.clone(),
        title: e.title.clone(),
        pool: pool.id.clone(),
        metric: match e.design.metric {
            Metric::Rate { .. } => "rate".into(),
            Metric::Mean { .. } => "mean".into(),
        },
        arms: e.need.arms,
        control_units: e.need.control,
        treatment_units: e.need.treatment,
        total_units: e.need.total,
        share,
        days_from_window_start: days,
        end_from_window_start: end,
        fits_alone: solo.is_some(),
        solo_start: solo.map(|s| s.0),
        solo_end: solo.map(|s| s.1),
        reason,
    }
}

/// The earliest run of `e` alone that fits, or why none does.
fn solo_fit(
    p: &Portfolio,
    e: &Experiment,
    series: &Series,
    share: f64,
) -> (Option<(NaiveDate, NaiveDate)>, Option<String>) {
    let w = p.window;
    let last = e.deadline.unwrap_or(w.end).min(w.end);
    let first = e.earliest_start.unwrap_or(w.start).max(w.start);
    let blocked = |date: NaiveDate, kind: BlackoutKind| {
        p.blackouts
            .iter()
            .any(|b| b.kind == kind && b.covers(date, e.pool))
    };
    let need = e.need.total as f64;
    let mut ran_out = false;
    let mut blocked_by_running = false;
    let mut any_start = false;
    let mut day = first;
    while day <= last {
        let on_grid = match p.planning.grid {
            StartGrid::Daily => true,
            StartGrid::Weekly => day.weekday() == p.planning.start_weekday,
        };
        if on_grid && !blocked(day, BlackoutKind::NoStarts) {
            any_start = true;
            let i = w.offset(day) as usize;
            match series.run_end(i, share, need, e.min_days, e.whole_weeks) {
                Some(j) => {
                    let end = w.date(j as i64);
                    if end > last {
                        ran_out = true;
                        break;
                    }
                    let crosses = std::iter::successors(Some(day), |d| d.succ_opt())
                        .take_while(|d| *d <= end)
                        .any(|d| blocked(d, BlackoutKind::NoRunning));
                    if !crosses {
                        return (Some((day, end)), None);
                    }
                    blocked_by_running = true;
                }
                None => {
                    ran_out = true;
                    break;
                }
            }
        }
        day += Duration::days(1);
    }
    let pct = format!("{}%", trim(share * 100.0));
    let until = if e.deadline.is_some_and(|d| d < w.end) {
        format!("its deadline {last}")
    } else {
        format!("the window's end {last}")
    };
    let reason = if !any_start {
        format!("no allowed start day between {first} and {last} (start grid, freezes)")
    } else if blocked_by_running {
        format!("every run at {pct} that ends by {until} crosses a no-running blackout")
    } else if ran_out {
        let start = if first > w.start {
            format!(" even from its earliest start {first}")
        } else {
            String::new()
        };
        let i = w.offset(first) as usize;
        match series.run_end(i, share, need, e.min_days, e.whole_weeks) {
            Some(j) => format!(
                "at {pct} it needs {} days{start}, ending {}, after {until}",
                j - i + 1,
                w.date(j as i64)
            ),
            None => format!(
                "at {pct} it needs more than {} years{start}",
                HORIZON_DAYS / 365
            ),
        }
    } else {
        format!("no run at {pct} ends by {until}")
    };
    (None, Some(reason))
}

/// A number without trailing zeros: 33.0 -> "33", 12.5 -> "12.5".
pub fn trim(x: f64) -> String {
    let s = format!("{x:.2}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}
