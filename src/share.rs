//! Shares of a pool's traffic and the levels a test may take.
//!
//! A [`Share`] is held in whole millionths, so sums and comparisons of
//! shares are exact (no tolerance to pick per file) and one share always
//! prints the same way: its `Display` is the crate's one percentage wording. In JSON
//! a share is the plain fraction (`0.25`), as the plan's documentation says.

use serde::{Deserialize, Deserializer, Serialize, Serializer};
use std::fmt;

/// A share of a pool's units, `0.25` for a quarter, in whole millionths.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct Share(u32);

impl Share {
    /// Millionths in a whole pool.
    pub const MILLION: u32 = 1_000_000;
    /// No traffic.
    pub const ZERO: Share = Share(0);
    /// The whole pool.
    pub const WHOLE: Share = Share(Share::MILLION);

    /// The share nearest to `fraction`, in millionths. Negative and
    /// non-finite values give zero; there is no upper clamp (an overlap
    /// pool's total may pass one).
    pub fn from_fraction(fraction: f64) -> Share {
        let m = (fraction * f64::from(Share::MILLION)).round();
        if m.is_finite() && m > 0.0 {
            Share(m.min(f64::from(u32::MAX)) as u32)
        } else {
            Share::ZERO
        }
    }

    /// A share given in millionths.
    pub const fn from_millionths(m: u32) -> Share {
        Share(m)
    }

    /// The share as a fraction of the pool.
    pub fn fraction(self) -> f64 {
        f64::from(self.0) / f64::from(Share::MILLION)
    }

    /// The share in whole millionths.
    pub fn millionths(self) -> u32 {
        self.0
    }

    /// Whether it is no traffic at all.
    pub fn is_zero(self) -> bool {
        self.0 == 0
    }

    /// The two shares together (saturating: an overlap pool's total may
    /// pass one whole pool, never `u32::MAX` millionths).
    pub fn plus(self, other: Share) -> Share {
        Share(self.0.saturating_add(other.0))
    }

    /// Whether `self` beside `used` stays within `room`: exact, in
    /// millionths. The one comparison of shares against a pool's room.
    pub fn fits_beside(self, used: Share, room: Share) -> bool {
        u64::from(used.0) + u64::from(self.0) <= u64::from(room.0)
    }
}

impl std::iter::Sum for Share {
    fn sum<I: Iterator<Item = Share>>(iter: I) -> Share {
        iter.fold(Share::ZERO, Share::plus)
    }
}

impl fmt::Display for Share {
    /// As a percentage: `25%`, `12.5%`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&crate::words::percent(self.fraction()))
    }
}

impl Serialize for Share {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_f64(self.fraction())
    }
}

impl<'de> Deserialize<'de> for Share {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Share, D::Error> {
        let x = f64::deserialize(d)?;
        if x.is_finite() && x >= 0.0 {
            Ok(Share::from_fraction(x))
        } else {
            Err(serde::de::Error::custom(format!(
                "a share is a fraction of at least 0, not {x}"
            )))
        }
    }
}

/// The share levels a portfolio allows, ascending and without repeats.
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize)]
#[serde(transparent)]
pub struct ShareLevels(Vec<Share>);

impl ShareLevels {
    /// The levels of `shares`, sorted, repeats and zero dropped.
    pub fn new(shares: impl IntoIterator<Item = Share>) -> ShareLevels {
        let mut v: Vec<Share> = shares.into_iter().filter(|s| !s.is_zero()).collect();
        v.sort_unstable();
        v.dedup();
        ShareLevels(v)
    }

    /// The levels from fractions (`[0.25, 0.5, 1.0]`).
    pub fn from_fractions(fractions: &[f64]) -> ShareLevels {
        ShareLevels::new(fractions.iter().map(|&f| Share::from_fraction(f)))
    }

    /// Every level, ascending.
    pub fn all(&self) -> &[Share] {
        &self.0
    }

    /// The levels not above `max`, ascending.
    pub fn up_to(&self, max: Share) -> impl DoubleEndedIterator<Item = Share> + '_ {
        let n = self.0.partition_point(|&s| s <= max);
        self.0[..n].iter().copied()
    }

    /// The largest level not above `max`.
    pub fn largest_up_to(&self, max: Share) -> Option<Share> {
        self.up_to(max).next_back()
    }

    /// The smallest level.
    pub fn lowest(&self) -> Option<Share> {
        self.0.first().copied()
    }

    /// Whether `share` is one of the levels.
    pub fn contains(&self, share: Share) -> bool {
        self.0.binary_search(&share).is_ok()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shares_add_and_fit_exactly() {
        // 0.1 + 0.2 passes 0.3 in floating point; in millionths it is 0.3.
        let (a, b) = (Share::from_fraction(0.1), Share::from_fraction(0.2));
        assert_eq!(a.plus(b), Share::from_fraction(0.3));
        assert!(b.fits_beside(a, Share::from_fraction(0.3)));
        assert!(!Share::from_millionths(1).fits_beside(a.plus(b), Share::from_fraction(0.3)));
        let total: Share = [a, b, Share::WHOLE].into_iter().sum();
        assert_eq!(total.millionths(), 1_300_000);
        assert_eq!(
            Share::from_millionths(u32::MAX).plus(a).millionths(),
            u32::MAX
        );
    }

    #[test]
    fn fractions_round_to_the_nearest_millionth_and_back_exactly() {
        for f in [0.05, 0.1, 0.125, 0.25, 0.3, 1.0 / 3.0, 0.5, 0.75, 1.0] {
            let s = Share::from_fraction(f);
            assert!((s.fraction() - f).abs() <= 0.5e-6, "{f}");
        }
        // Decimal fractions with up to six places survive the round trip
        // bit for bit, so the plan's JSON does not change.
        for f in [0.05, 0.1, 0.3, 0.35, 0.7, 0.123456] {
            assert_eq!(Share::from_fraction(f).fraction(), f);
        }
        assert_eq!(Share::from_fraction(-0.2), Share::ZERO);
        assert_eq!(Share::from_fraction(f64::NAN), Share::ZERO);
        assert_eq!(Share::from_fraction(1.0), Share::WHOLE);
        assert_eq!(Share::from_fraction(0.1 + 0.2), Share::from_fraction(0.3));
    }

    #[test]
    fn a_share_prints_as_a_percentage() {
        assert_eq!(Share::from_fraction(0.25).to_string(), "25%");
        assert_eq!(Share::from_fraction(0.125).to_string(), "12.5%");
        assert_eq!(Share::WHOLE.to_string(), "100%");
    }

    #[test]
    fn a_share_is_a_plain_fraction_in_json() {
        let s = Share::from_fraction(0.35);
        assert_eq!(serde_json::to_string(&s).unwrap(), "0.35");
        let back: Share = serde_json::from_str("0.35").unwrap();
        assert_eq!(back, s);
        assert!(serde_json::from_str::<Share>("-1").is_err());
    }

    #[test]
    fn levels_are_sorted_and_cut_at_a_maximum() {
        let l = ShareLevels::from_fractions(&[1.0, 0.5, 0.25, 0.5, 0.0]);
        let fr: Vec<f64> = l.all().iter().map(|s| s.fraction()).collect();
        assert_eq!(fr, vec![0.25, 0.5, 1.0]);
        let half = Share::from_fraction(0.5);
        let under: Vec<Share> = l.up_to(half).collect();
        assert_eq!(under, vec![Share::from_fraction(0.25), half]);
        assert_eq!(l.largest_up_to(Share::from_fraction(0.7)), Some(half));
        assert_eq!(l.largest_up_to(Share::from_fraction(0.1)), None);
        assert_eq!(l.lowest(), Some(Share::from_fraction(0.25)));
        assert!(l.contains(half) && !l.contains(Share::from_fraction(0.3)));
    }
}
