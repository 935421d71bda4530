//! Mode-graph findings (placeholder).
