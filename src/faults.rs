//! The fault catalogue: what a script can `break` and `mend`, and what `faults single` and
//! `faults double` enumerate, and how each fault rewrites the voltages a track delivers or
//! the behaviour of the actuator.

use crate::model::{Model, SensorId, TrackRef};
use crate::plant::ActuatorCondition;
use crate::time::{Time, trim};
use serde::Serialize;

/// A wiring fault on one track.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum TrackFault {
    /// Broken signal wire: reads the sensor's `open reads` level.
    Open,
    /// Signal shorted to ground: 0 V.
    ShortGround,
    /// Signal shorted to the sensor supply.
    ShortSupply,
    /// The signal freezes at the voltage it had at the instant of breaking.
    Stuck,
    /// A constant voltage added to the signal.
    Offset { volts: f64 },
    /// The signal scaled by a factor (0.9 for `gain 90 %`).
    Gain { factor: f64 },
    /// Shorted to another track: both deliver a common voltage (their mean).
    Bridged { other: TrackRef },
    /// Open for `open` out of every `every`, phase starting at the instant of breaking.
    Intermittent { open: Time, every: Time },
}

/// A fault on a sensor's shared ground or supply.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum SensorFault {
    /// The sensor's ground lifted: every track reads this much higher.
    GroundOffset { volts: f64 },
    /// The sensor's supply changed: every track scales ratiometrically.
    Supply { volts: f64 },
}

/// A fault of the throttle body itself.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ActuatorFault {
    /// The plate freezes where it is at the instant of breaking.
    Stuck,
    /// Motor torque scaled by a factor (0.5 for `weak 50 %`).
    Weak { factor: f64 },
    /// The return springs exert no force.
    SpringBroken,
}

/// Where a fault is injected and what it is.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "at", rename_all = "snake_case")]
pub enum Injection {
    Track {
        track: TrackRef,
        fault: TrackFault,
    },
    Sensor {
        sensor: SensorId,
        fault: SensorFault,
    },
    Actuator {
        fault: ActuatorFault,
    },
}

/// A fault that is broken: what, since when, and the value it froze at the instant of
/// breaking (the volts a `stuck` track delivered, the plate position of a `stuck` actuator;
/// zero for every other fault).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ActiveFault {
    pub injection: Injection,
    pub since: Time,
    pub captured: f64,
}

impl ActiveFault {
    pub fn new(injection: Injection, since: Time, captured: f64) -> ActiveFault {
        ActiveFault {
            injection,
            since,
            captured,
        }
    }

    /// Breaks `injection` at `now`, capturing what it freezes: for a stuck track, the volts
    /// that track delivers at this instant with the faults already `active` (so a track that
    /// sticks under a supply fault keeps the low reading after the supply is mended); for a
    /// stuck actuator, the plate position. `true_percent` is the true position of each sensor,
    /// indexed by [`SensorId`]; a missing entry reads as 0 %.
    pub fn capture(
        model: &Model,
        injection: Injection,
        now: Time,
        true_percent: &[f64],
        plate_position: f64,
        active: &[ActiveFault],
    ) -> ActiveFault {
        let captured = match injection {
            Injection::Track {
                track,
                fault: TrackFault::Stuck,
            } => {
                let n = model
                    .sensors
                    .get(track.sensor)
                    .map_or(0, |s| s.tracks.len());
                // Breaking is rare (once per injection), so a small allocation here is fine.
                let mut volts = vec![0.0; n];
                let pct = true_percent.get(track.sensor).copied().unwrap_or(0.0);
                sensor_volts(model, track.sensor, pct, active, now, &mut volts);
                volts.get(track.track).copied().unwrap_or(0.0)
            }
            Injection::Actuator {
                fault: ActuatorFault::Stuck,
            } => plate_position,
            _ => 0.0,
        };
        ActiveFault {
            injection,
            since: now,
            captured,
        }
    }
}

/// Whether an intermittent open is in its open part at `now`: open for the first `open` of
/// every `every`, counting from the instant of breaking. An `every` of zero is always open.
fn intermittent_is_open(open: Time, every: Time, since: Time, now: Time) -> bool {
    let elapsed = now.saturating_sub(since).0;
    let phase = if every.0 == 0 { 0 } else { elapsed % every.0 };
    phase < open.0
}

/// The volts the controller's input pin sees on each track of `sensor` (written to `out`,
/// one entry per track in track order; entries beyond the sensor's tracks are left alone, as
/// are all entries for an unknown sensor) when the sensor's true position is `true_percent`
/// and the faults `active` are broken.
///
/// Composition, in this order:
/// 1. the healthy characteristic `volts_at(true_percent)` at the nominal `model.supply`;
/// 2. sensor faults: a `supply V` fault scales every track ratiometrically by
///    `V / model.supply` (the last such fault broken wins), then every `ground offset` adds;
/// 3. track modifiers, `offset` and `gain`, in the order they were broken;
/// 4. track replacements, in the order they were broken, so the last one wins: `open` reads
///    the sensor's `open reads`, `short ground` 0 V, `short supply` the sensor's supply (the
///    faulted one if a supply fault is active), `stuck` the captured volts, `intermittent`
///    reads `open reads` in its open part and passes the value through otherwise. These act
///    at the pin, downstream of the sensor, which is why they override modifiers and ignore
///    the sensor's ground offset;
/// 5. bridges last: both tracks deliver the mean of their volts after steps 1-4 (equal source
///    impedances), pair by pair in the order broken. A bridge to a track of another sensor is
///    not modelled here (that sensor's true position is not known) and is ignored.
pub fn sensor_volts(
    model: &Model,
    sensor: SensorId,
    true_percent: f64,
    active: &[ActiveFault],
    now: Time,
    out: &mut [f64],
) {
    let Some(s) = model.sensors.get(sensor) else {
        return;
    };
    let mut supply = model.supply;
    let mut ground = 0.0;
    // Whether a track fault is on this sensor: without one, steps 2 to 5 have nothing to do.
    let mut touched = false;
    for f in active {
        match f.injection {
            Injection::Sensor { sensor: at, fault } if at == sensor => match fault {
                SensorFault::Supply { volts } => supply = volts,
                SensorFault::GroundOffset { volts } => ground += volts,
            },
            Injection::Track { track, .. } if track.sensor == sensor => touched = true,
            _ => {}
        }
    }
    let scale = if model.supply > 0.0 {
        supply / model.supply
    } else {
        1.0
    };
    // The faults the track passes below read: none when no track fault is on this sensor.
    let on_tracks: &[ActiveFault] = if touched { active } else { &[] };
    let on_track = |f: &ActiveFault, i: usize| match f.injection {
        Injection::Track { track, fault } if track.sensor == sensor && track.track == i => {
            Some(fault)
        }
        _ => None,
    };
    for (i, (track, v)) in s.tracks.iter().zip(out.iter_mut()).enumerate() {
        let mut volts = track.volts_at(true_percent) * scale + ground;
        for f in on_tracks {
            match on_track(f, i) {
                Some(TrackFault::Offset { volts: x }) => volts += x,
                Some(TrackFault::Gain { factor }) => volts *= factor,
                _ => {}
            }
        }
        for f in on_tracks {
            match on_track(f, i) {
                Some(TrackFault::Open) => volts = s.open_reads,
                Some(TrackFault::ShortGround) => volts = 0.0,
                Some(TrackFault::ShortSupply) => volts = supply,
                Some(TrackFault::Stuck) => volts = f.captured,
                Some(TrackFault::Intermittent { open, every })
                    if intermittent_is_open(open, every, f.since, now) =>
                {
                    volts = s.open_reads
                }
                _ => {}
            }
        }
        *v = volts;
    }
    let n = s.tracks.len().min(out.len());
    for f in on_tracks {
        if let Injection::Track {
            track,
            fault: TrackFault::Bridged { other },
        } = f.injection
            && track.sensor == sensor
            && other.sensor == sensor
            && track.track < n
            && other.track < n
        {
            let mean = 0.5 * (out[track.track] + out[other.track]);
            out[track.track] = mean;
            out[other.track] = mean;
        }
    }
}

/// What the active actuator faults do to the plate: frozen at the captured position (the
/// last stuck fault broken), motor torque scaled by the product of every `weak` factor, and
/// springs broken. No actuator fault gives the healthy condition.
pub fn actuator_condition(active: &[ActiveFault]) -> ActuatorCondition {
    let mut c = ActuatorCondition::HEALTHY;
    for f in active {
        if let Injection::Actuator { fault } = f.injection {
            match fault {
                ActuatorFault::Stuck => c.stuck_at = Some(f.captured),
                ActuatorFault::Weak { factor } => c.torque_factor *= factor,
                ActuatorFault::SpringBroken => c.spring_broken = true,
            }
        }
    }
    c
}

/// `pedal.a`; an index the model does not have prints as `?` rather than panicking.
fn track_label(model: &Model, r: TrackRef) -> String {
    let s = model.sensors.get(r.sensor);
    let sensor = s.map_or("?", |s| s.name.as_str());
    let track = s
        .and_then(|s| s.tracks.get(r.track))
        .map_or("?", |t| t.name.as_str());
    format!("{sensor}.{track}")
}

fn sensor_label(model: &Model, sensor: SensorId) -> &str {
    model.sensors.get(sensor).map_or("?", |s| s.name.as_str())
}

/// `+0.3` or `-0.3`: offsets always carry their sign in the scenario language.
fn signed(x: f64) -> String {
    if x < 0.0 {
        format!("-{}", trim(-x))
    } else {
        format!("+{}", trim(x))
    }
}

/// What a scenario names when it mends the fault: `pedal.a`, `pedal` or `actuator`.
pub fn describe_target(model: &Model, inj: &Injection) -> String {
    match *inj {
        Injection::Track { track, .. } => track_label(model, track),
        Injection::Sensor { sensor, .. } => sensor_label(model, sensor).to_string(),
        Injection::Actuator { .. } => "actuator".to_string(),
    }
}

/// The fault in the scenario language's own words, as written after `break`:
/// `pedal.a open`, `pedal.a offset +0.3 V`, `pedal.a intermittent open 10 ms every 100 ms`,
/// `pedal supply 4.6 V`, `actuator weak 50 %`.
pub fn describe(model: &Model, inj: &Injection) -> String {
    let target = describe_target(model, inj);
    let what = match *inj {
        Injection::Track { fault, .. } => match fault {
            TrackFault::Open => "open".to_string(),
            TrackFault::ShortGround => "short ground".to_string(),
            TrackFault::ShortSupply => "short supply".to_string(),
            TrackFault::Stuck => "stuck".to_string(),
            TrackFault::Offset { volts } => format!("offset {} V", signed(volts)),
            TrackFault::Gain { factor } => format!("gain {} %", trim(factor * 100.0)),
            TrackFault::Bridged { other } => format!("bridged {}", track_label(model, other)),
            TrackFault::Intermittent { open, every } => {
                format!("intermittent open {open} every {every}")
            }
        },
        Injection::Sensor { fault, .. } => match fault {
            SensorFault::GroundOffset { volts } => format!("ground offset {} V", signed(volts)),
            SensorFault::Supply { volts } => format!("supply {} V", trim(volts)),
        },
        Injection::Actuator { fault } => match fault {
            ActuatorFault::Stuck => "stuck".to_string(),
            ActuatorFault::Weak { factor } => format!("weak {} %", trim(factor * 100.0)),
            ActuatorFault::SpringBroken => "spring broken".to_string(),
        },
    };
    format!("{target} {what}")
}

/// Intermittent opens the catalogue tries, as (open, every) in milliseconds: a dropout
/// shorter than the usual 20 ms debounce, a half-duty chatter, and one long enough to set.
pub const INTERMITTENT_GRID: [(u64, u64); 2] = [(10, 100), (50, 100)];
/// `weak` factors the catalogue tries.
pub const WEAK_GRID: [f64; 3] = [0.25, 0.5, 0.75];

/// Offsets on a track, volts: small, moderate and gross, both ways. The prover adds the worst
/// value just inside each detection threshold, so the grid need not be fine.
pub const OFFSET_GRID: [f64; 6] = [-1.0, -0.5, -0.2, 0.2, 0.5, 1.0];

/// Gains on a track (1.0 is healthy).
pub const GAIN_GRID: [f64; 4] = [0.5, 0.8, 1.2, 1.5];

/// Sensor ground lifts, volts.
pub const GROUND_GRID: [f64; 3] = [0.2, 0.5, 1.0];

/// Sensor supply levels as fractions of the nominal supply.
pub const SUPPLY_GRID: [f64; 3] = [0.8, 0.9, 1.1];

/// The single-fault space of a policy, in a fixed order: sensor by sensor, each track's
/// faults (`open`, `short ground`, `short supply`, `stuck`, offsets -1.0 V .. +1.0 V in
/// 0.1 V steps without 0, gains 50 % .. 150 % in 10 % steps without 100 %, the
/// [`INTERMITTENT_GRID`], and a bridge to every later track of the same sensor: a bridge is
/// symmetric, so each pair appears once, on its first track), then the sensor's faults
/// (ground offsets +0.1 V .. +1.0 V, supplies 4.0 V .. 5.5 V in 0.1 V steps without the
/// nominal supply); last the actuator's (`stuck`, the [`WEAK_GRID`], `spring broken`).
/// Grid values are computed as integer multiples (`i / 10`) so they print exactly.
pub fn catalogue(model: &Model) -> Vec<Injection> {
    let mut out = Vec::new();
    for (s, sensor) in model.sensors.iter().enumerate() {
        let n = sensor.tracks.len();
        for t in 0..n {
            let track = TrackRef {
                sensor: s,
                track: t,
            };
            let mut push = |fault| out.push(Injection::Track { track, fault });
            push(TrackFault::Open);
            push(TrackFault::ShortGround);
            push(TrackFault::ShortSupply);
            push(TrackFault::Stuck);
            for volts in OFFSET_GRID {
                push(TrackFault::Offset { volts });
            }
            for factor in GAIN_GRID {
                push(TrackFault::Gain { factor });
            }
            for (open, every) in INTERMITTENT_GRID {
                push(TrackFault::Intermittent {
                    open: Time::from_ms(open),
                    every: Time::from_ms(every),
                });
            }
            for o in t + 1..n {
                push(TrackFault::Bridged {
                    other: TrackRef {
                        sensor: s,
                        track: o,
                    },
                });
            }
        }
        for volts in GROUND_GRID {
            let fault = SensorFault::GroundOffset { volts };
            out.push(Injection::Sensor { sensor: s, fault });
        }
        for ratio in SUPPLY_GRID {
            let volts = ratio * model.supply;
            if (volts - model.supply).abs() > 1e-9 {
                let fault = SensorFault::Supply { volts };
                out.push(Injection::Sensor { sensor: s, fault });
            }
        }
    }
    out.push(Injection::Actuator {
        fault: ActuatorFault::Stuck,
    });
    for factor in WEAK_GRID {
        out.push(Injection::Actuator {
            fault: ActuatorFault::Weak { factor },
        });
    }
    out.push(Injection::Actuator {
        fault: ActuatorFault::SpringBroken,
    });
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lang::Span;
    use crate::model::{Actuator, Combine, Sensor, Track};

    fn track(name: &str, v0: f64, v100: f64) -> Track {
        Track {
            name: name.into(),
            span: Span::default(),
            points: vec![(0.0, v0), (100.0, v100)],
        }
    }

    fn sensor(name: &str, a: (f64, f64), b: (f64, f64), combine: Combine) -> Sensor {
        Sensor {
            name: name.into(),
            span: Span::default(),
            tracks: vec![track("a", a.0, a.1), track("b", b.0, b.1)],
            filter: Time::from_ms(8),
            open_reads: 0.0,
            combine,
        }
    }

    /// The sensors and actuator of the reference policy (DESIGN.md), built by hand; the
    /// monitors and modes are not needed here.
    fn reference() -> Model {
        Model {
            name: "van_throttle".into(),
            name_span: Span::default(),
            period: Time::from_ms(5),
            supply: 5.0,
            sensors: vec![
                sensor("pedal", (0.8, 4.0), (0.4, 2.0), Combine::Min),
                sensor("throttle", (0.5, 4.5), (4.5, 0.5), Combine::Max),
            ],
            feedback: 1,
            driver: Some(0),
            inputs: vec![],
            switches: vec![],
            actuator: Actuator {
                span: Span::default(),
                default: 7.0,
                idle: 8.0,
                open_from: 0.0,
                open_to: 100.0,
                open_time: Time::from_ms(80),
                spring_from: 100.0,
                spring_to: 7.0,
                spring_time: Time::from_ms(150),
            },
            faults: vec![],
            modes: vec![],
            start: 0,
            start_span: Span::default(),
            transitions: vec![],
            assure: None,
        }
    }

    const A: TrackRef = TrackRef {
        sensor: 0,
        track: 0,
    };
    const B: TrackRef = TrackRef {
        sensor: 0,
        track: 1,
    };

    fn on(track: TrackRef, fault: TrackFault) -> ActiveFault {
        ActiveFault::new(Injection::Track { track, fault }, Time::from_ms(1000), 0.0)
    }

    fn pedal(fault: SensorFault) -> ActiveFault {
        ActiveFault::new(
            Injection::Sensor { sensor: 0, fault },
            Time::from_ms(1000),
            0.0,
        )
    }

    /// Pedal volts (a, b) at a true position with the given faults, at `now_ms`.
    fn volts_at(pct: f64, active: &[ActiveFault], now_ms: u64) -> (f64, f64) {
        let mut out = [f64::NAN; 2];
        sensor_volts(
            &reference(),
            0,
            pct,
            active,
            Time::from_ms(now_ms),
            &mut out,
        );
        (out[0], out[1])
    }

    fn close(got: (f64, f64), want: (f64, f64)) {
        let ok = (got.0 - want.0).abs() < 1e-9 && (got.1 - want.1).abs() < 1e-9;
        assert!(ok, "got {got:?}, want {want:?}");
    }

    // Hand-computed: track a = 0.8 + 0.032 V/% * pct, track b = 0.4 + 0.016 V/% * pct;
    // at 50 %: a = 2.4 V, b = 1.2 V.

    #[test]
    fn healthy_tracks_follow_their_characteristics() {
        close(volts_at(0.0, &[], 0), (0.8, 0.4));
        close(volts_at(50.0, &[], 0), (2.4, 1.2));
        close(volts_at(100.0, &[], 0), (4.0, 2.0));
    }

    #[test]
    fn each_track_fault_rewrites_its_track_only() {
        close(volts_at(50.0, &[on(A, TrackFault::Open)], 1001), (0.0, 1.2));
        close(
            volts_at(50.0, &[on(A, TrackFault::ShortGround)], 1001),
            (0.0, 1.2),
        );
        close(
            volts_at(50.0, &[on(B, TrackFault::ShortSupply)], 1001),
            (2.4, 5.0),
        );
        let stuck = ActiveFault {
            captured: 1.6,
            ..on(A, TrackFault::Stuck)
        };
        close(volts_at(50.0, &[stuck], 1001), (1.6, 1.2));
        close(
            volts_at(50.0, &[on(A, TrackFault::Offset { volts: 0.3 })], 1001),
            (2.7, 1.2),
        );
        close(
            volts_at(50.0, &[on(B, TrackFault::Offset { volts: -0.3 })], 1001),
            (2.4, 0.9),
        );
        close(
            volts_at(50.0, &[on(A, TrackFault::Gain { factor: 0.9 })], 1001),
            (2.16, 1.2),
        );
        // Bridged: both deliver (2.4 + 1.2) / 2.
        close(
            volts_at(50.0, &[on(A, TrackFault::Bridged { other: B })], 1001),
            (1.8, 1.8),
        );
    }

    #[test]
    fn intermittent_open_counts_from_the_break() {
        let f = on(
            A,
            TrackFault::Intermittent {
                open: Time::from_ms(10),
                every: Time::from_ms(100),
            },
        );
        // Broken at 1 s: open on [1.000, 1.010), [1.100, 1.110), ...
        close(volts_at(50.0, &[f], 1000), (0.0, 1.2));
        close(volts_at(50.0, &[f], 1009), (0.0, 1.2));
        close(volts_at(50.0, &[f], 1010), (2.4, 1.2));
        close(volts_at(50.0, &[f], 1050), (2.4, 1.2));
        close(volts_at(50.0, &[f], 1105), (0.0, 1.2));
        close(volts_at(50.0, &[f], 1110), (2.4, 1.2));
    }

    #[test]
    fn sensor_faults_act_on_every_track() {
        // Supply 4.6 V: ratiometric, 2.4 * 0.92 = 2.208, 1.2 * 0.92 = 1.104.
        close(
            volts_at(50.0, &[pedal(SensorFault::Supply { volts: 4.6 })], 1001),
            (2.208, 1.104),
        );
        close(
            volts_at(
                50.0,
                &[pedal(SensorFault::GroundOffset { volts: 0.2 })],
                1001,
            ),
            (2.6, 1.4),
        );
        // The other sensor is untouched.
        let mut out = [0.0; 2];
        let f = [pedal(SensorFault::GroundOffset { volts: 0.2 })];
        sensor_volts(&reference(), 1, 50.0, &f, Time::from_ms(1001), &mut out);
        close((out[0], out[1]), (2.5, 2.5));
    }

    #[test]
    fn double_faults_compose_in_the_documented_order() {
        let supply = pedal(SensorFault::Supply { volts: 4.6 });
        let ground = pedal(SensorFault::GroundOffset { volts: 0.2 });
        let offset = on(A, TrackFault::Offset { volts: 0.3 });
        let gain = on(A, TrackFault::Gain { factor: 0.9 });
        let open = on(A, TrackFault::Open);
        let bridge = on(A, TrackFault::Bridged { other: B });
        // Sensor first: supply scales, then ground adds: 2.4 * 0.92 + 0.2 = 2.408.
        close(volts_at(50.0, &[ground, supply], 1001), (2.408, 1.304));
        // Short to supply reads the faulted supply.
        close(
            volts_at(50.0, &[supply, on(B, TrackFault::ShortSupply)], 1001),
            (2.208, 4.6),
        );
        // Then track modifiers on top of the sensor: 2.208 + 0.3.
        close(volts_at(50.0, &[supply, offset], 1001), (2.508, 1.104));
        // Modifiers in break order: (2.4 * 0.9) + 0.3 against (2.4 + 0.3) * 0.9.
        close(volts_at(50.0, &[gain, offset], 1001), (2.46, 1.2));
        close(volts_at(50.0, &[offset, gain], 1001), (2.43, 1.2));
        // Replacements override modifiers whatever the order, and ignore the ground offset.
        close(volts_at(50.0, &[open, offset], 1001), (0.0, 1.2));
        close(volts_at(50.0, &[offset, open, ground], 1001), (0.0, 1.4));
        // The last replacement broken wins.
        let short = on(A, TrackFault::ShortGround);
        let high = on(A, TrackFault::ShortSupply);
        close(volts_at(50.0, &[short, high], 1001), (5.0, 1.2));
        close(volts_at(50.0, &[high, short], 1001), (0.0, 1.2));
        // Bridge last: mean of the otherwise faulted volts, (2.7 + 1.2) / 2 and
        // (2.6 + 1.4) / 2 with the ground lifted.
        close(volts_at(50.0, &[bridge, offset], 1001), (1.95, 1.95));
        close(volts_at(50.0, &[bridge, ground], 1001), (2.0, 2.0));
        close(volts_at(50.0, &[bridge, open], 1001), (0.6, 0.6));
    }

    #[test]
    fn capture_freezes_what_the_pin_saw() {
        let m = reference();
        let supply = pedal(SensorFault::Supply { volts: 4.6 });
        let stuck = Injection::Track {
            track: A,
            fault: TrackFault::Stuck,
        };
        // At 25 % under a 4.6 V supply track a delivers 1.6 * 0.92 = 1.472 V.
        let f = ActiveFault::capture(&m, stuck, Time::from_ms(500), &[25.0, 7.0], 7.0, &[supply]);
        assert!((f.captured - 1.472).abs() < 1e-9, "{f:?}");
        assert_eq!(f.since, Time::from_ms(500));
        // The supply mended, the pedal moved: the track still reads what it froze at.
        close(volts_at(80.0, &[f], 2000), (1.472, 1.68));
        let plate = Injection::Actuator {
            fault: ActuatorFault::Stuck,
        };
        let f = ActiveFault::capture(&m, plate, Time::from_ms(500), &[25.0, 7.0], 31.5, &[]);
        assert_eq!(f.captured, 31.5);
        // Unknown sensors do not panic.
        let odd = Injection::Track {
            track: TrackRef {
                sensor: 9,
                track: 0,
            },
            fault: TrackFault::Stuck,
        };
        assert_eq!(
            ActiveFault::capture(&m, odd, Time::ZERO, &[], 0.0, &[]).captured,
            0.0
        );
        let mut out = [7.0; 2];
        sensor_volts(&m, 9, 50.0, &[], Time::ZERO, &mut out);
        assert_eq!(out, [7.0; 2]);
        let mut short = [0.0; 1];
        sensor_volts(
            &m,
            0,
            50.0,
            &[on(A, TrackFault::Bridged { other: B })],
            Time::ZERO,
            &mut short,
        );
        assert!((short[0] - 2.4).abs() < 1e-9, "{short:?}");
    }

    #[test]
    fn actuator_condition_gathers_actuator_faults() {
        assert_eq!(
            actuator_condition(&[on(A, TrackFault::Open)]),
            ActuatorCondition::HEALTHY
        );
        let act =
            |fault, captured| ActiveFault::new(Injection::Actuator { fault }, Time::ZERO, captured);
        let c = actuator_condition(&[
            act(ActuatorFault::Weak { factor: 0.5 }, 0.0),
            act(ActuatorFault::Stuck, 23.0),
            act(ActuatorFault::SpringBroken, 0.0),
        ]);
        assert_eq!(
            c,
            ActuatorCondition {
                stuck_at: Some(23.0),
                torque_factor: 0.5,
                spring_broken: true
            }
        );
    }

    #[test]
    fn descriptions_are_scenario_text() {
        let m = reference();
        let t = |fault| describe(&m, &Injection::Track { track: A, fault });
        let s = |fault| describe(&m, &Injection::Sensor { sensor: 0, fault });
        let a = |fault| describe(&m, &Injection::Actuator { fault });
        assert_eq!(t(TrackFault::Open), "pedal.a open");
        assert_eq!(t(TrackFault::ShortGround), "pedal.a short ground");
        assert_eq!(t(TrackFault::ShortSupply), "pedal.a short supply");
        assert_eq!(t(TrackFault::Stuck), "pedal.a stuck");
        assert_eq!(
            t(TrackFault::Offset { volts: 0.3 }),
            "pedal.a offset +0.3 V"
        );
        assert_eq!(
            t(TrackFault::Offset { volts: -0.1 + -0.2 }),
            "pedal.a offset -0.3 V"
        );
        assert_eq!(t(TrackFault::Gain { factor: 0.9 }), "pedal.a gain 90 %");
        assert_eq!(
            t(TrackFault::Bridged { other: B }),
            "pedal.a bridged pedal.b"
        );
        let i = TrackFault::Intermittent {
            open: Time::from_ms(10),
            every: Time::from_ms(100),
        };
        assert_eq!(t(i), "pedal.a intermittent open 10 ms every 100 ms");
        assert_eq!(
            s(SensorFault::GroundOffset { volts: 0.2 }),
            "pedal ground offset +0.2 V"
        );
        assert_eq!(s(SensorFault::Supply { volts: 4.6 }), "pedal supply 4.6 V");
        assert_eq!(a(ActuatorFault::Stuck), "actuator stuck");
        assert_eq!(a(ActuatorFault::Weak { factor: 0.5 }), "actuator weak 50 %");
        assert_eq!(a(ActuatorFault::SpringBroken), "actuator spring broken");
        assert_eq!(
            describe_target(
                &m,
                &Injection::Sensor {
                    sensor: 1,
                    fault: SensorFault::Supply { volts: 4.0 }
                }
            ),
            "throttle"
        );
        let odd = Injection::Track {
            track: TrackRef {
                sensor: 4,
                track: 2,
            },
            fault: TrackFault::Open,
        };
        assert_eq!(describe(&m, &odd), "?.? open");
    }

    #[test]
    fn catalogue_covers_the_single_fault_space_once() {
        let m = reference();
        let all = catalogue(&m);
        // Per track 4 + 6 offsets + 4 gains + 2 intermittent, plus one bridge per pair;
        // per sensor 3 ground offsets + 3 supplies; 5 actuator faults.
        let per_sensor = 2 * 16 + 1 + 3 + 3;
        assert_eq!(all.len(), 2 * per_sensor + 5);
        let text: Vec<String> = all.iter().map(|i| describe(&m, i)).collect();
        let mut unique = text.clone();
        unique.sort();
        unique.dedup();
        assert_eq!(unique.len(), text.len(), "no fault twice");
        for want in [
            "pedal.a offset -1 V",
            "pedal.a offset +0.2 V",
            "pedal.b gain 150 %",
            "pedal.a bridged pedal.b",
            "throttle.b intermittent open 50 ms every 100 ms",
            "pedal ground offset +1 V",
            "throttle supply 5.5 V",
            "actuator weak 25 %",
        ] {
            assert!(text.iter().any(|t| t == want), "missing {want}");
        }
        for absent in [
            "pedal.b bridged pedal.a",
            "pedal.a offset +0 V",
            "pedal.a gain 100 %",
            "pedal supply 5 V",
        ] {
            assert!(!text.iter().any(|t| t == absent), "unexpected {absent}");
        }
        assert_eq!(text[0], "pedal.a open");
        assert_eq!(
            text.last().map(String::as_str),
            Some("actuator spring broken")
        );
        assert_eq!(catalogue(&m), all, "deterministic");
    }
}
