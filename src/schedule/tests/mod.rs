//! Unit tests of the scheduler: small portfolios whose optimum is worked
//! out by hand in the comments, the reasons, re-plan requests, the
//! verifier catching broken plans, and property tests on random portfolios
//! (every plan verified, never worse than greedy, never above its bound,
//! the same bytes twice).

use super::*;
use crate::plan::Status;
use crate::portfolio::{
    after_order, Blackout, BlackoutKind, Defaults, Experiment, Forecast, Planning, Pool, Portfolio,
    Prerequisite, Sharing, StartGrid, Window,
};
use crate::reason::Reason;
use crate::share::{Share, ShareLevels};
use crate::sizing::{Design, Effect, Metric};
use chrono::Weekday;
use proptest::prelude::*;

fn d(s: &str) -> NaiveDate {
    NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
}

fn pool(id: &str, daily: f64, sharing: Sharing, cap: u32) -> Pool {
    Pool {
        id: id.into(),
        label: id.into(),
        forecast: Forecast {
            daily,
            weekday: [1.0; 7],
            adjustments: Vec::new(),
            scales: Vec::new(),
            level_path: None,
            history: None,
            uncertainty: None,
        },
        sharing,
        max_concurrent: cap,
        holdout: 0.0,
    }
}

fn exp(id: &str, pool: usize, need: u64, priority: f64) -> Experiment {
    Experiment {
        id: id.into(),
        title: id.into(),
        owner: "tests".into(),
        pools: vec![pool],
        ramp: Vec::new(),
        ramp_counts: false,
        design: Design::new(Metric::Rate { baseline: 0.1 }, Effect::Relative(0.1)),
        need: super::synthetic::two_arm_need(need),
        sample_size_given: false,
        eligible: 1.0,
        looks: None,
        metrics: Vec::new(),
        driver: String::new(),
        priority,
        earliest_start: None,
        deadline: None,
        max_share: Share::WHOLE,
        min_days: 7,
        whole_weeks: true,
        after: Vec::new(),
        not_with: Vec::new(),
        apart_traffic: Vec::new(),
    }
}

/// Window 2027-01-04 (a Monday) to 2027-01-31: 28 days, so a run ending on
/// day index e earns priority x (1 - 0.5 e / 27). Share levels 50% and 100%.
fn portfolio(pools: Vec<Pool>, experiments: Vec<Experiment>) -> Portfolio {
    Portfolio {
        id: "hand-built".into(),
        name: "hand-built".into(),
        window: Window {
            start: d("2027-01-04"),
            end: d("2027-01-31"),
        },
        defaults: Defaults {
            min_days: 7,
            ..Defaults::default()
        },
        share_levels: ShareLevels::from_fractions(&[0.5, 1.0]),
        planning: Planning::default(),
        pools,
        after_order: after_order(&experiments).expect("hand-built `after` links have no cycle"),
        experiments,
        blackouts: Vec::new(),
    }
}

/// Plans, verifies, and checks the value against the bound.
fn planned(p: &Portfolio, r: &PlanRequest) -> Plan {
    let plan = plan(p, r);
    if let Err(v) = verify(p, r, &plan) {
        panic!("verifier: {v:#?}");
    }
    assert!(plan.solver.value <= plan.solver.bound + 1e-9);
    assert!(plan.solver.value >= plan.greedy_value - 1e-9);
    // Never the fallback: the optimised plan itself passed the guard.
    assert_ne!(plan.solver.status, SolverStatus::Greedy);
    plan
}

fn run_of(plan: &Plan, id: &str) -> Option<(NaiveDate, NaiveDate, f64)> {
    let e = plan.experiments.iter().find(|e| e.id == id).unwrap();
    e.run.map(|r| (r.start, r.end, r.share.fraction()))
}

/// Asserts that `plan` runs `id` from `start` to `end` (ISO dates) at
/// `share` of its pool.
#[track_caller]
fn assert_run(plan: &Plan, id: &str, start: &str, end: &str, share: f64) {
    assert_eq!(
        run_of(plan, id),
        Some((d(start), d(end), share)),
        "the run of `{id}`"
    );
}

/// Asserts the reason `plan` gives for leaving `id` out, as worded.
#[track_caller]
fn assert_reason(plan: &Plan, id: &str, expected: &str) {
    assert_eq!(reason_of(plan, id), expected, "the reason of `{id}`");
}

/// A blackout from `from` to `to` (ISO dates) on `pools` (all when empty).
fn blackout(from: &str, to: &str, kind: BlackoutKind, pools: &[usize]) -> Blackout {
    Blackout {
        from: d(from),
        to: d(to),
        kind,
        note: format!("{kind:?} from {from}"),
        pools: pools.to_vec(),
    }
}

/// How two tests are kept apart.
enum Apart {
    /// Never running on the same day (`not_with`).
    InTime,
    /// Never sharing a unit of traffic (`apart_traffic`).
    OnTraffic,
}

/// The two tests of `pair`, at indexes 0 and 1, kept apart `how`.
fn apart(pair: [Experiment; 2], how: Apart) -> Vec<Experiment> {
    let mut pair = Vec::from(pair);
    for (i, e) in pair.iter_mut().enumerate() {
        let other = vec![1 - i];
        match how {
            Apart::InTime => e.not_with = other,
            Apart::OnTraffic => e.apart_traffic = other,
        }
    }
    pair
}

/// One prerequisite: the test at index `experiment`, then `gap_days`.
fn after(experiment: usize, gap_days: u32) -> Vec<Prerequisite> {
    vec![Prerequisite {
        experiment,
        gap_days,
    }]
}

fn reason_of(plan: &Plan, id: &str) -> String {
    let e = plan.experiments.iter().find(|e| e.id == id).unwrap();
    e.reason.as_deref().unwrap_or_default().to_string()
}

#[test]
fn two_tests_share_one_pool_in_turn() {
    // 1,000 units a day; each needs 7,000: one week at 100%, two at 50%.
    // a (priority 2) in week 1 at 100% ends on day 6: 2 (1 - 3/27) = 48/27;
    // b (1) in week 2 ends on day 13: 1 - 6.5/27 = 20.5/27. Total 68.5/27.
    // Both at 50% from day 0 end on day 13: 3 x 20.5/27 = 61.5/27, less.
    let p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![exp("a", 0, 7000, 2.0), exp("b", 0, 7000, 1.0)],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert!((plan.solver.value - 68.5 / 27.0).abs() < 1e-9);
    assert_eq!(plan.solver.status, SolverStatus::Optimal);
    assert_run(&plan, "a", "2027-01-04", "2027-01-10", 1.0);
    assert_run(&plan, "b", "2027-01-11", "2027-01-17", 1.0);
    let e = &plan.experiments[0];
    let run = e.run.unwrap();
    assert_eq!(run.result_date, d("2027-01-11"));
    assert_eq!(run.days, 7);
    assert_eq!(run.units_expected, 7000.0);
    assert_eq!(plan.pools[0].days[0].share_used.fraction(), 1.0);
    assert_eq!(plan.pools[0].days[0].running, 1);
}

#[test]
fn the_optimiser_beats_greedy_where_priority_order_blocks_a_deadline() {
    // a needs 14,000 (two weeks at 100%); b needs 7,000 by 2027-01-17 (day 13).
    // Greedy takes a first (index order on equal priority) at 100% from day
    // 0 to 13, which leaves b no room: value 1 - 6.5/27 = 20.5/27.
    // Optimum: b in week 1 (ends day 6: 24/27), a in weeks 2-3 (ends day 20:
    // 1 - 10/27 = 17/27): 41/27. Both at 50% from day 0 give only
    // (13.5 + 20.5)/27 = 34/27.
    let mut b = exp("b", 0, 7000, 1.0);
    b.deadline = Some(d("2027-01-17"));
    let p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![exp("a", 0, 14000, 1.0), b],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert!((plan.greedy_value - 20.5 / 27.0).abs() < 1e-9);
    assert!((plan.solver.value - 41.0 / 27.0).abs() < 1e-9);
    assert_run(&plan, "b", "2027-01-04", "2027-01-10", 1.0);
    assert_run(&plan, "a", "2027-01-11", "2027-01-24", 1.0);
}

#[test]
fn after_waits_for_the_predecessor_and_its_gap() {
    // a ends on day 6; b starts no earlier than 6 + 1 + 7 = day 14 and runs
    // one week at 100% to day 20: 24/27 + (1 - 10/27) = 41/27.
    let mut b = exp("b", 0, 7000, 1.0);
    b.after = after(0, 7);
    let p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![exp("a", 0, 7000, 1.0), b],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert!((plan.solver.value - 41.0 / 27.0).abs() < 1e-9);
    assert_eq!(run_of(&plan, "b").unwrap().0, d("2027-01-18"));
}

#[test]
fn not_with_links_two_pools() {
    // Each alone on its own pool, but they must not overlap: a (2) first,
    // b (1) the week after: 48/27 + 20.5/27 = 68.5/27.
    let pair = [exp("a", 0, 7000, 2.0), exp("b", 1, 7000, 1.0)];
    let p = portfolio(
        vec![
            pool("home", 1000.0, Sharing::Split, 3),
            pool("search", 1000.0, Sharing::Split, 3),
        ],
        apart(pair, Apart::InTime),
    );
    let plan = planned(&p, &PlanRequest::default());
    assert!((plan.solver.value - 68.5 / 27.0).abs() < 1e-9);
    assert_eq!(run_of(&plan, "b").unwrap().0, d("2027-01-11"));
}

#[test]
fn overlap_pools_are_limited_by_their_cap_only() {
    // Overlap pool: both may take 100% at once when the cap allows two:
    // 3 x 24/27 = 72/27. With a cap of one they go in turn: 68.5/27.
    for (cap, want) in [(2, 72.0 / 27.0), (1, 68.5 / 27.0)] {
        let p = portfolio(
            vec![pool("app", 1000.0, Sharing::Overlap, cap)],
            vec![exp("a", 0, 7000, 2.0), exp("b", 0, 7000, 1.0)],
        );
        let plan = planned(&p, &PlanRequest::default());
        assert!((plan.solver.value - want).abs() < 1e-9, "cap {cap}");
    }
}

#[test]
fn reasons_say_what_to_change() {
    // too-long needs 100,000 at 1,000 a day: 100 days, 105 in whole weeks.
    // late must end by 2027-01-10 but needs two weeks: earliest end 01-17.
    // child depends on too-long. c3 is the third two-week test at 100% in
    // a window of four weeks: only two fit.
    let mut late = exp("late", 0, 14000, 1.0);
    late.deadline = Some(d("2027-01-10"));
    let mut child = exp("child", 0, 7000, 1.0);
    child.after = after(0, 0);
    let p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![
            exp("too-long", 0, 100_000, 5.0),
            late,
            child,
            exp("c1", 0, 14000, 3.0),
            exp("c2", 0, 14000, 2.0),
            exp("c3", 0, 14000, 1.0),
        ],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_reason(
        &plan,
        "too-long",
        "needs 105 days at 100% of `home`; the window has 28",
    );
    assert_reason(&plan, "late", "deadline 2027-01-10 cannot be met: at its maximum share of 100% the earliest end is 2027-01-17");
    assert_reason(
        &plan,
        "child",
        "depends on `too-long`, which is not scheduled",
    );
    assert_reason(&plan, "c3", "fits alone, but `home` is full from 2027-01-04 to 2027-01-31 with tests of higher priority: c1 (3), c2 (2)");
}

#[test]
fn blackouts_bind_and_are_named() {
    // Two weeks at 100% from day 0 would run into the week with nothing
    // running (days 7-13), and the window has no later fortnight free of
    // it that ends in time once day 14 cannot start either.
    let mut p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![exp("a", 0, 14000, 1.0), exp("b", 0, 7000, 1.0)],
    );
    p.blackouts = vec![
        blackout("2027-01-11", "2027-01-17", BlackoutKind::NoRunning, &[]),
        blackout("2027-01-18", "2027-01-18", BlackoutKind::NoStarts, &[0]),
    ];
    let plan = planned(&p, &PlanRequest::default());
    // b fits in week 1 (days 0-6); a cannot fit: weeks 1-2 cross the
    // blackout, week 3 cannot start, weeks 4-5 leave the window.
    assert_run(&plan, "b", "2027-01-04", "2027-01-10", 1.0);
    assert!(run_of(&plan, "a").is_none());
    assert!(
        reason_of(&plan, "a").contains("blackout"),
        "{}",
        reason_of(&plan, "a")
    );
}

#[test]
fn a_daily_grid_starts_on_the_earliest_start() {
    // Daily grid, no whole weeks, min 3 days: 5,000 at 1,000 a day is 5
    // days from 2027-01-06 (day 2) to 2027-01-10 (day 6).
    let mut a = exp("a", 0, 5000, 1.0);
    a.whole_weeks = false;
    a.min_days = 3;
    a.earliest_start = Some(d("2027-01-06"));
    let mut p = portfolio(vec![pool("home", 1000.0, Sharing::Split, 3)], vec![a]);
    p.planning.grid = StartGrid::Daily;
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "a", "2027-01-06", "2027-01-10", 1.0);
    assert!((plan.solver.value - (1.0 - 0.5 * 6.0 / 27.0)).abs() < 1e-9);
}

#[test]
fn a_replan_keeps_running_tests_and_starts_nothing_before_today() {
    // a runs at 100% from 2027-01-04 to 2027-01-17 and is held; today is
    // 2027-01-11. b (7,000) can start only once the pool is free on day 14
    // and ends on day 20. c finished on 2027-01-08, so its successor d may
    // start from the next Monday on; e's predecessor was cancelled.
    let mut d_ = exp("d", 1, 7000, 1.0);
    d_.after = after(2, 0);
    let mut e_ = exp("e", 1, 7000, 1.0);
    e_.after = after(5, 0);
    let p = portfolio(
        vec![
            pool("home", 1000.0, Sharing::Split, 3),
            pool("search", 1000.0, Sharing::Split, 3),
        ],
        vec![
            exp("a", 0, 14000, 1.0),
            exp("b", 0, 7000, 1.0),
            exp("c", 1, 7000, 1.0),
            d_,
            e_,
            exp("f", 1, 7000, 1.0),
        ],
    );
    let request = PlanRequest {
        today: Some(d("2027-01-11")),
        fixed: vec![FixedRun {
            experiment: 0,
            start: d("2027-01-04"),
            share: Share::WHOLE,
            share_before: Share::WHOLE,
            end: d("2027-01-17"),
            so_far: None,
        }],
        excluded: vec![
            Excluded {
                experiment: 2,
                ended: Some(d("2027-01-08")),
                reason: Reason::Finished { ended: None },
                ran: None,
            },
            Excluded {
                experiment: 5,
                ended: None,
                reason: Reason::Cancelled {
                    note: String::new(),
                },
                ran: None,
            },
        ],
        ..PlanRequest::default()
    };
    let plan = planned(&p, &request);
    assert_eq!(plan.experiments[0].status, Status::Running);
    assert_run(&plan, "a", "2027-01-04", "2027-01-17", 1.0);
    assert_run(&plan, "b", "2027-01-18", "2027-01-24", 1.0);
    assert_eq!(plan.experiments[2].status, Status::Finished);
    assert_eq!(plan.experiments[5].status, Status::Cancelled);
    assert_eq!(run_of(&plan, "d").unwrap().0, d("2027-01-11"));
    assert!(run_of(&plan, "e").is_none());
    assert!(reason_of(&plan, "e").contains("`f`"));
    assert_eq!(plan.today, d("2027-01-11"));
}

#[test]
fn edge_cases_give_plans_with_reasons() {
    // A pool with no traffic, a share cap below every level, and a re-plan
    // whose today is past the window.
    let mut tiny = exp("tiny-share", 0, 7000, 1.0);
    tiny.max_share = Share::from_fraction(0.25);
    let p = portfolio(
        vec![
            pool("home", 1000.0, Sharing::Split, 3),
            pool("dark", 0.0, Sharing::Split, 3),
        ],
        vec![exp("a", 0, 7000, 1.0), exp("b", 1, 7000, 1.0), tiny],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_reason(&plan, "b", "needs 7,000 units; at 100% of `dark` the forecast does not deliver them within three years");
    assert_reason(
        &plan,
        "tiny-share",
        "no share level is at or below its maximum share of 25%; add a smaller level or raise it",
    );
    let late = PlanRequest {
        today: Some(d("2027-02-15")),
        ..PlanRequest::default()
    };
    let plan = planned(&p, &late);
    assert!(plan.experiments.iter().all(|e| e.run.is_none()));
    assert_reason(
        &plan,
        "a",
        "its earliest possible start, 2027-02-15, is past the window",
    );
    assert_eq!(plan.solver.value, 0.0);
}

#[test]
fn the_verifier_catches_broken_plans() {
    let mut c = exp("c", 0, 7000, 1.0);
    c.not_with = vec![0];
    let mut a = exp("a", 0, 7000, 2.0);
    a.not_with = vec![2];
    let p = portfolio(
        vec![pool("home", 1000.0, Sharing::Split, 3)],
        vec![a, exp("b", 0, 7000, 1.0), c],
    );
    let r = PlanRequest::default();
    let good = plan(&p, &r);
    assert!(verify(&p, &r, &good).is_ok());
    type Breaker = Box<dyn Fn(&mut Plan)>;
    let breakers: Vec<(&str, Breaker)> = vec![
        (
            "end a day early",
            Box::new(|pl: &mut Plan| {
                if let Some(r) = &mut pl.experiments[0].run {
                    r.end -= Duration::days(1);
                }
            }),
        ),
        (
            "share off the levels",
            Box::new(|pl: &mut Plan| {
                if let Some(r) = &mut pl.experiments[0].run {
                    r.share = Share::from_fraction(0.4);
                }
            }),
        ),
        (
            "start off the grid",
            Box::new(|pl: &mut Plan| {
                if let Some(r) = &mut pl.experiments[0].run {
                    r.start += Duration::days(1);
                }
            }),
        ),
        (
            "claimed value",
            Box::new(|pl: &mut Plan| pl.solver.value += 0.5),
        ),
        (
            "everything at once",
            Box::new(|pl: &mut Plan| {
                for e in pl.experiments.iter_mut() {
                    e.status = Status::Scheduled;
                    e.run = Some(Run {
                        start: d("2027-01-04"),
                        end: d("2027-01-10"),
                        result_date: d("2027-01-11"),
                        share: Share::WHOLE,
                        days: 7,
                        units_expected: 7000.0,
                    });
                    e.reason = None;
                }
            }),
        ),
    ];
    for (what, f) in breakers {
        let mut bad = good.clone();
        f(&mut bad);
        assert!(verify(&p, &r, &bad).is_err(), "the verifier missed: {what}");
    }
}

#[test]
fn the_demo_plan_verifies_and_beats_greedy() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/portfolios/demo.yaml");
    let p = crate::portfolio::load(std::path::Path::new(path)).expect("the demo loads");
    let r = PlanRequest::default();
    let plan = planned(&p, &r);
    assert!(plan.solver.value > plan.greedy_value);
    for e in &plan.experiments {
        assert_eq!(
            e.status == Status::Unscheduled,
            e.reason.is_some(),
            "{}",
            e.id
        );
    }
}

mod pools;
mod properties;
mod scale;

use properties::{replan_request, untimed};
pub(crate) use scale::on_threads;
