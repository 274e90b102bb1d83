//! The difference between two plans: what moved when the calendar was made
//! again (a re-plan after a traffic drop, or a changed portfolio).
//!
//! Reads two [`Plan`]s only, matched by experiment id; it computes no
//! schedule facts of its own beyond subtracting dates and summing the
//! plans' own per-experiment numbers. [`calendar_history`] is the
//! calendar's side of the same difference: which published events
//! changed, left or were cancelled.

mod calendar;

pub use calendar::{calendar_history, CalendarView, LookEvent};

use crate::plan::{
    ExperimentDiff, Movement, Plan, PlanDiff, PlannedExperiment, PoolDiff, PoolTotals, Status,
};
use crate::share::Share;

fn in_calendar(e: &PlannedExperiment) -> bool {
    matches!(e.status, Status::Scheduled | Status::Running)
}

fn result_date(e: &PlannedExperiment) -> Option<chrono::NaiveDate> {
    e.run.map(|r| r.result_date)
}

fn share(e: &PlannedExperiment) -> Option<Share> {
    e.run.map(|r| r.share)
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
        (true, true) => match result_date(new).cmp(&result_date(old)) {
            std::cmp::Ordering::Greater => Movement::Later,
            std::cmp::Ordering::Less => Movement::Earlier,
            std::cmp::Ordering::Equal if share(old) != share(new) => Movement::Reshared,
            std::cmp::Ordering::Equal => Movement::Unchanged,
        },
    }
}

fn totals(plan: &Plan, pool: &str) -> PoolTotals {
    let mut t = PoolTotals::default();
    for e in plan
        .experiments
        .iter()
        .filter(|e| e.pools.iter().any(|p| p == pool))
    {
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
    let mut needs_decision = Vec::new();
    for n in &new.experiments {
        let o = old.experiments.iter().find(|o| o.id == n.id);
        let decide = n.status == Status::Running
            && new
                .running
                .iter()
                .any(|r| r.id == n.id && r.needs_decision());
        let mv = match o {
            _ if decide => Movement::NeedsDecision,
            Some(o) => movement(o, n),
            None => Movement::Added,
        };
        let both = o.filter(|o| in_calendar(o) && in_calendar(n));
        let slip = both.and_then(|o| match (result_date(o), result_date(n)) {
            (Some(a), Some(b)) => Some((b - a).num_days()),
            _ => None,
        });
        match mv {
            Movement::NoLongerFits => no_longer_fit.push(n.id.clone()),
            Movement::NowFits => now_fit.push(n.id.clone()),
            Movement::NeedsDecision => needs_decision.push(n.id.clone()),
            _ => {}
        }
        if both.is_some_and(|o| share(o) != share(n)) {
            share_changed.push(n.id.clone());
        }
        experiments.push(ExperimentDiff {
            id: n.id.clone(),
            pools: n.pools.clone(),
            movement: mv,
            old_status: o.map(|o| o.status),
            new_status: Some(n.status),
            old_result_date: o.and_then(result_date),
            new_result_date: result_date(n),
            slip_days: slip,
            old_share: o.and_then(share),
            new_share: share(n),
        });
    }
    for o in &old.experiments {
        if !new.experiments.iter().any(|n| n.id == o.id) {
            experiments.push(ExperimentDiff {
                id: o.id.clone(),
                pools: o.pools.clone(),
                movement: Movement::Dropped,
                old_status: Some(o.status),
                new_status: None,
                old_result_date: result_date(o),
                new_result_date: None,
                slip_days: None,
                old_share: share(o),
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
        needs_decision,
        pools,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::{PlanWindow, PoolDay, PoolPlan, Run, Sharing, SolverStatus, SolverSummary};
    use chrono::NaiveDate;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn exp(id: &str, status: Status, end: Option<&str>, share: Option<f64>) -> PlannedExperiment {
        let end = end.map(d);
        PlannedExperiment {
            id: id.into(),
            title: id.into(),
            owner: String::new(),
            pools: vec!["home".into()],
            priority: 1.0,
            status,
            run: end
                .zip(share.map(Share::from_fraction))
                .map(|(end, share)| Run {
                    start: d("2027-01-04"),
                    end,
                    result_date: end.succ_opt().unwrap(),
                    share,
                    days: 1,
                    units_expected: 0.0,
                }),
            units_needed: 1000,
            eligible: 1.0,
            ..PlannedExperiment::default()
        }
    }

    fn plan(experiments: Vec<PlannedExperiment>, daily: f64) -> Plan {
        Plan {
            portfolio: "t".into(),
            id: "t".into(),
            window: PlanWindow {
                start: d("2027-01-04"),
                end: d("2027-01-06"),
                week_start: None,
            },
            solver: SolverSummary {
                backend: "microlp".into(),
                status: SolverStatus::Optimal,
                seconds: 0.0,
                value: 0.0,
                bound: 0.0,
                gap: 0.0,
                cut_short: false,
            },
            greedy_value: 0.0,
            experiments,
            pools: vec![PoolPlan {
                id: "home".into(),
                label: "Home".into(),
                sharing: Sharing::Split,
                max_concurrent: 2,
                holdout: 0.0,
                days: (4..=6)
                    .map(|i| PoolDay {
                        date: d(&format!("2027-01-0{i}")),
                        forecast: daily,
                        share_used: crate::share::Share::ZERO,
                        running: 0,
                    })
                    .collect(),
                history: vec![],
                backtest: vec![],
            }],
            blackouts: vec![],
            today: d("2027-01-04"),
            running: vec![],
            traffic: vec![],
            missing_progress: vec![],
            changes: None,
            calendar: None,
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
