//! A partial calendar under construction: the chosen option of each free
//! test and the per-day occupancy of every pool, with the feasibility test
//! greedy and the local search share.
//!
//! Shares are held as whole millionths so adding and removing runs never
//! drifts. This is the planner's own bookkeeping; the independent check of
//! a finished plan lives in `verify`, which shares no code with it.

use super::options::{Instance, Opt, Role};
use crate::portfolio::Sharing;

/// One whole share in millionths.
pub(crate) const WHOLE: i64 = 1_000_000;

/// A share in millionths, rounded to the nearest.
pub(crate) fn micro(share: f64) -> i64 {
    (share * WHOLE as f64).round() as i64
}

#[derive(Debug, Clone, PartialEq)]
pub(crate) struct State {
    /// Index into `Instance::options[e]` of each scheduled free test.
    pub choice: Vec<Option<usize>>,
    /// Share in use per pool and day, in millionths.
    pub share: Vec<Vec<i64>>,
    /// Tests running per pool and day.
    pub count: Vec<Vec<u32>>,
    /// Objective value of the free tests scheduled.
    pub value: f64,
}

impl State {
    /// The calendar with only the fixed runs.
    pub fn new(inst: &Instance) -> State {
        State {
            choice: vec![None; inst.roles.len()],
            share: inst
                .base_share
                .iter()
                .map(|days| days.iter().map(|&s| micro(s)).collect())
                .collect(),
            count: inst.base_count.clone(),
            value: 0.0,
        }
    }

    /// The option test `e` runs with, if scheduled.
    pub fn opt<'i>(&self, inst: &'i Instance, e: usize) -> Option<&'i Opt> {
        self.choice[e].map(|k| &inst.options[e][k])
    }

    /// The days test `e` occupies (fixed or chosen), as window offsets.
    fn span(&self, inst: &Instance, e: usize) -> Option<(i64, i64)> {
        match &inst.roles[e] {
            Role::Fixed { start, end, .. } => Some((*start, *end)),
            Role::Free => self.opt(inst, e).map(|o| (o.start as i64, o.end as i64)),
            Role::Excluded { .. } => None,
        }
    }

    /// Whether the unscheduled free test `e` can take option `o` now.
    pub fn fits(&self, inst: &Instance, e: usize, o: &Opt) -> bool {
        let p = inst.portfolio;
        let ex = &p.experiments[e];
        let pool = &p.pools[ex.pool];
        let cap = pool.max_concurrent;
        let counts = &self.count[ex.pool][o.start..=o.end];
        if counts.iter().any(|&c| c >= cap) {
            return false;
        }
        if pool.sharing == Sharing::Split {
            let s = micro(o.share);
            if self.share[ex.pool][o.start..=o.end]
                .iter()
                .any(|&u| u + s > WHOLE)
            {
                return false;
            }
        }
        for &(pre, gap) in &inst.preds[e] {
            match self.opt(inst, pre) {
                Some(po) if po.end + 1 + gap as usize <= o.start => {}
                _ => return false,
            }
        }
        for &(suc, gap) in &inst.succs[e] {
            if let Some(so) = self.opt(inst, suc) {
                if o.end + 1 + gap as usize > so.start {
                    return false;
                }
            }
        }
        for &other in &ex.not_with {
            if let Some((s, t)) = self.span(inst, other) {
                if s <= o.end as i64 && o.start as i64 <= t {
                    return false;
                }
            }
        }
        true
    }

    /// Schedules free test `e` with its option `k` (the caller checked `fits`).
    pub fn add(&mut self, inst: &Instance, e: usize, k: usize) {
        debug_assert!(self.choice[e].is_none());
        let o = inst.options[e][k];
        let pool = inst.portfolio.experiments[e].pool;
        let s = micro(o.share);
        for d in o.start..=o.end {
            self.share[pool][d] += s;
            self.count[pool][d] += 1;
        }
        self.choice[e] = Some(k);
        self.value += o.value;
    }

    /// Unschedules free test `e`.
    pub fn remove(&mut self, inst: &Instance, e: usize) {
        let Some(k) = self.choice[e].take() else {
            return;
        };
        let o = inst.options[e][k];
        let pool = inst.portfolio.experiments[e].pool;
        let s = micro(o.share);
        for d in o.start..=o.end {
            self.share[pool][d] -= s;
            self.count[pool][d] -= 1;
        }
        self.value -= o.value;
    }

    /// Unschedules `e` and, first, every scheduled successor that depends on
    /// it (transitively); returns all removed tests.
    pub fn remove_with_successors(&mut self, inst: &Instance, e: usize, out: &mut Vec<usize>) {
        if self.choice[e].is_none() {
            return;
        }
        for &(s, _) in &inst.succs[e] {
            self.remove_with_successors(inst, s, out);
        }
        self.remove(inst, e);
        out.push(e);
    }

    /// The most valuable option of unscheduled `e` that fits now.
    pub fn best_fit(&self, inst: &Instance, e: usize) -> Option<usize> {
        inst.options[e].iter().position(|o| self.fits(inst, e, o))
    }
}
