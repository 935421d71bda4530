//! One controller step: a pure function of (model, state, sampled inputs) -> (state, outputs).
//! The simulator and the prover both call it; there is one semantics. It owns the track filters,
//! the fault debounce, the mode transitions, the demand shaping and the position loop.
//!
//! # The step, in order (DESIGN.md, "Meanings")
//! 1. **Filter.** Every track's raw volts pass a first-order low-pass discretised exactly:
//!    `y += alpha * (v - y)` with `alpha = 1 - exp(-T/tau)` (T the period, tau the sensor's
//!    `filter`; tau 0 means `alpha = 1`, no filter). A missing or non-finite sample reads the
//!    sensor's `open reads` level, as a broken wire would. `X.a` is the track's characteristic
//!    applied to the filtered volts.
//! 2. **Monitors.** Every fault condition is evaluated on this step's filtered values, with the
//!    merged values, `Fault`/`Suspect` atoms and `target` as they stood before this step (the
//!    faults of the previous step, the previous step's target). Then the debounces advance:
//!    first every fault that is not a plausibility check, then the plausibility checks, each
//!    held (frozen) when a fault that suspects exactly one of the tracks it reads is pending or
//!    set as the faults now stand.
//! 3. **Transition.** At most one: the edges out of the current mode in file order, guards read
//!    the faults as they now stand and the merged values recomputed with them; a guard with a
//!    dwell must have held on `ceil(dwell / T)` consecutive steps in the source mode.
//! 4. **Demand and drive** for the mode now active: the sensor's merged value, the input
//!    clamped into its band, or the fixed value; clamped to `0 ..= limit`; an opening demand
//!    slewed by `rate` per second (a closing one followed at once, so release is never
//!    delayed). Then the PI loop ([`loop_gains`]) on `target - merged feedback`, duty clamped to
//!    -100..=100 % with clamping anti-windup. `drive off`: `drive_on` false, duty 0, the
//!    integrator emptied, and the target set to the actuator default (where the springs hold
//!    the plate), which is also where a later rate-limited mode starts from.
//!
//! Monitors and guards that read `target` see the previous step's. Events of a step come in
//! the order they happen: plain faults in file order, then plausibility checks in file order,
//! then the transition. A fault whose debounce starts and qualifies on one step reports
//! `FaultPending` then `FaultSet`.
//!
//! # Rounding of times to steps
//! A time `D` (debounce, heal, dwell) becomes `N = max(1, ceil(D / T))` steps: a `for 20 ms`
//! monitor at a 5 ms period sets on the 4th consecutive step its condition holds, a `heal 200 ms`
//! one clears on the 40th consecutive step its condition is false.
//!
//! # Counter debouncing
//! Per the AUTOSAR diagnostic event manager's counter-based debouncing (from memory,
//! FACTS.md): a step with the condition true is a pre-failed report (adds `up`), false a
//! pre-passed report (subtracts `down`); the counter starts at `pass` at key on and is clamped
//! to `pass..=fail`; reaching `fail` sets the fault, falling back to `pass` clears it (unless
//! latched; with `heal T` it also needs the condition false for T). No jump-down or jump-up is
//! implemented: the IR carries no jump values. A counter fault is pending while it is not set
//! and its counter is above `pass` (its debounce is running, in either direction); a time fault
//! is pending while it is not set and its condition holds.

mod cond;
#[cfg(test)]
pub(crate) mod fixture;
#[cfg(test)]
mod tests;

use crate::model::{
    Combine, Compare, Debounce, Demand, Edge, FaultId, Healing, ModeId, Model, TrackRef,
};
use crate::time::Time;
use cond::{Cond, Num, Sig};

/// What the controller's input pins see at one sample instant.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Sample {
    /// `[sensor][track]` raw volts as the wiring delivers them. A missing entry reads the
    /// sensor's `open reads` level.
    pub volts: Vec<Vec<f64>>,
    /// Per analog input, percent, unclamped (the controller clamps into the band). Missing: 0 %.
    pub inputs: Vec<f64>,
    /// Per switch, on or off. Missing: off.
    pub switches: Vec<bool>,
}

impl Sample {
    /// Intact wiring: every track delivers its characteristic at the true position given per
    /// sensor (missing positions read 0 %); inputs at 0 %, switches off.
    pub fn healthy(model: &Model, positions: &[f64]) -> Sample {
        let volts = model
            .sensors
            .iter()
            .enumerate()
            .map(|(s, sensor)| {
                let p = positions.get(s).copied().unwrap_or(0.0);
                sensor.tracks.iter().map(|t| t.volts_at(p)).collect()
            })
            .collect();
        Sample {
            volts,
            inputs: vec![0.0; model.inputs.len()],
            switches: vec![false; model.switches.len()],
        }
    }
}

/// Debounce state of one fault.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
struct FaultState {
    set: bool,
    /// Not set, debounce running.
    pending: bool,
    /// Time form: consecutive steps with the condition true (while not set). Counter form: the
    /// counter (frozen once latched).
    count: u32,
    /// Consecutive steps with the condition false while set (heal timer).
    heal: u32,
}

/// Everything the controller remembers between steps. Plain data: clone it, compare it,
/// encode it for a visited set.
#[derive(Debug, PartialEq)]
pub struct State {
    mode: ModeId,
    /// Filtered volts, every track of every sensor in model order, flattened.
    volts: Vec<f64>,
    /// The target commanded on the last step (at key on: the actuator default).
    target: f64,
    /// PI integrator, percent duty.
    integral: f64,
    faults: Vec<FaultState>,
    /// Per transition (index into `Model::transitions`): consecutive steps its guard has held
    /// in the current mode. Only the edges out of the current mode count; all reset on a
    /// mode change.
    dwell: Vec<u32>,
}

impl Clone for State {
    fn clone(&self) -> State {
        State {
            mode: self.mode,
            volts: self.volts.clone(),
            target: self.target,
            integral: self.integral,
            faults: self.faults.clone(),
            dwell: self.dwell.clone(),
        }
    }

    /// Reuses the buffers: the prover copies a state into scratch for every successor it
    /// tries, and keeps few of them.
    fn clone_from(&mut self, source: &State) {
        self.mode = source.mode;
        self.volts.clone_from(&source.volts);
        self.target = source.target;
        self.integral = source.integral;
        self.faults.clone_from(&source.faults);
        self.dwell.clone_from(&source.dwell);
    }
}

impl State {
    /// Asks the processor to fetch the state's buffers ahead of a step (a hint only).
    pub fn prefetch(&self) {
        crate::hint::prefetch_slice(&self.volts);
        crate::hint::prefetch_slice(&self.faults);
        crate::hint::prefetch_slice(&self.dwell);
    }

    /// Key on: filters settled on the first sample, no fault pending or set, the start mode,
    /// every timer at zero, the target at the actuator default (where the springs hold the
    /// plate), the integrator empty.
    pub fn power_up(model: &Model, first: &Sample) -> State {
        let mut volts = Vec::with_capacity(model.sensors.iter().map(|s| s.tracks.len()).sum());
        for (s, sensor) in model.sensors.iter().enumerate() {
            for t in 0..sensor.tracks.len() {
                volts.push(raw_volts(first, s, t, sensor.open_reads));
            }
        }
        State {
            mode: model.start,
            volts,
            target: model.actuator.default,
            integral: 0.0,
            faults: vec![FaultState::default(); model.faults.len()],
            dwell: vec![0; model.transitions.len()],
        }
        .with_counters_at_pass(model)
    }

    /// Counter debounces start at their pass threshold.
    fn with_counters_at_pass(mut self, model: &Model) -> State {
        for (fs, f) in self.faults.iter_mut().zip(&model.faults) {
            if let Debounce::Counter { fail, pass, .. } = f.debounce {
                fs.count = pass.min(fail);
            }
        }
        self
    }

    /// The active mode.
    pub fn mode(&self) -> ModeId {
        self.mode
    }

    pub fn fault_set(&self, f: FaultId) -> bool {
        self.faults.get(f).is_some_and(|s| s.set)
    }

    /// Not set, debounce running.
    pub fn fault_pending(&self, f: FaultId) -> bool {
        self.faults.get(f).is_some_and(|s| s.pending)
    }

    /// Some set fault suspects the track.
    pub fn suspected(&self, model: &Model, t: TrackRef) -> bool {
        model
            .faults
            .iter()
            .zip(&self.faults)
            .any(|(f, s)| s.set && f.suspects.contains(&t))
    }

    /// The track's filtered volts.
    pub fn filtered_volts(&self, model: &Model, t: TrackRef) -> Option<f64> {
        let base: usize = model
            .sensors
            .iter()
            .take(t.sensor)
            .map(|s| s.tracks.len())
            .sum();
        if t.track >= model.sensors.get(t.sensor)?.tracks.len() {
            return None;
        }
        self.volts.get(base + t.track).copied()
    }

    /// The target commanded on the last step (percent).
    pub fn target(&self) -> f64 {
        self.target
    }

    /// The position loop's integrator (percent duty).
    pub fn integral(&self) -> f64 {
        self.integral
    }

    /// Compact encoding for a visited set: appends to `out`. The discrete parts (mode, fault
    /// flags, debounce and heal counters, dwell counters) are exact; the target and integrator
    /// are quantised to `quantum` percent, each track's filtered volts to `quantum` times the
    /// track's mean slope (volts per percent), so one quantum means the same travel on every
    /// track. A `quantum` that is not positive and finite encodes the continuous parts exactly.
    pub fn encode(&self, model: &Model, quantum: f64, out: &mut Vec<u8>) {
        self.encode_where(model, quantum, None, out);
    }

    /// The one encoding: every part, or only those `rel` marks (the mode always).
    fn encode_where(
        &self,
        model: &Model,
        quantum: f64,
        rel: Option<&Relevance>,
        out: &mut Vec<u8>,
    ) {
        let keep = |marks: fn(&Relevance) -> &[bool], i: usize| {
            rel.is_none_or(|r| marks(r).get(i).copied().unwrap_or(false))
        };
        put_varint(out, self.mode as u64);
        for (i, f) in self.faults.iter().enumerate() {
            if keep(|r| &r.faults, i) {
                out.push(u8::from(f.set) | (u8::from(f.pending) << 1));
                put_varint(out, u64::from(f.count));
                put_varint(out, u64::from(f.heal));
            }
        }
        for (i, &d) in self.dwell.iter().enumerate() {
            if keep(|r| &r.transitions, i) {
                put_varint(out, u64::from(d));
            }
        }
        let slopes = model
            .sensors
            .iter()
            .flat_map(|s| s.tracks.iter().map(|t| t.mean_slope()));
        for (i, (&v, slope)) in self.volts.iter().zip(slopes).enumerate() {
            if keep(|r| &r.tracks, i) {
                put_quantised(out, v, quantum * slope.abs());
            }
        }
        if rel.is_none_or(|r| r.target) {
            put_quantised(out, self.target, quantum);
        }
        if rel.is_none_or(|r| r.integral) {
            put_quantised(out, self.integral, quantum);
        }
    }
}

/// Which parts of a controller's memory can still influence the plate or a mode change (see
/// `prove::cone`); the rest may be left out of a visited-set key.
#[derive(Clone, Debug, Default, PartialEq, Eq, Hash)]
pub struct Relevance {
    /// Per flattened track (model order): its filter state.
    pub tracks: Vec<bool>,
    /// Per fault: its debounce and heal state.
    pub faults: Vec<bool>,
    /// Per transition: its dwell counter.
    pub transitions: Vec<bool>,
    pub target: bool,
    pub integral: bool,
}

impl State {
    /// As [`State::encode`], with only the parts `rel` marks (the mode always).
    pub fn encode_relevant(&self, model: &Model, quantum: f64, rel: &Relevance, out: &mut Vec<u8>) {
        self.encode_where(model, quantum, Some(rel), out);
    }

    /// Whether fault `f` is set and stays set until the next key on.
    pub fn latched(&self, model: &Model, f: FaultId) -> bool {
        self.fault_set(f) && matches!(model.faults[f].healing, crate::model::Healing::Latch)
    }

    /// Bit-exact equality of the parts `rel` marks (the mode always): a state whose marked
    /// parts a step leaves unchanged is a fixed point of them.
    pub fn same_relevant(&self, other: &State, rel: &Relevance) -> bool {
        let on = |v: &[bool], i: usize| v.get(i).copied().unwrap_or(true);
        self.mode == other.mode
            && self
                .faults
                .iter()
                .zip(&other.faults)
                .enumerate()
                .all(|(i, (a, b))| !on(&rel.faults, i) || a == b)
            && self
                .dwell
                .iter()
                .zip(&other.dwell)
                .enumerate()
                .all(|(i, (a, b))| !on(&rel.transitions, i) || a == b)
            && self
                .volts
                .iter()
                .zip(&other.volts)
                .enumerate()
                .all(|(i, (a, b))| !on(&rel.tracks, i) || a.to_bits() == b.to_bits())
            && (!rel.target || self.target.to_bits() == other.target.to_bits())
            && (!rel.integral || self.integral.to_bits() == other.integral.to_bits())
    }
}

fn put_varint(out: &mut Vec<u8>, mut x: u64) {
    while x >= 0x80 {
        out.push((x as u8) | 0x80);
        x >>= 7;
    }
    out.push(x as u8);
}

/// `x.round() as i64`: to the nearest integer, halves away from zero, saturating at the
/// type's ends, NaN to 0; without the library call a baseline x86-64 build makes for
/// `round` (it lies on the prover's hottest path, the visited-set key).
#[inline]
pub fn round_i64(x: f64) -> i64 {
    // Truncation is exact, and so is the fraction left (|x| < 2^52; above that x is whole
    // and the fraction 0, or the cast saturated and the step saturates too).
    let t = x as i64;
    let frac = x - t as f64;
    // Without branches: the fraction is as likely above a half as below.
    t.saturating_add(i64::from(frac >= 0.5) - i64::from(frac <= -0.5))
}

fn put_quantised(out: &mut Vec<u8>, v: f64, q: f64) {
    if q.is_finite() && q > 0.0 {
        // Saturating float-to-int rounding; zigzag so small negatives stay short.
        let n = round_i64(v / q);
        put_varint(out, ((n << 1) ^ (n >> 63)) as u64);
    } else {
        out.extend_from_slice(&v.to_bits().to_le_bytes());
    }
}

/// Something that happened on one step, in the order it happened.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Event {
    /// A fault's debounce started (a time fault's condition began to hold, a counter left pass).
    FaultPending {
        fault: FaultId,
    },
    /// A pending debounce ran out without the fault setting (the condition went away, or the
    /// counter fell back to its passed threshold).
    FaultLapsed {
        fault: FaultId,
    },
    FaultSet {
        fault: FaultId,
    },
    FaultCleared {
        fault: FaultId,
    },
    Transition {
        from: ModeId,
        to: ModeId,
        transition: usize,
    },
}

/// What one step produces. Reused by [`Controller::step_in_place`]: after the first step no
/// buffer grows, so stepping allocates nothing.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Outputs {
    /// The position commanded this step (percent).
    pub target: f64,
    /// H-bridge duty, -100..=100 percent (positive opens).
    pub duty: f64,
    /// False in a `drive off` mode: no torque, the springs act alone.
    pub drive_on: bool,
    /// Per sensor: the merged value with the faults as they stand after this step (percent).
    pub merged: Vec<f64>,
    /// `[sensor][track]`: filtered percent.
    pub tracks: Vec<Vec<f64>>,
    pub events: Vec<Event>,
    /// Scratch: each fault's condition this step.
    conds: Vec<bool>,
    /// Scratch: each plausibility fault held this step.
    holds: Vec<bool>,
    /// Scratch: filtered percent per flattened track (as `tracks`, for compiled conditions).
    percent: Vec<f64>,
    /// Scratch: bit `f` for each set fault `f`, as of the last merge (models of up to 64
    /// faults; see `Controller::masks`).
    set_bits: u64,
}

/// Gains of the PI position loop.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LoopGains {
    /// Percent duty per percent of position error.
    pub kp: f64,
    /// Percent duty per percent of error per second.
    pub ki: f64,
}

/// Derives the position loop gains from the actuator figures and the period.
///
/// The figure "full drive moves the plate over `span` in `open_time`" gives the plate speed at
/// full duty, `span / open_time`; read as an integrating plant, its gain is
/// `g = span / (100 * open_time)` (percent per second per percent duty). The loop crosses over
/// at `wc = min(3 / open_time, 0.2 / T)`: fast enough that a pedal step's error decays well
/// inside a typical 250 ms tracking monitor, slow enough to leave phase for the plate's inertia
/// and for the one-period sampling delay (`wc * T <= 0.2`). Then `kp = wc / g`, and the
/// integral time is `Ti = max(open_time, 3 / wc)`, so the integrator (which carries the duty
/// that holds the plate against its springs) settles within a few open times. Common
/// practice, no source; checked in the tests against a plate model with inertia, viscous
/// damping and springs fitted to the same figures. For the reference van (80 ms over 100 %,
/// 5 ms period): kp = 3, ki = 37.5 per second.
pub fn loop_gains(model: &Model) -> LoopGains {
    let a = &model.actuator;
    let period = model.period.as_secs_f64().max(1e-6);
    let open_time = match a.open_time.as_secs_f64() {
        t if t > 0.0 => t,
        _ => 10.0 * period,
    };
    let span = match (a.open_to - a.open_from).abs() {
        s if s > 0.0 && s.is_finite() => s,
        _ => 100.0,
    };
    let g = span / (100.0 * open_time);
    let wc = (3.0 / open_time).min(0.2 / period);
    let kp = wc / g;
    let ti = open_time.max(3.0 / wc);
    LoopGains { kp, ki: kp / ti }
}

/// How one fault debounces, in steps.
#[derive(Clone, Copy, Debug)]
enum Rule {
    Time {
        need: u32,
    },
    Counter {
        up: u32,
        down: u32,
        lo: u32,
        hi: u32,
    },
}

#[derive(Clone, Debug)]
struct FaultPlan {
    rule: Rule,
    /// Consecutive false steps that clear a set fault; `None` when latched.
    heal: Option<u32>,
    /// Faults whose pending or set state holds this plausibility check.
    holders: Vec<FaultId>,
}

/// A model prepared for stepping: filter coefficients, times in steps, the expanded edges per
/// mode and the loop gains are worked out once. Stepping is a pure function of
/// `(&self, &State, &Sample)`.
#[derive(Clone, Debug)]
pub struct Controller {
    model: Model,
    period: f64,
    /// Start of each sensor's tracks in the flattened track arrays.
    base: Vec<usize>,
    alpha: Vec<f64>,
    /// Per flattened track: the faults that suspect it.
    suspecters: Vec<Vec<FaultId>>,
    /// Per flattened track, the same as a bit mask, when the model has at most 64 faults.
    masks: Option<Vec<u64>>,
    /// Per fault, its condition compiled; per transition, its guard.
    conds: Vec<Cond>,
    guards: Vec<Cond>,
    plans: Vec<FaultPlan>,
    plain: Vec<FaultId>,
    plausible: Vec<FaultId>,
    edges: Vec<Vec<Edge>>,
    /// Per transition: steps its guard must hold.
    dwell_need: Vec<u32>,
    gains: LoopGains,
}

/// `max(1, ceil(d / period))`, saturating.
pub fn steps_for(d: Time, period: Time) -> u32 {
    let n = d.0.div_ceil(period.0.max(1)).max(1);
    u32::try_from(n).unwrap_or(u32::MAX)
}

/// Exact discretisation of a first-order low-pass over one period: `1 - exp(-T/tau)`.
pub fn filter_alpha(period: Time, tau: Time) -> f64 {
    if tau.0 == 0 {
        1.0
    } else {
        1.0 - (-(period.0 as f64) / tau.0 as f64).exp()
    }
}

fn raw_volts(sample: &Sample, s: usize, t: usize, open: f64) -> f64 {
    sample
        .volts
        .get(s)
        .and_then(|r| r.get(t))
        .copied()
        .filter(|v| v.is_finite())
        .unwrap_or(open)
}

/// `v` into `lo..=hi` without panicking on odd bounds (NaN `v` gives `lo`).
fn clamp(v: f64, lo: f64, hi: f64) -> f64 {
    v.max(lo).min(hi)
}

impl Controller {
    pub fn new(model: &Model) -> Controller {
        Controller::with_gains(model, loop_gains(model))
    }

    /// As [`Controller::new`] with loop gains of the caller's choosing.
    pub fn with_gains(model: &Model, gains: LoopGains) -> Controller {
        Controller::build(model, gains, true)
    }

    /// A controller that reads suspicion from the fault lists, with no bit masks and no
    /// condition folded onto them, whatever the model's size (a reference for the tests).
    #[cfg(test)]
    pub(crate) fn with_lists(model: &Model) -> Controller {
        Controller::build(model, loop_gains(model), false)
    }

    fn build(model: &Model, gains: LoopGains, use_masks: bool) -> Controller {
        let mut base = Vec::with_capacity(model.sensors.len());
        let mut alpha = Vec::new();
        for s in &model.sensors {
            base.push(alpha.len());
            let a = filter_alpha(model.period, s.filter);
            alpha.extend(std::iter::repeat_n(a, s.tracks.len()));
        }
        let index = |t: TrackRef| -> Option<usize> {
            let b = *base.get(t.sensor)?;
            (t.track < model.sensors[t.sensor].tracks.len()).then_some(b + t.track)
        };
        let mut suspecters = vec![Vec::new(); alpha.len()];
        for (f, fault) in model.faults.iter().enumerate() {
            for &t in &fault.suspects {
                if let Some(i) = index(t)
                    && !suspecters[i].contains(&f)
                {
                    suspecters[i].push(f);
                }
            }
        }
        let plans = model
            .faults
            .iter()
            .enumerate()
            .map(|(f, fault)| {
                let rule = match fault.debounce {
                    Debounce::Time { set } => Rule::Time {
                        need: steps_for(set, model.period),
                    },
                    Debounce::Counter {
                        up,
                        down,
                        fail,
                        pass,
                    } => Rule::Counter {
                        up,
                        down,
                        lo: pass.min(fail),
                        hi: pass.max(fail),
                    },
                };
                let heal = match fault.healing {
                    Healing::Immediate => Some(1),
                    Healing::After { time } => Some(steps_for(time, model.period)),
                    Healing::Latch => None,
                };
                let holders = if fault.plausibility {
                    model
                        .faults
                        .iter()
                        .enumerate()
                        .filter(|&(g, other)| {
                            g != f
                                && other.suspects.len() == 1
                                && fault.reads.contains(&other.suspects[0])
                        })
                        .map(|(g, _)| g)
                        .collect()
                } else {
                    Vec::new()
                };
                FaultPlan {
                    rule,
                    heal,
                    holders,
                }
            })
            .collect();
        let (plausible, plain) =
            (0..model.faults.len()).partition(|&f| model.faults[f].plausibility);
        let masks: Option<Vec<u64>> = (use_masks && model.faults.len() <= 64).then(|| {
            suspecters
                .iter()
                .map(|fs| fs.iter().fold(0u64, |m, &f| m | 1 << f))
                .collect()
        });
        let fold = |c: Cond| match &masks {
            Some(m) => c.fold_masks(m),
            None => c,
        };
        let conds = model
            .faults
            .iter()
            .map(|f| fold(Cond::compile(&f.condition, model, &index)))
            .collect();
        let guards = model
            .transitions
            .iter()
            .map(|t| fold(Cond::compile(&t.guard, model, &index)))
            .collect();
        Controller {
            model: model.clone(),
            period: model.period.as_secs_f64(),
            base,
            alpha,
            suspecters,
            masks,
            conds,
            guards,
            plans,
            plain,
            plausible,
            edges: (0..model.modes.len())
                .map(|m| model.edges_from(m))
                .collect(),
            dwell_need: model
                .transitions
                .iter()
                .map(|t| t.dwell.map_or(1, |d| steps_for(d, model.period)))
                .collect(),
            gains,
        }
    }

    pub fn model(&self) -> &Model {
        &self.model
    }

    pub fn gains(&self) -> LoopGains {
        self.gains
    }

    /// Key on (see [`State::power_up`]).
    pub fn power_up(&self, first: &Sample) -> State {
        State::power_up(&self.model, first)
    }

    /// The pure form: a new state and fresh outputs; `state` is untouched.
    pub fn step(&self, state: &State, sample: &Sample) -> (State, Outputs) {
        let mut next = state.clone();
        let mut out = Outputs::default();
        self.step_in_place(&mut next, sample, &mut out);
        (next, out)
    }

    /// The same step, updating `state` and overwriting `out`, reusing their buffers.
    pub fn step_in_place(&self, st: &mut State, sample: &Sample, out: &mut Outputs) {
        self.shape(st, out);
        out.events.clear();
        let model = &self.model;

        // 1. Sample and filter.
        for (s, sensor) in model.sensors.iter().enumerate() {
            for (t, track) in sensor.tracks.iter().enumerate() {
                let i = self.base[s] + t;
                let y = &mut st.volts[i];
                *y += self.alpha[i] * (raw_volts(sample, s, t, sensor.open_reads) - *y);
                let pct = track.percent_at(*y);
                out.tracks[s][t] = pct;
                out.percent[i] = pct;
            }
        }

        // 2. Monitors: conditions on the faults as they stood, then the debounces.
        self.merge(st, out);
        for f in 0..model.faults.len() {
            // Most conditions are one comparison: read here, without a call.
            let c = match &self.conds[f] {
                Cond::Cmp(n, cmp) => self.compare(*n, *cmp, st, sample, out),
                c => self.eval(c, st, sample, out),
            };
            out.conds[f] = c;
        }
        for &f in &self.plain {
            self.advance(f, out.conds[f], &mut st.faults[f], &mut out.events);
        }
        for &f in &self.plausible {
            out.holds[f] = self.plans[f].holders.iter().any(|&g| {
                let h = st.faults[g];
                h.pending || h.set
            });
        }
        for &f in &self.plausible {
            if !out.holds[f] {
                self.advance(f, out.conds[f], &mut st.faults[f], &mut out.events);
            }
        }
        // The merge again only if some fault set or cleared: otherwise it would give the same.
        if self.masks.is_none() || set_word(st) != out.set_bits {
            self.merge(st, out);
        }

        // 3. At most one transition.
        if let Some(edges) = self.edges.get(st.mode) {
            for e in edges {
                let held = self.eval(&self.guards[e.transition], st, sample, out);
                let d = &mut st.dwell[e.transition];
                *d = if held { d.saturating_add(1) } else { 0 };
                if *d >= self.dwell_need[e.transition] {
                    st.dwell.iter_mut().for_each(|d| *d = 0);
                    out.events.push(Event::Transition {
                        from: st.mode,
                        to: e.to,
                        transition: e.transition,
                    });
                    st.mode = e.to;
                    break;
                }
            }
        }

        // 4. Demand and drive.
        self.drive(st, sample, out);
    }

    /// Sizes the buffers of a state or outputs made for another model shape (a no-op, with no
    /// allocation, once they fit).
    #[inline]
    fn shape(&self, st: &mut State, out: &mut Outputs) {
        let m = &self.model;
        let fits = st.volts.len() == self.alpha.len()
            && st.faults.len() == m.faults.len()
            && st.dwell.len() == m.transitions.len()
            && out.merged.len() == m.sensors.len()
            && out.tracks.len() == m.sensors.len()
            && out
                .tracks
                .iter()
                .zip(&m.sensors)
                .all(|(row, s)| row.len() == s.tracks.len())
            && out.conds.len() == m.faults.len()
            && out.holds.len() == m.faults.len()
            && out.percent.len() == self.alpha.len();
        if !fits {
            self.reshape(st, out);
        }
    }

    /// [`Controller::shape`]'s work, when something does not fit.
    #[cold]
    fn reshape(&self, st: &mut State, out: &mut Outputs) {
        let m = &self.model;
        st.volts.resize(self.alpha.len(), 0.0);
        st.faults.resize(m.faults.len(), FaultState::default());
        st.dwell.resize(m.transitions.len(), 0);
        out.merged.resize(m.sensors.len(), 0.0);
        out.tracks.resize_with(m.sensors.len(), Vec::new);
        for (row, s) in out.tracks.iter_mut().zip(&m.sensors) {
            row.resize(s.tracks.len(), 0.0);
        }
        out.conds.resize(m.faults.len(), false);
        out.holds.resize(m.faults.len(), false);
        out.percent.resize(self.alpha.len(), 0.0);
    }

    /// Whether a set fault suspects flat track `i`, with the faults as of the last merge.
    fn suspected_at(&self, st: &State, out: &Outputs, i: usize) -> bool {
        match &self.masks {
            Some(m) => m[i] & out.set_bits != 0,
            None => self.suspecters[i].iter().any(|&f| st.faults[f].set),
        }
    }

    /// Merged value per sensor over the tracks no set fault suspects; with none left, the side
    /// that closes (0 % for `min`, 100 % for `max`). Records which faults are set, for
    /// [`Controller::suspected_at`] until the faults next change.
    fn merge(&self, st: &State, out: &mut Outputs) {
        if self.masks.is_some() {
            out.set_bits = set_word(st);
        }
        for (s, sensor) in self.model.sensors.iter().enumerate() {
            let mut acc: Option<f64> = None;
            for (t, &pct) in out.tracks[s].iter().enumerate() {
                if self.suspected_at(st, out, self.base[s] + t) {
                    continue;
                }
                acc = Some(match (acc, sensor.combine) {
                    (None, _) => pct,
                    (Some(a), Combine::Min) => a.min(pct),
                    (Some(a), Combine::Max) => a.max(pct),
                });
            }
            out.merged[s] = acc.unwrap_or(match sensor.combine {
                Combine::Min => 0.0,
                Combine::Max => 100.0,
            });
        }
    }

    fn input(&self, sample: &Sample, i: usize) -> f64 {
        let raw = sample.inputs.get(i).copied().unwrap_or(0.0);
        match self.model.inputs.get(i) {
            Some(inp) => clamp(raw, inp.lo, inp.hi),
            None => raw,
        }
    }

    /// A signal's value; NaN (every comparison false) for a reference outside the model.
    fn signal(&self, sig: Sig, st: &State, sample: &Sample, out: &Outputs) -> f64 {
        match sig {
            Sig::Percent(i) => out.percent[i],
            Sig::Volts(i) => st.volts[i],
            Sig::Merged(s) => out.merged[s],
            Sig::Input(i) => self.input(sample, i),
            Sig::Target => st.target,
            Sig::Nan => f64::NAN,
        }
    }

    /// A compiled condition's value, with the faults as of the last merge. Leaves are read
    /// here, inline; only compound conditions recurse.
    #[inline]
    fn eval(&self, c: &Cond, st: &State, sample: &Sample, out: &Outputs) -> bool {
        match c {
            Cond::Const(b) => *b,
            Cond::Set(f) => st.faults[*f].set,
            Cond::Suspect(i) => self.suspected_at(st, out, *i),
            Cond::Switch(i) => sample.switches.get(*i).copied().unwrap_or(false),
            Cond::AnySet(m) => out.set_bits & m != 0,
            Cond::NoneSet(m) => out.set_bits & m == 0,
            Cond::Cmp(n, cmp) => self.compare(*n, *cmp, st, sample, out),
            _ => self.eval_compound(c, st, sample, out),
        }
    }

    /// A compiled comparison's value.
    #[inline(always)]
    fn compare(&self, n: Num, cmp: Compare, st: &State, sample: &Sample, out: &Outputs) -> bool {
        let v = match n {
            Num::One(a) => self.signal(a, st, sample, out),
            Num::Diff(a, b) => self.signal(a, st, sample, out) - self.signal(b, st, sample, out),
            Num::AbsDiff(a, b) => {
                (self.signal(a, st, sample, out) - self.signal(b, st, sample, out)).abs()
            }
        };
        cmp.holds(v)
    }

    #[inline(never)]
    fn eval_compound(&self, c: &Cond, st: &State, sample: &Sample, out: &Outputs) -> bool {
        match c {
            Cond::Not(e) => !self.eval(e, st, sample, out),
            Cond::And(es) => es.iter().all(|e| self.eval(e, st, sample, out)),
            Cond::Or(es) => es.iter().any(|e| self.eval(e, st, sample, out)),
            leaf => self.eval(leaf, st, sample, out),
        }
    }

    /// One debounce step of fault `f` with its condition `cond`.
    #[inline(always)]
    fn advance(&self, f: FaultId, cond: bool, fs: &mut FaultState, events: &mut Vec<Event>) {
        let plan = &self.plans[f];
        match plan.rule {
            Rule::Time { need } => {
                if !fs.set {
                    if cond {
                        if !fs.pending {
                            fs.pending = true;
                            events.push(Event::FaultPending { fault: f });
                        }
                        fs.count = fs.count.saturating_add(1);
                        if fs.count >= need {
                            *fs = FaultState {
                                set: true,
                                ..FaultState::default()
                            };
                            events.push(Event::FaultSet { fault: f });
                        }
                    } else {
                        if fs.pending {
                            events.push(Event::FaultLapsed { fault: f });
                        }
                        fs.pending = false;
                        fs.count = 0;
                    }
                } else if let Some(heal) = plan.heal {
                    if cond {
                        fs.heal = 0;
                    } else {
                        fs.heal = fs.heal.saturating_add(1);
                        if fs.heal >= heal {
                            *fs = FaultState::default();
                            events.push(Event::FaultCleared { fault: f });
                        }
                    }
                }
            }
            Rule::Counter { up, down, lo, hi } => {
                if fs.set && plan.heal.is_none() {
                    // Latched: nothing the counter does can show until key on.
                    return;
                }
                fs.count = if cond {
                    fs.count.saturating_add(up).min(hi)
                } else {
                    fs.count.saturating_sub(down).max(lo)
                };
                if !fs.set {
                    let running = fs.count > lo;
                    if running && !fs.pending {
                        events.push(Event::FaultPending { fault: f });
                    }
                    if !running && fs.pending {
                        events.push(Event::FaultLapsed { fault: f });
                    }
                    fs.pending = running;
                    if cond && fs.count >= hi {
                        fs.set = true;
                        fs.pending = false;
                        fs.heal = 0;
                        events.push(Event::FaultSet { fault: f });
                        if plan.heal.is_none() {
                            fs.count = hi;
                        }
                    }
                } else {
                    fs.heal = if cond { 0 } else { fs.heal.saturating_add(1) };
                    if fs.count <= lo && fs.heal >= plan.heal.unwrap_or(u32::MAX) {
                        *fs = FaultState {
                            count: lo,
                            ..FaultState::default()
                        };
                        events.push(Event::FaultCleared { fault: f });
                    }
                }
            }
        }
    }

    /// Demand shaping for the active mode and the PI position loop.
    fn drive(&self, st: &mut State, sample: &Sample, out: &mut Outputs) {
        let model = &self.model;
        let mode = model.modes.get(st.mode);
        let raw = match mode.map(|m| &m.demand) {
            Some(Demand::Sensor { sensor }) => out.merged.get(*sensor).copied().unwrap_or(0.0),
            Some(Demand::Input { input }) => self.input(sample, *input),
            Some(Demand::Fixed { percent }) => *percent,
            Some(Demand::DriveOff) | None => {
                // H-bridge off: no torque; the plate rests where the springs hold it, and the
                // loop starts empty if a later mode drives again.
                st.target = model.actuator.default;
                st.integral = 0.0;
                out.target = st.target;
                out.duty = 0.0;
                out.drive_on = false;
                return;
            }
        };
        let Some(mode) = mode else { return };
        // Demand never asks below fully closed nor above the mode's limit.
        let limit = clamp(mode.limit, 0.0, 100.0);
        let demand = clamp(raw, 0.0, limit);
        // The slew limits opening only: a falling demand is followed at once, so the plate
        // closes (the safe direction) as fast as the loop allows and release is never delayed.
        let target = match mode.rate {
            Some(rate) if demand > st.target => {
                let step = (rate * self.period).max(0.0);
                demand.min(st.target + step)
            }
            _ => demand,
        };
        st.target = if target.is_finite() { target } else { 0.0 };

        let feedback = out.merged.get(model.feedback).copied().unwrap_or(100.0);
        let e = st.target - feedback;
        let e = if e.is_finite() { e } else { 0.0 };
        let LoopGains { kp, ki } = self.gains;
        let p = kp * e;
        let candidate = st.integral + ki * e * self.period;
        // Anti-windup by clamping: the integrator does not move further into a saturation the
        // output is already in.
        let unsat = p + candidate;
        let winds = (unsat > 100.0 && e > 0.0) || (unsat < -100.0 && e < 0.0);
        if !winds {
            st.integral = clamp(candidate, -100.0, 100.0);
        }
        out.target = st.target;
        out.duty = clamp(p + st.integral, -100.0, 100.0);
        out.drive_on = true;
    }
}

/// The set faults of a model of at most 64 faults as a bit word, bit `f` for fault `f`.
fn set_word(st: &State) -> u64 {
    st.faults
        .iter()
        .enumerate()
        .fold(0, |m, (f, fs)| m | u64::from(fs.set) << f)
}

/// The pure step as a free function. It prepares the model on every call; callers that step
/// many times build a [`Controller`] once instead.
pub fn step(model: &Model, state: &State, sample: &Sample) -> (State, Outputs) {
    Controller::new(model).step(state, sample)
}

/// The in-place step as a free function (prepares the model on every call, see [`step`]).
pub fn step_in_place(model: &Model, state: &mut State, sample: &Sample, out: &mut Outputs) {
    Controller::new(model).step_in_place(state, sample, out)
}
