//! Simulated time: integer nanoseconds, so that event order and output never depend on
//! floating-point rounding or on the wall clock.

use serde::{Deserialize, Serialize};
use std::fmt;

/// An instant or a duration in simulated time, in nanoseconds.
#[derive(
    Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize,
)]
pub struct Time(pub u64);

impl Time {
    pub const ZERO: Time = Time(0);

    pub fn from_ms(ms: u64) -> Time {
        Time(ms * 1_000_000)
    }

    /// Rounds a number of seconds to the nearest nanosecond; `None` when negative, NaN or too
    /// large to represent.
    pub fn from_secs_f64(secs: f64) -> Option<Time> {
        if !secs.is_finite() || secs < 0.0 {
            return None;
        }
        let ns = (secs * 1e9).round();
        if ns > u64::MAX as f64 / 2.0 {
            return None;
        }
        Some(Time(ns as u64))
    }

    pub fn as_secs_f64(self) -> f64 {
        self.0 as f64 * 1e-9
    }

    pub fn as_ms_f64(self) -> f64 {
        self.0 as f64 * 1e-6
    }

    pub fn saturating_sub(self, other: Time) -> Time {
        Time(self.0.saturating_sub(other.0))
    }
}

impl std::ops::Add for Time {
    type Output = Time;
    fn add(self, rhs: Time) -> Time {
        Time(self.0.saturating_add(rhs.0))
    }
}

/// Prints the shortest exact spelling with a unit: `5 ms`, `1.6 s`, `250 us`.
impl fmt::Display for Time {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let ns = self.0;
        if ns == 0 {
            return write!(f, "0 ms");
        }
        if ns.is_multiple_of(1_000_000_000) {
            write!(f, "{} s", ns / 1_000_000_000)
        } else if ns.is_multiple_of(1_000_000) && ns < 1_000_000_000 {
            write!(f, "{} ms", ns / 1_000_000)
        } else if ns >= 1_000_000_000 {
            write!(f, "{} s", trim(ns as f64 / 1e9))
        } else {
            write!(f, "{} ms", trim(ns as f64 / 1e6))
        }
    }
}

/// Formats a number with up to six decimals and no trailing zeros.
pub fn trim(x: f64) -> String {
    let s = format!("{x:.6}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn display_picks_the_natural_unit() {
        assert_eq!(Time::from_ms(5).to_string(), "5 ms");
        assert_eq!(Time::from_ms(1600).to_string(), "1.6 s");
        assert_eq!(Time::from_ms(3000).to_string(), "3 s");
        assert_eq!(Time(250_000).to_string(), "0.25 ms");
    }

    #[test]
    fn from_secs_rejects_negative_and_nan() {
        assert_eq!(Time::from_secs_f64(-1.0), None);
        assert_eq!(Time::from_secs_f64(f64::NAN), None);
        assert_eq!(Time::from_secs_f64(0.005), Some(Time::from_ms(5)));
    }
}
