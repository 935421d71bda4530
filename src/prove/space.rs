//! The fault space of a policy and the static pre-pass: which monitors can ever see each
//! catalogued fault over the whole travel (steady-state reasoning on the characteristics), and
//! the worst parametric values just inside the detection thresholds, found by bisection.

use crate::faults::{self, ActiveFault, Injection, SensorFault, TrackFault};
use crate::model::{Compare, Expr, FaultId, Model, Signal, Term};
use crate::time::Time;

/// Positions at which the pre-pass evaluates the monitors, percent (every 0.25 %).
const PREPASS_STEPS: usize = 400;

/// Steady-state values of everything a monitor reads, with one fault injected (or none).
struct Steady {
    /// Per sensor, per track: volts at the pin (filters settled).
    volts: Vec<Vec<f64>>,
}

fn steady(model: &Model, positions: &[f64], inj: Option<&Injection>) -> Steady {
    let active: Vec<ActiveFault> = inj
        .map(|i| {
            ActiveFault::capture(
                model,
                *i,
                Time::ZERO,
                positions,
                positions[model.feedback],
                &[],
            )
        })
        .into_iter()
        .collect();
    let volts = model
        .sensors
        .iter()
        .enumerate()
        .map(|(s, sensor)| {
            let mut out = vec![0.0; sensor.tracks.len()];
            faults::sensor_volts(model, s, positions[s], &active, Time::ZERO, &mut out);
            out
        })
        .collect();
    Steady { volts }
}

fn signal_value(model: &Model, st: &Steady, sig: &Signal, target: f64) -> f64 {
    match *sig {
        Signal::Track { track } => model
            .track(track)
            .percent_at(st.volts[track.sensor][track.track]),
        Signal::TrackVolts { track } => st.volts[track.sensor][track.track],
        Signal::Merged { sensor } => {
            let vals = model.sensors[sensor]
                .tracks
                .iter()
                .enumerate()
                .map(|(t, tr)| tr.percent_at(st.volts[sensor][t]).clamp(0.0, 100.0));
            match model.sensors[sensor].combine {
                crate::model::Combine::Min => vals.fold(f64::INFINITY, f64::min),
                crate::model::Combine::Max => vals.fold(f64::NEG_INFINITY, f64::max),
            }
        }
        Signal::Input { input } => model.inputs[input].hi,
        Signal::Target => target,
    }
}

/// Evaluates a monitor's condition on steady-state values (switches off: the pre-pass looks
/// at wiring, not at the driver's brake).
fn condition_holds(model: &Model, st: &Steady, e: &Expr, target: f64) -> bool {
    e.eval(&mut |atom| match atom {
        Expr::Compare { term, cmp, .. } => {
            let v = match term {
                Term::Signal { signal } => signal_value(model, st, signal, target),
                Term::Diff { a, b } => {
                    signal_value(model, st, a, target) - signal_value(model, st, b, target)
                }
                Term::AbsDiff { a, b } => {
                    (signal_value(model, st, a, target) - signal_value(model, st, b, target)).abs()
                }
            };
            cmp_holds(cmp, v)
        }
        _ => false,
    })
}

fn cmp_holds(c: &Compare, v: f64) -> bool {
    c.holds(v)
}

/// Which monitors can see a fault: at some steady pedal and plate position their condition
/// holds with the fault and not without it.
pub fn seen_by(model: &Model, inj: &Injection) -> Vec<FaultId> {
    let mut seen = vec![false; model.faults.len()];
    let driver = model.driver;
    let mut positions = vec![0.0; model.sensors.len()];
    for i in 0..=PREPASS_STEPS {
        let p = 100.0 * i as f64 / PREPASS_STEPS as f64;
        positions.iter_mut().for_each(|x| *x = p);
        // The loop settles the plate on the demand: pedal and plate positions move together,
        // and the target equals the plate position.
        let _ = driver;
        let healthy = steady(model, &positions, None);
        let broken = steady(model, &positions, Some(inj));
        for (f, fault) in model.faults.iter().enumerate() {
            if seen[f] {
                continue;
            }
            let target = p;
            if condition_holds(model, &broken, &fault.condition, target)
                && !condition_holds(model, &healthy, &fault.condition, target)
            {
                seen[f] = true;
            }
        }
    }
    (0..model.faults.len()).filter(|&f| seen[f]).collect()
}

/// With the parameter of a parametric fault replaced.
fn with_param(inj: &Injection, x: f64) -> Option<Injection> {
    Some(match *inj {
        Injection::Track {
            track,
            fault: TrackFault::Offset { .. },
        } => Injection::Track {
            track,
            fault: TrackFault::Offset { volts: x },
        },
        Injection::Track {
            track,
            fault: TrackFault::Gain { .. },
        } => Injection::Track {
            track,
            fault: TrackFault::Gain { factor: x },
        },
        Injection::Sensor {
            sensor,
            fault: SensorFault::GroundOffset { .. },
        } => Injection::Sensor {
            sensor,
            fault: SensorFault::GroundOffset { volts: x },
        },
        Injection::Sensor {
            sensor,
            fault: SensorFault::Supply { .. },
        } => Injection::Sensor {
            sensor,
            fault: SensorFault::Supply { volts: x },
        },
        _ => return None,
    })
}

/// The largest deviation from the healthy value `neutral` towards `far` that no monitor sees,
/// by bisection to `tol`; `None` when even the smallest step is seen, or the whole range is
/// unseen (then `far` itself is in the grid already).
pub fn worst_undetected(
    model: &Model,
    inj: &Injection,
    neutral: f64,
    far: f64,
    tol: f64,
) -> Option<f64> {
    let seen = |x: f64| with_param(inj, x).is_some_and(|i| !seen_by(model, &i).is_empty());
    if !seen(far) {
        return None;
    }
    let (mut lo, mut hi) = (neutral, far);
    if seen(neutral + (far - neutral) * 1e-6) {
        return None;
    }
    while (hi - lo).abs() > tol {
        let mid = 0.5 * (lo + hi);
        if seen(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(lo)
}

/// The faults the prover searches: the catalogue, plus for each parametric family and
/// direction the worst value just inside the detection thresholds (to 0.1 mV for volts,
/// 0.01 % for gains). Deterministic order, without duplicates.
pub fn fault_space(model: &Model) -> Vec<Injection> {
    let mut out = faults::catalogue(model);
    let mut extra = Vec::new();
    for (s, sensor) in model.sensors.iter().enumerate() {
        for t in 0..sensor.tracks.len() {
            let track = crate::model::TrackRef {
                sensor: s,
                track: t,
            };
            let off = Injection::Track {
                track,
                fault: TrackFault::Offset { volts: 0.0 },
            };
            for far in [model.supply, -model.supply] {
                if let Some(x) = worst_undetected(model, &off, 0.0, far, 1e-4) {
                    extra.push(Injection::Track {
                        track,
                        fault: TrackFault::Offset {
                            volts: round_to(x, 1e-4),
                        },
                    });
                }
            }
            let gain = Injection::Track {
                track,
                fault: TrackFault::Gain { factor: 1.0 },
            };
            for far in [2.0, 0.0] {
                if let Some(x) = worst_undetected(model, &gain, 1.0, far, 1e-4) {
                    extra.push(Injection::Track {
                        track,
                        fault: TrackFault::Gain {
                            factor: round_to(x, 1e-4),
                        },
                    });
                }
            }
        }
        let g = Injection::Sensor {
            sensor: s,
            fault: SensorFault::GroundOffset { volts: 0.0 },
        };
        if let Some(x) = worst_undetected(model, &g, 0.0, model.supply, 1e-4) {
            extra.push(Injection::Sensor {
                sensor: s,
                fault: SensorFault::GroundOffset {
                    volts: round_to(x, 1e-4),
                },
            });
        }
        let sup = Injection::Sensor {
            sensor: s,
            fault: SensorFault::Supply {
                volts: model.supply,
            },
        };
        for far in [2.0 * model.supply, 0.0] {
            if let Some(x) = worst_undetected(model, &sup, model.supply, far, 1e-4) {
                extra.push(Injection::Sensor {
                    sensor: s,
                    fault: SensorFault::Supply {
                        volts: round_to(x, 1e-4),
                    },
                });
            }
        }
    }
    for e in extra {
        if !out.contains(&e) {
            out.push(e);
        }
    }
    out
}

/// Rounds towards zero deviation at the given step, so the value stays inside the threshold.
fn round_to(x: f64, step: f64) -> f64 {
    (x / step).trunc() * step
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference() -> Model {
        crate::model::lower(include_str!("../../scenarios/van/van_throttle.limp")).unwrap()
    }

    /// Known answer, worked by hand: a common ground offset x lifts both pedal tracks by x. With
    /// slopes 3.2 V and 1.6 V per 100 %, track a reads x/0.032 % high and track b x/0.016 %:
    /// they disagree by x/0.032 %, so the 6 % plausibility limit is crossed at x = 0.192 V
    /// (range checks see nothing that small: at 100 % track a reads 4.192 V < 4.75 V).
    #[test]
    fn worst_undetected_ground_offset_follows_from_limit_and_slopes() {
        let m = reference();
        let g = Injection::Sensor {
            sensor: 0,
            fault: SensorFault::GroundOffset { volts: 0.0 },
        };
        let x = worst_undetected(&m, &g, 0.0, m.supply, 1e-5).unwrap();
        assert!((x - 0.192).abs() < 1e-3, "worst undetected offset {x} V");
    }

    #[test]
    fn open_pedal_track_is_seen_by_its_range_check() {
        let m = reference();
        let inj = Injection::Track {
            track: m.track_ref("pedal", "a").unwrap(),
            fault: TrackFault::Open,
        };
        let seen: Vec<&str> = seen_by(&m, &inj)
            .iter()
            .map(|&f| m.faults[f].name.as_str())
            .collect();
        assert!(seen.contains(&"pedal_a_low"), "{seen:?}");
    }

    #[test]
    fn supply_rise_on_the_pedal_is_seen_by_no_monitor_when_small() {
        let m = reference();
        let inj = Injection::Sensor {
            sensor: 0,
            fault: SensorFault::Supply { volts: 5.2 },
        };
        assert!(seen_by(&m, &inj).is_empty());
    }
}
