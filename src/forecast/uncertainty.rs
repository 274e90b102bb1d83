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
//! A day's units are the forecast times both factors. A forecast fitted
//! from a history also has a `growth`: the level factor's σ on a day t
//! days after the history's end is `σL·max(1, t/28)^growth` (the same Z on
//! every day of a path), so the further out a day, the wider its range, as
//! the backtest measured (`super::backtest`). Paths are shared by every
//! test, so tests on one pool see the same traffic.
//!
//! A test's simulated end follows the plan's own rule, [`Series::run_end`]:
//! the first day its share of the simulated units reaches its need, never
//! before its minimum run, in whole weeks when those are on. The draws come
//! from ChaCha8 seeded by `planning.seed`, in a fixed order (path by path,
//! pool by pool, the level then the days), so the same input gives the
//! same ranges.

pub use crate::fit::grown;

use super::Series;
use crate::plan::{PlannedExperiment, ResultRange, Status};
use crate::portfolio::{Portfolio, Uncertainty};
use chrono::{Duration, NaiveDate};
use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

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
/// that ends it ([`Series::run_end_from`], or [`Series::ramped_end`]
/// for a ramp run from its start).
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
    /// Day index of its first day (negative for a running test that began
    /// before the span).
    pub start: i64,
    /// Day index from which its units are counted: its start, or for a
    /// running test the day its counts were read.
    pub from: usize,
    /// The earliest day index it may end on: its start, or a re-plan's today.
    pub not_before: usize,
    /// Its constant share of its pools after any ramp, in (0, 1].
    pub share: f64,
    /// Units it still needs over all arms.
    pub need: f64,
    /// Its minimum run in days.
    pub min_days: u32,
    /// Whether it runs whole weeks.
    pub whole_weeks: bool,
}

impl RunRule {
    /// A run from day index `start` that needs `need` units.
    pub fn new(
        pool: usize,
        start: usize,
        share: f64,
        need: f64,
        min_days: u32,
        whole_weeks: bool,
    ) -> RunRule {
        RunRule {
            pool,
            entering: 1.0,
            also: Vec::new(),
            ramp: Vec::new(),
            ramp_counts: false,
            start: start as i64,
            from: start,
            not_before: start,
            share,
            need,
            min_days,
            whole_weeks,
        }
    }

    /// Its end on the simulated pools `sims`: one pool's units scaled by
    /// its entering fraction, or the sum over its pools.
    fn end_on(&self, sims: &[Series]) -> Option<u32> {
        let summed;
        let (series, k) = if self.also.is_empty() {
            (&sims[self.pool], self.entering)
        } else {
            summed = Series::summed(
                std::iter::once((&sims[self.pool], self.entering))
                    .chain(self.also.iter().map(|&(p, f)| (&sims[p], f))),
            );
            (&summed, 1.0)
        };
        let share = self.share * k;
        let from_start =
            self.start >= 0 && self.from as i64 == self.start && self.not_before == self.from;
        let end = if !self.ramp.is_empty() && from_start {
            let ramp: Vec<(f64, usize)> = self.ramp.iter().map(|&(s, d)| (s * k, d)).collect();
            series.ramped_end(
                self.from,
                &ramp,
                self.ramp_counts,
                share,
                self.need,
                self.min_days,
                self.whole_weeks,
            )
        } else {
            // A running test past its start counts at its planned share.
            series.run_end_from(
                self.start,
                self.from,
                self.not_before,
                share,
                self.need,
                self.min_days,
                self.whole_weeks,
            )
        };
        end.map(|i| i as u32)
    }
}

/// Each pool's level σ on each day of its series: the spread of its
/// `level_cv`, grown with the days since the forecast's origin when it has
/// a growth (worked out once, for every path).
fn level_sigmas(forecasts: &[Series], spread: &[Uncertainty]) -> Vec<Vec<f64>> {
    forecasts
        .iter()
        .zip(spread)
        .map(|(base, u)| {
            let sl = sigma(u.level_cv);
            match u.origin {
                Some(o) if u.growth > 0.0 => {
                    let ahead = (base.start - o).num_days();
                    (0..base.units.len())
                        .map(|i| sl * grown(ahead + i as i64, u.growth))
                        .collect()
                }
                _ => vec![sl; base.units.len()],
            }
        })
        .collect()
}

/// Draws path `path`'s traffic into `sims` (one series per pool, the same
/// length as `forecasts`): a pool without error keeps its forecast.
/// `levels` is [`level_sigmas`] of the same pools.
fn draw(
    forecasts: &[Series],
    spread: &[Uncertainty],
    levels: &[Vec<f64>],
    sims: &mut [Series],
    seed: u64,
    path: u32,
) {
    // Each path has its own ChaCha stream, so a path's draws do not depend
    // on which thread makes it or in what order.
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(u64::from(path));
    for (p, base) in forecasts.iter().enumerate() {
        let u = spread[p];
        if u.is_none() {
            continue;
        }
        let sd = sigma(u.daily_cv);
        let z: f64 = StandardNormal.sample(&mut rng);
        let sim = &mut sims[p];
        let mut total = 0.0;
        for (i, &f) in base.units.iter().enumerate() {
            // Day i's level factor: the path's one draw at that day's σ.
            let level = factor(levels[p][i], z);
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
}

/// Each run's end (a day index, `None` past the series) on each of `paths`
/// paths: `ends[run][path]`. `forecasts[p]` is pool `p`'s forecast and
/// `spread[p]` its error; a pool without error keeps its forecast on every
/// path and draws nothing. Paths are simulated in parallel; path `k`
/// always draws from stream `k` of the seed, so the result is the same
/// whatever the number of threads.
pub fn simulate(
    forecasts: &[Series],
    spread: &[Uncertainty],
    runs: &[RunRule],
    paths: u32,
    seed: u64,
) -> Vec<Vec<Option<u32>>> {
    let levels = level_sigmas(forecasts, spread);
    let per_path: Vec<Vec<Option<u32>>> = (0..paths)
        .into_par_iter()
        .map_init(
            || forecasts.to_vec(),
            |sims, path| {
                draw(forecasts, spread, &levels, sims, seed, path);
                runs.iter().map(|r| r.end_on(sims)).collect()
            },
        )
        .collect();
    let mut ends = vec![Vec::with_capacity(paths as usize); runs.len()];
    for path in &per_path {
        for (r, end) in path.iter().enumerate() {
            ends[r].push(*end);
        }
    }
    ends
}

/// The lower `q`-quantile of `ends` (`None` standing for past the span):
/// the `ceil(q·n)`-th smallest.
pub fn quantile(ends: &[Option<u32>], q: f64) -> Option<u32> {
    let mut sorted: Vec<u32> = ends.iter().flatten().copied().collect();
    sorted.sort_unstable();
    let k = ((q * ends.len() as f64).ceil() as usize).clamp(1, ends.len().max(1)) - 1;
    sorted.get(k).copied()
}

/// The share of `ends` on or before day index `day`.
fn share_by(ends: &[Option<u32>], day: i64) -> f64 {
    ends.iter()
        .filter(|end| end.is_some_and(|i| i64::from(i) <= day))
        .count() as f64
        / ends.len().max(1) as f64
}

/// What a re-plan knows of a running test's count: the units it had
/// collected by the end of the day before `as_of`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SoFar {
    /// The day the counts were read.
    pub as_of: NaiveDate,
    /// Units over all arms collected before `as_of`.
    pub units: u64,
}

/// A run whose range is simulated: the experiment and its rule.
struct Simulated {
    experiment: usize,
    rule: RunRule,
    /// Day index of its planned end.
    planned_end: i64,
}

/// The runs [`fill_ranges`] simulates: every scheduled test on an
/// uncertain pool from its start, and every running test that `so_far`
/// counts, from the day its counts were read with the units it still
/// needs (a test whose data are in, ending before today, has no range).
fn simulated_runs(
    portfolio: &Portfolio,
    experiments: &[PlannedExperiment],
    spread: &[Uncertainty],
    so_far: &[(usize, SoFar)],
    today: NaiveDate,
) -> Vec<Simulated> {
    let w = portfolio.window;
    let index = |d: NaiveDate| w.offset(d).offset();
    let mut out = Vec::new();
    for (e, pe) in experiments.iter().enumerate() {
        let ex = &portfolio.experiments[e];
        let Some(run) = &pe.run else {
            continue;
        };
        if ex.pools.iter().all(|&k| spread[k].is_none()) {
            continue;
        }
        let entering = |k: usize| portfolio.entering_fraction(e, k);
        let mut rule = RunRule::new(
            ex.pools[0],
            0,
            run.share.fraction(),
            ex.need.total as f64,
            ex.min_days,
            ex.whole_weeks,
        );
        rule.entering = entering(ex.pools[0]);
        rule.also = ex.pools[1..].iter().map(|&k| (k, entering(k))).collect();
        rule.ramp = ex.ramp_steps();
        rule.ramp_counts = ex.ramp_counts;
        rule.start = index(run.start);
        match pe.status {
            Status::Scheduled => {
                rule.from = rule.start.max(0) as usize;
                rule.not_before = rule.from;
            }
            Status::Running => {
                let Some((_, counted)) = so_far.iter().find(|(x, _)| *x == e) else {
                    continue;
                };
                if run.end < today {
                    continue;
                }
                rule.from = index(counted.as_of.max(run.start)).max(0) as usize;
                rule.not_before = index(today).max(0) as usize;
                rule.need = ex.need.total.saturating_sub(counted.units) as f64;
            }
            _ => continue,
        }
        out.push(Simulated {
            experiment: e,
            rule,
            planned_end: index(run.end),
        });
    }
    out
}

/// Fills `result_range` for every scheduled test of `experiments` (in
/// portfolio order) whose pool has an uncertain forecast, and for every
/// running test that `so_far` counts (re-plans: from the day its counts
/// were read, with the units it still needs, ending no earlier than
/// `today`). Paths run past the window by its length again, so late ends
/// still have dates. With `planning.confidence`, each range also gets
/// `on_plan`.
pub fn fill_ranges(
    portfolio: &Portfolio,
    experiments: &mut [PlannedExperiment],
    so_far: &[(usize, SoFar)],
    today: NaiveDate,
) {
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
    let sims = simulated_runs(portfolio, experiments, &spread, so_far, today);
    let runs: Vec<RunRule> = sims.iter().map(|s| s.rule.clone()).collect();
    let planning = portfolio.planning;
    let ends = simulate(&forecasts, &spread, &runs, planning.paths, planning.seed);
    for (s, ends) in sims.iter().zip(&ends) {
        let ex = &portfolio.experiments[s.experiment];
        let due = ex
            .deadline
            .map_or(window_days - 1, |d| w.offset(d).offset())
            .min(window_days - 1);
        // Result dates: the day after the last day of data.
        let date = |q: f64| quantile(ends, q).map(|i| w.date(i64::from(i) + 1));
        experiments[s.experiment].result_range = Some(ResultRange {
            p10: date(0.1),
            p50: date(0.5),
            p90: date(0.9),
            on_time: share_by(ends, due),
            on_plan: planning.confidence.map(|_| share_by(ends, s.planned_end)),
        });
    }
}

/// The factor by which planning to `confidence` lowers a pool's forecast
/// at first: the level factor's `(1 − confidence)`-quantile,
/// `exp(σL·Φ⁻¹(1 − c) − σL²/2)` (the lognormal's quantile function), with
/// the day-to-day error of a four-week run folded into σ
/// (`level_cv² + daily_cv²/28`), so that short runs on noisy pools start
/// near what they need. The simulation then confirms each run.
pub fn lower_quantile_factor(u: Uncertainty, confidence: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    if u.is_none() {
        return 1.0;
    }
    let cv = (u.level_cv * u.level_cv + u.daily_cv * u.daily_cv / 28.0).sqrt();
    let s = sigma(cv);
    let z = Normal::standard().inverse_cdf(1.0 - confidence);
    factor(s, z)
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
        RunRule::new(0, 0, 1.0, need, 1, false)
    }

    fn cv(level_cv: f64, daily_cv: f64) -> Uncertainty {
        Uncertainty {
            level_cv,
            daily_cv,
            ..Uncertainty::default()
        }
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
        let r = RunRule::new(0, 3, 0.5, 30_000.0, 14, true);
        let ends = simulate(&[f], &[cv(0.0, 0.0)], &[r], 200, 7);
        assert!(planned.is_some());
        assert!(ends[0].iter().all(|e| e.map(|i| i as usize) == planned));
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
            let expected = days.ceil() as u32 - 1;
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
    fn the_ends_do_not_depend_on_the_number_of_threads() {
        let run = |threads| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| {
                    simulate(
                        &[flat(1000.0, 200), flat(700.0, 200)],
                        &[cv(0.2, 0.3), cv(0.1, 0.5)],
                        &[rule(20_000.0), RunRule::new(1, 5, 0.5, 6_000.0, 7, true)],
                        777,
                        9,
                    )
                })
        };
        let one = run(1);
        assert_eq!(one, run(3));
        assert_eq!(one, run(2));
        // Path by path, not a sorted summary: path 0 is the same too.
        assert_eq!(one[1][0], run(4)[1][0]);
    }

    #[test]
    fn quantiles_count_paths_past_the_span_as_late() {
        let ends = [Some(3), None, Some(1), Some(2), None];
        assert_eq!(quantile(&ends, 0.2), Some(1));
        assert_eq!(quantile(&ends, 0.6), Some(3));
        assert_eq!(quantile(&ends, 0.8), None);
    }
}
