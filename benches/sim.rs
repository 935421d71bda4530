//! Simulator throughput: every bundled scenario replayed many times (simulated seconds per wall
//! second, controller steps per second), then the throttle-body sub-step and the controller
//! step alone. A plain `main` timed with `Instant`: `cargo bench --bench sim`.

use limpet::controller::{Controller, Outputs, Sample};
use limpet::model::Model;
use limpet::plant::{self, ActuatorCondition, PlantParams, PlantState, Plate};
use limpet::sim::engine::{self, RunOptions};
use limpet::sim::script::{self, Script};
use limpet::sim::system::Vehicle;
use limpet::time::Time;
use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Wall time spent on each measurement: long enough to average out the timer, short enough for
/// a shared machine.
const BUDGET: Duration = Duration::from_millis(400);

/// Runs `f` in rounds until the budget is spent: (calls, wall seconds).
fn timed(mut f: impl FnMut()) -> (u64, f64) {
    // One call to warm caches and learn roughly how long a call takes.
    let t0 = Instant::now();
    f();
    let one = t0.elapsed().as_secs_f64().max(1e-7);
    let per_round = ((BUDGET.as_secs_f64() / 8.0 / one) as u64).max(1);
    let start = Instant::now();
    let mut calls = 0;
    while start.elapsed() < BUDGET {
        for _ in 0..per_round {
            f();
        }
        calls += per_round;
    }
    (calls, start.elapsed().as_secs_f64())
}

fn load(path: &Path) -> Result<(String, Model, Script), String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
    let (ast, _) = script::parse_script(&text);
    let ast = ast.ok_or_else(|| format!("{}: does not parse", path.display()))?;
    let dir = path.parent().unwrap_or(Path::new("."));
    let policy_path = dir.join(&ast_policy(&text).ok_or("no policy line")?);
    let policy = std::fs::read_to_string(&policy_path)
        .map_err(|e| format!("{}: {e}", policy_path.display()))?;
    let (model, _) = limpet::model::load(&policy);
    let model = model.ok_or_else(|| format!("{}: does not lower", policy_path.display()))?;
    let scr = script::resolve(&ast, &model).map_err(|_| "does not resolve".to_string())?;
    let name = path
        .file_stem()
        .map_or(String::new(), |s| s.to_string_lossy().into_owned());
    Ok((name, model, scr))
}

/// The path in the `policy "..."` line.
fn ast_policy(text: &str) -> Option<String> {
    text.lines().find_map(|l| {
        let rest = l.trim().strip_prefix("policy")?;
        let a = rest.find('"')?;
        let b = rest[a + 1..].find('"')?;
        Some(rest[a + 1..a + 1 + b].to_string())
    })
}

fn main() {
    let dir = Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/van"));
    let mut paths: Vec<PathBuf> = std::fs::read_dir(dir)
        .map(|d| {
            d.filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.extension().is_some_and(|x| x == "scenario"))
                .collect()
        })
        .unwrap_or_default();
    paths.sort();
    let opts = RunOptions::default();

    println!("whole replays on a prepared vehicle (default 10 ms sample, derived plant sub-step)");
    println!(
        "{:<30} {:>7} {:>8} {:>12} {:>14}",
        "scenario", "len s", "runs", "x real time", "ctl steps/s"
    );
    let (mut sim_total, mut wall_total, mut steps_total) = (0.0, 0.0, 0.0);
    let mut substep = Time::ZERO;
    for p in &paths {
        let (name, model, scr) = match load(p) {
            Ok(x) => x,
            Err(e) => {
                eprintln!("skipped: {e}");
                continue;
            }
        };
        let Ok(vehicle) = Vehicle::new(&model) else {
            eprintln!("skipped {name}: no plant");
            continue;
        };
        substep = vehicle.plate.params.substep();
        // The replay proper, on a vehicle prepared once (see `setup` below for what
        // `engine::run` adds to each call).
        let (runs, wall) = timed(|| {
            black_box(engine::run_on(&vehicle, &scr, opts).passed());
        });
        let len = scr.length.as_secs_f64();
        let steps_per_run = (scr.length.0 / model.period.0.max(1) + 1) as f64;
        let sim = len * runs as f64;
        let steps = steps_per_run * runs as f64;
        println!(
            "{:<30} {:>7.2} {:>8} {:>12.0} {:>14.0}",
            name,
            len,
            runs,
            sim / wall,
            steps / wall
        );
        sim_total += sim;
        wall_total += wall;
        steps_total += steps;
    }
    println!(
        "{:<30} {:>7} {:>8} {:>12.0} {:>14.0}",
        "overall",
        "",
        "",
        sim_total / wall_total.max(1e-12),
        steps_total / wall_total.max(1e-12)
    );
    println!("(target: 20 000 x real time on one core; plant sub-step {substep})");

    // The parts alone, on the reference policy.
    let policy = dir.join("van_throttle.limp");
    let Some(model) = std::fs::read_to_string(&policy)
        .ok()
        .and_then(|t| limpet::model::load(&t).0)
    else {
        eprintln!("{}: cannot load the reference policy", policy.display());
        return;
    };
    let Ok(params) = PlantParams::derive(&model.actuator) else {
        eprintln!("the reference actuator gives no plant");
        return;
    };

    // What every replay pays before its first step: the controller prepared and the plate's
    // parameters derived from the actuator figures (a bisection over simulated figures).
    let (calls, wall) = timed(|| {
        black_box(Vehicle::new(&model).is_ok());
    });
    println!();
    println!(
        "setup (Vehicle::new):    {:>14.1} us each",
        wall / calls as f64 * 1e6
    );

    // Plant: one sub-step per call, as the engine calls it, under a duty that keeps the plate
    // moving so that no branch is settled for good.
    let healthy = ActuatorCondition::HEALTHY;
    let mut s = PlantState::at_rest(model.actuator.default);
    let mut k = 0u64;
    let (calls, wall) = timed(|| {
        for _ in 0..1000 {
            k = k.wrapping_add(1);
            let duty = if (k / 500).is_multiple_of(2) {
                60.0
            } else {
                -40.0
            };
            s = plant::advance(&params, s, duty, true, &healthy, params.substep());
        }
        black_box(s);
    });
    let plant_rate = calls as f64 * 1000.0 / wall;
    println!(
        "plant sub-step alone:    {:>14.0} sub-steps/s  ({:.1} ns each)",
        plant_rate,
        1e9 / plant_rate
    );
    // One whole controller period's worth of plant in one call, for comparison: sub-stepped
    // one by one, then through the closed-form jumps the engine and the prover use.
    let per_period = (model.period.0 / params.substep().0.max(1)).max(1);
    let plate = Plate::new(params.clone());
    let mut per_call = |step: &dyn Fn(PlantState, f64) -> PlantState| {
        let (calls, wall) = timed(|| {
            for _ in 0..20 {
                k = k.wrapping_add(1);
                let duty = if (k / 10).is_multiple_of(2) {
                    60.0
                } else {
                    -40.0
                };
                s = step(s, duty);
            }
            black_box(s);
        });
        calls as f64 * 20.0 * per_period as f64 / wall
    };
    let period_rate =
        per_call(&|s, duty| plant::advance(&params, s, duty, true, &healthy, model.period));
    let jump_rate = per_call(&|s, duty| plate.advance(s, duty, true, &healthy, model.period));
    println!(
        "plant, period per call:  {:>14.0} sub-steps/s  ({per_period} sub-steps a call, one by one)",
        period_rate
    );
    println!(
        "plant, period per call:  {:>14.0} sub-steps/s  (in jumps; {:.1}x one by one)",
        jump_rate,
        jump_rate / period_rate
    );

    // Controller: a pedal sweep through intact wiring, the plate following the target.
    let ctl = Controller::new(&model);
    let driver = model.driver.unwrap_or(0);
    let samples: Vec<Sample> = (0..200)
        .map(|i| {
            let mut pos = vec![0.0; model.sensors.len()];
            let pedal = 50.0 + 45.0 * (f64::from(i) / 200.0 * std::f64::consts::TAU).sin();
            pos[driver] = pedal;
            pos[model.feedback] = pedal * 0.98;
            let mut s = Sample::healthy(&model, &pos);
            s.inputs = model.inputs.iter().map(|i| i.hi).collect();
            s
        })
        .collect();
    let mut state = ctl.power_up(&samples[0]);
    let mut out = Outputs::default();
    let (calls, wall) = timed(|| {
        for smp in &samples {
            ctl.step_in_place(&mut state, smp, &mut out);
        }
        black_box(out.duty);
    });
    let ctl_rate = calls as f64 * samples.len() as f64 / wall;
    println!(
        "controller step alone:   {:>14.0} steps/s      ({:.1} ns each)",
        ctl_rate,
        1e9 / ctl_rate
    );

    // What the parts alone allow: per simulated second, steps and sub-steps at these rates.
    let steps_per_s = 1.0 / model.period.as_secs_f64();
    let subs_per_s = 1.0 / params.substep().as_secs_f64();
    let bound = 1.0 / (steps_per_s / ctl_rate + subs_per_s / jump_rate);
    println!(
        "bound from the parts:    {bound:>14.0} x real time ({steps_per_s:.0} steps + {subs_per_s:.0} sub-steps per simulated s)"
    );
}
