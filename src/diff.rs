//! The difference between two plans: what moved when the calendar was made
//! again (a re-plan after a traffic drop, or a changed portfolio).
//!
//! Reads two [`Plan`]s only, matched by experiment id; it computes no
//! schedule facts of its own beyond subtracting dates and summing the
//! plans' own per-experiment numbers.

use crate::plan::{Plan, PlannedExperiment, Status};
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

/// How one experiment's outcome changed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Movement {
    /// Same result date and share.
    Unchanged,
    /// Its result arrives later.
    Later,
    /// Its result arrives earlier.
    Earlier,
    /// Same result date, another share.
    Reshared,
    /// It was in the calendar and is not any more.
    NoLongerFits,
    /// It was out and now has a place.
    NowFits,
    /// Out before and out now.
    StillOut,
    /// Finished or cancelled since the previous plan.
    Closed,
    /// Not in the previous plan.
    Added,
    /// In the previous plan only.
    Dropped,
}

/// One experiment, before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExperimentDiff {
    /// The experiment's id.
    pub id: String,
    /// Its pool's id (in the new plan, else the old).
    pub pool: String,
    /// How it moved.
    pub movement: Movement,
    /// Its status in the old plan; `None` when it was not in it.
    pub old_status: Option<Status>,
    /// Its status in the new plan; `None` when it is not in it.
    pub new_status: Option<Status>,
    /// The old plan's result date.
    pub old_result_date: Option<NaiveDate>,
    /// The new plan's result date.
    pub new_result_date: Option<NaiveDate>,
    /// New result date minus old, in days (+ later, - earlier); both scheduled only.
    pub slip_days: Option<i64>,
    /// The old plan's share.
    pub old_share: Option<f64>,
    /// The new plan's share.
    pub new_share: Option<f64>,
}

/// A pool's totals in one plan.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
pub struct PoolTotals {
    /// Experiments in the calendar (scheduled or running).
    pub scheduled: u32,
    /// Experiments out of the calendar.
    pub unscheduled: u32,
    /// Experiments finished or cancelled (re-plans only).
    #[serde(default)]
    pub closed: u32,
    /// Units the scheduled experiments need, summed.
    pub units_needed: u64,
    /// Forecast units of the pool over the window.
    pub forecast_units: f64,
}

/// A pool before and after.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PoolDiff {
    /// The pool's id.
    pub id: String,
    /// Its totals in the old plan.
    pub before: PoolTotals,
    /// Its totals in the new plan.
    pub after: PoolTotals,
}

/// Everything that moved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PlanDiff {
    /// In the new plan's order, then experiments only the old plan had.
    pub experiments: Vec<ExperimentDiff>,
    /// Ids that were scheduled and are not any more.
    pub no_longer_fit: Vec<String>,
    /// Ids that were unscheduled and now are.
    pub now_fit: Vec<String>,
    /// Ids scheduled in both with another share.
    pub share_changed: Vec<String>,
    /// Each pool's totals before and after, in the new plan's order.
    pub pools: Vec<PoolDiff>,
}

fn in_calendar(e: &PlannedExperiment) -> bool {
    matches!(e.status, Status::Scheduled | Status::Running)
}

fn closed(e: &PlannedExperiment) -> bool {
    matches!(e.status, Status::Finished | Status::Cancelled)
}

fn movement(old: &PlannedExperiment, new: &PlannedExperiment) -> Movement {
    if closed(new) {
        return if closed(old) {
            Movement::Unchanged
        } else {
            Movement::Closed
        };
    }
    match (in_calendar(old), in_calendar(new)) {
        (true, false) => Movement::NoLongerFits,
        (false, true) => Movement::NowFits,
        (false, false) => Movement::StillOut,
        (true, true) => match new.result_date.cmp(&old.result_date) {
            std::cmp::Ordering::Greater => Movement::Later,
            std::cmp::Ordering::Less => Movement::Earlier,
            std::cmp::Ordering::Equal if !same_share(old.share, new.share) => Movement::Reshared,
            std::cmp::Ordering::Equal => Movement::Unchanged,
        },
    }
}

fn same_share(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(x), Some(y)) => (x - y).abs() < 1e-9,
        (None, None) => true,
        _ => false,
    }
}

fn totals(plan: &Plan, pool: &str) -> PoolTotals {
    let mut t = PoolTotals::default();
    for e in plan.experiments.iter().filter(|e| e.pool == pool) {
        if in_calendar(e) {
            t.scheduled += 1;
            t.units_needed += e.units_needed;
        } else if e.status == Status::Unscheduled {
            t.unscheduled += 1;
        } else if closed(e) {
            t.closed += 1;
        }
    }
    if let Some(p) = plan.pools.iter().find(|p| p.id == pool) {
        t.forecast_units = p.days.iter().map(|d| d.forecast).sum();
    }
    t
}

/// What changed from `old` to `new`.
pub fn diff(old: &Plan, new: &Plan) -> PlanDiff {
    let mut experiments = Vec::new();
    let mut no_longer_fit = Vec::new();
    let mut now_fit = Vec::new();
    let mut share_changed = Vec::new();
    for n in &new.experiments {
        let o = old.experiments.iter().find(|o| o.id == n.id);
        let mv = match o {
            Some(o) => movement(o, n),
            None => Movement::Added,
        };
        let both = o.filter(|o| in_calendar(o) && in_calendar(n));
        let slip = both.and_then(|o| match (o.result_date, n.result_date) {
            (Some(a), Some(b)) => Some((b - a).num_days()),
            _ => None,
        });
        match mv {
            Movement::NoLongerFits => no_longer_fit.push(n.id.clone()),
            Movement::NowFits => now_fit.push(n.id.clone()),
            _ => {}
        }
        if both.is_some_and(|o| !same_share(o.share, n.share)) {
            share_changed.push(n.id.clone());
        }
        experiments.push(ExperimentDiff {
            id: n.id.clone(),
            pool: n.pool.clone(),
            movement: mv,
            old_status: o.map(|o| o.status),
            new_status: Some(n.status),
            old_result_date: o.and_then(|o| o.result_date),
            new_result_date: n.result_date,
            slip_days: slip,
            old_share: o.and_then(|o| o.share),
            new_share: n.share,
        });
    }
    for o in &old.experiments {
        if !new.experiments.iter().any(|n| n.id == o.id) {
            experiments.push(ExperimentDiff {
                id: o.id.clone(),
                pool: o.pool.clone(),
                movement: Movement::Dropped,
                old_status: Some(o.status),
                new_status: None,
                old_result_date: o.result_date,
                new_result_date: None,
                slip_days: None,
                old_share: o.share,
                new_share: None,
            });
        }
    }
    let mut pool_ids: Vec<&str> = new.pools.iter().map(|p| p.id.as_str()).collect();
    for p in &old.pools {
        if !pool_ids.contains(&p.id.as_str()) {
            pool_ids.push(&p.id);
        }
    }
    let pools = pool_ids
        .into_iter()
        .map(|id| PoolDiff {
            id: id.to_string(),
            before: totals(old, id),
            after: totals(new, id),
        })
        .collect();
    PlanDiff {
        experiments,
        no_longer_fit,
        now_fit,
        share_changed,
        pools,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::{PlanWindow, PoolDay, PoolPlan, SolverSummary};

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn exp(id: &str, status: Status, end: Option<&str>, share: Option<f64>) -> PlannedExperiment {
        let end = end.map(d);
        PlannedExperiment {
            id: id.into(),
            title: id.into(),
            owner: String::new(),
            pool: "home".into(),
            priority: 1.0,
            status,
            start: end.map(|_| d("2027-01-04")),
            end,
            result_date: end.map(|e| e.succ_opt().unwrap()),
            share,
            days: None,
            units_needed: 1000,
            units_expected: None,
            reason: None,
        }
    }

    fn plan(experiments: Vec<PlannedExperiment>, daily: f64) -> Plan {
        Plan {
            portfolio: "t".into(),
            window: PlanWindow {
                start: d("2027-01-04"),
                end: d("2027-01-06"),
            },
            solver: SolverSummary {
                backend: "microlp".into(),
                status: "optimal".into(),
                seconds: 0.0,
                value: 0.0,
                bound: 0.0,
                gap: 0.0,
            },
            greedy_value: 0.0,
            experiments,
            pools: vec![PoolPlan {
                id: "home".into(),
                label: "Home".into(),
                sharing: "split".into(),
                max_concurrent: 2,
                days: (4..=6)
                    .map(|i| PoolDay {
                        date: d(&format!("2027-01-0{i}")),
                        forecast: daily,
                        share_used: 0.0,
                        running: 0,
                    })
                    .collect(),
            }],
            blackouts: vec![],
            today: d("2027-01-04"),
            running: vec![],
            changes: None,
        }
    }

    #[test]
    fn slips_fits_and_shares_are_told_apart() {
        let old = plan(
            vec![
                exp("a", Status::Scheduled, Some("2027-02-07"), Some(0.5)),
                exp("b", Status::Scheduled, Some("2027-02-14"), Some(0.5)),
                exp("c", Status::Unscheduled, None, None),
                exp("d", Status::Scheduled, Some("2027-03-07"), Some(0.25)),
                exp("e", Status::Scheduled, Some("2027-03-07"), Some(0.25)),
                exp("gone", Status::Scheduled, Some("2027-03-07"), Some(0.25)),
            ],
            100.0,
        );
        let new = plan(
            vec![
                exp("a", Status::Running, Some("2027-02-21"), Some(0.5)),
                exp("b", Status::Unscheduled, None, None),
                exp("c", Status::Scheduled, Some("2027-03-28"), Some(0.2)),
                exp("d", Status::Scheduled, Some("2027-02-28"), Some(0.5)),
                exp("e", Status::Scheduled, Some("2027-03-07"), Some(0.5)),
                exp("new", Status::Unscheduled, None, None),
            ],
            70.0,
        );
        let diff = diff(&old, &new);
        let by_id = |id: &str| diff.experiments.iter().find(|e| e.id == id).unwrap();
        assert_eq!(by_id("a").movement, Movement::Later);
        assert_eq!(by_id("a").slip_days, Some(14));
        assert_eq!(by_id("b").movement, Movement::NoLongerFits);
        assert_eq!(by_id("b").slip_days, None);
        assert_eq!(by_id("c").movement, Movement::NowFits);
        assert_eq!(by_id("d").movement, Movement::Earlier);
        assert_eq!(by_id("d").slip_days, Some(-7));
        assert_eq!(by_id("e").movement, Movement::Reshared);
        assert_eq!(by_id("new").movement, Movement::Added);
        assert_eq!(by_id("gone").movement, Movement::Dropped);
        assert_eq!(diff.no_longer_fit, vec!["b"]);
        assert_eq!(diff.now_fit, vec!["c"]);
        assert_eq!(diff.share_changed, vec!["d", "e"]);
        let pool = &diff.pools[0];
        assert_eq!(pool.before.scheduled, 5);
        assert_eq!(pool.after.scheduled, 4);
        assert_eq!(pool.after.unscheduled, 2);
        assert_eq!(pool.before.forecast_units, 300.0);
        assert_eq!(pool.after.forecast_units, 210.0);
    }

    #[test]
    fn a_finished_test_is_closed_not_dropped() {
        let old = plan(
            vec![exp("a", Status::Scheduled, Some("2027-02-07"), Some(0.5))],
            1.0,
        );
        let new = plan(vec![exp("a", Status::Finished, None, None)], 1.0);
        let diff = diff(&old, &new);
        assert_eq!(diff.experiments[0].movement, Movement::Closed);
        assert!(diff.no_longer_fit.is_empty());
        assert_eq!(diff.pools[0].before.scheduled, 1);
        assert_eq!(diff.pools[0].after.scheduled, 0);
        assert_eq!(diff.pools[0].after.closed, 1);
    }
}
