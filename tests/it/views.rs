//! Views a reviewer looks at: the VCD read back by an independent parser (the `vcd` crate)
//! against the JSON trace, snapshots of the CSV and of the plot's structure for the reference
//! scenario, the mode graph SVG, and `limpet review` end to end on a small folder.

use limpet::app::{self, Exit};
use limpet::sim::engine::RunOptions;
use std::collections::BTreeMap;

const REFERENCE: &str = "scenarios/van/pedal_a_open.scenario";

fn reference() -> app::Replay {
    app::replay(REFERENCE, None, RunOptions::default())
        .unwrap_or_else(|e| panic!("reference scenario does not replay:\n{e}"))
}

/// Every declared variable as `scope.path.name` -> (type, id code).
type Decls = BTreeMap<String, (String, String)>;

/// Reads a dump with the `vcd` crate: declarations, timescale in seconds per tick, and the
/// changes per id code as (tick, value) in file order.
#[allow(clippy::type_complexity)]
fn parse_vcd(text: &str) -> (Decls, f64, BTreeMap<String, Vec<(u64, f64)>>) {
    let mut decls = Decls::new();
    let mut scopes: Vec<String> = Vec::new();
    let mut scale = 0.0;
    let mut changes: BTreeMap<String, Vec<(u64, f64)>> = BTreeMap::new();
    let mut now = 0u64;
    for cmd in vcd::Parser::new(text.as_bytes()) {
        let cmd = cmd.unwrap_or_else(|e| panic!("the vcd crate rejects the dump: {e}"));
        match cmd {
            vcd::Command::Timescale(n, unit) => scale = f64::from(n) / unit.divisor() as f64,
            vcd::Command::ScopeDef(_, name) => scopes.push(name),
            vcd::Command::Upscope => {
                scopes.pop();
            }
            vcd::Command::VarDef(ty, _, code, name, _) => {
                let mut path = scopes.clone();
                path.push(name);
                decls.insert(path.join("."), (ty.to_string(), code.to_string()));
            }
            vcd::Command::Timestamp(t) => now = t,
            vcd::Command::ChangeReal(code, v) => {
                changes.entry(code.to_string()).or_default().push((now, v));
            }
            vcd::Command::ChangeScalar(code, v) => {
                let x = if v == vcd::Value::V1 { 1.0 } else { 0.0 };
                changes.entry(code.to_string()).or_default().push((now, x));
            }
            vcd::Command::ChangeVector(code, bits) => {
                let x = bits
                    .iter()
                    .fold(0u64, |acc, b| acc * 2 + u64::from(b == vcd::Value::V1));
                changes
                    .entry(code.to_string())
                    .or_default()
                    .push((now, x as f64));
            }
            _ => {}
        }
    }
    (decls, scale, changes)
}

/// The value of a variable at tick `t`: its last change at or before `t`.
fn value_at(changes: &[(u64, f64)], t: u64) -> Option<f64> {
    changes
        .iter()
        .take_while(|(at, _)| *at <= t)
        .last()
        .map(|(_, v)| *v)
}

#[test]
fn vcd_reads_back_with_an_independent_parser_and_matches_the_json_trace() {
    let r = reference();
    let dump = limpet::report::vcd::write(&r.trace);
    let (decls, scale, changes) = parse_vcd(&dump);
    let top = &r.trace.scenario;

    // Every variable is declared, with the type the writer promises.
    let mut expected: Vec<(String, &str)> = ["driver", "pedal", "target", "opening", "duty"]
        .iter()
        .map(|v| (format!("{top}.{v}"), "real"))
        .collect();
    expected.push((format!("{top}.mode"), "integer"));
    expected.push((format!("{top}.key_on"), "wire"));
    for f in &r.trace.faults {
        expected.push((format!("{top}.faults.{f}"), "wire"));
        expected.push((format!("{top}.pending.{f}"), "wire"));
    }
    for (name, ty) in &expected {
        let got = decls.get(name).map(|d| d.0.as_str());
        assert_eq!(got, Some(*ty), "{name} in {decls:?}");
    }
    assert_eq!(decls.len(), expected.len(), "no undeclared extras");

    // Real values at each sample instant equal the JSON trace's (both rounded to 1e-6).
    let json: serde_json::Value = serde_json::from_str(&r.trace.to_json()).expect("json");
    let samples = json["samples"].as_array().expect("samples");
    assert!(
        samples.len() > 100,
        "the reference run has a few hundred samples"
    );
    assert!(scale > 0.0);
    for s in samples {
        let t = s["t"].as_f64().expect("t");
        let tick = (t / scale).round() as u64;
        for v in ["driver", "pedal", "target", "opening", "duty"] {
            let code = &decls[&format!("{top}.{v}")].1;
            let got = value_at(&changes[code], tick);
            let want = s[v].as_f64().expect("value");
            assert!(
                got.is_some_and(|g| (g - want).abs() < 1e-9),
                "{v} at {t} s: vcd {got:?}, json {want}"
            );
        }
        let mode = s["mode"].as_str().expect("mode");
        let code = &decls[&format!("{top}.mode")].1;
        let idx = r
            .trace
            .modes
            .iter()
            .position(|m| m == mode)
            .expect("known mode");
        assert_eq!(
            value_at(&changes[code], tick),
            Some(idx as f64),
            "mode at {t} s"
        );
    }

    // The fault the script breaks is set in the dump from the instant the trace sets it.
    let set_at = r
        .trace
        .events
        .iter()
        .find_map(|e| match e.kind {
            limpet::sim::trace::EventKind::FaultSet { fault } => Some((fault, e.at)),
            _ => None,
        })
        .expect("pedal_a_open sets a fault");
    let name = &r.trace.faults[set_at.0];
    let code = &decls[&format!("{top}.faults.{name}")].1;
    let tick = (set_at.1.as_secs_f64() / scale).round() as u64;
    assert_eq!(value_at(&changes[code], tick), Some(1.0));
    assert_eq!(value_at(&changes[code], tick.saturating_sub(1)), Some(0.0));
}

#[test]
fn csv_of_the_reference_scenario() {
    let r = reference();
    insta::assert_snapshot!(r.trace.to_csv());
}

/// The structure of an SVG: element counts and every text, in document order.
fn svg_structure(svg: &str) -> String {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    let mut texts = Vec::new();
    let mut rest = svg;
    while let Some(i) = rest.find('<') {
        rest = &rest[i + 1..];
        if rest.starts_with('/') || rest.starts_with('?') || rest.starts_with('!') {
            continue;
        }
        let name: String = rest
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric() || *c == '-')
            .collect();
        *counts.entry(name.clone()).or_default() += 1;
        if name == "text" {
            let body = rest.find('>').map_or("", |j| &rest[j + 1..]);
            let end = body.find("</text>").unwrap_or(0);
            texts.push(body[..end].trim().to_string());
        }
    }
    let mut o = String::from("elements\n");
    for (k, v) in &counts {
        o.push_str(&format!("  {k}: {v}\n"));
    }
    o.push_str("texts\n");
    for t in texts {
        o.push_str(&format!("  {t}\n"));
    }
    o
}

#[test]
fn plot_of_the_reference_scenario() {
    let r = reference();
    let svg = limpet::report::plot::svg(&r.trace, &r.script.expectations);
    let s = svg_structure(&svg);
    // What a reader needs is there, whatever the snapshot says.
    for want in [
        "time [s]",
        "position [%]",
        "driver pedal",
        "merged pedal",
        "target",
        "opening",
        "break pedal.a open",
        "mend pedal.a open",
        "fault pedal_a_low set",
        "at most 36 %",
        "mode reduced_power",
        "mode normal",
    ] {
        assert!(s.contains(&format!("  {want}\n")), "{want} missing in\n{s}");
    }
    insta::assert_snapshot!(s);
}

#[test]
fn run_format_svg_plots_each_scenario() {
    let cfg = app::RunConfig {
        format: app::Format::Svg,
        ..Default::default()
    };
    let o = app::run(
        &[
            REFERENCE.to_string(),
            "scenarios/van/throttle_a_open.scenario".to_string(),
        ],
        &cfg,
    );
    assert_eq!(o.exit, Exit::Holds, "{}", o.stderr);
    assert_eq!(o.stdout.matches("<svg ").count(), 2);
    assert_eq!(o.stdout.matches("</svg>").count(), 2);
}

#[test]
fn graph_svg_command() {
    let o = limpet::report::graph_svg::command("scenarios/van/van_throttle.limp");
    assert_eq!(o.exit, Exit::Holds);
    assert!(o.stdout.starts_with("<svg"));
    for mode in ["normal", "reduced_power", "idle_only", "shutdown"] {
        assert!(o.stdout.contains(mode), "{mode}");
    }
    let bad = limpet::report::graph_svg::command("tests/fixtures/diagnostics/missing_start.limp");
    assert_eq!(bad.exit, Exit::BadInput);
}

fn review_folder(name: &str, scenarios: &[&str]) -> std::path::PathBuf {
    let d = std::env::temp_dir().join(format!("limpet-it-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    std::fs::copy(
        "scenarios/van/van_throttle.limp",
        d.join("van_throttle.limp"),
    )
    .expect("copy");
    for s in scenarios {
        std::fs::copy(format!("scenarios/van/{s}"), d.join(s)).expect("copy");
    }
    d
}

fn small_search() -> limpet::prove::Config {
    // Coarse on purpose: the page's content is tested, not the prover's reach.
    limpet::prove::Config {
        grid: 50.0,
        resolution: 10.0,
        horizon: limpet::time::Time::from_ms(300),
        max_states: 20_000,
        only: Some("actuator stuck".into()),
        ..Default::default()
    }
}

#[test]
fn review_writes_one_self_contained_page() {
    let d = review_folder(
        "review",
        &["pedal_a_open.scenario", "throttle_a_open.scenario"],
    );
    let cfg = limpet::review::ReviewConfig {
        dir: d.to_string_lossy().into_owned(),
        output: None,
        search: small_search(),
        progress: false,
    };
    let o = limpet::review::review(&cfg);
    // The stuck plate breaks the ceiling (uncorrectable, so not "violated"), the states bound
    // is hit, and check reports errors on the reference today: a finding wins over the bound.
    let check = app::check(
        &d.join("van_throttle.limp").to_string_lossy(),
        app::Format::Text,
        false,
    );
    let want = if check.exit == Exit::Finding {
        Exit::Finding
    } else {
        Exit::Inconclusive
    };
    assert_eq!(o.exit, want, "{}\n{}", o.stdout, o.stderr);
    assert!(
        o.stdout
            .contains("scenario pedal_a_open: 5 of 5 expectations hold")
    );
    let html = std::fs::read_to_string(d.join("review.html")).expect("review written");
    assert!(html.starts_with("<!DOCTYPE html>"));
    for id in [
        "policy-header",
        "cautions",
        "findings",
        "mode-graph",
        "reaction-matrix",
        "counterexamples",
        "scenarios",
    ] {
        assert!(html.contains(&format!("id=\"{id}\"")), "{id}");
    }
    assert!(html.contains("ISO 26262"));
    assert!(html.contains("not a safety case"));
    assert_eq!(html.matches("class=\"figure scenario-plot\"").count(), 2);
    assert!(
        html.contains("class=\"violated\""),
        "the stuck plate's cell is marked"
    );
    assert!(html.contains("class=\"counterexample\""));
    assert!(html.contains("pre class=\"script\""));
    // Self-contained: nothing fetched from anywhere.
    for needle in ["src=\"http", "href=\"http", "<script", "<link", "@import"] {
        assert!(!html.contains(needle), "{needle}");
    }
    // Every inline SVG is closed.
    assert_eq!(html.matches("<svg").count(), html.matches("</svg>").count());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn review_never_overwrites_an_input() {
    let d = review_folder("refuse", &["pedal_a_open.scenario"]);
    let before = std::fs::read_to_string(d.join("pedal_a_open.scenario")).expect("read");
    for out in ["pedal_a_open.scenario", "van_throttle.limp", "other.limp"] {
        let cfg = limpet::review::ReviewConfig {
            dir: d.to_string_lossy().into_owned(),
            output: Some(d.join(out).to_string_lossy().into_owned()),
            search: small_search(),
            progress: false,
        };
        let o = limpet::review::review(&cfg);
        assert_eq!(o.exit, Exit::BadInput, "{out}");
        assert!(o.stderr.contains("refusing"), "{}", o.stderr);
    }
    assert_eq!(
        std::fs::read_to_string(d.join("pedal_a_open.scenario")).expect("read"),
        before
    );
    assert!(!d.join("other.limp").exists());
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn review_of_a_folder_without_a_policy_is_bad_input() {
    let d = std::env::temp_dir().join(format!("limpet-it-empty-{}", std::process::id()));
    let _ = std::fs::create_dir_all(&d);
    let o = limpet::review::review(&limpet::review::ReviewConfig {
        dir: d.to_string_lossy().into_owned(),
        ..Default::default()
    });
    assert_eq!(o.exit, Exit::BadInput);
    assert!(o.stderr.contains("no .limp policy"));
    let _ = std::fs::remove_dir_all(&d);
}
