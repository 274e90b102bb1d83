//! A partial calendar under construction: the chosen option of each free
//! test and the per-day occupancy of every pool, with the feasibility test
//! greedy and the local search share.
//!
//! Shares are held as whole millionths (`millionths`) so adding and
//! removing runs never drifts. This is the planner's own bookkeeping; the
//! independent check of a finished plan lives in `verify`, which shares
//! no code with it.

use super::millionths::{micro, room, WHOLE};
use super::options::{Instance, Opt, Role};
use crate::portfolio::Sharing;
use crate::share::Share;

/// The calendar so far: each free test's chosen option and every pool's
/// occupancy per segment.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct State {
    /// Index into `Instance::options[e]` of each scheduled free test.
    pub choice: Vec<Option<usize>>,
    /// Share in use per pool and segment, in millionths.
    pub share: Vec<Vec<i64>>,
    /// Tests running per pool and segment.
    pub count: Vec<Vec<u32>>,
    /// Objective value of the free tests scheduled.
    pub value: f64,
    /// The largest of `share` over each block of [`BLOCK`] segments.
    share_top: Vec<Vec<i64>>,
    /// The largest of `count` over each block of [`BLOCK`] segments.
    count_top: Vec<Vec<u32>>,
}

/// Segments per block of the running maxima that let `fits` pass over a
/// long run block by block rather than segment by segment (a ramp cuts
/// the days into segments of a day or two, so a year's run may cover
/// hundreds). Eight rather than sixteen: on the daily grid a run covers
/// a segment per day, and shorter blocks leave fewer single segments at
/// its ends (scale-daily 6.2 against 6.6 s of CPU, large-keys 4.35
/// against 4.6 s, scale unchanged, the same plans; DEVELOPERS.md).
const BLOCK: usize = 8;

/// The largest value of each block of [`BLOCK`] in `v`.
fn tops<T: Copy + Ord + Default>(v: &[T]) -> Vec<T> {
    v.chunks(BLOCK)
        .map(|c| c.iter().copied().max().unwrap_or_default())
        .collect()
}

/// Whether every value of `v[lo..=hi]` is at most `most`, read through
/// the block maxima `top` wherever a whole block lies inside the range.
fn all_at_most<T: Copy + Ord>(v: &[T], top: &[T], lo: usize, hi: usize, most: T) -> bool {
    let mut i = lo;
    while i <= hi {
        if i.is_multiple_of(BLOCK) && i + BLOCK - 1 <= hi {
            if top[i / BLOCK] > most {
                return false;
            }
            i += BLOCK;
        } else {
            if v[i] > most {
                return false;
            }
            i += 1;
        }
    }
    true
}

/// Recomputes the block maxima `top` of the blocks holding `v[lo..=hi]`.
fn refresh<T: Copy + Ord + Default>(v: &[T], top: &mut [T], lo: usize, hi: usize) {
    for b in lo / BLOCK..=hi / BLOCK {
        let end = ((b + 1) * BLOCK).min(v.len());
        top[b] = v[b * BLOCK..end].iter().copied().max().unwrap_or_default();
    }
}

impl State {
    /// The calendar with only the fixed runs.
    pub fn new(inst: &Instance) -> State {
        // Fixed runs change only at segment boundaries: a segment's first
        // day stands for all of it.
        let firsts = |pool: usize| {
            let c = &inst.segments[pool];
            c[..c.len() - 1].to_vec()
        };
        State {
            choice: vec![None; inst.roles.len()],
            share: (0..inst.segments.len())
                .map(|pool| {
                    firsts(pool)
                        .into_iter()
                        .map(|d| inst.base_share[pool][d])
                        .collect()
                })
                .collect(),
            count: (0..inst.segments.len())
                .map(|pool| {
                    firsts(pool)
                        .into_iter()
                        .map(|d| inst.base_count[pool][d])
                        .collect()
                })
                .collect(),
            value: 0.0,
            share_top: Vec::new(),
            count_top: Vec::new(),
        }
        .with_tops()
    }

    /// Fills the block maxima from `share` and `count`.
    fn with_tops(mut self) -> State {
        self.share_top = self.share.iter().map(|v| tops(v)).collect();
        self.count_top = self.count.iter().map(|v| tops(v)).collect();
        self
    }

    /// The option test `e` runs with, if scheduled.
    pub fn opt<'i>(&self, inst: &'i Instance, e: usize) -> Option<&'i Opt> {
        self.choice[e].map(|k| &inst.options[e][k])
    }

    /// The days test `e` occupies (fixed or chosen), as window offsets.
    fn span(&self, inst: &Instance, e: usize) -> Option<(i64, i64)> {
        match &inst.roles[e] {
            Role::Fixed { start, end, .. } => Some((start.offset(), end.offset())),
            Role::Free => self.opt(inst, e).map(|o| (o.start as i64, o.end as i64)),
            Role::Excluded { .. } => None,
        }
    }

    /// Whether the unscheduled free test `e` can take option `o` now.
    pub fn fits(&self, inst: &Instance, e: usize, o: &Opt) -> bool {
        let p = inst.portfolio;
        let ex = &p.experiments[e];
        for &pool in &ex.pools {
            let def = &p.pools[pool];
            let (counts, top) = (&self.count[pool], &self.count_top[pool]);
            let Some(most) = def.max_concurrent.checked_sub(1) else {
                return false;
            };
            if !all_at_most(counts, top, o.seg_lo, o.seg_hi, most) {
                return false;
            }
            if def.sharing == Sharing::Split {
                let (used, top) = (&self.share[pool], &self.share_top[pool]);
                let cap = room(def);
                let clear = all_phases(inst, e, o, |lo, hi, share| {
                    all_at_most(used, top, lo, hi, cap - micro(share))
                });
                if !clear {
                    return false;
                }
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
        for &other in &ex.apart_traffic {
            if !self.apart_fits(inst, e, o, other) {
                return false;
            }
        }
        true
    }

    /// Whether option `o` of `e` and the run of `other` (fixed or chosen)
    /// add up to at most the whole of every pool they share on every day
    /// both run.
    pub fn apart_fits(&self, inst: &Instance, e: usize, o: &Opt, other: usize) -> bool {
        let p = inst.portfolio;
        let (a, b) = (&p.experiments[e], &p.experiments[other]);
        if !a.pools.iter().any(|&pool| b.uses(pool)) {
            return true;
        }
        let Some((s, t)) = self.span(inst, other) else {
            return true;
        };
        let lo = (o.start as i64).max(s).max(0) as usize;
        let hi = (o.end as i64).min(t);
        if hi < lo as i64 {
            return true;
        }
        (lo..=hi as usize).all(|d| {
            let mine = micro(inst.share_at(e, o, d));
            let theirs = match &inst.roles[other] {
                Role::Fixed { start, share, .. } => {
                    micro(b.share_on_day((d as i64 - start.offset()).max(0) as u32, *share))
                }
                _ => self
                    .opt(inst, other)
                    .map_or(0, |oo| micro(inst.share_at(other, oo, d))),
            };
            mine + theirs <= WHOLE
        })
    }

    /// Schedules free test `e` with its option `k` (the caller checked `fits`).
    pub fn add(&mut self, inst: &Instance, e: usize, k: usize) {
        debug_assert!(self.choice[e].is_none());
        let o = inst.options[e][k];
        self.occupy(inst, e, &o, 1);
        self.choice[e] = Some(k);
        self.value += o.value;
    }

    /// Adds (`sign` 1) or takes away (-1) option `o` of `e` on each of its
    /// pools.
    fn occupy(&mut self, inst: &Instance, e: usize, o: &Opt, sign: i64) {
        for &pool in &inst.portfolio.experiments[e].pools {
            let used = &mut self.share[pool];
            all_phases(inst, e, o, |lo, hi, share| {
                let add = sign * micro(share);
                for u in &mut used[lo..=hi] {
                    *u += add;
                }
                true
            });
            for count in &mut self.count[pool][o.seg_lo..=o.seg_hi] {
                if sign > 0 {
                    *count += 1;
                } else {
                    *count -= 1;
                }
            }
            let (lo, hi) = (o.seg_lo, o.seg_hi);
            refresh(&self.share[pool], &mut self.share_top[pool], lo, hi);
            refresh(&self.count[pool], &mut self.count_top[pool], lo, hi);
        }
    }

    /// Unschedules free test `e`.
    pub fn remove(&mut self, inst: &Instance, e: usize) {
        let Some(k) = self.choice[e].take() else {
            return;
        };
        let o = inst.options[e][k];
        self.occupy(inst, e, &o, -1);
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

    /// Tests running on `pool` on `day`.
    pub fn count_on(&self, inst: &Instance, pool: usize, day: usize) -> u32 {
        self.count[pool][inst.segment_of(pool, day)]
    }

    /// Share of `pool` in use on `day`, in millionths.
    pub fn share_on(&self, inst: &Instance, pool: usize, day: usize) -> i64 {
        self.share[pool][inst.segment_of(pool, day)]
    }

    /// The most valuable option of unscheduled `e` that fits now.
    pub fn best_fit(&self, inst: &Instance, e: usize) -> Option<usize> {
        inst.options[e].iter().position(|o| self.fits(inst, e, o))
    }
}

/// Calls `each` with the phases of test `e`'s run with option `o` in
/// segments, (first segment, last segment, share): each ramp step it
/// reaches, then its planned share; stops at the first `false` and
/// returns whether none was. The segments are cut at every step's end, so
/// a share is constant across each phase.
fn all_phases(
    inst: &Instance,
    e: usize,
    o: &Opt,
    mut each: impl FnMut(usize, usize, Share) -> bool,
) -> bool {
    let cuts = &inst.segments[0];
    let mut day = o.start;
    let mut seg = o.seg_lo;
    for step in &inst.portfolio.experiments[e].ramp {
        if day > o.end {
            return true;
        }
        let last = (day + step.days as usize - 1).min(o.end);
        let last_seg = cuts.partition_point(|&b| b <= last) - 1;
        if !each(seg, last_seg, step.share) {
            return false;
        }
        day = last + 1;
        seg = last_seg + 1;
    }
    seg > o.seg_hi || each(seg, o.seg_hi, o.share)
}
