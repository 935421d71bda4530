//! Front ends of the two languages: pest grammars, ASTs with byte spans, and the canonical
//! printer. Nothing outside this module sees pest types.

pub mod policy;
pub mod scenario;

use serde::Serialize;

/// A byte range in one source file.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize)]
pub struct Span {
    pub start: usize,
    pub end: usize,
}

impl Span {
    pub fn new(start: usize, end: usize) -> Span {
        Span { start, end }
    }

    pub fn of(pair: &pest::Span<'_>) -> Span {
        Span {
            start: pair.start(),
            end: pair.end(),
        }
    }

    /// The smallest span covering both.
    pub fn join(self, other: Span) -> Span {
        Span {
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}
