//! End-to-end tests over files in scenarios/ and tests/fixtures/: one test binary, a module per
//! command.

mod approve;
mod check;
mod diff;
mod findings;
mod fmt;
mod prove;
mod robust;
mod run;
mod views;

use std::path::Path;

/// A path relative to the crate root, with `/` separators, so snapshots do not depend on where
/// the checkout lives.
pub fn rel(p: &Path) -> String {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    p.strip_prefix(root)
        .unwrap_or(p)
        .to_string_lossy()
        .replace('\\', "/")
}

/// What a command printed and how it exited, as one text for a snapshot.
pub fn shown(o: &limpet::app::Outcome) -> String {
    let mut s = format!("exit: {}\n", o.exit as u8);
    if !o.stdout.is_empty() {
        s.push_str("--- stdout\n");
        s.push_str(&o.stdout);
    }
    if !o.stderr.is_empty() {
        s.push_str("--- stderr\n");
        s.push_str(&o.stderr);
    }
    s
}
