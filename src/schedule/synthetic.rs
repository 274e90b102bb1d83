//! Seeded synthetic portfolios for tests and the benchmark.
//!
//! The same [`Spec`] always gives the same portfolio. Pools get a daily
//! level, a weekday pattern, sometimes a dip; tests get a need sized so the
//! queue asks for about one and a half times the traffic the window holds,
//! integer priorities 1-10, and now and then an earliest start, a deadline,
//! an `after` link or a `not_with` pair (mostly within one pool), plus a
//! week with no starts and sometimes a week with nothing running on a pool.
//! [`with_keys`] adds, from its own seed, what the second round of the
//! model brought: pool holdouts, tests that admit only part of a pool,
//! given sample sizes and adjustments that compose.
//! The scenario is invented; nothing here models a real site.

use super::search::SplitMix64;
use crate::portfolio::{
    after_order, Adjustment, Blackout, BlackoutKind, Change, Defaults, Experiment, Forecast,
    Planning, Pool, Portfolio, Prerequisite, RampStep, Sharing, Window,
};
use crate::share::{Share, ShareLevels};
use crate::sizing::{Design, Effect, Metric, SampleSize};
use chrono::{Duration, NaiveDate};

/// The size and seed of a synthetic portfolio.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Spec {
    /// Experiments in the queue.
    pub tests: usize,
    /// Traffic pools.
    pub pools: usize,
    /// Weeks in the window.
    pub weeks: usize,
    /// The random seed: the same spec gives the same portfolio.
    pub seed: u64,
}

impl Spec {
    /// `tests` tests on `pools` pools over a quarter of 13 weeks.
    pub fn quarter(tests: usize, pools: usize, seed: u64) -> Spec {
        Spec {
            tests,
            pools,
            weeks: 13,
            seed,
        }
    }
    /// 10 tests, 2 pools, 13 weeks.
    pub fn small(seed: u64) -> Spec {
        Spec {
            tests: 10,
            pools: 2,
            weeks: 13,
            seed,
        }
    }
    /// 30 tests, 4 pools, 13 weeks.
    pub fn medium(seed: u64) -> Spec {
        Spec {
            tests: 30,
            pools: 4,
            weeks: 13,
            seed,
        }
    }
    /// 300 tests, 20 pools, 52 weeks.
    pub fn large(seed: u64) -> Spec {
        Spec {
            tests: 300,
            pools: 20,
            weeks: 52,
            seed,
        }
    }
    /// 3,000 tests, 40 pools, 13 weeks: a quarter at scale.
    pub fn scale(seed: u64) -> Spec {
        Spec {
            tests: 3000,
            pools: 40,
            weeks: 13,
            seed,
        }
    }
}

/// The share levels of every synthetic portfolio.
pub const SHARE_LEVELS: [f64; 6] = [0.1, 0.2, 0.3, 0.5, 0.75, 1.0];

/// The sample size of a two-arm test that needs `total` units (the
/// planner reads only the total; each arm gets half, rounded up).
pub(crate) fn two_arm_need(total: u64) -> SampleSize {
    SampleSize {
        control_exact: total as f64 / 2.0,
        treatment_exact: total as f64 / 2.0,
        control: total.div_ceil(2),
        treatment: total.div_ceil(2),
        arms: 2,
        total,
        comparison_alpha: 0.05,
    }
}

/// Builds the portfolio of `spec`.
pub fn portfolio(spec: &Spec) -> Portfolio {
    let mut rng = SplitMix64::new(spec.seed.wrapping_mul(0x9E37_79B9).wrapping_add(17));
    let start = NaiveDate::from_ymd_opt(2027, 1, 4).expect("a valid date"); // a Monday
    let weeks = spec.weeks.max(1);
    let end = start + Duration::days(7 * weeks as i64 - 1);
    let npools = spec.pools.max(1);
    let pools: Vec<Pool> = (0..npools)
        .map(|i| {
            let daily = (10f64.powf(4.0 + 1.3 * rng.unit())).round();
            let mut adjustments = Vec::new();
            if rng.unit() < 0.3 {
                let from = start + Duration::days(7 * rng.below(weeks) as i64);
                adjustments.push(Adjustment {
                    from,
                    to: from + Duration::days(6),
                    change: Change::Multiply(0.6),
                    note: "seasonal dip".into(),
                });
            }
            let split = rng.unit() < 0.8;
            Pool {
                id: format!("pool-{i}"),
                label: format!("Pool {i}"),
                forecast: Forecast {
                    daily,
                    weekday: [1.05, 1.1, 1.1, 1.05, 1.0, 0.8, 0.9],
                    adjustments,
                    scales: Vec::new(),
                    level_path: None,
                    history: None,
                    uncertainty: None,
                },
                sharing: if split {
                    Sharing::Split
                } else {
                    Sharing::Overlap
                },
                max_concurrent: if split {
                    3 + rng.below(3) as u32
                } else {
                    2 + rng.below(3) as u32
                },
                holdout: 0.0,
            }
        })
        .collect();
    let ntests = spec.tests;
    // Mean run at half a pool, in weeks, so demand is ~1.5x the supply.
    let mean_weeks =
        (3.0 * weeks as f64 * npools as f64 / ntests.max(1) as f64).min(weeks as f64 * 0.8);
    let mut experiments: Vec<Experiment> = Vec::with_capacity(ntests);
    for i in 0..ntests {
        let pool = rng.below(npools);
        let run_weeks = (mean_weeks * (0.4 + 1.2 * rng.unit())).max(1.0);
        let daily = pools[pool].forecast.daily;
        let total = (daily * 7.0 * run_weeks * 0.5).round() as u64;
        let earliest_start = (rng.unit() < 0.2)
            .then(|| start + Duration::days(7 * rng.below(weeks.div_ceil(2)) as i64));
        let deadline = (rng.unit() < 0.2)
            .then(|| end - Duration::days(7 * rng.below(weeks.div_ceil(2)) as i64));
        let max_share = Share::from_fraction([0.5, 0.75, 1.0, 1.0][rng.below(4)]);
        let mut after = Vec::new();
        if i > 0 && rng.unit() < 0.1 {
            let same: Vec<usize> = (0..i).filter(|&j| experiments[j].uses(pool)).collect();
            let pred = if !same.is_empty() && rng.unit() < 0.8 {
                same[rng.below(same.len())]
            } else {
                rng.below(i)
            };
            after.push(Prerequisite {
                experiment: pred,
                gap_days: [0, 7][rng.below(2)],
            });
        }
        experiments.push(Experiment {
            id: format!("test-{i:03}"),
            title: format!("Synthetic test {i}"),
            owner: "synthetic".into(),
            pools: vec![pool],
            ramp: Vec::new(),
            ramp_counts: false,
            design: Design::new(Metric::Rate { baseline: 0.05 }, Effect::Relative(0.05)),
            need: two_arm_need(total),
            sample_size_given: false,
            eligible: 1.0,
            looks: None,
            metrics: Vec::new(),
            driver: String::new(),
            priority: (1 + rng.below(10)) as f64,
            earliest_start,
            deadline,
            max_share,
            min_days: 14,
            whole_weeks: true,
            after,
            not_with: Vec::new(),
            apart_traffic: Vec::new(),
        });
    }
    // not_with pairs, mostly within a pool.
    for i in 0..ntests {
        if rng.unit() < 0.05 {
            let pool = experiments[i].pools[0];
            let same: Vec<usize> = (0..ntests)
                .filter(|&j| j != i && experiments[j].uses(pool))
                .collect();
            let j = if !same.is_empty() && rng.unit() < 0.8 {
                same[rng.below(same.len())]
            } else {
                rng.below(ntests)
            };
            if j != i {
                experiments[i].not_with.push(j);
                experiments[j].not_with.push(i);
            }
        }
    }
    for e in &mut experiments {
        e.not_with.sort_unstable();
        e.not_with.dedup();
    }
    let mut blackouts = vec![Blackout {
        from: start + Duration::days(7 * (weeks as i64 / 2)),
        to: start + Duration::days(7 * (weeks as i64 / 2) + 6),
        kind: BlackoutKind::NoStarts,
        note: "release freeze".into(),
        pools: Vec::new(),
    }];
    if rng.unit() < 0.5 {
        let from = start + Duration::days(7 * rng.below(weeks) as i64);
        blackouts.push(Blackout {
            from,
            to: from + Duration::days(6),
            kind: BlackoutKind::NoRunning,
            note: "site redesign".into(),
            pools: vec![rng.below(npools)],
        });
    }
    Portfolio {
        id: format!("synthetic-{}", spec.seed),
        name: format!(
            "synthetic-{}x{}x{}-{}",
            spec.tests, spec.pools, spec.weeks, spec.seed
        ),
        window: Window { start, end },
        defaults: Defaults::default(),
        share_levels: ShareLevels::from_fractions(&SHARE_LEVELS),
        planning: Planning::default(),
        pools,
        after_order: after_order(&experiments).expect("`after` links point back, so never round"),
        experiments,
        blackouts,
    }
}

/// `portfolio` with the calendar keys of multi-pool programmes added,
/// drawn from their own seeded stream so the base portfolio stays as it
/// was: about one test in eight runs on one or two more pools (its need
/// scaled by the extra traffic, so its run stays about as long), about
/// one in six ramps up (one or two steps at the lowest share level, each
/// two to four days, the ramp's units counted for half of them), and
/// about one in twelve is kept apart on traffic from another test that
/// shares a pool with it.
pub fn with_calendar_keys(mut p: Portfolio, seed: u64) -> Portfolio {
    let mut rng = SplitMix64::new(seed.wrapping_mul(0x2545_F491).wrapping_add(91));
    let npools = p.pools.len();
    let n = p.experiments.len();
    let lowest = p.share_levels.lowest().unwrap_or(Share::WHOLE);
    for i in 0..n {
        if npools > 1 && rng.unit() < 0.125 {
            let first = p.experiments[i].pools[0];
            let extra = 1 + rng.below(2.min(npools - 1));
            let mut pools = vec![first];
            while pools.len() < 1 + extra {
                let q = rng.below(npools);
                if !pools.contains(&q) {
                    pools.push(q);
                }
            }
            let daily = |k: usize| p.pools[k].forecast.daily;
            let scale = pools.iter().map(|&k| daily(k)).sum::<f64>() / daily(first).max(1.0);
            let e = &mut p.experiments[i];
            e.need = two_arm_need((e.need.total as f64 * scale).round() as u64);
            e.pools = pools;
        }
        if rng.unit() < 1.0 / 6.0 {
            let steps = 1 + rng.below(2);
            let e = &mut p.experiments[i];
            e.ramp = (0..steps)
                .map(|_| RampStep {
                    share: lowest,
                    days: 2 + rng.below(3) as u32,
                })
                .collect();
            e.ramp_counts = rng.unit() < 0.5;
        }
    }
    for i in 0..n {
        if rng.unit() < 1.0 / 12.0 {
            let mine = p.experiments[i].pools.clone();
            let partners: Vec<usize> = (0..n)
                .filter(|&j| {
                    j != i
                        && !p.experiments[i].not_with.contains(&j)
                        && p.experiments[j].pools.iter().any(|q| mine.contains(q))
                })
                .collect();
            if partners.is_empty() {
                continue;
            }
            let j = partners[rng.below(partners.len())];
            p.experiments[i].apart_traffic.push(j);
            p.experiments[j].apart_traffic.push(i);
        }
    }
    for e in &mut p.experiments {
        e.apart_traffic.sort_unstable();
        e.apart_traffic.dedup();
    }
    p
}

/// Adds the keys of eligibility, holdouts, given sample sizes and
/// composed adjustments to `p`, drawn from `seed` alone (so the rest of
/// the portfolio stays as [`portfolio`] made it): about half the pools
/// hold out 5%, 10% or 25% of their units (never so much that the
/// smallest share level has no room), a third of the tests admit only
/// 30%, 60% or 90% of their pool (their need shrinks with it, so runs
/// stay about as long), a fifth have a given sample size, and pools with
/// a dip get a campaign x1.3 inside it and now and then a fixed level.
pub fn with_keys(p: &mut Portfolio, seed: u64) {
    let mut rng = SplitMix64::new(seed.wrapping_mul(0x2545_F491).wrapping_add(101));
    let lowest = p.share_levels.lowest().map_or(0.0, Share::fraction);
    for pool in &mut p.pools {
        if rng.unit() < 0.5 {
            let h = [0.05, 0.1, 0.25][rng.below(3)];
            if 1.0 - h >= lowest {
                pool.holdout = h;
            }
        }
        let dip = pool.forecast.adjustments.first().cloned();
        if let Some(dip) = dip {
            let from = dip.from + Duration::days(rng.below(4) as i64);
            pool.forecast.adjustments.push(Adjustment {
                from,
                to: from + Duration::days(2),
                change: Change::Multiply(1.3),
                note: "campaign".into(),
            });
            if rng.unit() < 0.3 {
                pool.forecast.adjustments.push(Adjustment {
                    from: dip.to,
                    to: dip.to,
                    change: Change::Level(pool.forecast.daily * 0.5),
                    note: "outage".into(),
                });
            }
        }
    }
    for e in &mut p.experiments {
        if rng.unit() < 0.33 {
            e.eligible = [0.3, 0.6, 0.9][rng.below(3)];
            e.need = two_arm_need(((e.need.total as f64 * e.eligible).round() as u64).max(2));
        }
        if rng.unit() < 0.2 {
            e.sample_size_given = true;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Over a few medium portfolios every key appears: holdouts within
    /// each split pool's room, eligibility below 1, given sample sizes,
    /// and days where a campaign and a dip cover the same day.
    #[test]
    fn with_keys_uses_every_key_and_keeps_room_for_the_smallest_share() {
        let (mut holdouts, mut eligible, mut given, mut composed) = (0, 0, 0, 0);
        for seed in 0..10 {
            let mut p = portfolio(&Spec::medium(seed));
            let before = p.clone();
            with_keys(&mut p, seed);
            assert_eq!(p.experiments.len(), before.experiments.len());
            for pool in &p.pools {
                assert!(pool.capacity() >= p.share_levels.lowest().unwrap());
                holdouts += usize::from(pool.holdout > 0.0);
                let a = &pool.forecast.adjustments;
                composed +=
                    usize::from(a.len() > 1 && a[1].from >= a[0].from && a[1].to <= a[0].to);
            }
            eligible += p.experiments.iter().filter(|e| e.eligible < 1.0).count();
            given += p.experiments.iter().filter(|e| e.sample_size_given).count();
            // Same seed, same portfolio.
            let mut again = before.clone();
            with_keys(&mut again, seed);
            assert_eq!(again, p);
        }
        assert!(holdouts > 5 && eligible > 30 && given > 20 && composed > 3);
    }

    /// Both sets of keys on one portfolio, as the benchmark's `-keys`
    /// rows build it, keep it one the validator would pass: every ramp
    /// step within the room of each of its test's pools, eligibility in
    /// (0, 1], a need of at least one unit per arm, `not_with` and
    /// `apart` links symmetric and never to the test itself; and its plan
    /// passes the verifier.
    #[test]
    fn calendar_keys_then_keys_keep_a_valid_portfolio_that_plans_verified() {
        for seed in 0..4 {
            let spec = Spec::medium(seed);
            let mut p = with_calendar_keys(portfolio(&spec), seed);
            with_keys(&mut p, seed);
            assert!(p.experiments.iter().any(|e| e.pools.len() > 1));
            assert!(p.experiments.iter().any(|e| e.eligible < 1.0));
            assert!(p.pools.iter().any(|q| q.holdout > 0.0));
            for (i, e) in p.experiments.iter().enumerate() {
                assert!(e.eligible > 0.0 && e.eligible <= 1.0);
                assert!(e.need.total >= 2);
                for step in &e.ramp {
                    for &k in &e.pools {
                        assert!(
                            step.share <= p.pools[k].capacity(),
                            "seed {seed}: `{}`",
                            e.id
                        );
                    }
                }
                for &j in &e.apart_traffic {
                    assert_ne!(i, j);
                    assert!(p.experiments[j].apart_traffic.contains(&i));
                }
                for &j in &e.not_with {
                    assert_ne!(i, j);
                    assert!(p.experiments[j].not_with.contains(&i));
                }
            }
            let request = crate::schedule::PlanRequest::default();
            let plan = crate::schedule::plan(&p, &request);
            if let Err(problems) = crate::schedule::verify(&p, &request, &plan) {
                panic!("seed {seed}: {problems:#?}");
            }
            assert!(plan.solver.value >= plan.greedy_value - 1e-9);
        }
    }
}
