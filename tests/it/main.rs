//! End-to-end tests over files in scenarios/ and tests/fixtures/.
