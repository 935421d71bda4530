//! limpet: design, prove and review the limp-home policy of a drive-by-wire throttle.
//!
//! Data flows one way: text -> `lang` (AST with spans) -> `model` (resolved IR) -> analysis,
//! the pure `controller` step driven by `sim` or `prove`, and `diff` over two models.

pub mod alloc;
pub mod analysis;
pub mod app;
pub mod approve;
pub mod controller;
pub mod diag;
pub mod diff;
pub mod faults;
pub mod fmt;
pub mod hint;
pub mod lang;
pub mod model;
pub mod plant;
pub mod prove;
pub mod report;
pub mod review;
pub mod sim;
pub mod time;

/// Helpers shared by the unit tests.
#[cfg(test)]
pub(crate) mod testing {
    /// One step of Marsaglia's xorshift64 (shifts 13, 7, 17; "Xorshift RNGs", J. Stat.
    /// Softw. 8(14), 2003): the seeded generator the randomised tests draw from. Returns the
    /// new state.
    pub fn xorshift(x: &mut u64) -> u64 {
        *x ^= *x << 13;
        *x ^= *x >> 7;
        *x ^= *x << 17;
        *x
    }
}
