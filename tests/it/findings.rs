//! `limpet check` end to end on one fixture per finding kind (tests/fixtures/findings/): the
//! rendered output is snapshotted, and the kind the file is named after must be reported.

use crate::{rel, shown};
use limpet::app::{self, Exit, Format};
use std::path::Path;

/// The finding kind a fixture shows: its file name without `.limp`.
fn kind_of(path: &Path) -> String {
    path.file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default()
}

#[test]
fn each_fixture_shows_its_finding() {
    let mut seen = Vec::new();
    insta::glob!("../fixtures/findings", "*.limp", |path| {
        let o = app::check(&rel(path), Format::Text, false);
        let kind = kind_of(path);
        let out = shown(&o);
        assert!(
            out.contains(&format!("[{kind}]: ")),
            "`{kind}` is missing from:\n{out}"
        );
        // A fixture loads: its findings are about the policy, not about the file.
        assert_ne!(o.exit, Exit::BadInput, "{out}");
        insta::assert_snapshot!(out);
        seen.push(kind);
    });
    seen.sort();
    // One fixture per kind, so a kind without a fixture is noticed here.
    let expected = [
        "authority-under-fault",
        "chatter",
        "dead-end",
        "identical-tracks",
        "inconclusive",
        "inert-fault",
        "latched-exit",
        "missing-transition",
        "no-path-to-safe",
        "off-period-time",
        "order-dependent-overlap",
        "shadowed-transition",
        "unreachable-mode",
        "unread-fault",
    ];
    assert_eq!(seen, expected);
}

#[test]
fn errors_fail_and_warnings_and_notes_pass() {
    let exit = |kind: &str| {
        app::check(
            &format!("tests/fixtures/findings/{kind}.limp"),
            Format::Text,
            false,
        )
        .exit
    };
    assert_eq!(exit("dead-end"), Exit::Finding);
    assert_eq!(exit("unread-fault"), Exit::Holds);
    assert_eq!(exit("latched-exit"), Exit::Holds);
}

#[test]
fn deny_warnings_fails_a_warning_only_policy() {
    for kind in [
        "unread-fault",
        "inert-fault",
        "off-period-time",
        "order-dependent-overlap",
    ] {
        let path = format!("tests/fixtures/findings/{kind}.limp");
        let lenient = app::check(&path, Format::Text, false);
        let strict = app::check(&path, Format::Text, true);
        assert_eq!(lenient.exit as u8, 0, "{}", shown(&lenient));
        assert_eq!(strict.exit as u8, 1, "{}", shown(&strict));
        assert!(
            strict.stdout.contains(&format!("error[{kind}]: ")),
            "{}",
            strict.stdout
        );
    }
}

#[test]
fn deny_warnings_leaves_notes_alone() {
    let path = "tests/fixtures/findings/latched-exit.limp";
    let strict = app::check(path, Format::Text, true);
    assert_eq!(strict.exit as u8, 0, "{}", shown(&strict));
    assert!(
        strict.stdout.contains("note[latched-exit]: "),
        "{}",
        strict.stdout
    );
}
