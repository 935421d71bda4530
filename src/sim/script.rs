//! Scenario scripts resolved against a policy model (placeholder).
