//! The discrete-event simulator: scenario scripts resolved against a policy, the event queue,
//! expectations and traces.

pub mod engine;
pub mod script;
pub mod system;
pub mod trace;
