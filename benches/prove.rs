//! Prover throughput on the reference policy: states stored per second (per core and in all),
//! bytes per stored state, and the wall time of single-fault proofs at the default settings
//! and of a slice of the double-fault space. A plain `main` timed with `Instant`:
//! `cargo bench --bench prove`.

use limpet::model::FaultScope;
use limpet::prove::{self, Config};
use std::time::Instant;

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
        "single faults, 1 M states bound, all threads",
        Config {
            max_states: 1_000_000,
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
    // What one stored state costs: the visited digest (16 bytes) and its requirement timers
    // (4), the path record (parent, pedal, origin: 9, padded to 12), the hash table's control
    // byte; plus the slack of a table at load factor 7/8 and the frontier's states in flight.
    let per_state = 16 + 4 + 12 + 1;
    println!("bytes per stored state: about {per_state} plus hash-table slack (load factor 7/8)");
}
