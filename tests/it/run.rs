//! `limpet run` end to end: a snapshot of every bundled scenario's text trace, the JSON and
//! CSV writers against the text, determinism, exit statuses, the explanations of failed
//! expectations, the engine against a bare controller loop, and the release-to-idle limit.

use crate::{rel, shown};
use limpet::app::{self, Exit, Format, RunConfig};
use limpet::controller::{Controller, Event, Outputs, Sample};
use limpet::model::Model;
use limpet::sim::engine::{self, RunOptions};
use limpet::sim::script::{self, Action, Script};
use limpet::sim::trace::{EventKind, Trace};
use limpet::time::Time;
use std::path::{Path, PathBuf};

const FIXTURES: &str = "tests/fixtures/run";

/// The bundled scenarios, sorted by name.
fn bundled() -> Vec<PathBuf> {
    let dir = Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/van"));
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .expect("scenarios/van is readable")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "scenario"))
        .collect();
    v.sort();
    assert!(
        v.len() >= 17,
        "expected the 17 bundled scenarios, found {}",
        v.len()
    );
    v
}

fn run_with(paths: &[String], format: Format, sample: Option<Time>) -> app::Outcome {
    app::run(
        paths,
        &RunConfig {
            format,
            sample_every: sample,
            ..RunConfig::default()
        },
    )
}

fn replay(path: &str, sample: Time) -> app::Replay {
    match app::replay(
        path,
        None,
        RunOptions {
            sample_every: sample,
        },
    ) {
        Ok(r) => r,
        Err(e) => panic!("{path} does not replay:\n{e}"),
    }
}

/// The resolved script of a scenario file, for tests that need its events.
fn script_of(path: &str, model: &Model) -> Script {
    let text = std::fs::read_to_string(path).expect("scenario readable");
    let (ast, diags) = script::parse_script(&text);
    let ast = ast.unwrap_or_else(|| panic!("{path} parses: {diags:?}"));
    script::resolve(&ast, model).unwrap_or_else(|d| panic!("{path} resolves: {d:?}"))
}

#[test]
fn every_bundled_scenario_trace() {
    insta::glob!("../../scenarios/van", "*.scenario", |path| {
        let o = run_with(&[rel(path)], Format::Text, None);
        // The bundled scenarios are the demo: every expectation in them holds.
        assert_eq!(o.exit, Exit::Holds, "{}", shown(&o));
        insta::assert_snapshot!(shown(&o));
    });
}

/// The verdict lines of a text trace: (passed, expectation, decided at seconds).
fn text_verdicts(text: &str) -> Vec<(bool, String, f64)> {
    let body = text
        .split("\nexpectations\n")
        .nth(1)
        .expect("a text trace has an expectations section");
    body.lines()
        .filter_map(|l| {
            let l = l.strip_prefix("  ")?;
            let (word, rest) = l.split_once("  ")?;
            let passed = match word {
                "pass" => true,
                "FAIL" => false,
                _ => return None,
            };
            let (expect, rest) = rest.split_once("  (decided at ")?;
            let (secs, _) = rest.split_once(" s: ")?;
            Some((passed, expect.to_string(), secs.parse().ok()?))
        })
        .collect()
}

#[test]
fn json_trace_agrees_with_the_text_verdicts() {
    let mut paths: Vec<String> = bundled().iter().map(|p| rel(p)).collect();
    paths.push(format!("{FIXTURES}/wrong_expectations.scenario"));
    for p in &paths {
        let text = run_with(std::slice::from_ref(p), Format::Text, None);
        let json = run_with(std::slice::from_ref(p), Format::Json, None);
        assert_eq!(text.exit, json.exit, "{p}");
        let v: serde_json::Value =
            serde_json::from_str(&json.stdout).unwrap_or_else(|e| panic!("{p}: invalid JSON: {e}"));
        let r = replay(p, RunOptions::default().sample_every);
        let events = v["events"].as_array().expect("events array");
        let samples = v["samples"].as_array().expect("samples array");
        let exps = v["expectations"].as_array().expect("expectations array");
        assert_eq!(events.len(), r.trace.events.len(), "{p}");
        assert_eq!(samples.len(), r.trace.samples.len(), "{p}");
        // 10 ms samples over the whole run, both ends included.
        let expected = (r.trace.length.0 / Time::from_ms(10).0) as usize + 1;
        assert_eq!(samples.len(), expected, "{p}");
        let tv = text_verdicts(&text.stdout);
        assert_eq!(tv.len(), exps.len(), "{p}:\n{}", text.stdout);
        for ((passed, expect, at), j) in tv.iter().zip(exps) {
            assert_eq!(j["text"].as_str(), Some(expect.as_str()), "{p}");
            assert_eq!(j["passed"].as_bool(), Some(*passed), "{p}: {expect}");
            let jat = j["decided_at"].as_f64().expect("decided_at is a number");
            // The text trims to microseconds at most.
            assert!((jat - at).abs() < 1e-6, "{p}: {expect}: {jat} vs {at}");
        }
        assert_eq!(
            v["passed"].as_bool(),
            Some(tv.iter().all(|(ok, _, _)| *ok)),
            "{p}"
        );
    }
}

#[test]
fn two_runs_are_byte_identical() {
    // Both 3 s long: one fault-free with every kind of input, one with a latch and a key cycle.
    let paths = [
        format!("{FIXTURES}/fault_free.scenario"),
        "scenarios/van/key_cycle_clears_latch.scenario".to_string(),
    ];
    for p in &paths {
        let r = replay(p, RunOptions::default().sample_every);
        assert_eq!(r.trace.length, Time::from_ms(3000), "{p}");
        for f in [Format::Text, Format::Json, Format::Csv] {
            let a = run_with(std::slice::from_ref(p), f, None);
            let b = run_with(std::slice::from_ref(p), f, None);
            assert!(!a.stdout.is_empty(), "{p} {f:?}");
            assert!(a.stdout == b.stdout, "{p}: two {f:?} runs differ");
        }
    }
}

#[test]
fn exit_statuses() {
    let ok = run_with(
        &[format!("{FIXTURES}/fault_free.scenario")],
        Format::Text,
        None,
    );
    assert_eq!(ok.exit, Exit::Holds, "{}", shown(&ok));
    assert!(ok.stderr.is_empty());

    let failing = run_with(
        &[format!("{FIXTURES}/wrong_expectations.scenario")],
        Format::Text,
        None,
    );
    assert_eq!(failing.exit, Exit::Finding, "{}", shown(&failing));
    assert!(failing.stdout.contains("1 of 8 expectations hold"));

    let bad = run_with(
        &[format!("{FIXTURES}/unknown_fault.scenario")],
        Format::Text,
        None,
    );
    assert_eq!(bad.exit, Exit::BadInput, "{}", shown(&bad));
    assert!(bad.stdout.is_empty());
    // file:line:col of the misspelt name, and a hint naming the fault meant.
    assert!(
        bad.stderr
            .contains("tests/fixtures/run/unknown_fault.scenario:9:16"),
        "{}",
        bad.stderr
    );
    assert!(
        bad.stderr.contains("hint: did you mean `pedal_a_low`?"),
        "{}",
        bad.stderr
    );
    insta::assert_snapshot!("unknown_fault", shown(&bad));

    // Several files: the worst status wins, and the good ones are still replayed.
    let all = run_with(
        &[
            format!("{FIXTURES}/fault_free.scenario"),
            format!("{FIXTURES}/unknown_fault.scenario"),
            format!("{FIXTURES}/wrong_expectations.scenario"),
        ],
        Format::Text,
        None,
    );
    assert_eq!(all.exit, Exit::BadInput);
    assert!(all.stdout.contains("fault_free: 2 of 2 expectations hold"));
    assert!(all.stdout.contains("wrong_expectations: 1 of 8"));

    let missing = run_with(
        &[format!("{FIXTURES}/no_such.scenario")],
        Format::Text,
        None,
    );
    assert_eq!(missing.exit, Exit::BadInput);
    assert!(missing.stderr.contains("cannot read"), "{}", missing.stderr);
}

/// The instant of the first trace event matching `f`.
fn first_event(t: &Trace, f: impl Fn(&EventKind) -> bool) -> Option<Time> {
    t.events.iter().find(|e| f(&e.kind)).map(|e| e.at)
}

fn secs(t: Time) -> String {
    limpet::time::trim(t.as_secs_f64())
}

#[test]
fn failed_expectations_are_explained() {
    let p = format!("{FIXTURES}/wrong_expectations.scenario");
    let o = run_with(std::slice::from_ref(&p), Format::Text, None);
    insta::assert_snapshot!("wrong_expectations", shown(&o));

    let r = replay(&p, RunOptions::default().sample_every);
    let (m, t) = (&r.model, &r.trace);
    let fault = |n: &str| m.faults.iter().position(|f| f.name == n).expect("fault");
    let mode = |n: &str| m.modes.iter().position(|x| x.name == n).expect("mode");
    let a_low = fault("pedal_a_low");
    let set_at = first_event(t, |k| *k == EventKind::FaultSet { fault: a_low }).expect("set");
    let entered = first_event(
        t,
        |k| matches!(k, EventKind::Transition { to, .. } if *to == mode("reduced_power")),
    )
    .expect("reduced_power entered");
    let v = |text: &str| {
        t.expectations
            .iter()
            .find(|v| v.text == text)
            .unwrap_or_else(|| panic!("no verdict for `{text}`"))
    };
    for x in &t.expectations {
        if !x.passed {
            // Every failure says when, in the explanation and in `decided_at`.
            assert!(
                x.explanation
                    .contains(&format!("at {} s", secs(x.decided_at))),
                "{}: {}",
                x.text,
                x.explanation
            );
        }
    }
    // `by`: decided at the instant, saying what stood then.
    let by = v("fault pedal_a_low by 510 ms");
    assert!(!by.passed);
    assert_eq!(by.decided_at, Time::from_ms(510));
    assert!(
        set_at > Time::from_ms(510),
        "the fault is set only after 510 ms"
    );
    assert!(by.explanation.contains("not set"), "{}", by.explanation);
    let held = v("fault pedal_disagree by 1 s");
    assert!(
        held.explanation.contains("still pending"),
        "{}",
        held.explanation
    );
    let wrong_mode = v("mode idle_only by 1 s");
    assert!(
        wrong_mode
            .explanation
            .starts_with("reduced_power active at 1 s"),
        "{}",
        wrong_mode.explanation
    );
    // `never`: decided at the first step it stopped holding, which the event log confirms.
    let never_f = v("fault never pedal_a_low");
    assert_eq!(never_f.decided_at, set_at);
    let never_m = v("mode never reduced_power");
    assert_eq!(never_m.decided_at, entered);
    // Opening windows: the first sub-step outside the bound, with the value seen there.
    let most = v("opening at most 20 % from 300 ms to 1.5 s");
    assert_eq!(most.decided_at, Time::from_ms(300));
    let least = v("opening at least 25 % from 500 ms to 1.5 s");
    assert!(!least.passed);
    let seen: f64 = least
        .explanation
        .split("fell to ")
        .nth(1)
        .and_then(|s| s.split(" %").next())
        .and_then(|s| s.parse().ok())
        .expect("the value is in the explanation");
    assert!(seen < 25.0 && seen > 24.0, "{}", least.explanation);
    assert!(least.decided_at > Time::from_ms(500) && least.decided_at < Time::from_ms(520));
    assert!(v("mode normal by 400 ms").passed);
}

#[test]
fn after_a_key_cycle_the_start_mode_counts_from_power_up() {
    let r = replay(
        "scenarios/van/key_cycle_clears_latch.scenario",
        RunOptions::default().sample_every,
    );
    let v = r
        .trace
        .expectations
        .iter()
        .find(|v| v.text == "mode normal by 2 s")
        .expect("verdict");
    assert!(v.passed);
    // The key came on at 1.8 s; normal was left at 0.435 s and is active again only since then.
    assert!(v.explanation.contains("since 1.8 s"), "{}", v.explanation);
}

/// Steps the controller directly from what the trace says the pins saw: the driver's true
/// position, the plate's true position, and the script's switches and inputs applied before the
/// step of their instant. The engine must have stepped the very same controller on the very
/// same inputs: same target, merged pedal, mode and events at every step.
fn agree_with_bare_controller(path: &str) {
    let r = replay(path, Time::ZERO);
    let (m, t) = (&r.model, &r.trace);
    assert_eq!(
        t.sample_every, m.period,
        "a sample at every controller step"
    );
    let scr = script_of(path, m);
    assert!(
        scr.events.iter().all(|e| !matches!(
            e.action,
            Action::Break(_) | Action::Mend { .. } | Action::KeyOff
        )),
        "{path}: only intact wiring can be rebuilt from the trace"
    );
    let ctl = Controller::new(m);
    let mut inputs: Vec<f64> = m.inputs.iter().map(|i| i.hi).collect();
    let mut switches = vec![false; m.switches.len()];
    let mut state = None;
    let mut out = Outputs::default();
    let mut next = 0;
    let mut steps = 0;
    let mut targets_moved = 0;
    for s in &t.samples {
        while next < scr.events.len() && scr.events[next].at <= s.at {
            match scr.events[next].action {
                Action::Switch { switch, on } => switches[switch] = on,
                Action::Input { input, percent } => inputs[input] = percent,
                _ => {}
            }
            next += 1;
        }
        let mut positions = vec![0.0; m.sensors.len()];
        if let Some(d) = m.driver {
            positions[d] = s.driver;
        }
        positions[m.feedback] = s.opening;
        let mut sample = Sample::healthy(m, &positions);
        sample.inputs.clone_from(&inputs);
        sample.switches.clone_from(&switches);
        let st = state.get_or_insert_with(|| ctl.power_up(&sample));
        let before = out.target;
        ctl.step_in_place(st, &sample, &mut out);
        steps += 1;
        if (out.target - before).abs() > 1e-6 {
            targets_moved += 1;
        }
        let at = secs(s.at);
        assert!(
            (out.target - s.target).abs() < 1e-9,
            "{path} at {at} s: engine target {} vs controller {}",
            s.target,
            out.target
        );
        assert!((out.duty - s.duty).abs() < 1e-9, "{path} at {at} s: duty");
        if let Some(d) = m.driver {
            assert!(
                (out.merged[d] - s.pedal).abs() < 1e-9,
                "{path} at {at} s: pedal"
            );
        }
        assert_eq!(st.mode(), s.mode, "{path} at {at} s: mode");
        for f in 0..m.faults.len() {
            let in_trace = t.events.iter().rev().find_map(|e| match e.kind {
                EventKind::FaultSet { fault } if fault == f && e.at <= s.at => Some(true),
                EventKind::FaultCleared { fault } if fault == f && e.at <= s.at => Some(false),
                _ => None,
            });
            assert_eq!(
                st.fault_set(f),
                in_trace.unwrap_or(false),
                "{path} at {at} s: fault {}",
                m.faults[f].name
            );
        }
        let logged: Vec<EventKind> = t
            .events
            .iter()
            .filter(|e| e.at == s.at)
            .filter_map(|e| match e.kind {
                EventKind::Script { .. } | EventKind::Break { .. } | EventKind::Mend { .. } => None,
                ref k => Some(k.clone()),
            })
            .collect();
        let direct: Vec<EventKind> = out
            .events
            .iter()
            .map(|e| match *e {
                Event::FaultPending { fault } => EventKind::FaultPending { fault },
                Event::FaultLapsed { fault } => EventKind::FaultLapsed { fault },
                Event::FaultSet { fault } => EventKind::FaultSet { fault },
                Event::FaultCleared { fault } => EventKind::FaultCleared { fault },
                Event::Transition { from, to, .. } => EventKind::Transition {
                    from,
                    to,
                    guard: String::new(),
                },
            })
            .collect();
        let strip = |v: Vec<EventKind>| -> Vec<EventKind> {
            v.into_iter()
                .map(|k| match k {
                    EventKind::Transition { from, to, .. } => EventKind::Transition {
                        from,
                        to,
                        guard: String::new(),
                    },
                    k => k,
                })
                .collect()
        };
        assert_eq!(strip(logged), direct, "{path} at {at} s: events");
    }
    assert_eq!(steps, (t.length.0 / m.period.0) as usize + 1, "{path}");
    assert!(targets_moved > 10, "{path}: the drive must move the target");
}

#[test]
fn engine_steps_the_same_controller_as_a_bare_loop() {
    agree_with_bare_controller(&format!("{FIXTURES}/fault_free.scenario"));
    // The brake makes a fault and two transitions: switch events must reach the step of their
    // own instant.
    agree_with_bare_controller("scenarios/van/brake_conflict.scenario");
}

/// Runs a scenario text against the reference policy, 1 ms samples.
fn run_text(text: &str) -> Trace {
    let policy = std::fs::read_to_string("scenarios/van/van_throttle.limp").expect("policy");
    let (model, diags) = limpet::model::load(&policy);
    let model = model.unwrap_or_else(|| panic!("reference policy lowers: {diags:?}"));
    let (ast, diags) = script::parse_script(text);
    let ast = ast.unwrap_or_else(|| panic!("parses: {diags:?}\n{text}"));
    let scr = script::resolve(&ast, &model).unwrap_or_else(|d| panic!("resolves: {d:?}"));
    engine::run(
        &model,
        &scr,
        RunOptions {
            sample_every: Time::from_ms(1),
        },
    )
    .expect("the reference actuator gives a plant")
}

#[test]
fn released_pedal_returns_the_plate_to_idle_within_one_second() {
    // US FMVSS No. 124 (accelerator control systems), from memory: for vehicles of 4 536 kg
    // GVWR or less the throttle returns to idle within 1 s of the driver removing the force.
    // The courier van is 3.5 t; idle is the actuator's `idle 8 %`.
    const IDLE: f64 = 8.0;
    for held in [20, 50, 80, 100] {
        let text = format!(
            "scenario release_{held} {{\n  policy \"van_throttle.limp\"\n  length 3 s\n\n  \
             at 0 s      pedal {held} % over 200 ms\n  at 1.5 s    pedal 0 %\n}}\n"
        );
        let t = run_text(&text);
        let release = Time::from_ms(1500);
        let before = t
            .samples
            .iter()
            .find(|s| s.at == Time::from_ms(1499))
            .expect("sample before release");
        assert!(
            before.opening > f64::from(held) - 3.0,
            "held {held} %: plate at {:.2} % before release",
            before.opening
        );
        // The last instant above idle; the plate must stay at or below idle after it.
        let last_above = t
            .samples
            .iter()
            .filter(|s| s.at >= release && s.opening > IDLE)
            .map(|s| s.at)
            .next_back()
            .expect("the plate starts above idle");
        let took = last_above.saturating_sub(release);
        assert!(
            took < Time::from_ms(1000),
            "held {held} %: plate above idle until {} s, {} after release",
            secs(last_above),
            took
        );
        assert_eq!(
            t.samples.last().map(|s| t.modes[s.mode].as_str()),
            Some("normal"),
            "a fault-free release stays in normal"
        );
    }
}
