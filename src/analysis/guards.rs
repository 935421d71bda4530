//! Exact reasoning over guards (placeholder).
