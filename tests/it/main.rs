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

/// A seeded generator: a campaign, or a proptest seed's edits, are the same on every run.
pub struct Rng(pub u64);

impl Rng {
    pub fn next_u64(&mut self) -> u64 {
        // xorshift64* (Vigna 2016, "An experimental exploration of Marsaglia's xorshift
        // generators"); any fixed generator would do here.
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }

    pub fn below(&mut self, n: u64) -> u64 {
        self.next_u64() % n.max(1)
    }
}

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
