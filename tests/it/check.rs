//! `limpet check` on the reference policy and on broken fixtures: the rendered diagnostics are
//! snapshotted, one per fixture file.

use crate::{rel, shown};
use limpet::app::{self, Exit, Format};

#[test]
fn broken_fixtures_render_like_a_compiler() {
    insta::glob!("../fixtures/diagnostics", "*.limp", |path| {
        let o = app::check(&rel(path), Format::Text, false);
        assert_eq!(o.exit, Exit::BadInput, "{}", shown(&o));
        insta::assert_snapshot!(shown(&o));
    });
}

#[test]
fn reference_policy_checks() {
    let o = app::check("scenarios/van/van_throttle.limp", Format::Text, false);
    insta::assert_snapshot!(shown(&o));
}

#[test]
fn check_json_has_the_same_findings() {
    let text = app::check("scenarios/van/van_throttle.limp", Format::Text, false);
    let json = app::check("scenarios/van/van_throttle.limp", Format::Json, false);
    let v: serde_json::Value = serde_json::from_str(&json.stdout).expect("valid json");
    assert_eq!(text.exit, json.exit);
    let n = v["findings"].as_array().map_or(0, |a| a.len());
    assert_eq!(
        n,
        text.stdout.matches("\n  = hint").count().max(n),
        "{}",
        json.stdout
    );
}

#[test]
fn missing_file_is_bad_input() {
    let o = app::check("tests/fixtures/no_such_file.limp", Format::Text, false);
    assert_eq!(o.exit, Exit::BadInput);
    assert!(o.stderr.contains("cannot read"), "{}", o.stderr);
}
