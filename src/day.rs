//! Days of a plan as the planner counts them: from the planning window's
//! first day, which is day 0.
//!
//! A [`Day`] is a signed offset, because a running test may have started
//! before the window and be held past its end; an index into a per-day
//! array of the window is a `usize` that converts into a `Day` with
//! `Day::from`. Only [`crate::portfolio::Window`] turns days into dates and
//! back, so every layer agrees on which date day 0 is.

use std::fmt;
use std::ops::{Add, Sub};

/// A day counted from the planning window's first day (day 0); negative
/// before the window.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Default)]
pub struct Day(i64);

impl Day {
    /// The window's first day.
    pub const FIRST: Day = Day(0);

    /// The day `offset` days after the window's first day.
    pub const fn new(offset: i64) -> Day {
        Day(offset)
    }

    /// Days after the window's first day (negative before it).
    pub const fn offset(self) -> i64 {
        self.0
    }

    /// Its index into a per-day array of a window of `days` days, when it
    /// lies inside the window.
    pub fn index(self, days: usize) -> Option<usize> {
        usize::try_from(self.0).ok().filter(|&i| i < days)
    }
}

impl From<usize> for Day {
    /// The day at this index of the window.
    fn from(index: usize) -> Day {
        Day(i64::try_from(index).unwrap_or(i64::MAX))
    }
}

impl From<i64> for Day {
    fn from(offset: i64) -> Day {
        Day(offset)
    }
}

impl Add<i64> for Day {
    type Output = Day;
    fn add(self, days: i64) -> Day {
        Day(self.0.saturating_add(days))
    }
}

impl Sub for Day {
    type Output = i64;
    /// Days from `other` to `self`.
    fn sub(self, other: Day) -> i64 {
        self.0 - other.0
    }
}

impl fmt::Display for Day {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "day {}", self.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn indices_exist_only_inside_the_window() {
        assert_eq!(Day::new(0).index(7), Some(0));
        assert_eq!(Day::new(6).index(7), Some(6));
        assert_eq!(Day::new(7).index(7), None);
        assert_eq!(Day::new(-1).index(7), None);
        assert_eq!(Day::from(3usize), Day::new(3));
    }

    #[test]
    fn days_add_and_subtract_as_offsets() {
        assert_eq!(Day::new(3) + 4, Day::new(7));
        assert_eq!(Day::new(-2) + 2, Day::FIRST);
        assert_eq!(Day::new(10) - Day::new(3), 7);
        assert!(Day::new(-1) < Day::FIRST);
        assert_eq!(Day::new(5).to_string(), "day 5");
    }
}
