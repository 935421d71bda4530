//! The discrete-event simulator: scenario scripts resolved against a policy, the event queue,
//! expectations and traces.

pub mod script;
pub mod trace;
