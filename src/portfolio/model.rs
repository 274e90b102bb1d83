//! The validated portfolio: what every later stage reads.
//!
//! Nothing here comes straight from YAML; the loader (`portfolio::load`)
//! builds these values only after every check has passed, so code that
//! holds a [`Portfolio`] may rely on the invariants documented on each
//! field (ids resolved to indices, dates inside the window, numbers in
//! range, the `after` graph acyclic, every experiment sized).

// The level's path after a history is a fact of the fit, below the model.
pub use crate::fit::LevelPath;

use crate::day::Day;
use crate::share::{Share, ShareLevels};
use crate::sizing::sequential::{Boundary, Sequential};
use crate::sizing::{Correction, Design, Method, SampleSize, Sides};
use chrono::{NaiveDate, Weekday};
use serde::{Deserialize, Serialize};

/// The planning window, both ends inclusive; `start <= end`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Window {
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
}

impl Window {
    /// Number of calendar days in the window.
    pub fn days(&self) -> usize {
        ((self.end - self.start).num_days() + 1).max(0) as usize
    }

    /// Whether `date` lies inside the window.
    pub fn contains(&self, date: NaiveDate) -> bool {
        self.start <= date && date <= self.end
    }

    /// The day `date` is, counted from the window's first day (negative
    /// before the window, past its last index after it).
    pub fn offset(&self, date: NaiveDate) -> Day {
        Day::new((date - self.start).num_days())
    }

    /// The date `offset` days after the window's first day.
    pub fn date(&self, day: impl Into<Day>) -> NaiveDate {
        self.start + chrono::Duration::days(day.into().offset())
    }
}

/// Portfolio-wide defaults each experiment may override.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Defaults {
    /// Type I error rate (default 0.05).
    pub alpha: f64,
    /// 1 - beta (default 0.8).
    pub power: f64,
    /// One- or two-sided (default two).
    pub sides: Sides,
    /// Method for rate metrics (one of pooled, unpooled, corrected, arcsine).
    pub rate_method: Method,
    /// Method for mean metrics (t or z).
    pub mean_method: Method,
    /// Correction for several treatment arms (default Bonferroni).
    pub correction: Correction,
    /// Shortest run in days (default 14).
    pub min_days: u32,
    /// Round runs up to whole weeks (default true).
    pub whole_weeks: bool,
    /// Planned looks, equally spaced in information (default 1: a fixed
    /// horizon).
    pub looks: u32,
    /// The boundary of tests with looks (default Lan-DeMets spending of the
    /// O'Brien-Fleming type).
    pub boundary: Boundary,
    /// The one-sided alpha of guardrail (non-inferiority) tests (default
    /// 0.05).
    pub guardrail_alpha: f64,
    /// The holdout of pools that give none, in [0, 1) (default 0).
    pub holdout: f64,
}

impl Default for Defaults {
    /// What a file without `defaults` gets: alpha 0.05, power 0.8, two
    /// sides, the pooled and t methods, Bonferroni, 14 days, whole weeks.
    fn default() -> Defaults {
        Defaults {
            alpha: 0.05,
            power: 0.8,
            sides: Sides::Two,
            rate_method: Method::Pooled,
            mean_method: Method::T,
            correction: Correction::Bonferroni,
            min_days: 14,
            whole_weeks: true,
            looks: 1,
            boundary: Boundary::SpendingObrienFleming,
            guardrail_alpha: 0.05,
            holdout: 0.0,
        }
    }
}

/// Where tests may start.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum StartGrid {
    /// Only on `Planning::start_weekday` (the default when whole weeks are on).
    Weekly,
    /// Any day.
    Daily,
}

/// Settings of the optimiser.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Planning {
    /// Where tests may start.
    pub grid: StartGrid,
    /// The weekday tests start on with the weekly grid (default Monday).
    #[serde(serialize_with = "serialize_weekday")]
    pub start_weekday: Weekday,
    /// How much of its priority a test loses when its result arrives on the
    /// window's last day, in [0, 1); value = priority x (1 - weight x t),
    /// with t = (result day - window start) / (window days - 1). Default 0.5.
    pub lateness_weight: f64,
    /// Whether a re-plan may change the share of a running test.
    pub reshare_running: bool,
    /// The seed of the simulated traffic behind result ranges.
    pub seed: u64,
    /// How many traffic paths result ranges are simulated over.
    pub paths: u32,
    /// Plan each scheduled test so that its planned end is at least this
    /// quantile of its simulated ends (`planning.confidence`); `None`
    /// plans on the forecast as it is.
    pub confidence: Option<f64>,
    /// The p-value below which a test's per-arm counts are flagged as a
    /// sample-ratio mismatch (`planning.srm_alpha`, 0.001 by default).
    pub srm_alpha: f64,
}

impl Default for Planning {
    /// What a file without `planning` gets (with whole weeks on): the
    /// weekly grid on Mondays, a lateness weight of 0.5, running tests
    /// keep their share.
    fn default() -> Planning {
        Planning {
            grid: StartGrid::Weekly,
            start_weekday: Weekday::Mon,
            lateness_weight: 0.5,
            reshare_running: false,
            seed: 1,
            paths: 2_000,
            confidence: None,
            srm_alpha: 0.001,
        }
    }
}

fn serialize_weekday<S: serde::Serializer>(w: &Weekday, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&w.to_string())
}

/// How the tests of a pool share its units.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Sharing {
    /// Disjoint slices: the shares of tests running on a day add up to at most 1.
    Split,
    /// Independent randomisation: each test may see every unit.
    Overlap,
}

impl Sharing {
    /// The name in the portfolio file and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Sharing::Split => "split",
            Sharing::Overlap => "overlap",
        }
    }
}

/// A dated change to a pool's forecast.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Adjustment {
    /// First day it applies to.
    pub from: NaiveDate,
    /// Last day it applies to, inclusive.
    pub to: NaiveDate,
    /// What it does to those days.
    pub change: Change,
    /// Why, in the file's words.
    pub note: String,
}

/// What an adjustment does to the days it covers.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Change {
    /// Multiply the day's forecast (after the weekday pattern); >= 0.
    Multiply(f64),
    /// Replace the day's weekday forecast with this many units (the last
    /// level covering a day wins; multipliers covering it still apply); >= 0.
    Level(f64),
}

/// A pool's forecast of eligible units per day.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Forecast {
    /// Units on an average day; >= 0.
    pub daily: f64,
    /// Multipliers Monday first; all 1.0 when none was given.
    pub weekday: [f64; 7],
    /// In file order; where several cover a day they compose: the last
    /// `level` replaces the weekday forecast, every `multiply` scales it.
    pub adjustments: Vec<Adjustment>,
    /// What-if scalings from the command line (`--scale POOL=FACTOR@DATE`):
    /// each multiplies every day from its date on, on top of the rest.
    pub scales: Vec<Scale>,
    /// The level's path after the history: its trend (`trend: true`)
    /// and yearly season (a year of history or more).
    pub level_path: Option<LevelPath>,
    /// The history the level, pattern and trend were fitted from, if any.
    pub history: Option<History>,
    /// The forecast's error as the portfolio gives it (`uncertainty`);
    /// `None` takes it from the history's fit, or none at all
    /// (see [`Forecast::uncertainty`]).
    pub uncertainty: Option<Uncertainty>,
}

impl Forecast {
    /// The forecast's error behind result ranges: the `uncertainty` key
    /// when given, else the history's fit, else none (point dates).
    pub fn uncertainty(&self) -> Uncertainty {
        self.uncertainty
            .or_else(|| {
                self.history.as_ref().map(|h| Uncertainty {
                    level_cv: h.fit.level_cv,
                    daily_cv: h.fit.daily_cv,
                    growth: h.fit.level_growth,
                    origin: Some(h.end()),
                })
            })
            .unwrap_or_default()
    }
}

/// How far a pool's traffic may stray from its forecast, as coefficients
/// of variation of two mean-1 lognormal factors.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct Uncertainty {
    /// One factor per pool and path: the forecast's bias over the run.
    pub level_cv: f64,
    /// One factor per day: day-to-day noise, independent across days.
    pub daily_cv: f64,
    /// How the level factor's spread grows with the days since `origin`:
    /// on day t it is the spread of `level_cv` times `max(1, t / 28)^growth`
    /// (fitted by the backtest; 0, a spread as wide far out as near, when
    /// the portfolio gives `uncertainty`).
    #[serde(default)]
    pub growth: f64,
    /// The day the forecast was made from (a history's last day).
    #[serde(default)]
    pub origin: Option<NaiveDate>,
}

impl Uncertainty {
    /// Whether both spreads are 0 (dates are points).
    pub fn is_none(&self) -> bool {
        self.level_cv == 0.0 && self.daily_cv == 0.0
    }
}

/// A span of a history's days that are not the pool's normal traffic (a
/// campaign, an outage, a tracking fault): left out of the fit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Event {
    /// The first day.
    pub from: NaiveDate,
    /// The last day (inclusive).
    pub to: NaiveDate,
    /// What happened.
    pub note: String,
}

/// For each of `days` days from `start`, whether one of `events` covers it.
pub fn event_days(start: NaiveDate, days: usize, events: &[Event]) -> Vec<bool> {
    (0..days)
        .map(|i| {
            let d = start + chrono::Duration::days(i as i64);
            events.iter().any(|e| e.from <= d && d <= e.to)
        })
        .collect()
}

/// A pool's daily history (`history: FILE.csv`) and the model fitted to it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct History {
    /// The file as the portfolio names it.
    pub file: String,
    /// The first day of the history.
    pub start: NaiveDate,
    /// Units per day from `start`, one per day, without gaps.
    pub units: Vec<f64>,
    /// Whether a trend was fitted (`trend: true`).
    pub trend: bool,
    /// Known events in the history, left out of the fit (`events`).
    pub events: Vec<Event>,
    /// The fitted model (before `daily` or `weekday_pattern` override it).
    pub fit: crate::fit::Fit,
}

impl History {
    /// The history's last day.
    pub fn end(&self) -> NaiveDate {
        self.start + chrono::Duration::days(self.units.len() as i64 - 1)
    }

    /// For each day, whether an event covers it (left out of the fit).
    pub fn skipped(&self) -> Vec<bool> {
        event_days(self.start, self.units.len(), &self.events)
    }
}

/// A lasting change of a pool's traffic from a date on (a what-if).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Scale {
    /// The first day it applies to.
    pub from: NaiveDate,
    /// >= 0; 0.7 is a 30% drop.
    pub factor: f64,
}

/// A page, surface or audience whose traffic tests share.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pool {
    /// The id experiments name it by.
    pub id: String,
    /// A name for people.
    pub label: String,
    /// Units per day.
    pub forecast: Forecast,
    /// How its tests share its units.
    pub sharing: Sharing,
    /// Most tests running at once; >= 1.
    pub max_concurrent: u32,
    /// The fraction of its units no test may receive, in [0, 1): on a
    /// split pool the shares running on a day add up to at most
    /// [`Pool::capacity`]; on an overlap pool every test's units are
    /// scaled by `1 - holdout`.
    pub holdout: f64,
}

impl Pool {
    /// The most its tests' shares may add up to on a day when it is split
    /// (`1 - holdout`, in whole millionths); the whole pool otherwise.
    /// The one place a pool's room is worked out.
    pub fn capacity(&self) -> Share {
        capacity(self.sharing, self.holdout)
    }

    /// Whether `share` more fits on a day when `used` is taken and
    /// `running` tests run: below `max_concurrent`, and on a split pool
    /// within its [`Pool::capacity`]. The one home of the pool-room rule
    /// outside the planner's own millionths bookkeeping.
    pub fn has_room(&self, used: Share, running: u32, share: Share) -> bool {
        !self.overloaded(used.plus(share), running + 1)
    }

    /// Whether `used` shares and `running` tests are beyond what it
    /// allows (see [`beyond_room`]).
    pub fn overloaded(&self, used: Share, running: u32) -> bool {
        beyond_room(
            self.sharing,
            self.holdout,
            self.max_concurrent,
            used,
            running,
        )
    }

    /// The fraction of the units under a share that may enter a test
    /// before targeting: `1 - holdout` on an overlap pool (the held-out
    /// units are spread over every test's slice), 1 on a split pool (its
    /// holdout is a slice no test may take, see [`Pool::capacity`]).
    pub fn open_fraction(&self) -> f64 {
        match self.sharing {
            Sharing::Split => 1.0,
            Sharing::Overlap => 1.0 - self.holdout,
        }
    }
}

/// `after`: this experiment starts only once `experiment` has ended, plus a gap.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Prerequisite {
    /// Index into `Portfolio::experiments`.
    pub experiment: usize,
    /// Days left free for analysis: this one starts no earlier than
    /// `predecessor end + 1 + gap_days` (0: the day after it ends).
    pub gap_days: u32,
}

/// One queued A/B test, sized.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Experiment {
    /// The id other experiments and the progress file name it by.
    pub id: String,
    /// A name for people.
    pub title: String,
    /// Who owns it.
    pub owner: String,
    /// Indices into `Portfolio::pools` of every pool it runs on at once
    /// (`pools`, or `pool` as the short form for one): at least one, in
    /// file order, without duplicates. The same start, end and share in
    /// each; its units are the sum over them.
    pub pools: Vec<usize>,
    /// The steps it runs at before its planned share (`ramp`), in order;
    /// empty for none.
    pub ramp: Vec<RampStep>,
    /// Whether the ramp days' units count towards the sample (`ramp_counts`,
    /// default false).
    pub ramp_counts: bool,
    /// The statistics with defaults applied.
    pub design: Design,
    /// Units per arm and in total; with looks, the maximum sample. With
    /// `sample_size_given`, the given control units, each treatment arm
    /// `ratio` x that, and a `comparison_alpha` of 0 (none was given).
    pub need: SampleSize,
    /// Whether the file gave the control arm's units (`sample_size`)
    /// instead of the sizing keys: then `design` holds only the arms and
    /// ratio, and `metrics` is empty.
    pub sample_size_given: bool,
    /// The fraction of its pool's units its targeting admits, in (0, 1]
    /// (default 1). It takes its whole share of the pool either way.
    pub eligible: f64,
    /// The planned interim looks; None for a fixed horizon (one look).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub looks: Option<Looks>,
    /// Every metric of the test in file order; the short form (the metric
    /// keys written on the experiment) is one primary named `primary`.
    pub metrics: Vec<MetricPlan>,
    /// The name of the metric whose need is `need` (the largest over the
    /// primary and guardrail metrics; the first of equals in file order).
    pub driver: String,
    /// Positive weight in the objective.
    pub priority: f64,
    /// Inside the window when given.
    pub earliest_start: Option<NaiveDate>,
    /// The last day its data may run to; inside the window when given.
    pub deadline: Option<NaiveDate>,
    /// Largest share of the pool it may take, in (0, 1].
    pub max_share: Share,
    /// Shortest run in days.
    pub min_days: u32,
    /// Whether runs are rounded up to whole weeks.
    pub whole_weeks: bool,
    /// Experiments it must start after.
    pub after: Vec<Prerequisite>,
    /// Indices of experiments it must never run alongside; symmetric
    /// (if a lists b, b lists a), sorted and without duplicates.
    pub not_with: Vec<usize>,
    /// Indices of experiments it may run alongside only on disjoint
    /// traffic (`not_with` entries with `apart: traffic`): while both run,
    /// their shares on each pool they share add up to at most 1. Symmetric,
    /// sorted and without duplicates.
    pub apart_traffic: Vec<usize>,
}

impl Experiment {
    /// Days its ramp lasts before the planned share (0 without a ramp).
    pub fn ramp_days(&self) -> u32 {
        self.ramp.iter().map(|s| s.days).sum()
    }

    /// Its ramp as (share, days) pairs, in order.
    pub fn ramp_steps(&self) -> Vec<(f64, usize)> {
        self.ramp
            .iter()
            .map(|s| (s.share.fraction(), s.days as usize))
            .collect()
    }

    /// Whether it runs on `pool`.
    pub fn uses(&self, pool: usize) -> bool {
        self.pools.contains(&pool)
    }

    /// Its share on the `day`-th day of its run (0 is its first day): a
    /// ramp step's share on the ramp's days, `share` after them.
    pub fn share_on_day(&self, day: u32, share: Share) -> Share {
        let mut first = 0;
        for step in &self.ramp {
            if day < first + step.days {
                return step.share;
            }
            first += step.days;
        }
        share
    }
}

/// One step of a ramp: a share held for some days.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct RampStep {
    /// The share of each of its pools on these days.
    pub share: Share,
    /// How many days; >= 1.
    pub days: u32,
}

/// What a metric does in its test.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// Sized as a superiority test; several primaries split alpha.
    Primary,
    /// Sized as a one-sided non-inferiority test at the guardrail alpha.
    Guardrail,
    /// Not sized; read at the test's sample.
    Secondary,
}

impl Role {
    /// The name in the portfolio file and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Role::Primary => "primary",
            Role::Guardrail => "guardrail",
            Role::Secondary => "secondary",
        }
    }
}

/// One metric of a test with what sizing made of it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetricPlan {
    /// Its name, unique within the test.
    pub name: String,
    /// What it does in the test.
    pub role: Role,
    /// The design it is sized or read with. A primary's `alpha` is its
    /// share of the experiment's alpha (split by `correction` when there
    /// are several primaries); a guardrail's `effect` is its margin, its
    /// `alpha` the guardrail alpha and its `sides` one; a secondary's
    /// `effect` gives only the kind (relative or absolute) and direction.
    pub design: Design,
    /// Units it needs on its own (with looks, the maximum sample); None
    /// for a secondary metric.
    pub need: Option<SampleSize>,
    /// A secondary metric's smallest detectable effect at the test's
    /// sample (`need.control_exact`), in its design's kind (relative or
    /// absolute), read once at the end; None for the other roles.
    pub detectable: Option<f64>,
}

/// A test read at planned interim looks (a group-sequential design, see
/// `sizing::sequential`); its `need` is the maximum sample.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Looks {
    /// The boundary family.
    pub boundary: Boundary,
    /// The fixed-horizon size the maximum inflates.
    pub fixed: SampleSize,
    /// Boundaries, inflation, stop probabilities and expected samples.
    pub design: Sequential,
}

/// What a blackout forbids.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BlackoutKind {
    /// No test may start on these days (a release freeze).
    NoStarts,
    /// No test may be running on these days (unrepresentative traffic).
    NoRunning,
}

/// The most the shares of a pool's tests may add up to on a day: `1 -
/// holdout` when it is split, the whole pool when it overlaps (then only
/// the number running is limited). [`Pool::capacity`] and the plan's
/// [`crate::plan::PoolPlan::capacity`] both read it.
pub fn capacity(sharing: Sharing, holdout: f64) -> Share {
    match sharing {
        Sharing::Split => Share::from_fraction(1.0 - holdout),
        Sharing::Overlap => Share::WHOLE,
    }
}

/// Whether `used` shares and `running` tests on one day are beyond a
/// pool's limits: more tests than `max_concurrent`, or on a split pool
/// shares past its [`capacity`]. The pool-room rule, read by
/// [`Pool::has_room`], [`Pool::overloaded`] and the plan's
/// [`crate::plan::PoolPlan::over`]; the planner keeps the same rule in
/// millionths for speed.
pub fn beyond_room(
    sharing: Sharing,
    holdout: f64,
    max_concurrent: u32,
    used: Share,
    running: u32,
) -> bool {
    running > max_concurrent
        || (sharing == Sharing::Split && !Share::ZERO.fits_beside(used, capacity(sharing, holdout)))
}

/// A span of the calendar with a restriction.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Blackout {
    /// First day, inclusive.
    pub from: NaiveDate,
    /// Last day, inclusive.
    pub to: NaiveDate,
    /// What it forbids.
    pub kind: BlackoutKind,
    /// Why, in the file's words.
    pub note: String,
    /// Pool indices it applies to; empty means every pool.
    pub pools: Vec<usize>,
}

impl Blackout {
    /// Whether it restricts `pool` on `date`.
    pub fn covers(&self, date: NaiveDate, pool: usize) -> bool {
        self.from <= date
            && date <= self.to
            && (self.pools.is_empty() || self.pools.contains(&pool))
    }

    /// Whether it forbids `kind` on `date` to a test on any of `pools`:
    /// the one home of "does this blackout touch this test".
    pub fn touches(&self, kind: BlackoutKind, date: NaiveDate, pools: &[usize]) -> bool {
        self.kind == kind && pools.iter().any(|&k| self.covers(date, k))
    }
}

/// The whole validated queue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Portfolio {
    /// The portfolio's stable id (the `id` key, else the file's stem):
    /// with the experiment ids, the key of the calendar events' UIDs, so
    /// that renaming the portfolio keeps them.
    pub id: String,
    /// A name for the plan's title.
    pub name: String,
    /// The planning window.
    pub window: Window,
    /// Defaults each experiment may override.
    pub defaults: Defaults,
    /// Shares the planner may give a test, ascending, each in (0, 1].
    pub share_levels: ShareLevels,
    /// Settings of the optimiser.
    pub planning: Planning,
    /// In file order.
    pub pools: Vec<Pool>,
    /// In file order.
    pub experiments: Vec<Experiment>,
    /// In file order.
    pub blackouts: Vec<Blackout>,
    /// Every experiment index once, each `after` prerequisite before its
    /// dependants, ties in file order: [`after_order`] of `experiments`,
    /// computed once when the portfolio is validated. Not part of the file.
    #[serde(skip)]
    pub after_order: Vec<usize>,
}

impl Portfolio {
    /// The index of the pool called `id`.
    pub fn pool_index(&self, id: &str) -> Option<usize> {
        self.pools.iter().position(|p| p.id == id)
    }

    /// The index of the experiment called `id`.
    pub fn experiment_index(&self, id: &str) -> Option<usize> {
        self.experiments.iter().position(|e| e.id == id)
    }

    /// The most of each of its pools experiment `ex` may take: its
    /// `max_share`, and no more than any of its split pools' capacity.
    pub fn share_cap(&self, ex: &Experiment) -> Share {
        ex.pools
            .iter()
            .map(|&k| self.pools[k].capacity())
            .fold(ex.max_share, Share::min)
    }

    /// Whether a blackout forbids `kind` on `date` to a test on `pools`.
    pub fn forbids(&self, kind: BlackoutKind, date: NaiveDate, pools: &[usize]) -> bool {
        self.blackouts.iter().any(|b| b.touches(kind, date, pools))
    }

    /// The share a test runs at when it may take all it is allowed: the
    /// largest share level not above [`Portfolio::share_cap`]
    /// (validation guarantees one).
    pub fn top_share(&self, ex: &Experiment) -> Share {
        let most = self.share_cap(ex);
        self.share_levels.largest_up_to(most).unwrap_or(most)
    }

    /// The fraction of the units under experiment `experiment`'s share of
    /// pool `pool` that enter the test: its `eligible` times the pool's
    /// [`Pool::open_fraction`]. Units entering = share x this x forecast.
    /// By index; [`entering`] forms the product.
    pub fn entering_fraction(&self, experiment: usize, pool: usize) -> f64 {
        entering(&self.experiments[experiment], &self.pools[pool])
    }
}

/// The fraction of `pool`'s units that enter `experiment` while it holds
/// the whole pool: its `eligible` times the pool's
/// [`Pool::open_fraction`] (what an overlap pool's holdout leaves). The one
/// place a test's units from one pool are worked out; the forecast, the
/// check and the planner all read it from here.
pub fn entering(experiment: &Experiment, pool: &Pool) -> f64 {
    experiment.eligible * pool.open_fraction()
}

/// Experiment indices ordered so every `after` prerequisite comes before
/// its dependants, ties in file order (Kahn's algorithm, always taking the
/// lowest ready index); `None` when the `after` graph has a cycle.
pub fn after_order(experiments: &[Experiment]) -> Option<Vec<usize>> {
    let n = experiments.len();
    let mut waiting: Vec<usize> = experiments.iter().map(|e| e.after.len()).collect();
    let mut dependants: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (i, e) in experiments.iter().enumerate() {
        for pre in &e.after {
            dependants[pre.experiment].push(i);
        }
    }
    let mut ready: std::collections::BTreeSet<usize> =
        (0..n).filter(|&i| waiting[i] == 0).collect();
    let mut order = Vec::with_capacity(n);
    while let Some(i) = ready.pop_first() {
        order.push(i);
        for &d in &dependants[i] {
            waiting[d] -= 1;
            if waiting[d] == 0 {
                ready.insert(d);
            }
        }
    }
    (order.len() == n).then_some(order)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sizing::{Effect, Metric};

    #[test]
    fn a_pools_room_is_its_capacity_and_its_count() {
        let split = |holdout: f64| (Sharing::Split, holdout, 2);
        let s = Share::from_fraction;
        // A split pool holding out 10% has room for 90% of shares.
        let (sh, h, m) = split(0.1);
        assert_eq!(capacity(sh, h), s(0.9));
        assert!(!beyond_room(sh, h, m, s(0.9), 2));
        assert!(beyond_room(sh, h, m, s(0.900001), 1));
        assert!(beyond_room(sh, h, m, s(0.5), 3));
        // An overlap pool limits only the number running.
        assert!(!beyond_room(Sharing::Overlap, 0.1, 2, s(1.9), 2));
        assert!(beyond_room(Sharing::Overlap, 0.1, 2, s(0.2), 3));
    }

    /// Experiments whose `after` lists name the given indices.
    fn graph(after: &[&[usize]]) -> Vec<Experiment> {
        after
            .iter()
            .enumerate()
            .map(|(i, pre)| Experiment {
                id: format!("t{i}"),
                title: String::new(),
                owner: String::new(),
                pools: vec![0],
                ramp: Vec::new(),
                ramp_counts: false,
                design: Design::new(Metric::Rate { baseline: 0.1 }, Effect::Relative(0.1)),
                need: crate::schedule::synthetic::two_arm_need(1000),
                sample_size_given: false,
                eligible: 1.0,
                looks: None,
                metrics: Vec::new(),
                driver: String::new(),
                priority: 1.0,
                earliest_start: None,
                deadline: None,
                max_share: Share::WHOLE,
                min_days: 14,
                whole_weeks: true,
                after: pre
                    .iter()
                    .map(|&experiment| Prerequisite {
                        experiment,
                        gap_days: 0,
                    })
                    .collect(),
                not_with: Vec::new(),
                apart_traffic: Vec::new(),
            })
            .collect()
    }

    #[test]
    fn prerequisites_come_first_and_ties_keep_file_order() {
        // 0 waits for 3, 2 waits for 0 and 1; 1 and 3 wait for nothing.
        let order = after_order(&graph(&[&[3], &[], &[0, 1], &[]])).unwrap();
        assert_eq!(order, vec![1, 3, 0, 2]);
        assert_eq!(after_order(&graph(&[&[], &[], &[]])), Some(vec![0, 1, 2]));
    }

    #[test]
    fn a_cycle_has_no_order() {
        assert_eq!(after_order(&graph(&[&[1], &[0]])), None);
        assert_eq!(after_order(&graph(&[&[], &[2], &[3], &[1]])), None);
    }
}
