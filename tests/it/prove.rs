//! `limpet prove`: the flawed demos fail with counterexamples that replay to the same violation,
//! a seeded random campaign finds nothing the prover missed, and the output does not depend
//! on the thread count.

use crate::Rng;
use limpet::app::{self, Exit, Format, RunConfig};
use limpet::model::Model;
use limpet::prove::{self, Config, Verdict, search};
use limpet::sim::system::Vehicle;
use limpet::time::Time;

fn load(path: &str) -> Model {
    limpet::model::lower(&std::fs::read_to_string(path).expect("readable")).expect("lowers")
}

/// A small, fast configuration: coarse grid, short horizon, one fault family.
fn focused(only: &str) -> Config {
    Config {
        grid: 10.0,
        resolution: 10.0,
        horizon: Time::from_ms(600),
        max_states: 150_000,
        jobs: 1,
        only: Some(only.to_string()),
        ..Config::default()
    }
}

/// The prover's own grid, resolution and horizon for one fault family, with a bound that
/// lets the van's searches close.
fn complete(only: &str) -> Config {
    Config {
        max_states: 10_000_000,
        jobs: 1,
        only: Some(only.to_string()),
        ..Config::default()
    }
}

/// A fresh folder of this process's own: tests run in parallel, and two of them may ask for
/// the same name (one removing it while the other writes into it), so each call numbers its
/// folder.
fn temp_dir(name: &str) -> std::path::PathBuf {
    static CALLS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let n = CALLS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let d = std::env::temp_dir().join(format!("limpet-it-{}-{n}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("temp dir");
    d
}

/// Each flawed demo, with the fault family that exposes its flaw.
const FLAWED: [(&str, &str); 3] = [
    (
        "scenarios/van-flawed/pedal_max.limp",
        "pedal.a short supply",
    ),
    (
        "scenarios/van-flawed/feedback_min_slow.limp",
        "throttle.a short ground",
    ),
    (
        "scenarios/van-flawed/no_plausibility.limp",
        "pedal ground offset +0.5 V",
    ),
];

#[test]
fn flawed_demos_fail_with_counterexamples_that_replay() {
    flawed_demos_replay(false);
}

/// The same with the twin paired exactly.
#[test]
fn flawed_demos_fail_with_counterexamples_that_replay_with_an_exact_twin() {
    flawed_demos_replay(true);
}

fn flawed_demos_replay(exact_twin: bool) {
    for (policy, only) in FLAWED {
        let m = load(policy);
        let cfg = Config {
            exact_twin,
            ..focused(only)
        };
        let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
        assert!(
            proof.violated(),
            "{policy}: prove must catch the flaw\n{}",
            prove::report::text(&m, &proof)
        );
        let dir = temp_dir(&m.name);
        for (ri, row) in proof.rows.iter().enumerate() {
            for v in &row.result.violations {
                let name = format!("cx{ri}_{}", proof.requirements[v.requirement].short());
                let text = prove::report::script(&m, &proof, row, v, &name, "unused.limp");
                let file = dir.join(format!("{name}.scenario"));
                std::fs::write(&file, &text).expect("write");
                let cfg = RunConfig {
                    policy: Some(policy.to_string()),
                    format: Format::Json,
                    ..RunConfig::default()
                };
                let out = app::run(&[file.to_string_lossy().into_owned()], &cfg);
                assert_eq!(
                    out.exit,
                    Exit::Finding,
                    "{policy}: the counterexample must fail on replay\n{text}\n{}",
                    out.stderr
                );
                let json: serde_json::Value = serde_json::from_str(&out.stdout).expect("json");
                let e = &json["expectations"][0];
                assert_eq!(e["passed"], false);
                let decided = e["decided_at"].as_f64().unwrap_or(-1.0);
                let period = m.period.as_secs_f64();
                assert!(
                    (decided - v.at.as_secs_f64()).abs() <= period + 1e-9,
                    "{policy}: replay fails at {decided} s, the prover said {} s",
                    v.at.as_secs_f64()
                );
            }
        }
        let _ = std::fs::remove_dir_all(&dir);
    }
}

#[test]
fn output_is_the_same_for_one_and_two_threads() {
    let m = load("scenarios/van-flawed/pedal_max.limp");
    let mut cfg = focused("pedal.b");
    cfg.horizon = Time::from_ms(300);
    let one = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    cfg.jobs = 2;
    let two = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    assert_eq!(prove::report::text(&m, &one), prove::report::text(&m, &two));
    assert_eq!(prove::report::json(&m, &one), prove::report::json(&m, &two));
}

/// Random pedal profiles on the prover's grid (one grid step per period at most) and random
/// injection instants, replayed exactly: every violation sampling finds, the prover found
/// too (for the same fault and requirement).
#[test]
fn random_campaign_finds_nothing_the_prover_missed() {
    let mut rng = Rng(0x5eed_1234_abcd_0001);
    let mut sampled_hits = 0;
    for (policy, only) in FLAWED {
        let m = load(policy);
        let cfg = focused(only);
        let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
        let vehicle = Vehicle::new(&m).expect("plant derives");
        let grid = search::grid(&cfg);
        let horizon = (cfg.horizon.0 / m.period.0) as usize;
        for row in &proof.rows {
            for _ in 0..12 {
                let inject = 2 + rng.below(40) as usize;
                let mut p = rng.below(grid.len() as u64) as usize;
                let mut pedal = Vec::new();
                // Start from rest: climb to the chosen pedal one step at a time, then wander.
                for k in 0..inject + horizon {
                    let target = if k < inject {
                        p
                    } else {
                        (p as i64 + rng.below(3) as i64 - 1).clamp(0, grid.len() as i64 - 1)
                            as usize
                    };
                    let last = pedal.last().map_or(0usize, |&x: &usize| x);
                    let step = (target as i64 - last as i64).clamp(-1, 1);
                    p = target;
                    pedal.push((last as i64 + step) as usize);
                }
                let values: Vec<f64> = pedal.iter().map(|&i| grid[i]).collect();
                for (ri, r) in proof.requirements.iter().enumerate() {
                    let sampled =
                        search::confirm(&vehicle, &row.faults, &values, inject as u32, None, ri, r)
                            .ok();
                    if sampled.is_some() {
                        let proved = row.result.violations.iter().any(|v| v.requirement == ri);
                        sampled_hits += 1;
                        assert!(
                            proved,
                            "{policy}: sampling found `{}` violated by {:?}, the prover did not",
                            r.text(&m),
                            row.faults
                        );
                    }
                }
            }
        }
    }
    // The campaign is not vacuous: it does find violations, and each is one the prover found.
    assert!(
        sampled_hits > 0,
        "the random campaign found no violation on the flawed demos"
    );
}

/// Sampling against verdicts that hold: a feedback track open on the reference policy is
/// caught by its range check, the drive goes off and the springs close the plate. The
/// prover, with the twin paired exactly, says the excess and idle requirements hold (the
/// search closed without hitting a bound, and met no candidate violation of them). The
/// ceiling is unresolved at this resolution: plates of one cell on either side of 90 % are
/// merged, so the search meets candidates that no exact replay confirms, and it says so
/// rather than calling the ceiling held. Seeded random drives with the fault at random
/// instants, replayed exactly, find no violation of the held requirements either.
#[test]
fn a_fault_that_prove_passes_survives_a_random_campaign() {
    let m = load("scenarios/van/van_throttle.limp");
    let cfg = Config {
        exact_twin: true,
        ..focused("throttle.a open")
    };
    let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    assert_eq!(proof.rows.len(), 1);
    let row = &proof.rows[0];
    assert!(!row.result.truncated, "the search must close");
    assert!(
        row.result.violations.is_empty(),
        "{:?}",
        row.result.violations
    );
    assert!(!proof.violated() && !proof.bound_hit());
    let verdicts: Vec<Verdict> = (0..3).map(|ri| row.verdict(ri)).collect();
    assert_eq!(
        verdicts,
        [Verdict::Holds, Verdict::Unresolved, Verdict::Holds],
        "excess, ceiling, idle; candidates {:?}",
        row.result.unconfirmed
    );
    assert!(proof.inconclusive(), "an unresolved cell is not a proof");
    let summary = prove::report::summary(&m, &proof);
    assert!(
        summary
            .contains("never above 90 % unless driver above 90 %: unresolved for 1 fault set(s)")
            && summary.contains("unresolved: 1 cell(s) met"),
        "{summary}"
    );
    // The unresolved cell says how near the exact replays came: under the ceiling, since
    // none broke it.
    let near = row.result.nearest[1]
        .as_ref()
        .expect("a replay met the ceiling's condition");
    assert!(near.value <= 90.0, "{near:?}");
    let listed = prove::report::unresolved(&m, &proof);
    assert!(
        listed.contains(&format!(
            "throttle.a open: ceiling {} candidate(s), nearest replay ",
            row.result.unconfirmed[1]
        )) && listed.contains("(limit 90 %)"),
        "{listed}"
    );
    let vehicle = Vehicle::new(&m).expect("plant derives");
    let grid = search::grid(&cfg);
    let horizon = (cfg.horizon.0 / m.period.0) as usize;
    let mut rng = Rng(0x0dd_ba11_5eed_0002);
    for _ in 0..40 {
        let inject = 1 + rng.below(60) as usize;
        let mut last = 0usize;
        let mut pedal = Vec::new();
        for _ in 0..inject + horizon {
            let step = rng.below(3) as i64 - 1;
            last = (last as i64 + step).clamp(0, grid.len() as i64 - 1) as usize;
            pedal.push(grid[last]);
        }
        let hits = search::replay_check(
            &vehicle,
            &row.faults,
            &pedal,
            inject as u32,
            None,
            &proof.requirements,
        );
        for (ri, hit) in hits.iter().enumerate() {
            assert!(
                hit.is_none() || verdicts[ri] != Verdict::Holds,
                "sampling broke a requirement the prover says holds: {hit:?}"
            );
        }
    }
}

/// A pair at independent instants, as the double-fault search reports it: the closing spring
/// breaks, a feedback wire fails later, the drive goes off and nothing returns the plate. The
/// exact replay finds the idle requirement broken, and the written script, with its two `break`
/// lines at their own instants, fails the same way in the simulator.
#[test]
fn a_pair_at_independent_instants_replays() {
    use limpet::faults::{ActuatorFault, Injection, TrackFault};
    let policy = "scenarios/van/van_throttle.limp";
    let m = load(policy);
    let vehicle = Vehicle::new(&m).expect("plant derives");
    let reqs = prove::requirements(&m);
    let idle = reqs
        .iter()
        .position(|r| matches!(r, prove::Requirement::Idle { .. }))
        .expect("idle requirement");
    let pair = [
        Injection::Actuator {
            fault: ActuatorFault::SpringBroken,
        },
        Injection::Track {
            track: m.track_ref("throttle", "b").expect("track"),
            fault: TrackFault::Open,
        },
    ];
    // 40 % for 1 s (the spring breaks at 0.3 s, the wire at 0.9 s), then released for 1.5 s.
    let mut pedal = vec![40.0; 200];
    pedal.extend(vec![0.0; 300]);
    let found = search::replay_check(&vehicle, &pair, &pedal, 60, Some(180), &reqs);
    let v = found[idle]
        .clone()
        .expect("the pair breaks the idle requirement");
    assert_eq!(v.second_step, Some(180));
    // The script puts each break at its own instant and replays to the same failure.
    let cfg = focused("actuator spring broken");
    let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    let row = prove::Row {
        faults: pair.to_vec(),
        ..proof.rows[0].clone()
    };
    let text = prove::report::script(&m, &proof, &row, &v, "pair", "unused.limp");
    assert!(
        text.contains("at 300 ms    break actuator spring broken"),
        "{text}"
    );
    assert!(
        text.contains("at 900 ms    break throttle.b open"),
        "{text}"
    );
    let dir = temp_dir("pair");
    let file = dir.join("pair.scenario");
    std::fs::write(&file, &text).expect("write");
    let run = RunConfig {
        policy: Some(policy.to_string()),
        ..RunConfig::default()
    };
    let out = app::run(&[file.to_string_lossy().into_owned()], &run);
    assert_eq!(out.exit, Exit::Finding, "{text}\n{}", out.stdout);
    let _ = std::fs::remove_dir_all(&dir);
}

/// The worst detection time, worked by hand. `pedal.a open` reads 0 V at once; the track's
/// filter is a first-order lag discretised exactly (DESIGN.md), so from the highest reading
/// (pedal at 100 %, 4.00 V) the filtered volts after n periods are 4.00 * exp(-n T / tau)
/// (first-order step response, any control textbook). `pedal_a_low` needs them below 0.25 V
/// on 20 ms / T consecutive steps. Any lower pedal starts lower and crosses sooner, and the
/// disagreement check needs 40 ms of its own, so the worst branch is the one from full pedal,
/// and no branch escapes: an open wire is seen whatever the driver does.
#[test]
fn worst_detection_time_of_an_open_track_follows_from_the_filter_and_the_debounce() {
    let m = load("scenarios/van/van_throttle.limp");
    let cfg = Config {
        max_states: 5_000_000,
        ..focused("pedal.a open")
    };
    let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    let r = &proof.rows[0].result;
    assert!(!r.truncated, "the search must close");
    let (period, tau) = (5.0, 8.0);
    // First step with the filtered volts below the threshold, then the debounce's steps.
    let crossing = ((tau / period) * (4.00f64 / 0.25).ln()).floor() as u64 + 1;
    let debounce = (20.0f64 / period).ceil() as u64;
    let want = Time::from_ms((crossing + debounce - 1) * 5);
    assert_eq!(want, Time::from_ms(40));
    assert_eq!(r.worst_detection, Some(want));
    assert!(!r.undetected_branch);
}

/// A pedal track stuck where the driver holds the pedal reads what it should: no monitor can
/// see it until the driver moves (common practice, no source: a stuck sensor is a latent
/// fault for as long as its value stays plausible). The search must say some branch stays
/// undetected over the whole horizon, whatever it found on the branches that were detected.
#[test]
fn a_track_stuck_under_a_held_pedal_is_latent() {
    let m = load("scenarios/van/van_throttle.limp");
    // The prover's own grid and horizon (a coarser grid does not close within the bound).
    let cfg = complete("pedal.a stuck");
    let proof = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    let r = &proof.rows[0].result;
    assert!(!r.truncated, "the search must close");
    assert!(!r.monitors.is_empty(), "moving the pedal away is seen");
    assert!(r.undetected_branch);
    assert_eq!(
        limpet::prove::report::detection(r),
        "latent",
        "the matrix says so"
    );
}

/// Screening candidates past the first 64 finds a violation that those alone miss: a
/// feedback track reading 94.67 % of its value (just inside the disagreement check) makes the
/// position loop hold the plate a little above where it should. With the driver at 90 % or
/// below, the plate passes 90 % while the fault-free one stays under. The search meets tens of
/// thousands of candidates of the ceiling. Without the screen the first 64 replays confirm
/// none, so the cell is unresolved. With it, one is confirmed, and its path replays from
/// key on to the same violation.
#[test]
fn screening_candidates_confirms_a_violation_the_first_replays_miss() {
    let m = load("scenarios/van/van_throttle.limp");
    let run = |screen: usize| {
        let cfg = Config {
            max_states: 10_000_000,
            jobs: 1,
            only: Some("throttle.b gain 94.67".into()),
            screen,
            ..Config::default()
        };
        let p = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
        assert_eq!(p.rows.len(), 1);
        assert!(!p.rows[0].result.truncated, "the search must close");
        p
    };
    let ceiling = 1;
    let bare = run(0);
    assert_eq!(bare.rows[0].verdict(ceiling), Verdict::Unresolved);
    assert!(bare.rows[0].result.unconfirmed[ceiling] > 64);
    let screened = run(Config::default().screen);
    let row = &screened.rows[0];
    assert_eq!(row.verdict(ceiling), Verdict::Violated);
    let v = &row.result.violations[0];
    assert!(v.opening > 90.0 && v.opening < 90.5, "{v:?}");
    let vehicle = Vehicle::new(&m).expect("plant derives");
    let again = search::replay_check(
        &vehicle,
        &row.faults,
        &v.pedal,
        v.inject_step,
        v.second_step,
        &screened.requirements,
    );
    assert_eq!(again[ceiling].as_ref(), Some(v));
}

/// The `searched` column's claim, "every drive searched to T after the injection", checked
/// against searches of their own: with the horizon cut to T, the same fault's search closes
/// within the bound that stopped the long one, and the long one's depth grows with the bound
/// until it closes (common practice for bounded breadth-first search, no source).
#[test]
fn a_bounded_search_says_how_deep_it_searched() {
    let m = load("scenarios/van/van_throttle.limp");
    let run = |max_states: usize, horizon_ms: u64| {
        let cfg = Config {
            max_states,
            horizon: Time::from_ms(horizon_ms),
            ..complete("pedal.a open")
        };
        let p = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
        assert_eq!(p.rows.len(), 1);
        p.rows[0].result.clone()
    };
    let mut last = 0;
    for bound in [30_000, 100_000, 400_000] {
        let r = run(bound, 1200);
        assert!(r.truncated, "{bound}");
        let depth = r
            .searched_to
            .expect("a bounded search says how deep it went");
        assert!(depth >= last, "{bound}: {depth} < {last}");
        last = depth;
        let cut = run(bound, 5 * u64::from(depth));
        assert!(
            !cut.truncated,
            "{bound}: the first {depth} periods fit in the bound"
        );
        let beyond = run(bound, 5 * u64::from(depth + 1));
        assert!(beyond.truncated, "{bound}: one period more does not fit");
    }
    let closed = run(10_000_000, 1200);
    assert!(!closed.truncated);
    assert_eq!(closed.searched_to, None);
}

/// The directed probes step within `--max-states`, so a long horizon cannot make a bounded
/// run take unbounded time: every drive they step is a horizon long, and their periods in all
/// stay under the bound (common practice, no source: a bound on states bounds the work).
#[test]
fn probes_stay_within_the_bound() {
    let m = load("scenarios/van/van_throttle.limp");
    for (max_states, horizon_ms) in [(100_000, 1200), (100_000, 60_000), (100_000, 600_000)] {
        let cfg = Config {
            max_states,
            horizon: Time::from_ms(horizon_ms),
            ..complete("pedal.a open")
        };
        let p = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
        let probes = p.rows[0].result.probes;
        let steps = horizon_ms / 5;
        assert!(
            probes as u64 * steps <= max_states as u64,
            "{horizon_ms} ms: {probes} drives of {steps} periods"
        );
        if horizon_ms == 1200 {
            assert!(probes > 0, "a short horizon probes");
        }
    }
}

/// How near a replay came to breaking a requirement, against the vehicle stepped here on its
/// own: the faulty van (a feedback track at 94.67 % gain, the worst the disagreement check
/// lets through) and its fault-free twin driven from the ceiling counterexample's injection
/// through a hold at 88 %, a hold at 60 % and a release. The ceiling's measure is the highest
/// faulty opening at the steps where the driver is at or below 90 % and the twin at or below
/// 90 % (the requirement's own condition, from the assure block); the excess measure the
/// longest run above the fault-free opening (or the springs' default) plus 5 %, in ms; the
/// idle measure the highest opening 1 s or more after release with the twin at idle (common
/// practice, no source).
#[test]
fn the_nearest_approach_is_the_requirements_own_measure_along_the_drive() {
    use limpet::sim::system::System;
    let m = load("scenarios/van/van_throttle.limp");
    let cfg = complete("throttle.b gain 94.67");
    let p = prove::prove(&m, &cfg, &|_, _, _| {}).expect("plant derives");
    let row = &p.rows[0];
    let v = row
        .result
        .violations
        .iter()
        .find(|v| v.requirement == 1)
        .expect("the ceiling is violated");
    let inject = v.inject_step as usize;
    let mut path = v.pedal[..inject].to_vec();
    path.extend([88.0; 100].iter().chain(&[60.0; 100]).chain(&[0.0; 300]));
    let vehicle = Vehicle::new(&m).expect("plant derives");
    let start = search::Prefix::drive(&vehicle, &path[..inject]);
    let (out, near) = start.replay_nearest(&row.faults, &path, None, &p.requirements);
    assert!(out.iter().all(Option::is_none), "{out:?}");

    // The same drive, stepped here.
    let (mut faulty, mut twin) = (System::new(&vehicle), System::new(&vehicle));
    let (mut ceiling, mut idle) = (f64::NEG_INFINITY, f64::NEG_INFINITY);
    let (mut run, mut longest, mut released) = (0u32, 0u32, 0u32);
    for (k, &pedal) in path.iter().enumerate() {
        let now = Time(m.period.0 * k as u64);
        if k == inject {
            faulty.inject(row.faults[0], now);
        }
        search::period_step(&mut faulty, &m, pedal, now);
        search::period_step(&mut twin, &m, pedal, now);
        released = if pedal == 0.0 { released + 1 } else { 0 };
        if k < inject {
            continue;
        }
        let (open, open_n) = (faulty.opening(), twin.opening());
        if pedal <= 90.0 && open_n <= 90.0 {
            ceiling = ceiling.max(open);
        }
        run = if open - open_n.max(m.actuator.default) > 5.0 {
            run + 1
        } else {
            0
        };
        longest = longest.max(run);
        if released >= 200 && open_n <= m.actuator.idle {
            idle = idle.max(open);
        }
    }
    assert!(ceiling > 87.0 && ceiling <= 90.0, "{ceiling}");
    assert_eq!(near[1].value, ceiling);
    assert_eq!(near[1].opening, ceiling);
    let excess = f64::from(longest) * m.period.as_ms_f64();
    assert_eq!(
        near[0].value,
        if longest > 0 {
            excess
        } else {
            f64::NEG_INFINITY
        }
    );
    assert!(idle.is_finite(), "the drive ends 1.5 s after release");
    assert_eq!(near[2].value, idle);
}

/// `prove --counterexamples DIR` also writes, for each unresolved cell, the drive that came
/// nearest to breaking the requirement. Each replays through the simulator with its
/// expectation holding (the opening at that instant, rounded up to a hundredth), and fails when
/// the expectation is tightened by two hundredths: the simulator puts the plate where the
/// prover said (common practice, no source: one semantics for both).
#[test]
fn near_miss_scripts_replay_to_the_same_opening() {
    let dir = temp_dir("near");
    let cfg = app::ProveConfig {
        search: complete("throttle.a open"),
        format: Format::Text,
        counterexamples: Some(dir.to_string_lossy().into_owned()),
        progress: false,
    };
    let out = app::prove("scenarios/van/van_throttle.limp", &cfg);
    assert!(
        out.stdout
            .contains("0 counterexample script(s) and 2 near-miss script(s)"),
        "{}",
        out.stdout
    );
    let run = |file: &std::path::Path| {
        let cfg = RunConfig {
            policy: Some("scenarios/van/van_throttle.limp".into()),
            format: Format::Json,
            ..RunConfig::default()
        };
        app::run(&[file.to_string_lossy().into_owned()], &cfg)
    };
    for name in ["near001_excess", "near001_ceiling"] {
        let file = dir.join(format!("{name}.scenario"));
        let text = std::fs::read_to_string(&file).expect("written");
        let ok = run(&file);
        assert_eq!(ok.exit, Exit::Holds, "{text}\n{}", ok.stderr);
        // The same drive, the expectation two hundredths tighter.
        let at = text.rfind("at most ").expect("an expectation") + "at most ".len();
        let end = at + text[at..].find(" %").expect("a percentage");
        let x: f64 = text[at..end].parse().expect("a number");
        let tight = format!("{}{}{}", &text[..at], x - 0.02, &text[end..]);
        let tfile = dir.join(format!("{name}_tight.scenario"));
        std::fs::write(&tfile, &tight).expect("write");
        let bad = run(&tfile);
        assert_eq!(bad.exit, Exit::Finding, "{tight}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// A fault-free vehicle kept as its controller's memory and plate alone, and made whole again
/// (`System::with_state`, how the prover keeps its fault-free states), steps exactly as the
/// vehicle it was taken from: every output a step needs is recomputed from the state and the
/// sample (common practice, no source: a step is a function of state and inputs).
#[test]
fn a_vehicle_made_again_from_its_state_steps_as_the_original() {
    use limpet::sim::system::System;
    let m = load("scenarios/van/van_throttle.limp");
    let vehicle = Vehicle::new(&m).expect("plant derives");
    let mut rng = Rng(0x5eed_0000_face_0003);
    let mut pedal = 0.0f64;
    let mut drive = |rng: &mut Rng| {
        pedal = (pedal + 5.0 * (rng.below(3) as f64 - 1.0)).clamp(0.0, 100.0);
        pedal
    };
    let mut a = System::new(&vehicle);
    let mut k = 0u64;
    for _ in 0..150 {
        search::period_step(&mut a, &m, drive(&mut rng), Time(m.period.0 * k));
        k += 1;
    }
    let mut b = System::new(&vehicle).with_state(a.controller_state(), a.plate());
    for _ in 0..300 {
        let p = drive(&mut rng);
        let now = Time(m.period.0 * k);
        search::period_step(&mut a, &m, p, now);
        search::period_step(&mut b, &m, p, now);
        k += 1;
        assert_eq!(a.controller_state(), b.controller_state(), "step {k}");
        assert_eq!(a.plate(), b.plate(), "step {k}");
    }
}
