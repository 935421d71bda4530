//! The resolved policy model: names replaced by indices, units normalised (times in integer
//! nanoseconds, voltages in volts, positions in percent of travel, rates in percent per second),
//! defaults applied. Everything downstream of lowering works on this IR alone.

mod lower;

pub use lower::{load, lower, lower_ast, term_signals};

use crate::lang::Span;
use crate::time::Time;
use serde::Serialize;

/// Index of a sensor in [`Model::sensors`].
pub type SensorId = usize;
/// Index of a fault (monitor) in [`Model::faults`].
pub type FaultId = usize;
/// Index of a mode in [`Model::modes`].
pub type ModeId = usize;
/// Index of an analog input in [`Model::inputs`].
pub type InputId = usize;
/// Index of a switch in [`Model::switches`].
pub type SwitchId = usize;

/// One track of one sensor.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
pub struct TrackRef {
    pub sensor: SensorId,
    pub track: usize,
}

#[derive(Clone, Debug, Serialize)]
pub struct Model {
    pub name: String,
    pub name_span: Span,
    /// Controller task period.
    pub period: Time,
    /// Sensor reference voltage; a short to supply reads this.
    pub supply: f64,
    pub sensors: Vec<Sensor>,
    /// The sensor whose merged value is the plate position feedback (`throttle` unless the
    /// actuator names another with `feedback`).
    pub feedback: SensorId,
    /// The sensor the driver moves (the first sensor that is not the feedback); `driver` in
    /// `assure` is its true position.
    pub driver: Option<SensorId>,
    pub inputs: Vec<Input>,
    pub switches: Vec<Switch>,
    pub actuator: Actuator,
    pub faults: Vec<Fault>,
    pub modes: Vec<Mode>,
    pub start: ModeId,
    pub start_span: Span,
    /// In file order; `any` sources are kept as written (see [`Model::edges`] for the
    /// expansion the controller and the analysis use).
    pub transitions: Vec<Transition>,
    pub assure: Option<Assure>,
}

#[derive(Clone, Debug, Serialize)]
pub struct Sensor {
    pub name: String,
    pub span: Span,
    pub tracks: Vec<Track>,
    /// First-order low-pass time constant per track; zero means unfiltered.
    pub filter: Time,
    /// Voltage a broken signal wire floats to.
    pub open_reads: f64,
    pub combine: Combine,
}

#[derive(Clone, Debug, Serialize)]
pub struct Track {
    pub name: String,
    pub span: Span,
    /// Characteristic as (percent, volts) points, sorted by percent, at least two, strictly
    /// monotonic in volts. Linear between points, extrapolated beyond the ends.
    pub points: Vec<(f64, f64)>,
}

impl Track {
    /// Volts the track delivers at a true position (percent of travel).
    pub fn volts_at(&self, pct: f64) -> f64 {
        let (i, j) = self.segment_by(|p| p.0, pct);
        let (p0, v0) = self.points[i];
        let (p1, v1) = self.points[j];
        v0 + (pct - p0) * (v1 - v0) / (p1 - p0)
    }

    /// Percent of travel the controller reads from a voltage (the inverse characteristic).
    pub fn percent_at(&self, volts: f64) -> f64 {
        let (i, j) = self.segment_by(|p| p.1, volts);
        let (p0, v0) = self.points[i];
        let (p1, v1) = self.points[j];
        p0 + (volts - v0) * (p1 - p0) / (v1 - v0)
    }

    /// Rising (volts grow with position) or falling.
    pub fn rising(&self) -> bool {
        self.points[self.points.len() - 1].1 > self.points[0].1
    }

    /// Volts per percent over the whole characteristic.
    pub fn mean_slope(&self) -> f64 {
        let (p0, v0) = self.points[0];
        let (p1, v1) = self.points[self.points.len() - 1];
        (v1 - v0) / (p1 - p0)
    }

    /// Picks the segment (pair of adjacent point indices) that contains `x` along the chosen
    /// coordinate, or the end segment for extrapolation.
    fn segment_by(&self, key: impl Fn(&(f64, f64)) -> f64, x: f64) -> (usize, usize) {
        let n = self.points.len();
        match n {
            0 | 1 => return (0, 0),
            // The one segment, inside or extrapolated (what the search below gives).
            2 => return (0, 1),
            _ => {}
        }
        let increasing = key(&self.points[n - 1]) > key(&self.points[0]);
        for i in 0..n - 1 {
            let hi = key(&self.points[i + 1]);
            let inside = if increasing { x <= hi } else { x >= hi };
            if inside {
                return (i, i + 1);
            }
        }
        (n - 2, n - 1)
    }
}

/// How the tracks no set fault suspects merge into one value.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Combine {
    /// The lower reading; with every track suspected the value is 0 %.
    Min,
    /// The higher reading; with every track suspected the value is 100 %.
    Max,
}

#[derive(Clone, Debug, Serialize)]
pub struct Input {
    pub name: String,
    pub span: Span,
    /// Demand from another controller, clamped into this band (percent).
    pub lo: f64,
    pub hi: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Switch {
    pub name: String,
    pub span: Span,
}

#[derive(Clone, Debug, Serialize)]
pub struct Actuator {
    pub span: Span,
    /// Position the springs hold with the drive off (percent).
    pub default: f64,
    /// At or below this position the engine idles (percent).
    pub idle: f64,
    /// Full drive moves the plate from `open_from` to `open_to` in `open_time`.
    pub open_from: f64,
    pub open_to: f64,
    pub open_time: Time,
    /// The springs alone move the plate from `spring_from` to `spring_to` in `spring_time`.
    pub spring_from: f64,
    pub spring_to: f64,
    pub spring_time: Time,
}

/// A monitor: a condition over signals, debounced, that sets a fault.
#[derive(Clone, Debug, Serialize)]
pub struct Fault {
    pub name: String,
    pub span: Span,
    /// Tracks this fault casts doubt on while set; they leave the merged value.
    pub suspects: Vec<TrackRef>,
    pub condition: Expr,
    pub debounce: Debounce,
    pub healing: Healing,
    /// SAE J2012 trouble code, when given.
    pub code: Option<String>,
    /// True when the condition reads two or more tracks: a plausibility check, held while a
    /// fault that suspects one of those tracks alone is pending or set.
    pub plausibility: bool,
    /// The tracks the condition reads (through `X.a`, `X.a.volts` or the merged `X`).
    pub reads: Vec<TrackRef>,
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Debounce {
    /// The condition must hold on every controller step for this long before the fault sets.
    Time { set: Time },
    /// Counter debouncing: each step with the condition true adds `up`, each with it false
    /// subtracts `down`; the fault sets when the counter reaches `fail` and, unless latched,
    /// clears when it falls back to `pass`. The counter is clamped to `pass..=fail`.
    Counter {
        up: u32,
        down: u32,
        fail: u32,
        pass: u32,
    },
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Healing {
    /// Clears on the first step the condition is false (counter form: when the counter
    /// reaches its pass threshold).
    Immediate,
    /// Clears after the condition has been false for this long.
    After { time: Time },
    /// Stays set until the next key on.
    Latch,
}

#[derive(Clone, Debug, Serialize)]
pub struct Mode {
    pub name: String,
    pub span: Span,
    pub demand: Demand,
    /// Demand clamp (percent); 100 when not given.
    pub limit: f64,
    /// Demand slew limit (percent per second); `None` is unlimited.
    pub rate: Option<f64>,
    /// Faults this mode deliberately does not react to.
    pub tolerates: Vec<FaultId>,
}

impl Mode {
    /// A safe mode disables the H-bridge; the springs alone hold the plate.
    pub fn is_safe(&self) -> bool {
        matches!(self.demand, Demand::DriveOff)
    }
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Demand {
    /// The merged value of a sensor (the pedal).
    Sensor { sensor: SensorId },
    /// An analog input, clamped into its band.
    Input { input: InputId },
    /// A fixed position.
    Fixed { percent: f64 },
    /// H-bridge off: no torque.
    DriveOff,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(tag = "kind", content = "mode", rename_all = "lowercase")]
pub enum Source {
    Any,
    Mode(ModeId),
}

#[derive(Clone, Debug, Serialize)]
pub struct Transition {
    pub span: Span,
    pub from: Source,
    pub to: ModeId,
    pub guard: Expr,
    /// The whole guard must hold continuously for this long while in the source mode.
    pub dwell: Option<Time>,
}

/// One expanded transition: a concrete source mode (an `any` becomes one edge per mode other
/// than its target), in the order the controller tries them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct Edge {
    pub from: ModeId,
    pub to: ModeId,
    /// Index into [`Model::transitions`].
    pub transition: usize,
}

impl Model {
    /// Transitions out of `mode`, expanded and in file order (the order they are tried).
    pub fn edges_from(&self, mode: ModeId) -> Vec<Edge> {
        self.transitions
            .iter()
            .enumerate()
            .filter_map(|(i, t)| match t.from {
                Source::Mode(m) if m == mode => Some(Edge {
                    from: m,
                    to: t.to,
                    transition: i,
                }),
                Source::Any if t.to != mode => Some(Edge {
                    from: mode,
                    to: t.to,
                    transition: i,
                }),
                _ => None,
            })
            .collect()
    }

    /// Every expanded edge, grouped by source mode in mode order.
    pub fn edges(&self) -> Vec<Edge> {
        (0..self.modes.len())
            .flat_map(|m| self.edges_from(m))
            .collect()
    }

    pub fn track(&self, r: TrackRef) -> &Track {
        &self.sensors[r.sensor].tracks[r.track]
    }

    /// `pedal.a` style name of a track.
    pub fn track_name(&self, r: TrackRef) -> String {
        format!(
            "{}.{}",
            self.sensors[r.sensor].name, self.sensors[r.sensor].tracks[r.track].name
        )
    }

    pub fn mode_id(&self, name: &str) -> Option<ModeId> {
        self.modes.iter().position(|m| m.name == name)
    }

    pub fn fault_id(&self, name: &str) -> Option<FaultId> {
        self.faults.iter().position(|f| f.name == name)
    }

    pub fn sensor_id(&self, name: &str) -> Option<SensorId> {
        self.sensors.iter().position(|s| s.name == name)
    }

    /// Resolves `sensor.track`.
    pub fn track_ref(&self, sensor: &str, track: &str) -> Option<TrackRef> {
        let s = self.sensor_id(sensor)?;
        let t = self.sensors[s]
            .tracks
            .iter()
            .position(|t| t.name == track)?;
        Some(TrackRef {
            sensor: s,
            track: t,
        })
    }
}

/// A signal a condition or guard can read.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Signal {
    /// A track in percent, after its characteristic and filter.
    Track { track: TrackRef },
    /// A track's filtered volts.
    TrackVolts { track: TrackRef },
    /// The merged value of the tracks no set fault suspects.
    Merged { sensor: SensorId },
    /// An analog input, clamped into its band.
    Input { input: InputId },
    /// The position the controller commands this step (the previous step's, when read by a
    /// monitor: monitors run before the demand is computed).
    Target,
}

/// A numeric term: a signal, the difference of two, or its absolute value.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Term {
    Signal { signal: Signal },
    Diff { a: Signal, b: Signal },
    AbsDiff { a: Signal, b: Signal },
}

/// A comparison of a term against a threshold, in the unit of the term (percent or volts).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Compare {
    Above { x: f64 },
    Below { x: f64 },
    Outside { lo: f64, hi: f64 },
    Inside { lo: f64, hi: f64 },
}

impl Compare {
    pub fn holds(&self, v: f64) -> bool {
        match *self {
            Compare::Above { x } => v > x,
            Compare::Below { x } => v < x,
            Compare::Outside { lo, hi } => v < lo || v > hi,
            Compare::Inside { lo, hi } => v >= lo && v <= hi,
        }
    }
}

/// A boolean expression: a fault condition or a transition guard.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Expr {
    True,
    /// A fault is set (guards only).
    Fault {
        fault: FaultId,
        span: Span,
    },
    /// Some set fault suspects this track (guards only).
    Suspect {
        track: TrackRef,
        span: Span,
    },
    /// A switch is on.
    Switch {
        switch: SwitchId,
        span: Span,
    },
    Compare {
        term: Term,
        cmp: Compare,
        span: Span,
    },
    Not {
        e: Box<Expr>,
    },
    And {
        es: Vec<Expr>,
    },
    Or {
        es: Vec<Expr>,
    },
}

impl Expr {
    /// Calls `f` on every leaf (atom) of the expression, left to right.
    pub fn for_each_atom<'a>(&'a self, f: &mut impl FnMut(&'a Expr)) {
        match self {
            Expr::Not { e } => e.for_each_atom(f),
            Expr::And { es } | Expr::Or { es } => es.iter().for_each(|e| e.for_each_atom(f)),
            Expr::True => {}
            atom => f(atom),
        }
    }

    /// Evaluates with a caller-supplied valuation of atoms.
    pub fn eval(&self, atom: &mut impl FnMut(&Expr) -> bool) -> bool {
        match self {
            Expr::True => true,
            Expr::Not { e } => !e.eval(atom),
            Expr::And { es } => es.iter().all(|e| e.eval(atom)),
            Expr::Or { es } => es.iter().any(|e| e.eval(atom)),
            a => atom(a),
        }
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Assure {
    pub span: Span,
    pub faults: FaultScope,
    pub requirements: Vec<Requirement>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum FaultScope {
    Single,
    Double,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Requirement {
    /// Opening above the fault-free opening by more than `limit` ends within `within` (the FTTI).
    Excess {
        limit: f64,
        within: Time,
        span: Span,
    },
    /// The opening never exceeds `above`, unless the driver's pedal exceeds `unless_driver`.
    Never {
        above: f64,
        unless_driver: Option<f64>,
        span: Span,
    },
    /// After the driver's pedal goes to 0 %, the opening is at or below `idle` within this time.
    IdleAfterRelease { within: Time, span: Span },
}
