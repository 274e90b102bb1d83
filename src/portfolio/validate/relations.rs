//! How an experiment stands to the others: the tests that must end
//! before it (`after`, with a gap), those kept apart from it in time or
//! on traffic (`not_with`), those pairs made to hold both ways, and every
//! cycle of the `after` graph, each told once.

use super::super::model::*;
use super::super::raw::*;
use super::{whole, Ctx, Entry, Names, MAX_DAYS_SETTING};
use std::collections::BTreeSet;

/// Every `apart` value by its name in a file: true for traffic.
const APART: [(&str, bool); 2] = [("time", false), ("traffic", true)];

/// The experiments that must end first (`after`), each once, with its gap.
pub(super) fn after(cx: &mut Ctx, t: &Entry, id_refs: &Names) -> Vec<Prerequisite> {
    let (e, i, id, who, what) = (t.e, t.i, t.id, t.who.as_str(), t.what.as_str());
    let mut after: Vec<Prerequisite> = Vec::new();
    for (j, a) in e.after.iter().flatten().enumerate() {
        let (ref_id, gap, key, gap_key) = match a {
            RawAfter::Id(t) => (Some(t), 0.0, format!("experiments[{i}].after[{j}]"), None),
            RawAfter::WithGap(g) => {
                let key = format!("experiments[{i}].after[{j}].id");
                if g.id.is_none() {
                    cx.missing(
                        &key,
                        &format!("`after` entry {} of {what}", j + 1),
                        "give the id of the experiment that must end first",
                    );
                }
                (
                    g.id.as_ref(),
                    g.gap_days.unwrap_or(0.0),
                    key,
                    Some(format!("experiments[{i}].after[{j}].gap_days")),
                )
            }
        };
        let gap_ok = match &gap_key {
            Some(k) => cx.number(
                k,
                who,
                gap,
                whole(gap, 0.0, MAX_DAYS_SETTING),
                "a whole number of days from 0 to 366",
                "days left free after the earlier test ends, e.g. for its analysis",
            ),
            None => true,
        };
        let Some(ref_id) = ref_id else { continue };
        let ref_id = ref_id.as_str().trim();
        if ref_id == id {
            cx.err(
                &key,
                format!("{who}lists itself in `after`"),
                "an experiment cannot wait for its own end; remove the entry",
            );
            continue;
        }
        if let Some(k) = cx.reference(&key, who, ref_id, "experiment", id_refs) {
            if after.iter().any(|p| p.experiment == k) {
                cx.err(
                    &key,
                    format!("{who}`{ref_id}` is listed twice in `after`"),
                    "list each prerequisite once",
                );
            } else if gap_ok {
                after.push(Prerequisite {
                    experiment: k,
                    gap_days: gap as u32,
                });
            }
        }
    }
    after
}

/// The experiments kept apart from this one (`not_with`): in time, and
/// those kept apart only on traffic (`apart: traffic`).
pub(super) fn apart(cx: &mut Ctx, t: &Entry, id_refs: &Names) -> (Vec<usize>, Vec<usize>) {
    let (e, i, id, who, what) = (t.e, t.i, t.id, t.who.as_str(), t.what.as_str());
    let mut not_with = Vec::new();
    let mut apart_traffic = Vec::new();
    for (j, entry) in e.not_with.iter().flatten().enumerate() {
        let (t, key, traffic) = match entry {
            RawNotWith::Id(t) => (Some(t), format!("experiments[{i}].not_with[{j}]"), false),
            RawNotWith::Apart(a) => {
                let key = format!("experiments[{i}].not_with[{j}].id");
                if a.id.is_none() {
                    cx.missing(
                        &key,
                        &format!("`not_with` entry {} of {what}", j + 1),
                        "give the id of the experiment to keep apart",
                    );
                }
                let traffic = cx.choice(
                    &format!("experiments[{i}].not_with[{j}].apart"),
                    who,
                    &a.apart,
                    &APART,
                    false,
                );
                (a.id.as_ref(), key, traffic)
            }
        };
        let Some(t) = t else { continue };
        let other = t.as_str().trim();
        if other == id {
            cx.err(
                &key,
                format!("{who}lists itself in `not_with`"),
                "remove the entry; `not_with` names other experiments",
            );
            continue;
        }
        if let Some(k) = cx.reference(&key, who, other, "experiment", id_refs) {
            if traffic {
                apart_traffic.push(k);
            } else {
                not_with.push(k);
            }
        }
    }
    (not_with, apart_traffic)
}

/// `not_with` made to hold both ways, sorted, without duplicates; so is
/// `apart_traffic`, less the pairs also kept apart in time.
pub(super) fn keep_apart_both_ways(out: &mut [Experiment]) {
    let pairs: Vec<(usize, usize)> = out
        .iter()
        .enumerate()
        .flat_map(|(i, e)| e.not_with.iter().map(move |&j| (i, j)))
        .collect();
    for (i, j) in pairs {
        out[j].not_with.push(i);
    }
    let pairs: Vec<(usize, usize)> = out
        .iter()
        .enumerate()
        .flat_map(|(i, e)| e.apart_traffic.iter().map(move |&j| (i, j)))
        .collect();
    for (i, j) in pairs {
        out[j].apart_traffic.push(i);
    }
    for e in out.iter_mut() {
        e.not_with.sort_unstable();
        e.not_with.dedup();
        e.apart_traffic.sort_unstable();
        e.apart_traffic.dedup();
        // Apart in time is the stronger rule: a pair named both ways keeps it.
        let time = e.not_with.clone();
        e.apart_traffic.retain(|k| !time.contains(k));
    }
}

/// Reports every cycle of the `after` graph once, as `a -> b -> a`.
pub(super) fn cycles(cx: &mut Ctx, exps: &[Experiment]) {
    // Edge e -> p: e waits for p.
    let n = exps.len();
    let mut state = vec![0u8; n]; // 0 new, 1 on the stack, 2 done
    let mut reported: BTreeSet<Vec<usize>> = BTreeSet::new();
    for root in 0..n {
        if state[root] != 0 {
            continue;
        }
        // Iterative DFS: (node, next edge index).
        let mut stack: Vec<(usize, usize)> = vec![(root, 0)];
        state[root] = 1;
        while let Some(&mut (v, ref mut k)) = stack.last_mut() {
            if *k < exps[v].after.len() {
                let w = exps[v].after[*k].experiment;
                *k += 1;
                match state[w] {
                    0 => {
                        state[w] = 1;
                        stack.push((w, 0));
                    }
                    1 => {
                        let pos = stack.iter().position(|&(x, _)| x == w).unwrap_or(0);
                        let cycle: Vec<usize> = stack[pos..].iter().map(|&(x, _)| x).collect();
                        let mut canon = cycle.clone();
                        let m = canon
                            .iter()
                            .enumerate()
                            .min_by_key(|(_, &x)| x)
                            .map_or(0, |(i, _)| i);
                        canon.rotate_left(m);
                        if reported.insert(canon) {
                            let mut names: Vec<&str> =
                                cycle.iter().map(|&x| exps[x].id.as_str()).collect();
                            names.push(exps[w].id.as_str());
                            let entry = exps[v]
                                .after
                                .iter()
                                .position(|p| p.experiment == w)
                                .unwrap_or(0);
                            // The entry's key: a plain id or the `id` of a mapping.
                            let plain = format!("experiments[{v}].after[{entry}]");
                            let key = match cx.index.and_then(|ix| ix.get(&format!("{plain}.id"))) {
                                Some(_) => format!("{plain}.id"),
                                None => plain,
                            };
                            cx.err(
                                &key,
                                format!("`after` forms a cycle: {}", names.join(" -> ")),
                                "each test in the cycle waits for the next to end, so none can start; remove one of these `after` entries",
                            );
                        }
                    }
                    _ => {}
                }
            } else {
                state[v] = 2;
                stack.pop();
            }
        }
    }
}
