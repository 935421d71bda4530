//! Structural analysis of a resolved model: the mode graph (petgraph) and exact guard
//! reasoning.

pub mod graph;
pub mod guards;

use crate::diag::Diagnostic;
use crate::model::Model;

/// Every structural finding about a model, as diagnostics, in a deterministic order.
pub fn findings(m: &Model) -> Vec<Diagnostic> {
    graph::analyse(m)
        .into_iter()
        .map(Diagnostic::from)
        .collect()
}
