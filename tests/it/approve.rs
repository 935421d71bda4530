//! `limpet run --approved`: a round trip through a temporary folder: a missing approved
//! trace is a difference, `--approve` stores it, a rerun matches, and a changed policy shows
//! a unified diff.

use limpet::app::{Exit, RunConfig};
use limpet::approve::run_approved;
use std::path::PathBuf;

fn scenario() -> String {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios/van/pedal_a_open.scenario")
        .to_string_lossy()
        .into_owned()
}

#[test]
fn approve_round_trip() {
    let dir =
        std::env::temp_dir().join(format!("limpet-approve-{}-round-trip", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let d = dir.to_string_lossy().into_owned();
    let paths = vec![scenario()];
    let cfg = RunConfig::default();

    let missing = run_approved(&paths, &cfg, &d, false);
    assert_eq!(missing.exit, Exit::Finding);
    assert!(
        missing.stdout.contains("no approved trace"),
        "{}",
        missing.stdout
    );

    let stored = run_approved(&paths, &cfg, &d, true);
    assert_eq!(stored.exit, Exit::Holds, "{}", stored.stderr);
    let file = dir.join("pedal_a_open.trace");
    let text = std::fs::read_to_string(&file).unwrap_or_default();
    assert!(text.starts_with("scenario "), "{text}");

    let same = run_approved(&paths, &cfg, &d, false);
    assert_eq!(same.exit, Exit::Holds, "{}", same.stdout);
    assert!(same.stdout.contains("matches"), "{}", same.stdout);

    // A slower disagreement monitor changes the trace: the diff shows the moved event.
    let policy = dir.join("slower.limp");
    let van = std::fs::read_to_string(
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/van/van_throttle.limp"),
    )
    .unwrap_or_default();
    let slower = van.replace(
        "for 20 ms heal 200 ms code P2122",
        "for 60 ms heal 200 ms code P2122",
    );
    assert_ne!(slower, van);
    std::fs::write(&policy, slower).unwrap_or_default();
    let cfg2 = RunConfig {
        policy: Some(policy.to_string_lossy().into_owned()),
        ..RunConfig::default()
    };
    let changed = run_approved(&paths, &cfg2, &d, false);
    assert_eq!(changed.exit, Exit::Finding, "{}", changed.stdout);
    assert!(
        changed.stdout.contains("differs from"),
        "{}",
        changed.stdout
    );
    assert!(changed.stdout.contains("\n@@ "), "{}", changed.stdout);
    assert!(
        changed
            .stdout
            .lines()
            .any(|l| l.starts_with('-') && l.contains("fault pedal_a_low set")),
        "{}",
        changed.stdout
    );
    let _ = std::fs::remove_dir_all(&dir);
}
