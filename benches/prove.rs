//! Prover throughput on the reference policy: states stored per second (per core and in all),
//! bytes per stored state, and the wall time of single-fault proofs at the default settings
//! and of a slice of the double-fault space. A plain `main` timed with `Instant`:
//! `cargo bench --bench prove`.

use limpet::model::FaultScope;
use limpet::prove::{self, Config};
use std::time::Instant;

// The binary's allocator, so that the figures are the binary's.
#[global_allocator]
static ALLOC: limpet::alloc::LargeBlocks = limpet::alloc::LargeBlocks;

/// The process's peak resident set, in bytes (Linux: `getrusage`, in KiB).
#[cfg(target_os = "linux")]
fn peak_rss() -> Option<u64> {
    // SAFETY: `getrusage` fills the zeroed struct it is given and touches nothing else.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    let ok = unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) } == 0;
    ok.then(|| u64::try_from(u.ru_maxrss).unwrap_or(0) * 1024)
}

#[cfg(not(target_os = "linux"))]
fn peak_rss() -> Option<u64> {
    None
}

fn main() {
    let src = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/scenarios/van/van_throttle.limp"
    ))
    .expect("reference policy");
    let model = limpet::model::lower(&src).expect("reference lowers");
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    println!(
        "prover benchmark, reference policy `{}`, {cores} core(s)",
        model.name
    );
    println!(
        "{:<44} {:>10} {:>12} {:>14} {:>14}",
        "run", "wall s", "states", "states/s", "per core"
    );
    let run = |label: &str, cfg: Config| {
        let t = Instant::now();
        let p = prove::prove(&model, &cfg, &|_, _, _| {}).expect("plant derives");
        let wall = t.elapsed().as_secs_f64();
        let rate = p.states as f64 / wall;
        let threads = if cfg.jobs == 0 { cores } else { cfg.jobs };
        println!(
            "{label:<44} {wall:>10.2} {:>12} {rate:>14.0} {:>14.0}",
            p.states,
            rate / threads as f64
        );
    };
    // First, alone in the process so that the peak resident set is its own: the largest
    // search of the reference, run until it closes.
    let t = Instant::now();
    let big = prove::prove(
        &model,
        &Config {
            jobs: 1,
            only: Some("pedal.a gain 150".into()),
            max_states: 10_000_000,
            ..Config::default()
        },
        &|_, _, _| {},
    )
    .expect("plant derives");
    let wall = t.elapsed().as_secs_f64();
    let faulty: usize = big.rows.iter().map(|r| r.result.faulty_states).sum();
    println!(
        "{:<44} {wall:>10.2} {:>12} {:>14.0} {:>14.0}",
        "pedal.a gain 150 %, until closed, 1 thread",
        big.states,
        big.states as f64 / wall,
        big.states as f64 / wall
    );
    if let Some(rss) = peak_rss() {
        println!(
            "  peak resident set {:.0} MiB: {:.0} bytes per stored joint state ({} joint, {} faulty nodes)",
            rss as f64 / f64::from(1 << 20),
            rss as f64 / big.states as f64,
            big.states,
            faulty
        );
    }
    run(
        "single faults, defaults, 1 thread",
        Config {
            jobs: 1,
            ..Config::default()
        },
    );
    run("single faults, defaults, all threads", Config::default());
    run(
        "single faults, twin paired exactly, all threads",
        Config {
            exact_twin: true,
            ..Config::default()
        },
    );
    run(
        "single faults, 10 M states bound, all threads",
        Config {
            max_states: 10_000_000,
            ..Config::default()
        },
    );
    run(
        "pedal.a shorts and stuck, with their pairs",
        Config {
            scope: Some(FaultScope::Double),
            only: Some("pedal.a s".into()),
            ..Config::default()
        },
    );
    // What one stored joint state costs by layout: its entry beside its faulty node (8 bytes,
    // in the node's own 64-byte record for its first four twins, then in 64-byte buckets of
    // seven), its path record (parent, pedal, origin: 9, padded to 12) and its place in the
    // frontier while in flight (20, twice while sorting); the faulty graph's nodes (the
    // controller state until expanded, plate, successors, index slot) come on top, one per
    // several joint states.
    println!(
        "by layout: 8 to 10 bytes of entry, 12 of path and 20 in flight per joint state, plus the faulty nodes"
    );
}
