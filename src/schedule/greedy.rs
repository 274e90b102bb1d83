//! The greedy baseline every plan is compared against, and the fallback
//! when the solver fails: tests in priority order (a test never before its
//! predecessors), each at its earliest feasible start with the largest
//! share that fits there.

use super::options::{Instance, Role};
use super::state::State;
use std::collections::BTreeSet;

/// Free tests by priority, highest first, each after its free predecessors;
/// ties in portfolio order.
pub(crate) fn priority_order(inst: &Instance) -> Vec<usize> {
    let p = inst.portfolio;
    let n = inst.roles.len();
    let mut indegree: Vec<usize> = (0..n).map(|e| inst.preds[e].len()).collect();
    // Keyed by (priority descending, index) through a sortable integer rank.
    let mut rank: Vec<usize> = inst.free().collect();
    rank.sort_by(|&a, &b| {
        p.experiments[b]
            .priority
            .total_cmp(&p.experiments[a].priority)
            .then(a.cmp(&b))
    });
    let mut pos = vec![0usize; n];
    for (i, &e) in rank.iter().enumerate() {
        pos[e] = i;
    }
    let mut ready: BTreeSet<(usize, usize)> = rank
        .iter()
        .filter(|&&e| indegree[e] == 0)
        .map(|&e| (pos[e], e))
        .collect();
    let mut order = Vec::with_capacity(rank.len());
    while let Some((_, e)) = ready.pop_first() {
        order.push(e);
        for &(s, _) in &inst.succs[e] {
            indegree[s] -= 1;
            if indegree[s] == 0 {
                ready.insert((pos[s], s));
            }
        }
    }
    order
}

/// The greedy calendar.
pub(crate) fn greedy(inst: &Instance) -> State {
    let mut state = State::new(inst);
    for e in priority_order(inst) {
        debug_assert!(inst.roles[e] == Role::Free);
        // Earliest start first, then the largest share.
        let mut best: Option<usize> = None;
        for (k, o) in inst.options[e].iter().enumerate() {
            let better = match best {
                None => true,
                Some(b) => {
                    let ob = &inst.options[e][b];
                    o.start < ob.start || (o.start == ob.start && o.share > ob.share)
                }
            };
            if better && state.fits(inst, e, o) {
                best = Some(k);
            }
        }
        if let Some(k) = best {
            state.add(inst, e, k);
        }
    }
    state
}
