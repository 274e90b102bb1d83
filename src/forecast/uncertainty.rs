//! Result ranges: when a scheduled test's result may come if traffic
//! strays from its forecast.
//!
//! Each pool's forecast error is two coefficients of variation
//! ([`Uncertainty`]): `level_cv` and `daily_cv`. On each simulated path a
//! pool draws one level factor `exp(σL·Z − σL²/2)` with
//! `σL = sqrt(ln(1 + level_cv²))` (the forecast's bias), and each day draws
//! its own factor `exp(σD·Z − σD²/2)` with `σD = sqrt(ln(1 + daily_cv²))`,
//! independent across days (day-to-day noise). Both are lognormal with
//! mean 1 and the given coefficient of variation (the lognormal's moments:
//! mean `exp(μ + σ²/2)`, variance `(exp(σ²) − 1)·mean²`; common practice).
//! A day's units are the forecast times both factors. Paths are shared by
//! every test, so tests on one pool see the same traffic.
//!
//! A test's simulated end follows the plan's own rule, [`Series::run_end`]:
//! the first day its share of the simulated units reaches its need, never
//! before its minimum run, in whole weeks when those are on. The draws come
//! from ChaCha8 seeded by `planning.seed`, in a fixed order (path by path,
//! pool by pool, the level then the days), so the same input gives the
//! same ranges.

use super::Series;
use crate::plan::{PlannedExperiment, ResultRange, Status};
use crate::portfolio::{Portfolio, Uncertainty};
use chrono::Duration;
use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// The σ of a mean-1 lognormal factor whose coefficient of variation is
/// `cv`: `sqrt(ln(1 + cv²))`.
pub fn sigma(cv: f64) -> f64 {
    (1.0 + cv * cv).ln().sqrt()
}

/// The mean-1 lognormal factor of σ `s` at the standard normal value `z`.
pub fn factor(s: f64, z: f64) -> f64 {
    (s * z - s * s / 2.0).exp()
}

/// One run to simulate: where it starts on its pool's series and the rule
/// that ends it.
#[derive(Debug, Clone, PartialEq)]
pub struct RunRule {
    /// Index of its (first) pool in the series given to [`simulate`].
    pub pool: usize,
    /// The fraction of that pool's units that enter it.
    pub entering: f64,
    /// Its other pools with the fraction of their units that enter it,
    /// for a test on several pools; empty for one pool.
    pub also: Vec<(usize, f64)>,
    /// Its ramp steps (share, days) before `share`; empty for none.
    pub ramp: Vec<(f64, usize)>,
    /// Whether ramp days' units count.
    pub ramp_counts: bool,
    /// Day index of its first day.
    pub start: usize,
    /// Its constant share of the pool, in (0, 1].
    pub share: f64,
    /// Units it needs over all arms.
    pub need: f64,
    /// Its minimum run in days.
    pub min_days: u32,
    /// Whether it runs whole weeks.
    pub whole_weeks: bool,
}

/// Each run's end (a day index, `None` past the series) on each of `paths`
/// paths: `ends[run][path]`. `forecasts[p]` is pool `p`'s forecast and
/// `spread[p]` its error; a pool without error keeps its forecast on every
/// path and draws nothing.
pub fn simulate(
    forecasts: &[Series],
    spread: &[Uncertainty],
    runs: &[RunRule],
    paths: u32,
    seed: u64,
) -> Vec<Vec<Option<usize>>> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut ends = vec![Vec::with_capacity(paths as usize); runs.len()];
    let mut paths_now: Vec<Series> = forecasts.to_vec();
    for _ in 0..paths {
        for (p, base) in forecasts.iter().enumerate() {
            let u = spread[p];
            if u.is_none() {
                continue;
            }
            let (sl, sd) = (sigma(u.level_cv), sigma(u.daily_cv));
            let z: f64 = StandardNormal.sample(&mut rng);
            let level = factor(sl, z);
            let sim = &mut paths_now[p];
            let mut total = 0.0;
            for (i, &f) in base.units.iter().enumerate() {
                let day = if sd > 0.0 {
                    let z: f64 = StandardNormal.sample(&mut rng);
                    factor(sd, z)
                } else {
                    1.0
                };
                sim.units[i] = f * level * day;
                total += sim.units[i];
                sim.cumulative[i + 1] = total;
            }
        }
        for (r, run) in runs.iter().enumerate() {
            let summed;
            let series = if run.also.is_empty() && run.entering == 1.0 {
                &paths_now[run.pool]
            } else {
                summed = Series::summed(
                    std::iter::once((&paths_now[run.pool], run.entering))
                        .chain(run.also.iter().map(|&(k, f)| (&paths_now[k], f))),
                );
                &summed
            };
            ends[r].push(series.ramped_end(
                run.start,
                &run.ramp,
                run.ramp_counts,
                run.share,
                run.need,
                run.min_days,
                run.whole_weeks,
            ));
        }
    }
    ends
}

/// The lower `q`-quantile of `ends` (`None` standing for past the span):
/// the `ceil(q·n)`-th smallest.
pub fn quantile(ends: &[Option<usize>], q: f64) -> Option<usize> {
    let mut sorted: Vec<usize> = ends.iter().flatten().copied().collect();
    sorted.sort_unstable();
    let k = ((q * ends.len() as f64).ceil() as usize).clamp(1, ends.len().max(1)) - 1;
    sorted.get(k).copied()
}

/// Fills `result_range` for every scheduled test of `plan_experiments`
/// (in portfolio order) whose pool has an uncertain forecast. Paths run
/// past the window by its length again, so late ends still have dates.
pub fn fill_ranges(portfolio: &Portfolio, experiments: &mut [PlannedExperiment]) {
    let w = portfolio.window;
    let spread: Vec<Uncertainty> = portfolio
        .pools
        .iter()
        .map(|p| p.forecast.uncertainty())
        .collect();
    if spread.iter().all(Uncertainty::is_none) {
        return;
    }
    let window_days = w.offset(w.end).offset() + 1;
    let span_end = w.end + Duration::days(window_days);
    let forecasts: Vec<Series> = portfolio
        .pools
        .iter()
        .map(|p| Series::new(p, w.start, span_end))
        .collect();
    let mut which = Vec::new();
    let mut runs = Vec::new();
    for (e, pe) in experiments.iter().enumerate() {
        let ex = &portfolio.experiments[e];
        let (Some(run), Status::Scheduled) = (&pe.run, pe.status) else {
            continue;
        };
        if ex.pools.iter().all(|&k| spread[k].is_none()) {
            continue;
        }
        let entering = |k: usize| crate::forecast::entering(ex, &portfolio.pools[k]);
        which.push(e);
        runs.push(RunRule {
            pool: ex.pools[0],
            entering: entering(ex.pools[0]),
            also: ex.pools[1..].iter().map(|&k| (k, entering(k))).collect(),
            ramp: ex.ramp_steps(),
            ramp_counts: ex.ramp_counts,
            start: w.offset(run.start).offset() as usize,
            share: run.share.fraction(),
            need: ex.need.total as f64,
            min_days: ex.min_days,
            whole_weeks: ex.whole_weeks,
        });
    }
    let planning = portfolio.planning;
    let ends = simulate(&forecasts, &spread, &runs, planning.paths, planning.seed);
    for (k, &e) in which.iter().enumerate() {
        let ex = &portfolio.experiments[e];
        let due = ex
            .deadline
            .map_or(window_days - 1, |d| w.offset(d).offset())
            .min(window_days - 1);
        let on_time = ends[k]
            .iter()
            .filter(|end| end.is_some_and(|i| i as i64 <= due))
            .count() as f64
            / ends[k].len() as f64;
        // Result dates: the day after the last day of data.
        let date = |q: f64| quantile(&ends[k], q).map(|i| w.date(i as i64 + 1));
        experiments[e].result_range = Some(ResultRange {
            p10: date(0.1),
            p50: date(0.5),
            p90: date(0.9),
            on_time,
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::NaiveDate;
    use statrs::distribution::{ContinuousCDF, Normal};

    /// A flat forecast of `daily` units for `days` days.
    fn flat(daily: f64, days: usize) -> Series {
        let units = vec![daily; days];
        let mut cumulative = vec![0.0];
        for (i, u) in units.iter().enumerate() {
            cumulative.push(cumulative[i] + u);
        }
        Series {
            start: NaiveDate::from_ymd_opt(2027, 1, 4).unwrap(),
            units,
            cumulative,
        }
    }

    fn rule(need: f64) -> RunRule {
        RunRule {
            pool: 0,
            entering: 1.0,
            also: Vec::new(),
            ramp: Vec::new(),
            ramp_counts: false,
            start: 0,
            share: 1.0,
            need,
            min_days: 1,
            whole_weeks: false,
        }
    }

    fn cv(level_cv: f64, daily_cv: f64) -> Uncertainty {
        Uncertainty { level_cv, daily_cv }
    }

    #[test]
    fn both_factors_have_mean_one_and_the_given_cv() {
        // E[exp(σZ − σ²/2)] = 1 and its cv is sqrt(exp(σ²) − 1) = the cv.
        for c in [0.05, 0.3, 1.0] {
            let s = sigma(c);
            assert!(((s * s).exp() - 1.0 - c * c).abs() < 1e-12);
        }
        assert_eq!(factor(sigma(0.0), 1.7), 1.0);
    }

    #[test]
    fn without_error_every_path_ends_on_the_planned_day() {
        let f = flat(1000.0, 200);
        let planned = f.run_end(3, 0.5, 30_000.0, 14, true);
        let mut r = rule(30_000.0);
        (r.start, r.share, r.min_days, r.whole_weeks) = (3, 0.5, 14, true);
        let ends = simulate(&[f], &[cv(0.0, 0.0)], &[r], 200, 7);
        assert!(planned.is_some());
        assert!(ends[0].iter().all(|e| *e == planned));
    }

    /// With daily_cv = 0 a run of share 1 on a flat forecast μ ends after
    /// ceil(n / (μ·F)) days, F the level factor; the end is decreasing in
    /// F, so its q-quantile is the day of F's (1 − q)-quantile,
    /// exp(σ·Φ⁻¹(1 − q) − σ²/2) (the lognormal's quantile function).
    #[test]
    fn level_error_alone_gives_the_lognormal_quantiles() {
        let (mu, need, level_cv) = (1000.0, 30_000.0, 0.3);
        let s = sigma(level_cv);
        let z = Normal::standard();
        let ends = simulate(
            &[flat(mu, 400)],
            &[cv(level_cv, 0.0)],
            &[rule(need)],
            20_000,
            11,
        );
        for q in [0.1, 0.5, 0.9] {
            let f = factor(s, z.inverse_cdf(1.0 - q));
            let days = need / (mu * f);
            // The exact quantile is not near a day's edge (sampling error
            // of the quantile is about 0.1 day here).
            let edge = (days - days.floor()).min(days.ceil() - days);
            assert!(edge > 0.3, "q {q}: {days} days is too near an edge");
            let expected = days.ceil() as usize - 1;
            assert_eq!(quantile(&ends[0], q), Some(expected), "q {q}");
        }
    }

    /// The inverse Gaussian CDF of mean m and shape λ (Chhikara & Folks,
    /// "The Inverse Gaussian Distribution", 1989, eq. 2.3; from memory):
    /// Φ(√(λ/x)(x/m − 1)) + exp(2λ/m)·Φ(−√(λ/x)(x/m + 1)).
    fn inverse_gaussian_cdf(x: f64, m: f64, lambda: f64) -> f64 {
        let z = Normal::standard();
        let r = (lambda / x).sqrt();
        let tail = z.cdf(-r * (x / m + 1.0));
        z.cdf(r * (x / m - 1.0)) + (2.0 * lambda / m + tail.ln()).exp()
    }

    fn inverse_gaussian_quantile(q: f64, m: f64, lambda: f64) -> f64 {
        let (mut lo, mut hi) = (1e-6, 100.0 * m);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if inverse_gaussian_cdf(mid, m, lambda) < q {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    /// Daily noise alone on a flat forecast: units collected form a random
    /// walk with drift μ and variance (μ·cv)² per day, whose first passage
    /// to n is close to inverse Gaussian with mean n/μ and shape n²/σ²
    /// (the Wald distribution of a Brownian motion's first passage). A run
    /// of d days passed n during its last day, so its continuous passage
    /// time is taken at the day's middle, d − 0.5.
    #[test]
    fn daily_noise_alone_gives_about_the_inverse_gaussian_passage_time() {
        let (mu, daily_cv, need) = (1000.0, 0.5, 50_000.0);
        let sd = mu * daily_cv;
        let (m, lambda) = (need / mu, need * need / (sd * sd));
        let ends = simulate(
            &[flat(mu, 400)],
            &[cv(0.0, daily_cv)],
            &[rule(need)],
            4_000,
            5,
        );
        for q in [0.5, 0.9] {
            let days = quantile(&ends[0], q).unwrap() as f64 + 0.5;
            let expected = inverse_gaussian_quantile(q, m, lambda);
            assert!(
                (days - expected).abs() <= 1.0,
                "q {q}: simulated {days} days, inverse Gaussian {expected:.2}"
            );
        }
        // The check can fail: with twice the noise the P90 moves by days.
        let expected = inverse_gaussian_quantile(0.9, m, lambda / 4.0);
        let days = quantile(&ends[0], 0.9).unwrap() as f64 + 0.5;
        assert!((days - expected).abs() > 1.0);
    }

    #[test]
    fn the_same_seed_gives_the_same_paths_and_another_seed_others() {
        let run = |seed| {
            simulate(
                &[flat(1000.0, 200), flat(500.0, 200)],
                &[cv(0.2, 0.3), cv(0.0, 0.0)],
                &[
                    rule(20_000.0),
                    RunRule {
                        pool: 1,
                        ..rule(5_000.0)
                    },
                ],
                500,
                seed,
            )
        };
        assert_eq!(run(3), run(3));
        assert_ne!(run(3)[0], run(4)[0]);
        // A pool without error keeps its forecast on every path.
        assert!(run(3)[1].iter().all(|e| *e == Some(9)));
    }

    #[test]
    fn quantiles_count_paths_past_the_span_as_late() {
        let ends = [Some(3), None, Some(1), Some(2), None];
        assert_eq!(quantile(&ends, 0.2), Some(1));
        assert_eq!(quantile(&ends, 0.6), Some(3));
        assert_eq!(quantile(&ends, 0.8), None);
    }
}
