//! One controller step: a pure function of (model, state, sampled inputs) -> (state, outputs).
//! The simulator and the prover both call it; there is one semantics.
