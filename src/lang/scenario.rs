//! Scenario front end (placeholder).
