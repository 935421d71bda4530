//! `limpet diff`: snapshots of the text and markdown reports for each revision pair under
//! tests/fixtures/diff/ (every file there against `van_base.limp`), guard equivalence across
//! two models, and a behaviour diff over the bundled scenarios.

use crate::{rel, shown};
use limpet::app::{Exit, Format};
use limpet::diff::joint::{Comparison, Joint};
use limpet::diff::{DiffConfig, run};
use std::path::{Path, PathBuf};

fn fixture(name: &str) -> String {
    rel(&PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/diff")
        .join(name))
}

/// Runs from the crate root so that the paths in the reports are relative.
fn diff(old: &str, new: &str, cfg: &DiffConfig) -> limpet::app::Outcome {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    run(
        &root.join(old).to_string_lossy(),
        &root.join(new).to_string_lossy(),
        cfg,
    )
}

/// The absolute checkout path removed, so snapshots do not depend on the machine.
fn portable(s: String) -> String {
    let root = format!("{}/", env!("CARGO_MANIFEST_DIR").replace('\\', "/"));
    s.replace(&root, "")
}

#[test]
fn every_pair_as_text_and_markdown() {
    insta::glob!("../fixtures/diff", "*.limp", |path| {
        let name = path
            .file_name()
            .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
        if name == "van_base.limp" {
            return;
        }
        let (old, new) = (fixture("van_base.limp"), fixture(&name));
        let text = diff(&old, &new, &DiffConfig::default());
        let md = diff(
            &old,
            &new,
            &DiffConfig {
                format: Format::Markdown,
                ..DiffConfig::default()
            },
        );
        assert_eq!(text.exit, md.exit, "{name}: the views disagree on the exit");
        let both = format!("{}\n=== markdown\n{}", shown(&text), shown(&md));
        insta::assert_snapshot!(portable(both));
    });
}

#[test]
fn layout_and_equivalent_rewrites_exit_zero_and_real_changes_exit_one() {
    let base = fixture("van_base.limp");
    for (name, exit) in [
        ("layout.limp", Exit::Holds),
        ("equivalent.limp", Exit::Holds),
        ("debounce.limp", Exit::Finding),
        ("guard.limp", Exit::Finding),
        ("rename.limp", Exit::Finding),
        ("new_mode.limp", Exit::Finding),
    ] {
        let o = diff(&base, &fixture(name), &DiffConfig::default());
        assert_eq!(o.exit, exit, "{name}: {}", o.stdout);
    }
}

#[test]
fn json_lists_the_same_lines() {
    let o = diff(
        &fixture("van_base.limp"),
        &fixture("guard.limp"),
        &DiffConfig {
            format: Format::Json,
            ..DiffConfig::default()
        },
    );
    let v: serde_json::Value = match serde_json::from_str(&o.stdout) {
        Ok(v) => v,
        Err(e) => panic!("not JSON: {e}\n{}", o.stdout),
    };
    assert_eq!(v["differs"], true);
    assert_eq!(
        v["lines"][0],
        "transition normal -> idle_only: guard pedal_disagree or brake_conflict -> pedal_disagree"
    );
    assert_eq!(v["changes"][0]["comparison"]["answer"], "differs");
    assert_eq!(v["changes"][0]["comparison"]["old_holds"], true);
}

#[test]
fn unreadable_revisions_are_bad_input() {
    let o = diff(
        &fixture("van_base.limp"),
        &fixture("missing.limp"),
        &DiffConfig::default(),
    );
    assert_eq!(o.exit, Exit::BadInput);
    assert!(o.stderr.contains("cannot read"), "{}", o.stderr);
    let o = run(
        "no-such-revision-xyz:scenarios/van/van_throttle.limp",
        &fixture("van_base.limp"),
        &DiffConfig::default(),
    );
    assert_eq!(o.exit, Exit::BadInput);
    assert!(o.stderr.contains("git"), "{}", o.stderr);
}

/// Two separately lowered models: guards are compared by atom names, not indices.
#[test]
fn guards_compare_across_two_models() {
    let base = std::fs::read_to_string(fixture_abs("van_base.limp")).unwrap_or_default();
    let lower = |s: &str| match limpet::model::lower(s) {
        Ok(m) => m,
        Err(d) => panic!("does not lower: {d:?}"),
    };
    // A new sensor-free switch first, so every switch and fault index shifts by one.
    let shifted = base
        .replace("switch brake", "switch clutch\n  switch brake")
        .replace(
            "  fault pedal_a_low ",
            "  fault clutch_stuck when clutch for 1 s\n  fault pedal_a_low ",
        );
    let (old, new) = (lower(&base), lower(&shifted));
    assert_ne!(
        old.fault_id("brake_conflict"),
        new.fault_id("brake_conflict")
    );
    let j = Joint::new(&old, &new, &[]);
    let g = |m: &limpet::model::Model, i: usize| m.transitions[i].guard.clone();
    for i in 0..old.transitions.len() {
        assert_eq!(
            j.compare(&g(&old, i), &g(&new, i)),
            Comparison::Same,
            "transition {i}"
        );
    }
    // Non-equivalent across the two: the guard of one transition against another's.
    match j.compare(&g(&old, 1), &g(&new, 2)) {
        Comparison::Differs { assignment, .. } => assert!(!assignment.entries.is_empty()),
        other => panic!("expected a difference, got {other:?}"),
    }
    let brake = |m: &limpet::model::Model| {
        m.faults[m.fault_id("brake_conflict").unwrap_or(0)]
            .condition
            .clone()
    };
    assert_eq!(j.compare(&brake(&old), &brake(&new)), Comparison::Same);
}

fn fixture_abs(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/diff")
        .join(name)
}

#[test]
fn behaviour_over_the_bundled_scenarios() {
    let cfg = DiffConfig {
        scenarios: Some(
            PathBuf::from(env!("CARGO_MANIFEST_DIR"))
                .join("scenarios/van")
                .to_string_lossy()
                .into_owned(),
        ),
        ..DiffConfig::default()
    };
    let o = diff(&fixture("van_base.limp"), &fixture("debounce.limp"), &cfg);
    assert_eq!(o.exit, Exit::Finding);
    insta::assert_snapshot!(portable(shown(&o)));
    // A layout-only revision replays every scenario the same.
    let o = diff(&fixture("van_base.limp"), &fixture("layout.limp"), &cfg);
    assert_eq!(o.exit, Exit::Holds, "{}", o.stdout);
    assert!(
        o.stdout.contains("17 scenarios replay the same"),
        "{}",
        o.stdout
    );
}
