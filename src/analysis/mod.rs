//! Structural analysis of a resolved model: the mode graph (petgraph) and exact guard
//! reasoning.

pub mod graph;
pub mod guards;
