//! Policy front end (placeholder until the parser lands).
