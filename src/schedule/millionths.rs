//! Shares as whole millionths of a pool, the planner's integer unit: a
//! pool's room, a share, and one whole pool, so the occupancy that
//! `state` adds and removes never drifts.
//!
//! Both the candidate runs (`options`) and the search's bookkeeping
//! (`state`) read these, as do the model (`lp`) and the reasons; keeping
//! them here, below all of those, leaves no import circle between them.

use crate::portfolio::Pool;
use crate::share::Share;

/// One whole pool in millionths, as sums of [`Share`]s are kept.
pub(crate) const WHOLE: i64 = Share::MILLION as i64;

/// The most the shares on a split pool may add up to on a day, in
/// millionths: its [`Pool::capacity`].
pub(crate) fn room(pool: &Pool) -> i64 {
    micro(pool.capacity())
}

/// A share in millionths, for sums that may pass one whole pool.
pub(crate) fn micro(share: Share) -> i64 {
    i64::from(share.millionths())
}
