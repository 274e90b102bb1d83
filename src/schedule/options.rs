//! Candidate runs: for every test the planner may place, each allowed
//! (start day, share level) pair with its exact end day from the forecast.
//!
//! This module turns a portfolio and a [`PlanRequest`] into an [`Instance`]:
//! day indices counted from the window's first day, the traffic held by
//! fixed (running) tests, and the filtered options of every free test. An
//! option is kept only when it starts on the start grid, on or after the
//! test's earliest start, today and its fixed predecessors' ends (plus gap),
//! not on a `no_starts` day, crosses no `no_running` day, ends inside the
//! window and by the deadline, and fits beside the fixed runs. Dominated
//! options (same start, a larger share but no earlier end) are dropped.
//! Every end comes from [`Series::run_end`].

use super::millionths::{micro, room};
use super::request::{FixedRun, PlanRequest};
use crate::day::Day;
use crate::forecast::Series;
use crate::portfolio::{BlackoutKind, Portfolio, Sharing, StartGrid};
use crate::share::Share;
use chrono::{Datelike, NaiveDate};

/// One candidate run of one test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Opt {
    /// First day, as an index from the window's first day.
    pub start: usize,
    /// Last day of data, inclusive.
    pub end: usize,
    pub share: Share,
    /// Its contribution to the objective.
    pub value: f64,
    /// First and last of its pool's segments it covers (see `Instance::segments`).
    pub seg_lo: usize,
    pub seg_hi: usize,
}

/// What the request says about one experiment.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Role {
    /// The planner decides.
    Free,
    /// Running: holds its traffic as given (offsets may lie outside the window).
    Fixed { start: Day, end: Day, share: Share },
    /// Left out by request; `ended` is the last day of a finished run.
    Excluded {
        ended: Option<Day>,
        reason: crate::reason::Reason,
    },
}

/// The portfolio as the planner sees it.
pub(crate) struct Instance<'a> {
    pub portfolio: &'a Portfolio,
    /// Days in the window.
    pub days: usize,
    /// Forecast of each pool over the window.
    pub series: Vec<Series>,
    /// The units entering each test per day at the whole of each of its
    /// pools: its pools' forecasts summed (see `portfolio::entering`).
    pub test_series: Vec<Series>,
    /// Share of each pool held by fixed runs, per day.
    pub base_share: Vec<Vec<i64>>,
    /// Number of fixed runs on each pool, per day.
    pub base_count: Vec<Vec<u32>>,
    pub roles: Vec<Role>,
    /// Earliest start day index each free test may take (grid aside); may
    /// be past the window when nothing is possible.
    pub lo_start: Vec<i64>,
    /// Options of each free test, sorted by value, best first.
    pub options: Vec<Vec<Opt>>,
    /// Free predecessors: (predecessor, gap days), per experiment.
    pub preds: Vec<Vec<(usize, u32)>>,
    /// Free successors: (successor, gap days), per experiment.
    pub succs: Vec<Vec<(usize, u32)>>,
    /// Per pool, the first day of each segment, then `days`: stretches of
    /// days on which no option starts or ends and no fixed run changes, so
    /// occupancy can be kept per segment (per week on the weekly grid).
    pub segments: Vec<Vec<usize>>,
    /// Today's day index (0 for a plan from the window's start): a
    /// re-shared running test changes its share there.
    pub today: usize,
}

/// What [`Instance::earliest_solo`] found.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub(crate) struct Solo {
    /// First and last day index of the earliest run that fits.
    pub run: Option<(usize, usize)>,
    /// Some day scanned was an allowed start.
    pub any_start: bool,
    /// Some run that ended in time crossed a `no_running` day.
    pub crossed: bool,
    /// The scan stopped at a run that ends too late (or past the window).
    pub ran_out: bool,
}

/// Objective weight of a run ending on day index `end` (the last day of
/// data): priority x (1 - lateness_weight x end / (days - 1)).
pub(crate) fn run_value(priority: f64, lateness_weight: f64, days: usize, end: i64) -> f64 {
    let t = if days > 1 {
        end as f64 / (days - 1) as f64
    } else {
        0.0
    };
    priority * (1.0 - lateness_weight * t)
}

impl<'a> Instance<'a> {
    pub fn new(portfolio: &'a Portfolio, request: &PlanRequest) -> Instance<'a> {
        let w = portfolio.window;
        let days = w.days();
        let n = portfolio.experiments.len();
        let series: Vec<Series> = portfolio
            .pools
            .iter()
            .map(|p| Series::new(p, w.start, w.end))
            .collect();
        let test_series: Vec<Series> = portfolio
            .experiments
            .iter()
            .map(|ex| {
                Series::summed(ex.pools.iter().map(|&pool| {
                    (
                        &series[pool],
                        crate::portfolio::entering(ex, &portfolio.pools[pool]),
                    )
                }))
            })
            .collect();
        let mut roles = vec![Role::Free; n];
        for ex in &request.excluded {
            if ex.experiment < n {
                roles[ex.experiment] = Role::Excluded {
                    ended: ex.ended.map(|d| w.offset(d)),
                    reason: ex.reason.clone(),
                };
            }
        }
        let mut base_share = vec![vec![0i64; days]; portfolio.pools.len()];
        let mut base_count = vec![vec![0u32; days]; portfolio.pools.len()];
        let today_date = request.today.unwrap_or(w.start);
        for f in &request.fixed {
            let FixedRun {
                experiment,
                start,
                share,
                end,
                ..
            } = f;
            if *experiment >= n {
                continue;
            }
            let (s, e) = (w.offset(*start), w.offset(*end));
            roles[*experiment] = Role::Fixed {
                start: s,
                end: e,
                share: *share,
            };
            let ex = &portfolio.experiments[*experiment];
            for d in s.offset().max(0)..=e.offset().min(days as i64 - 1) {
                // A running test keeps its ramp: its step's share on the
                // step's days, unless re-shared from today.
                let date = w.date(d);
                let held = if f.share != f.share_before && date >= today_date {
                    f.share
                } else {
                    let into = (d - s.offset()).max(0) as u32;
                    ex.share_on_day(into, f.share_on(date, today_date))
                };
                for &pool in &ex.pools {
                    base_share[pool][d as usize] += micro(held);
                    base_count[pool][d as usize] += 1;
                }
            }
        }
        let mut preds = vec![Vec::new(); n];
        let mut succs = vec![Vec::new(); n];
        for (b, e) in portfolio.experiments.iter().enumerate() {
            if roles[b] != Role::Free {
                continue;
            }
            for pre in &e.after {
                if roles[pre.experiment] == Role::Free {
                    preds[b].push((pre.experiment, pre.gap_days));
                    succs[pre.experiment].push((b, pre.gap_days));
                }
            }
        }
        let today = request.today.map_or(0, |t| w.offset(t).offset()).max(0);
        let mut inst = Instance {
            portfolio,
            days,
            series,
            test_series,
            base_share,
            base_count,
            roles,
            lo_start: vec![today; n],
            options: vec![Vec::new(); n],
            preds,
            succs,
            segments: Vec::new(),
            today: (today as usize).min(days),
        };
        // Options in topological order so a test's bound can use its free
        // predecessors' earliest ends.
        for &e in &portfolio.after_order {
            if inst.roles[e] == Role::Free {
                inst.lo_start[e] = inst.earliest_start(e, today);
                // A pinned test starts on its day or not at all.
                let pin = request.pinned.iter().find(|p| p.experiment == e);
                let pin = pin.map(|p| w.offset(p.start).offset());
                if let Some(day) = pin {
                    inst.lo_start[e] = inst.lo_start[e].max(day);
                }
                inst.options[e] = inst.enumerate(e);
                if let Some(day) = pin {
                    inst.options[e].retain(|o| o.start as i64 == day);
                }
            }
        }
        inst.segment();
        inst
    }

    /// Cuts the days into segments (the same cuts for every pool, so an
    /// option's segments are the same on each of its pools) and labels
    /// every option with the segments it covers.
    fn segment(&mut self) {
        let p = self.portfolio;
        let mut cuts: Vec<usize> = vec![0, self.today, self.days];
        for (e, opts) in self.options.iter().enumerate() {
            let ex = &p.experiments[e];
            for o in opts {
                cuts.push(o.start);
                cuts.push(o.end + 1);
                let mut d = o.start;
                for step in &ex.ramp {
                    d += step.days as usize;
                    cuts.push(d);
                }
            }
        }
        for (e, role) in self.roles.iter().enumerate() {
            if let Role::Fixed { start, end, .. } = role {
                let mut d = start.offset();
                let mut at = vec![d, end.offset() + 1];
                for step in &p.experiments[e].ramp {
                    d += i64::from(step.days);
                    at.push(d);
                }
                for c in at {
                    if let Some(i) = Day::new(c).index(self.days).filter(|&i| i > 0) {
                        cuts.push(i);
                    }
                }
            }
        }
        cuts.sort_unstable();
        cuts.dedup();
        for opts in self.options.iter_mut() {
            for o in opts {
                o.seg_lo = cuts.partition_point(|&b| b < o.start);
                o.seg_hi = cuts.partition_point(|&b| b <= o.end) - 1;
            }
        }
        self.segments = vec![cuts; p.pools.len()];
    }

    /// The share test `e` holds on `day` with option `o` (a ramp step's
    /// share on the ramp's days, the option's after them); zero outside
    /// its run.
    pub fn share_at(&self, e: usize, o: &Opt, day: usize) -> Share {
        if day < o.start || day > o.end {
            return Share::ZERO;
        }
        self.portfolio.experiments[e].share_on_day((day - o.start) as u32, o.share)
    }

    /// The test's phases with option `o`: (first day, last day, share) of
    /// each ramp step, then of its planned share.
    pub fn phases(&self, e: usize, o: &Opt) -> Vec<(usize, usize, Share)> {
        let mut out = Vec::new();
        let mut d = o.start;
        for step in &self.portfolio.experiments[e].ramp {
            let last = (d + step.days as usize - 1).min(o.end);
            out.push((d, last, step.share));
            d = last + 1;
        }
        if d <= o.end {
            out.push((d, o.end, o.share));
        }
        out
    }

    /// The segment of `pool` holding `day`.
    pub fn segment_of(&self, pool: usize, day: usize) -> usize {
        self.segments[pool].partition_point(|&b| b <= day) - 1
    }

    /// The earliest day index test `e` may start: today, its earliest start,
    /// and its predecessors' earliest ends plus gaps; `i64::MAX` when a
    /// predecessor cannot run at all.
    fn earliest_start(&self, e: usize, today: i64) -> i64 {
        let p = self.portfolio;
        let ex = &p.experiments[e];
        let mut lo = today;
        if let Some(d) = ex.earliest_start {
            lo = lo.max(p.window.offset(d).offset());
        }
        for pre in &ex.after {
            let gap = pre.gap_days as i64;
            let end = match &self.roles[pre.experiment] {
                Role::Fixed { end, .. } => Some(end.offset()),
                Role::Excluded { ended, .. } => ended.map(Day::offset),
                Role::Free => self.options[pre.experiment]
                    .iter()
                    .map(|o| o.end as i64)
                    .min(),
            };
            match end {
                Some(end) => lo = lo.max(end + 1 + gap),
                None => return i64::MAX,
            }
        }
        lo
    }

    /// Whether test `e` may start on `day`: on the start grid and not in a
    /// `no_starts` blackout of any of its pools.
    pub fn may_start(&self, day: usize, e: usize) -> bool {
        may_start_on(self.portfolio, e, self.portfolio.window.date(day as i64))
    }

    /// The last day index a run of test `e` may end on: its deadline or
    /// the window's last day, whichever comes first.
    pub(crate) fn last_end(&self, e: usize) -> i64 {
        let p = self.portfolio;
        p.experiments[e]
            .deadline
            .map_or(i64::MAX, |d| p.window.offset(d).offset())
            .min(self.days as i64 - 1)
    }

    /// Prefix counts of the days a `no_running` blackout of any of test
    /// `e`'s pools covers: entry `d` counts the days before `d`, so a run
    /// from `s` to `t` crosses one when entries `t + 1` and `s` differ.
    fn no_running_before(&self, e: usize) -> Vec<usize> {
        let mut blocked = vec![false; self.days];
        for &pool in &self.portfolio.experiments[e].pools {
            for (b, x) in blocked.iter_mut().zip(self.no_running_days(pool)) {
                *b |= x;
            }
        }
        let mut before = vec![0usize; self.days + 1];
        for (d, blocked) in blocked.into_iter().enumerate() {
            before[d + 1] = before[d] + usize::from(blocked);
        }
        before
    }

    /// The last day of test `e`'s run from `start` at `share`, from its
    /// summed forecast and its ramp (the one place an option's end is
    /// worked out).
    pub fn run_end(&self, e: usize, start: usize, share: Share) -> Option<usize> {
        self.test_series[e].test_end(&self.portfolio.experiments[e], start, share.fraction())
    }

    /// The earliest run of test `e` alone (fixed runs and every other test
    /// ignored) at `share`, starting on day index `first` or later: the
    /// first allowed start whose run ends by the deadline and the window's
    /// end and crosses no `no_running` day. The scan stops at the first
    /// allowed start whose run ends too late; the flags say what it met.
    pub fn earliest_solo(&self, e: usize, share: Share, first: usize) -> Solo {
        let last = self.last_end(e);
        let before = self.no_running_before(e);
        let mut solo = Solo::default();
        for start in first..self.days {
            if start as i64 > last {
                break;
            }
            if !self.may_start(start, e) {
                continue;
            }
            solo.any_start = true;
            match self.run_end(e, start, share) {
                Some(end) if end as i64 <= last => {
                    if before[end + 1] == before[start] {
                        solo.run = Some((start, end));
                        return solo;
                    }
                    solo.crossed = true;
                }
                _ => {
                    solo.ran_out = true;
                    return solo;
                }
            }
        }
        solo
    }

    /// Whether `day` is on the start grid.
    pub fn on_grid(&self, day: usize) -> bool {
        on_grid(self.portfolio, self.portfolio.window.date(day as i64))
    }

    /// Days of `pool` a `no_running` blackout covers.
    pub fn no_running_days(&self, pool: usize) -> Vec<bool> {
        (0..self.days)
            .map(|d| {
                let date = self.portfolio.window.date(d as i64);
                self.portfolio
                    .forbids(BlackoutKind::NoRunning, date, &[pool])
            })
            .collect()
    }

    /// Share levels test `e` may take, ascending: up to its `max_share`
    /// and, on a split pool, the pool's capacity beside its holdout; none
    /// below its ramp's largest step.
    pub fn shares(&self, e: usize) -> Vec<Share> {
        let ex = &self.portfolio.experiments[e];
        let floor = ex.ramp.iter().map(|s| s.share).max().unwrap_or(Share::ZERO);
        self.portfolio
            .share_levels
            .up_to(self.portfolio.share_cap(ex))
            .filter(|&s| s >= floor)
            .collect()
    }

    fn enumerate(&self, e: usize) -> Vec<Opt> {
        let p = self.portfolio;
        let ex = &p.experiments[e];
        let lo = self.lo_start[e];
        if lo >= self.days as i64 {
            return Vec::new();
        }
        let deadline = self.last_end(e);
        let blocked_before = self.no_running_before(e);
        let shares = self.shares(e);
        let mut out = Vec::new();
        for start in lo.max(0) as usize..self.days {
            let blocked = blocked_before[start + 1] > blocked_before[start];
            if !self.may_start(start, e) || blocked {
                continue;
            }
            let mut last_end = usize::MAX;
            let mut pushed_last = false;
            // Largest share first: ends only move later as the share drops.
            for &share in shares.iter().rev() {
                let Some(end) = self.run_end(e, start, share) else {
                    break;
                };
                if end as i64 > deadline {
                    break;
                }
                if end == last_end && pushed_last {
                    // A larger share ends no earlier: the larger is dominated.
                    out.pop();
                }
                last_end = end;
                pushed_last = false;
                if blocked_before[end + 1] - blocked_before[start] > 0 {
                    continue;
                }
                let fits_fixed = ex.pools.iter().all(|&pool| {
                    let def = &p.pools[pool];
                    let split = def.sharing == Sharing::Split;
                    (start..=end).all(|d| {
                        let s = ex.share_on_day((d - start) as u32, share);
                        self.base_count[pool][d] < def.max_concurrent
                            && (!split || self.base_share[pool][d] + micro(s) <= room(def))
                    })
                });
                if !fits_fixed {
                    continue;
                }
                pushed_last = true;
                out.push(Opt {
                    start,
                    end,
                    share,
                    value: run_value(
                        ex.priority,
                        p.planning.lateness_weight,
                        self.days,
                        end as i64,
                    ),
                    seg_lo: 0,
                    seg_hi: 0,
                });
            }
        }
        out.sort_by(|a, b| {
            b.value
                .total_cmp(&a.value)
                .then(a.share.cmp(&b.share))
                .then(a.start.cmp(&b.start))
        });
        out
    }

    /// Experiments the planner decides, in portfolio order.
    pub fn free(&self) -> impl Iterator<Item = usize> + '_ {
        (0..self.roles.len()).filter(|&e| self.roles[e] == Role::Free)
    }

    /// The value of the fixed runs, a constant in every plan.
    pub fn fixed_value(&self) -> f64 {
        let p = self.portfolio;
        self.roles
            .iter()
            .enumerate()
            .map(|(e, r)| match r {
                Role::Fixed { end, .. } => run_value(
                    p.experiments[e].priority,
                    p.planning.lateness_weight,
                    self.days,
                    end.offset(),
                ),
                _ => 0.0,
            })
            .sum()
    }
}

/// Whether `date` is on the portfolio's start grid.
pub(crate) fn on_grid(p: &Portfolio, date: NaiveDate) -> bool {
    match p.planning.grid {
        StartGrid::Daily => true,
        StartGrid::Weekly => date.weekday() == p.planning.start_weekday,
    }
}

/// Whether a `no_starts` blackout covers `date` on `pool`.
fn no_start(p: &Portfolio, date: NaiveDate, pool: usize) -> bool {
    p.forbids(BlackoutKind::NoStarts, date, &[pool])
}

/// Whether test `e` may start on `date`: on the start grid and not in a
/// `no_starts` blackout of any of its pools. The one home of the rule, for
/// the planner's options and for what a left-out test could still run.
pub(crate) fn may_start_on(p: &Portfolio, e: usize, date: NaiveDate) -> bool {
    on_grid(p, date)
        && !p.experiments[e]
            .pools
            .iter()
            .any(|&pool| no_start(p, date, pool))
}
