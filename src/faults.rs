//! The fault catalogue: what a script can `break` and `mend`, and what `faults single` and
//! `faults double` enumerate, and how each fault rewrites the voltages a track delivers or
//! the behaviour of the actuator.

use crate::model::{SensorId, TrackRef};
use crate::time::Time;
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
