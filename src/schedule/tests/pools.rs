//! Pools: eligibility and holdouts, tests on several pools, ramps, and
//! tests kept apart on traffic.

use super::*;

#[test]
fn eligibility_lengthens_a_run_by_its_own_arithmetic() {
    // 1,000 units a day at 100%; 4,200 units: 5 days, the 7-day minimum,
    // ends day 6. At 30% eligible 300 a day enter: 14 days, ends day 13.
    let mut b = exp("b", 1, 4200, 1.0);
    b.eligible = 0.3;
    let p = portfolio(
        vec![
            pool("a", 1000.0, Sharing::Split, 3),
            pool("b", 1000.0, Sharing::Split, 3),
        ],
        vec![exp("a", 0, 4200, 1.0), b],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "a", "2027-01-04", "2027-01-10", 1.0);
    assert_run(&plan, "b", "2027-01-04", "2027-01-17", 1.0);
    let e = plan.experiments.iter().find(|e| e.id == "b").unwrap();
    assert!((e.run.unwrap().units_expected - 4200.0).abs() < 1e-9);
    // The verifier re-derives the end: one day short is refused.
    let mut bad = plan.clone();
    let run = bad.experiments[1].run.as_mut().unwrap();
    run.end = d("2027-01-10");
    run.result_date = d("2027-01-11");
    run.days = 7;
    assert!(verify(&p, &PlanRequest::default(), &bad).is_err());
}

#[test]
fn a_split_holdout_keeps_the_shares_under_its_capacity() {
    // 5% held out: 100% does not fit, nor 50% + 50%; two 50% tests of a
    // week each (3,500 units at 500 a day) run one after the other.
    let mut home = pool("home", 1000.0, Sharing::Split, 3);
    home.holdout = 0.05;
    assert_eq!(home.capacity(), Share::from_fraction(0.95));
    let p = portfolio(
        vec![home],
        vec![exp("a", 0, 3500, 2.0), exp("b", 0, 3500, 1.0)],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "a", "2027-01-04", "2027-01-10", 0.5);
    assert_run(&plan, "b", "2027-01-11", "2027-01-17", 0.5);
    assert_eq!(plan.pools[0].holdout, 0.05);
    // Side by side they would use 100% of a pool whose room is 95%.
    let mut bad = plan.clone();
    let run = bad.experiments[1].run.as_mut().unwrap();
    (run.start, run.end, run.result_date) = (d("2027-01-04"), d("2027-01-10"), d("2027-01-11"));
    for day in &mut bad.pools[0].days[..7] {
        day.share_used = Share::WHOLE;
        day.running = 2;
    }
    for day in &mut bad.pools[0].days[7..14] {
        day.share_used = Share::ZERO;
        day.running = 0;
    }
    bad.solver.value += 7.0 / 27.0 * 0.5;
    let errors = verify(&p, &PlanRequest::default(), &bad).unwrap_err();
    assert!(
        errors.iter().any(|e| e.contains("over 0.95")),
        "{errors:#?}"
    );
}

#[test]
fn an_overlap_holdout_scales_every_tests_units() {
    // 1,000 a day less 20%: 800 enter at 100%; 8,000 units take 10 days
    // (8 without the holdout), ending day 9.
    let mut news = pool("news", 1000.0, Sharing::Overlap, 2);
    news.holdout = 0.2;
    let mut a = exp("a", 0, 8000, 1.0);
    a.whole_weeks = false;
    let p = portfolio(vec![news], vec![a]);
    assert_eq!(p.entering_fraction(0, 0), 0.8);
    assert_eq!(p.pools[0].capacity(), Share::WHOLE);
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "a", "2027-01-04", "2027-01-13", 1.0);
}

#[test]
fn the_reason_names_eligibility_and_the_holdout() {
    // 10,000 units at 300 a day (30% of 1,000 eligible): 34 days, 35 in
    // whole weeks, more than the window's 28.
    let mut a = exp("a", 0, 10_000, 1.0);
    a.eligible = 0.3;
    let p = portfolio(vec![pool("home", 1000.0, Sharing::Overlap, 2)], vec![a]);
    let plan = planned(&p, &PlanRequest::default());
    assert_reason(
        &plan,
        "a",
        "needs 35 days at 100% of `home` (30% of its units eligible); the window has 28",
    );
    // A split pool with a 5% holdout caps the share at 50% (the levels are
    // 50% and 100%): 10,000 at 500 a day is 20 days, 21 in whole weeks,
    // past a deadline of 2027-01-17.
    let mut b = exp("b", 0, 10_000, 1.0);
    b.deadline = Some(d("2027-01-17"));
    let mut shop = pool("shop", 1000.0, Sharing::Split, 2);
    shop.holdout = 0.05;
    let p = portfolio(vec![shop], vec![b]);
    let plan = planned(&p, &PlanRequest::default());
    assert_reason(&plan, "b", "deadline 2027-01-17 cannot be met: at its maximum share of 50% (5% held out) the earliest end is 2027-01-24");
}

// Tests on several pools, ramps and pairs kept apart on traffic.

use crate::portfolio::RampStep;

/// `exp` on every pool of `pools`, with a minimum run of one day and no
/// rounding to whole weeks, so ends can be worked out day by day.
fn site(id: &str, pools: &[usize], need: u64, priority: f64) -> Experiment {
    Experiment {
        pools: pools.to_vec(),
        min_days: 1,
        whole_weeks: false,
        ..exp(id, pools[0], need, priority)
    }
}

#[test]
fn a_three_pool_test_ends_from_the_summed_forecast_and_holds_each_pool() {
    // Pools of 1,000, 500 and 500 units a day: at 100% of each the test
    // collects 2,000 a day, so 21,000 units take 11 days (10 days give
    // 20,000): days 0 to 10, 2027-01-04 to 2027-01-14, 22,000 units.
    // `solo` (3,500 units of a 500-a-day pool: one week at 100%) cannot
    // share `b` with it, a split pool held whole, so it starts on the next
    // Monday after day 10: day 14, ending day 20. Taking 50% instead would
    // end the big test on day 20: 10 (1 - 10/27) + solo from day 0 at 50%
    // to day 13 = 6.30 + 0.76 < 10 (1 - 5/27) + (1 - 10/27) = 8.15 + 0.63.
    let p = portfolio(
        vec![
            pool("a", 1000.0, Sharing::Split, 3),
            pool("b", 500.0, Sharing::Split, 3),
            pool("c", 500.0, Sharing::Overlap, 3),
        ],
        vec![
            site("big", &[0, 1, 2], 21_000, 10.0),
            exp("solo", 1, 3_500, 1.0),
        ],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "big", "2027-01-04", "2027-01-14", 1.0);
    let big = &plan.experiments[0];
    assert_eq!(big.pools, vec!["a", "b", "c"]);
    assert_eq!(big.run.unwrap().units_expected, 22_000.0);
    for pool in &plan.pools {
        assert_eq!(pool.days[0].share_used.fraction(), 1.0, "{}", pool.id);
        assert_eq!(pool.days[0].running, 1, "{}", pool.id);
        assert_eq!(pool.days[11].running, 0, "{}", pool.id);
    }
    assert_run(&plan, "solo", "2027-01-18", "2027-01-24", 1.0);
    // The summed forecast is what `check` reads too: the same end alone.
    let report = crate::check::check(&p);
    assert_eq!(
        report.experiments[0].end_from_first_start,
        Some(d("2027-01-14"))
    );
    assert_eq!(report.experiments[0].pools, vec!["a", "b", "c"]);
    // Each pool counts the big test's part of its need: 21,000 x 1/2 on
    // `a`, x 1/4 on `b` (plus solo's 3,500) and on `c`.
    let needed: Vec<u64> = report.pools.iter().map(|p| p.needed_units).collect();
    assert_eq!(needed, vec![10_500, 5_250 + 3_500, 5_250]);
}

#[test]
fn a_blackout_of_any_of_its_pools_applies_to_a_multi_pool_test() {
    let mut p = portfolio(
        vec![
            pool("a", 1000.0, Sharing::Split, 3),
            pool("b", 1000.0, Sharing::Split, 3),
        ],
        vec![site("big", &[0, 1], 14_000, 1.0)],
    );
    p.blackouts.push(blackout(
        "2027-01-04",
        "2027-01-10",
        BlackoutKind::NoStarts,
        &[1],
    ));
    // 2,000 a day at 100%: 7 days, from the next Monday.
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "big", "2027-01-11", "2027-01-17", 1.0);
}

#[test]
fn a_multi_pool_test_counts_against_each_pools_cap_and_names_the_full_pool() {
    // `hog` holds `search` (cap 1) for the whole window (500 a day, 14,000
    // units: 28 days at 100%); `wide`, on `home` and `search`, has no day
    // left on `search` however much room `home` has.
    let p = portfolio(
        vec![
            pool("home", 10_000.0, Sharing::Overlap, 3),
            pool("search", 500.0, Sharing::Overlap, 1),
        ],
        vec![
            exp("hog", 1, 14_000, 10.0),
            site("wide", &[0, 1], 7_000, 1.0),
        ],
    );
    let plan = planned(&p, &PlanRequest::default());
    assert!(run_of(&plan, "hog").is_some());
    assert_eq!(run_of(&plan, "wide"), None);
    let why = reason_of(&plan, "wide");
    assert!(
        why.starts_with("fits alone, but `search` is full from 2027-01-04 to "),
        "{why}"
    );
    assert!(why.contains("hog (10)"), "{why}");
}

#[test]
fn pools_joined_by_a_multi_pool_test_form_one_component() {
    let p = portfolio(
        vec![
            pool("a", 1000.0, Sharing::Split, 3),
            pool("b", 1000.0, Sharing::Split, 3),
            pool("c", 1000.0, Sharing::Split, 3),
        ],
        vec![
            exp("on-a", 0, 7000, 1.0),
            exp("on-b", 1, 7000, 1.0),
            exp("on-c", 2, 7000, 1.0),
            site("a-and-b", &[0, 1], 7000, 1.0),
        ],
    );
    let inst = Instance::new(&p, &PlanRequest::default());
    assert_eq!(components(&inst), vec![vec![0, 1, 3], vec![2]]);
}

/// One pool of 10,000 units a day and a test of 20,500 units at 50% after
/// a ramp of two days at 5%.
fn ramped(counts: bool) -> Portfolio {
    let mut t = site("ramped", &[0], 20_500, 1.0);
    t.max_share = Share::from_fraction(0.5);
    t.ramp = vec![RampStep {
        share: Share::from_fraction(0.05),
        days: 2,
    }];
    t.ramp_counts = counts;
    portfolio(vec![pool("home", 10_000.0, Sharing::Split, 3)], vec![t])
}

#[test]
fn ramp_days_count_only_with_ramp_counts() {
    // Not counted: two ramp days, then 20,500 at 5,000 a day takes 5 days
    // (4 give 20,000): days 0 to 6, 2027-01-04 to 2027-01-10, and 25,000
    // units counted. Counted: the ramp brings 2 x 500 = 1,000, the other
    // 19,500 take 4 days: days 0 to 5, to 2027-01-09, 1,000 + 20,000.
    for (counts, end, units) in [
        (false, "2027-01-10", 25_000.0),
        (true, "2027-01-09", 21_000.0),
    ] {
        let p = ramped(counts);
        let plan = planned(&p, &PlanRequest::default());
        assert_eq!(
            run_of(&plan, "ramped"),
            Some((d("2027-01-04"), d(end), 0.5)),
            "ramp_counts {counts}"
        );
        let e = &plan.experiments[0];
        assert_eq!(e.run.unwrap().units_expected, units);
        assert_eq!(e.ramp.len(), 1);
        assert_eq!(
            (e.ramp[0].start, e.ramp[0].end, e.ramp[0].share),
            (d("2027-01-04"), d("2027-01-05"), Share::from_fraction(0.05))
        );
        // Capacity is held at the ramp's share on its days.
        let days = &plan.pools[0].days;
        assert_eq!(days[0].share_used.fraction(), 0.05);
        assert_eq!(days[1].share_used.fraction(), 0.05);
        assert_eq!(days[2].share_used.fraction(), 0.5);
    }
}

#[test]
fn another_test_uses_the_room_a_ramp_leaves() {
    // `ramped` holds 5% on days 0-1 and 50% after; `short` (50% or 100%,
    // 7,000 units) fits at 100% nowhere beside it, at 50% beside it from
    // day 0 (1.0 in total on days 2 on, 0.55 on the ramp days).
    let mut p = ramped(false);
    let mut short = exp("short", 0, 35_000, 0.5);
    short.max_share = Share::from_fraction(0.5);
    p.experiments.push(short);
    p.after_order = after_order(&p.experiments).unwrap();
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "short", "2027-01-04", "2027-01-10", 0.5);
    assert!((plan.pools[0].days[0].share_used.fraction() - 0.55).abs() < 1e-12);
    assert_eq!(plan.pools[0].days[3].share_used.fraction(), 1.0);
}

#[test]
fn tests_apart_on_traffic_split_an_overlap_pool() {
    // An overlap pool of 1,000 a day; a (priority 2) and b (1) each need
    // 7,000: a week at 100%, two at 50%. Free, both run at 100% in week 1.
    // Apart on traffic their shares add up to at most 1: a at 100% in week
    // 1 (2 x 24/27) and b at 100% in week 2 (20.5/27), 68.5/27, beats both
    // at 50% to day 13 (3 x 20.5/27 = 61.5/27).
    let both = |kept_apart: bool| {
        let pair = [exp("a", 0, 7000, 2.0), exp("b", 0, 7000, 1.0)];
        let tests = if kept_apart {
            apart(pair, Apart::OnTraffic)
        } else {
            pair.into()
        };
        portfolio(vec![pool("o", 1000.0, Sharing::Overlap, 3)], tests)
    };
    let free = planned(&both(false), &PlanRequest::default());
    assert_run(&free, "b", "2027-01-04", "2027-01-10", 1.0);
    let p = both(true);
    let plan = planned(&p, &PlanRequest::default());
    assert!((plan.solver.value - 68.5 / 27.0).abs() < 1e-9);
    assert_run(&plan, "a", "2027-01-04", "2027-01-10", 1.0);
    assert_run(&plan, "b", "2027-01-11", "2027-01-17", 1.0);
    // The free calendar breaks the pair's rule: the verifier says so.
    let err = verify(&p, &PlanRequest::default(), &free).unwrap_err();
    assert!(
        err.iter()
            .any(|v| v.contains("kept apart on traffic but take 2.0000")),
        "{err:#?}"
    );
}

#[test]
fn the_verifier_checks_pools_and_ramps() {
    let p = portfolio(
        vec![
            pool("a", 1000.0, Sharing::Split, 3),
            pool("b", 1000.0, Sharing::Split, 3),
        ],
        vec![site("big", &[0, 1], 14_000, 1.0), exp("on-b", 1, 7000, 1.0)],
    );
    let r = PlanRequest::default();
    let good = planned(&p, &r);
    // The same calendar read as if `big` ran on `a` alone: `on-b` beside it.
    let mut narrow = p.clone();
    narrow.experiments[0].pools = vec![0];
    let mut bad = planned(&narrow, &r);
    assert!(verify(&p, &r, &bad).is_err());
    bad.experiments[0].pools = good.experiments[0].pools.clone();
    let err = verify(&p, &r, &bad).unwrap_err();
    assert!(err.iter().any(|v| v.contains("`b` is shared")), "{err:#?}");
    // A ramp the test does not have.
    let mut ramp = good.clone();
    ramp.experiments[0].ramp.push(crate::plan::RampDays {
        start: d("2027-01-04"),
        end: d("2027-01-05"),
        share: Share::from_fraction(0.1),
    });
    let err = verify(&p, &r, &ramp).unwrap_err();
    assert!(
        err.iter()
            .any(|v| v.contains("lists a ramp other than its own")),
        "{err:#?}"
    );
}

#[test]
fn a_running_ramped_multi_pool_test_keeps_its_dates_and_shares() {
    // Two pools of 5,000 a day: at 100% of both, after two ramp days at 5%
    // (not counted), 20,500 units take 3 days (2 give 20,000): days 0 to
    // 4. A re-plan on day 2 keeps it, with the ramp in the past days.
    let mut t = site("big", &[0, 1], 20_500, 1.0);
    t.ramp = vec![RampStep {
        share: Share::from_fraction(0.05),
        days: 2,
    }];
    let p = portfolio(
        vec![
            pool("a", 5_000.0, Sharing::Split, 3),
            pool("b", 5_000.0, Sharing::Split, 3),
        ],
        vec![t],
    );
    let first = planned(&p, &PlanRequest::default());
    assert_run(&first, "big", "2027-01-04", "2027-01-08", 1.0);
    let r = PlanRequest {
        today: Some(d("2027-01-06")),
        fixed: vec![FixedRun {
            experiment: 0,
            start: d("2027-01-04"),
            share: Share::WHOLE,
            share_before: Share::WHOLE,
            end: d("2027-01-08"),
            so_far: None,
        }],
        ..PlanRequest::default()
    };
    let again = planned(&p, &r);
    assert_eq!(again.experiments[0].status, Status::Running);
    assert_run(&again, "big", "2027-01-04", "2027-01-08", 1.0);
    assert_eq!(again.experiments[0].ramp, first.experiments[0].ramp);
    for pool in &again.pools {
        assert_eq!(pool.days[1].share_used.fraction(), 0.05, "{}", pool.id);
        assert_eq!(pool.days[2].share_used.fraction(), 1.0, "{}", pool.id);
        assert_eq!(pool.days[5].share_used.fraction(), 0.0, "{}", pool.id);
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    /// Random portfolios with tests on several pools, ramps and pairs kept
    /// apart on traffic: every plan and every re-plan passes the verifier.
    #[test]
    fn random_portfolios_with_calendar_keys_plan_and_replan_to_verified_calendars(
        tests in 2usize..9,
        pools in 2usize..4,
        weeks in 3usize..9,
        seed in 0u64..1_000_000,
    ) {
        let base = synthetic::portfolio(&synthetic::Spec { tests, pools, weeks, seed });
        let p = synthetic::with_calendar_keys(base, seed);
        let r = PlanRequest::default();
        let a = plan(&p, &r);
        if let Err(v) = verify(&p, &r, &a) {
            panic!("verifier: {v:#?}");
        }
        prop_assert!(a.solver.value <= a.solver.bound + 1e-9);
        prop_assert!(a.solver.value >= a.greedy_value - 1e-9);
        prop_assert_ne!(a.solver.status, SolverStatus::Greedy);
        let rr = replan_request(&p, &a, (seed % 3) as i64 + 1);
        let c = plan(&p, &rr);
        if let Err(v) = verify(&p, &rr, &c) {
            panic!("verifier on the re-plan: {v:#?}");
        }
        prop_assert_ne!(c.solver.status, SolverStatus::Greedy);
    }
}

#[test]
fn synthetic_portfolios_with_calendar_keys_use_every_key() {
    let p = synthetic::with_calendar_keys(synthetic::portfolio(&synthetic::Spec::medium(3)), 3);
    assert!(p.experiments.iter().any(|e| e.pools.len() > 1));
    assert!(p.experiments.iter().any(|e| !e.ramp.is_empty()));
    assert!(p.experiments.iter().any(|e| !e.apart_traffic.is_empty()));
    // The base portfolio is untouched by the extra stream.
    let base = synthetic::portfolio(&synthetic::Spec::medium(3));
    assert_eq!(base, synthetic::portfolio(&synthetic::Spec::medium(3)));
}

#[test]
fn a_test_kept_apart_on_traffic_names_its_partner() {
    // One overlap pool of 1,000 a day for four weeks; `big` (priority 5)
    // needs all of it for four weeks, so `small`, kept apart on traffic
    // from it, has no share level left on any day.
    let pair = [exp("big", 0, 28_000, 5.0), exp("small", 0, 3_500, 1.0)];
    let p = portfolio(
        vec![pool("o", 1000.0, Sharing::Overlap, 3)],
        apart(pair, Apart::OnTraffic),
    );
    let plan = planned(&p, &PlanRequest::default());
    assert_run(&plan, "big", "2027-01-04", "2027-01-31", 1.0);
    assert_eq!(run_of(&plan, "small"), None);
    assert_reason(&plan, "small", "fits alone, but is kept apart on traffic from `big` (2027-01-04 to 2027-01-31), which the plan keeps, and no share level fits beside it");
}
