//! The throttle body: a second-order plate model (motor torque from duty, return springs
//! towards the default position, viscous and Coulomb friction, hard stops) whose parameters are
//! derived from the policy's `actuator` figures.
//!
//! The model, per unit of plate inertia, with position `x` in percent of travel:
//!
//! ```text
//! x'' = motor * torque_factor * duty / 100       (drive on only; duty -100..100 %, + opens)
//!     + spring(x)                               (towards `default`; none when broken)
//!     - viscous * x'
//!     - coulomb * sign(x')                      (stiction at rest: stays while |force| <= coulomb)
//! ```
//!
//! `spring(x)` is the limp-home pair: a closing spring above the default and an opening spring
//! below it, both of rate `stiffness` and preloaded by `stiffness * PRELOAD_TRAVEL`, so that the
//! plate is still pushed firmly when it nears the default (and Coulomb friction, smaller than
//! the preload, cannot hold it short of it). Within `DETENT_BAND` of the default the two
//! preloads cancel linearly, which gives the default a firm but continuous centre instead of a
//! force step that would chatter. Hard stops at 0 % and 100 % clamp the position and zero the
//! velocity into the stop.
//!
//! Derivation fixes the shape (damping ratio, preload, friction fraction) and solves for the two
//! scales the figures determine: the spring rate by bisection against the simulated spring
//! return, then the motor gain by bisection against the simulated full-drive opening. Both are
//! simulated with the same integrator [`advance`] uses, so the figures hold for the model as run.

mod closed;

use crate::model::Actuator;
use crate::time::Time;
pub use closed::Closed;
use std::fmt;

/// Fixed integration sub-step of [`advance`].
pub const DEFAULT_SUBSTEP: Time = Time(100_000);

/// Damping ratio of the viscous friction against the spring rate (the linear part, drive
/// off): critical. With the preload still pushing at the default, a lower ratio lets the plate
/// arrive fast, dive several percent below the default and bounce back above idle; at 1.0 the
/// reference plate dips about 1 % below the default and settles without rising past it.
pub const DAMPING_RATIO: f64 = 1.0;
/// Spring preload, expressed as the travel (percent) the springs are pre-compressed by: the
/// preload force is `stiffness * PRELOAD_TRAVEL`.
pub const PRELOAD_TRAVEL: f64 = 10.0;
/// Coulomb friction as a fraction of the preload force; below 1 so the springs always overcome
/// it and the plate arrives at the default.
pub const COULOMB_FRACTION: f64 = 0.2;
/// Half-width (percent) of the band around the default across which the opposing preloads
/// cancel linearly.
pub const DETENT_BAND: f64 = 0.5;
/// A figure's target counts as reached at the first instant the plate comes within this many
/// percent of it (interpolated within the sub-step). For a spring return to the default that
/// is `default + 0.5 %`; for a full opening to 100 % it is 99.5 %.
pub const ARRIVAL_TOLERANCE: f64 = 0.5;
/// A figure must span at least this many sub-steps, or its time cannot be resolved.
pub const MIN_SUBSTEPS_PER_FIGURE: u64 = 10;
/// Stability margin of the semi-implicit Euler step. The step of `x'' = -k x - c x'` is
/// stable iff `c h < 2` and `k h^2 < 4 - 2 c h` (Jury test on its 2x2 update matrix); we ask
/// for `k h^2 + 2 c h <= STABILITY_MARGIN`, a quarter of the bound, with `k` the stiffest
/// local rate (inside the detent band).
pub const STABILITY_MARGIN: f64 = 1.0;

/// The fixed ratios of a derivation; only the scales (spring rate, motor gain) are solved for.
#[derive(Clone, Copy, Debug)]
struct Shape {
    damping_ratio: f64,
    preload_travel: f64,
    coulomb_fraction: f64,
}

impl Shape {
    const STANDARD: Shape = Shape {
        damping_ratio: DAMPING_RATIO,
        preload_travel: PRELOAD_TRAVEL,
        coulomb_fraction: COULOMB_FRACTION,
    };
}

/// Which actuator figure a derivation problem concerns.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Figure {
    /// `open A % to B % in T`: full drive.
    Open,
    /// `spring A % to B % in T`: drive off, springs alone.
    Spring,
}

impl fmt::Display for Figure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Figure::Open => "open",
            Figure::Spring => "spring",
        })
    }
}

/// Actuator figures for which no usable plate model exists. Positions are percent.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum PlantError {
    #[error("{what} {percent} % is outside the travel 0 % .. 100 %")]
    PositionOutOfRange { what: &'static str, percent: f64 },
    #[error("the {figure} time is zero")]
    ZeroTime { figure: Figure },
    #[error(
        "full drive must open the plate: {from} % to {to} % does not rise by more than {ARRIVAL_TOLERANCE} %"
    )]
    OpenNotOpening { from: f64, to: f64 },
    #[error(
        "the springs move the plate towards the default {default} %: {from} % to {to} % does not"
    )]
    SpringNotTowardsDefault { from: f64, to: f64, default: f64 },
    #[error("the {figure} time {time} spans fewer than {min} integration sub-steps of {substep}")]
    FigureTooFast {
        figure: Figure,
        time: Time,
        substep: Time,
        min: u64,
    },
    #[error("the integration sub-step must be longer than zero")]
    ZeroSubstep,
    #[error(
        "the spring return in {spring_time} needs a spring rate of {stiffness:.1} /s^2, too stiff for the integration sub-step of {substep} (stability index {index:.3} above {STABILITY_MARGIN})"
    )]
    UnstableSubstep {
        spring_time: Time,
        stiffness: f64,
        substep: Time,
        index: f64,
    },
    #[error("no {figure} parameters reproduce {from} % to {to} % in {time}")]
    NoParameters {
        figure: Figure,
        from: f64,
        to: f64,
        time: Time,
    },
}

/// Derived plate parameters, per unit of inertia (forces are accelerations in %/s^2).
#[derive(Clone, Debug, PartialEq)]
pub struct PlantParams {
    default: f64,
    stiffness: f64,
    preload: f64,
    viscous: f64,
    coulomb: f64,
    motor: f64,
    substep: Time,
    substep_s: f64,
}

/// Position (percent of travel, 0..100) and velocity (percent per second) of the plate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PlantState {
    pub position: f64,
    pub velocity: f64,
}

impl PlantState {
    /// The plate at rest at a position.
    pub fn at_rest(position: f64) -> PlantState {
        PlantState {
            position,
            velocity: 0.0,
        }
    }
}

/// What actuator faults do to the plate. `Default` is the healthy actuator.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ActuatorCondition {
    /// The plate is frozen at this position.
    pub stuck_at: Option<f64>,
    /// Motor torque scale; 1.0 is healthy.
    pub torque_factor: f64,
    /// The return springs exert no force.
    pub spring_broken: bool,
}

impl ActuatorCondition {
    pub const HEALTHY: ActuatorCondition = ActuatorCondition {
        stuck_at: None,
        torque_factor: 1.0,
        spring_broken: false,
    };
}

impl Default for ActuatorCondition {
    /// Healthy (a derived default would give zero torque).
    fn default() -> ActuatorCondition {
        ActuatorCondition::HEALTHY
    }
}

impl PlantParams {
    /// Derives the parameters from the actuator figures with [`DEFAULT_SUBSTEP`].
    pub fn derive(a: &Actuator) -> Result<PlantParams, PlantError> {
        PlantParams::derive_with_substep(a, DEFAULT_SUBSTEP)
    }

    /// Derives the parameters for a given integration sub-step.
    ///
    /// The shape is fixed by [`DAMPING_RATIO`], [`PRELOAD_TRAVEL`], [`COULOMB_FRACTION`] and
    /// [`DETENT_BAND`]; the spring rate is bisected until the simulated spring figure takes its
    /// time, then the motor gain until the simulated full-drive figure does (arrival as in
    /// [`ARRIVAL_TOLERANCE`]). The springs on both sides of the default share the rate (the
    /// figures say nothing of the opening spring alone).
    pub fn derive_with_substep(a: &Actuator, substep: Time) -> Result<PlantParams, PlantError> {
        PlantParams::derive_shaped(a, substep, Shape::STANDARD)
    }

    fn derive_shaped(a: &Actuator, substep: Time, shape: Shape) -> Result<PlantParams, PlantError> {
        validate(a, substep)?;
        let spring_s = a.spring_time.as_secs_f64();
        let open_s = a.open_time.as_secs_f64();
        // Drive off, the shape (ratios) fixed, the return time falls monotonically with the
        // spring rate (exactly as 1/sqrt(rate) in continuous time): bisect the rate.
        let with_rate = |k: f64| PlantParams::shaped(shape, a.default, k, 0.0, substep);
        let spring_time = |k: f64| {
            time_to_reach(
                &with_rate(k),
                a.spring_from,
                a.spring_to,
                0.0,
                false,
                50.0 * spring_s,
            )
        };
        let no_spring = || PlantError::NoParameters {
            figure: Figure::Spring,
            from: a.spring_from,
            to: a.spring_to,
            time: a.spring_time,
        };
        let k = solve_decreasing(spring_time, spring_s, 1.0).ok_or_else(no_spring)?;
        let shaped = with_rate(k);
        let index = shaped.stability_index();
        if index.is_nan() || index > STABILITY_MARGIN {
            return Err(PlantError::UnstableSubstep {
                spring_time: a.spring_time,
                stiffness: k,
                substep,
                index,
            });
        }
        // Full drive must beat the largest resisting force on the way, which is at the target
        // (the springs stiffen away from the default); above that, the opening time falls
        // monotonically with the motor gain: bisect it.
        let resist = (-shaped.spring(a.open_to)).max(0.0) + shaped.coulomb;
        let floor = resist.max(1.0) * (1.0 + 1e-9);
        let with_motor = |m: f64| PlantParams {
            motor: m,
            ..shaped.clone()
        };
        let open_time = |m: f64| {
            time_to_reach(
                &with_motor(m),
                a.open_from,
                a.open_to,
                100.0,
                true,
                50.0 * open_s,
            )
        };
        let m =
            solve_decreasing_above(open_time, open_s, floor).ok_or(PlantError::NoParameters {
                figure: Figure::Open,
                from: a.open_from,
                to: a.open_to,
                time: a.open_time,
            })?;
        Ok(with_motor(m))
    }

    /// The fixed shape with a given spring rate and motor gain.
    fn shaped(
        shape: Shape,
        default: f64,
        stiffness: f64,
        motor: f64,
        substep: Time,
    ) -> PlantParams {
        let preload = stiffness * shape.preload_travel;
        PlantParams {
            default,
            stiffness,
            preload,
            viscous: 2.0 * shape.damping_ratio * stiffness.sqrt(),
            coulomb: shape.coulomb_fraction * preload,
            motor,
            substep,
            substep_s: substep.as_secs_f64(),
        }
    }

    /// `k h^2 + 2 c h` with the stiffest local rate (inside the detent band); see
    /// [`STABILITY_MARGIN`].
    fn stability_index(&self) -> f64 {
        let k_local = self.stiffness + self.preload / DETENT_BAND;
        let h = self.substep_s;
        k_local * h * h + 2.0 * self.viscous * h
    }

    /// Spring force (acceleration, %/s^2) at a position, towards the default.
    #[inline(always)]
    fn spring(&self, x: f64) -> f64 {
        let e = x - self.default;
        if e > DETENT_BAND {
            -(self.preload + self.stiffness * e)
        } else if e < -DETENT_BAND {
            self.preload - self.stiffness * e
        } else {
            -(self.stiffness + self.preload / DETENT_BAND) * e
        }
    }

    /// Position the springs hold with the drive off (percent).
    pub fn default_position(&self) -> f64 {
        self.default
    }
    /// Spring rate, 1/s^2 (acceleration per percent of deflection per percent).
    pub fn stiffness(&self) -> f64 {
        self.stiffness
    }
    /// Spring preload force, %/s^2.
    pub fn preload(&self) -> f64 {
        self.preload
    }
    /// Viscous friction, 1/s.
    pub fn viscous(&self) -> f64 {
        self.viscous
    }
    /// Coulomb friction force, %/s^2.
    pub fn coulomb(&self) -> f64 {
        self.coulomb
    }
    /// Motor force at full duty, %/s^2.
    pub fn motor(&self) -> f64 {
        self.motor
    }
    /// Integration sub-step.
    pub fn substep(&self) -> Time {
        self.substep
    }
}

fn validate(a: &Actuator, substep: Time) -> Result<(), PlantError> {
    let positions = [
        ("default", a.default),
        ("open from", a.open_from),
        ("open to", a.open_to),
        ("spring from", a.spring_from),
        ("spring to", a.spring_to),
    ];
    for (what, percent) in positions {
        if !(0.0..=100.0).contains(&percent) {
            return Err(PlantError::PositionOutOfRange { what, percent });
        }
    }
    if substep == Time::ZERO {
        return Err(PlantError::ZeroSubstep);
    }
    for (figure, t) in [(Figure::Open, a.open_time), (Figure::Spring, a.spring_time)] {
        if t == Time::ZERO {
            return Err(PlantError::ZeroTime { figure });
        }
        if t.0 / substep.0 < MIN_SUBSTEPS_PER_FIGURE {
            return Err(PlantError::FigureTooFast {
                figure,
                time: t,
                substep,
                min: MIN_SUBSTEPS_PER_FIGURE,
            });
        }
    }
    if a.open_to - a.open_from <= ARRIVAL_TOLERANCE {
        return Err(PlantError::OpenNotOpening {
            from: a.open_from,
            to: a.open_to,
        });
    }
    // The springs move the plate towards the default and no further: the target must lie
    // between the start and the default, and be a visible move away from the start.
    let (lo, hi) = if a.spring_from >= a.default {
        (a.default, a.spring_from)
    } else {
        (a.spring_from, a.default)
    };
    let between = a.spring_to >= lo && a.spring_to <= hi;
    if !between || (a.spring_from - a.spring_to).abs() <= ARRIVAL_TOLERANCE {
        return Err(PlantError::SpringNotTowardsDefault {
            from: a.spring_from,
            to: a.spring_to,
            default: a.default,
        });
    }
    Ok(())
}

/// Finds `x > 0` with `f(x) = target` for `f` falling in `x` (`None` meaning "too slow", i.e.
/// +infinity), by bracketing from `start` and bisecting on a log scale.
fn solve_decreasing(f: impl Fn(f64) -> Option<f64>, target: f64, start: f64) -> Option<f64> {
    let slow = |x: f64| f(x).is_none_or(|t| t > target);
    let (mut lo, mut hi) = (start, start);
    let mut n = 0;
    while slow(hi) {
        hi *= 4.0;
        n += 1;
        if n > 60 {
            return None;
        }
    }
    n = 0;
    while !slow(lo) {
        lo /= 4.0;
        n += 1;
        if n > 60 {
            return None;
        }
    }
    Some(bisect(slow, lo, hi))
}

/// As [`solve_decreasing`], with `f` defined only above `floor` (and infinite at it).
fn solve_decreasing_above(f: impl Fn(f64) -> Option<f64>, target: f64, floor: f64) -> Option<f64> {
    let slow = |x: f64| f(x).is_none_or(|t| t > target);
    let lo = floor;
    let mut hi = floor * 2.0;
    let mut n = 0;
    while slow(hi) {
        hi *= 4.0;
        n += 1;
        if n > 60 {
            return None;
        }
    }
    Some(bisect(slow, lo, hi))
}

/// Geometric bisection between `lo` (slow) and `hi` (fast) to a relative width of 1e-9.
fn bisect(slow: impl Fn(f64) -> bool, mut lo: f64, mut hi: f64) -> f64 {
    for _ in 0..200 {
        if hi / lo < 1.0 + 1e-9 {
            break;
        }
        let mid = (lo * hi).sqrt();
        if slow(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    (lo * hi).sqrt()
}

/// Seconds the plate, starting at rest at `from` with the given drive, takes to come within
/// [`ARRIVAL_TOLERANCE`] of `to` (interpolated within the sub-step); `None` if not by `limit`
/// seconds. The actuator is healthy.
pub fn time_to_reach(
    p: &PlantParams,
    from: f64,
    to: f64,
    duty: f64,
    drive_on: bool,
    limit: f64,
) -> Option<f64> {
    let rising = to > from;
    let threshold = if rising {
        to - ARRIVAL_TOLERANCE
    } else {
        to + ARRIVAL_TOLERANCE
    };
    let reached = |x: f64| {
        if rising {
            x >= threshold
        } else {
            x <= threshold
        }
    };
    if reached(from) {
        return Some(0.0);
    }
    let h = p.substep_s;
    let motor = if drive_on {
        p.motor * duty.clamp(-100.0, 100.0) / 100.0
    } else {
        0.0
    };
    let (mut x, mut v) = (from, 0.0);
    let mut t = 0.0;
    while t < limit {
        let (xn, vn) = substep(p, x, v, motor, true, h);
        if reached(xn) {
            let frac = if xn != x {
                ((threshold - x) / (xn - x)).clamp(0.0, 1.0)
            } else {
                1.0
            };
            return Some(t + frac * h);
        }
        x = xn;
        v = vn;
        t += h;
    }
    None
}

/// One semi-implicit Euler step: velocity first (with stiction), then position from the new
/// velocity, then the stops.
#[inline(always)]
fn substep(p: &PlantParams, x: f64, v: f64, motor: f64, spring_on: bool, h: f64) -> (f64, f64) {
    let fa = if spring_on {
        motor + p.spring(x)
    } else {
        motor
    };
    let fc = p.coulomb;
    let mut vn = if v == 0.0 {
        // At rest: static friction holds unless the applied force exceeds it.
        if fa.abs() <= fc {
            0.0
        } else {
            h * (fa - fc.copysign(fa))
        }
    } else {
        v + h * (fa - p.viscous * v - fc.copysign(v))
    };
    if vn * v < 0.0 && fa.abs() <= fc {
        // Friction brought the plate to rest within the step, and it cannot break away.
        vn = 0.0;
    }
    let mut xn = x + h * vn;
    if xn <= 0.0 {
        xn = 0.0;
        vn = vn.max(0.0);
    } else if xn >= 100.0 {
        xn = 100.0;
        vn = vn.min(0.0);
    }
    (xn, vn)
}

/// Advances the plate by `dt` in fixed sub-steps of the parameters' sub-step (the last one
/// shortened to land on `dt`). `duty` is the signed H-bridge duty in percent (clamped to
/// -100..100, non-finite reads as 0); with `drive_on` false the motor exerts no torque.
/// Sub-steps one at a time; [`Plate::advance`] gives the same plate faster.
pub fn advance(
    p: &PlantParams,
    s: PlantState,
    duty: f64,
    drive_on: bool,
    c: &ActuatorCondition,
    dt: Time,
) -> PlantState {
    advance_in(p, None, s, duty, drive_on, c, dt)
}

/// A plate model ready to run: the parameters and their closed-form tables.
#[derive(Clone, Debug, PartialEq)]
pub struct Plate {
    pub params: PlantParams,
    closed: Closed,
}

impl Plate {
    pub fn new(params: PlantParams) -> Plate {
        let closed = Closed::new(&params);
        Plate { params, closed }
    }

    /// `dt` (whole sub-steps) in a single closed-form jump, when no event of the plate falls
    /// inside it: then the position moved monotonically from `s` to the result, so every
    /// sub-step's position lies between the two. `None` otherwise (the caller sub-steps).
    pub fn jump(
        &self,
        s: PlantState,
        duty: f64,
        drive_on: bool,
        c: &ActuatorCondition,
        dt: Time,
    ) -> Option<PlantState> {
        let h = self.params.substep.0.max(1);
        if !dt.0.is_multiple_of(h) {
            return None;
        }
        let (x, v, motor, spring_on) = call_inputs(&self.params, s, duty, drive_on, c)?;
        let (position, velocity) =
            self.closed
                .jump(&self.params, x, v, motor, spring_on, dt.0 / h)?;
        Some(PlantState { position, velocity })
    }

    /// As [`advance`], with runs of sub-steps between the plate's events taken in one
    /// closed-form jump; equal to [`advance`] up to rounding.
    pub fn advance(
        &self,
        s: PlantState,
        duty: f64,
        drive_on: bool,
        c: &ActuatorCondition,
        dt: Time,
    ) -> PlantState {
        advance_in(&self.params, Some(&self.closed), s, duty, drive_on, c, dt)
    }
}

/// The plate's state and forces for one call: `None` for a stuck plate.
fn call_inputs(
    p: &PlantParams,
    s: PlantState,
    duty: f64,
    drive_on: bool,
    c: &ActuatorCondition,
) -> Option<(f64, f64, f64, bool)> {
    if c.stuck_at.is_some() {
        return None;
    }
    let duty = if duty.is_finite() {
        duty.clamp(-100.0, 100.0)
    } else {
        0.0
    };
    let factor = if c.torque_factor.is_finite() {
        c.torque_factor
    } else {
        0.0
    };
    let motor = if drive_on {
        p.motor * factor * duty / 100.0
    } else {
        0.0
    };
    let x = if s.position.is_finite() {
        s.position.clamp(0.0, 100.0)
    } else {
        p.default
    };
    let v = if s.velocity.is_finite() {
        s.velocity
    } else {
        0.0
    };
    Some((x, v, motor, !c.spring_broken))
}

fn advance_in(
    p: &PlantParams,
    closed: Option<&Closed>,
    s: PlantState,
    duty: f64,
    drive_on: bool,
    c: &ActuatorCondition,
    dt: Time,
) -> PlantState {
    let Some((x, v, motor, spring_on)) = call_inputs(p, s, duty, drive_on, c) else {
        return PlantState {
            position: c.stuck_at.unwrap_or(0.0).clamp(0.0, 100.0),
            velocity: 0.0,
        };
    };
    let full = dt.0 / p.substep.0.max(1);
    let run = Run {
        p,
        closed,
        motor,
        spring_on,
    };
    let (mut x, mut v, at_rest) = run.steps(x, v, full);
    let rest = dt.0 % p.substep.0.max(1);
    if rest > 0 && !at_rest {
        (x, v) = substep(p, x, v, motor, spring_on, rest as f64 * 1e-9);
    }
    PlantState {
        position: x,
        velocity: v,
    }
}

/// The fixed inputs of one call of [`advance_in`].
struct Run<'a> {
    p: &'a PlantParams,
    closed: Option<&'a Closed>,
    motor: f64,
    spring_on: bool,
}

/// Below this many sub-steps a failed jump is not split further.
const MIN_JUMP: u64 = 4;

impl Run<'_> {
    /// `n` full sub-steps; the flag says the plate came to rest and stays there.
    fn steps(&self, x: f64, v: f64, n: u64) -> (f64, f64, bool) {
        if let Some(c) = self.closed
            && n >= MIN_JUMP
            && v != 0.0
        {
            if let Some((x, v)) = c.jump(self.p, x, v, self.motor, self.spring_on, n) {
                return (x, v, false);
            }
            // An event falls inside: halve the run and try each half.
            let first = n / 2;
            let (x, v, rest) = self.steps(x, v, first);
            if rest {
                return (x, v, true);
            }
            return self.steps(x, v, n - first);
        }
        self.one_by_one(x, v, n)
    }

    fn one_by_one(&self, mut x: f64, mut v: f64, n: u64) -> (f64, f64, bool) {
        let h = self.p.substep_s;
        for i in 0..n {
            let (xn, vn) = substep(self.p, x, v, self.motor, self.spring_on, h);
            // A plate at rest that stays at rest (held by static friction, or pressed
            // against a stop) stays so for every further sub-step of this call, whatever
            // their length: the drive and the springs do not change within it. Stopping here
            // is exact.
            if v == 0.0 && vn == 0.0 && xn == x {
                return (x, v, true);
            }
            (x, v) = (xn, vn);
            // Moving again after a rest or a reversal: the rest may go in jumps.
            if self.closed.is_some() && v != 0.0 && n - i > MIN_JUMP {
                return self.steps(x, v, n - i - 1);
            }
        }
        (x, v, false)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lang::Span;

    /// The reference actuator of DESIGN.md.
    fn reference() -> Actuator {
        Actuator {
            span: Span::default(),
            default: 7.0,
            idle: 8.0,
            open_from: 0.0,
            open_to: 100.0,
            open_time: Time::from_ms(80),
            spring_from: 100.0,
            spring_to: 7.0,
            spring_time: Time::from_ms(150),
        }
    }

    /// Linear plate for textbook checks: no friction, no preload, symmetric springs.
    fn linear(default: f64, wn: f64, zeta: f64, motor: f64) -> PlantParams {
        PlantParams {
            default,
            stiffness: wn * wn,
            preload: 0.0,
            viscous: 2.0 * zeta * wn,
            coulomb: 0.0,
            motor,
            substep: DEFAULT_SUBSTEP,
            substep_s: DEFAULT_SUBSTEP.as_secs_f64(),
        }
    }

    /// Runs the plate for `secs` in 1 ms calls, returning (peak, 2 % settling time).
    fn step_response(
        p: &PlantParams,
        start: f64,
        final_value: f64,
        secs: f64,
        mut duty: impl FnMut(f64) -> f64,
    ) -> (f64, f64, f64) {
        let mut s = PlantState::at_rest(start);
        let dir = (final_value - start).signum();
        let mut peak = start;
        let mut settled_at = 0.0;
        let band = 0.02 * (final_value - start).abs();
        let n = (secs / 1e-4) as usize;
        for i in 0..n {
            s = advance(
                p,
                s,
                duty(s.position),
                true,
                &ActuatorCondition::HEALTHY,
                Time(100_000),
            );
            if (s.position - final_value) * dir > (peak - final_value) * dir {
                peak = s.position;
            }
            if (s.position - final_value).abs() > band {
                settled_at = (i + 1) as f64 * 1e-4;
            }
        }
        (
            (peak - final_value).abs() / (final_value - start).abs(),
            settled_at,
            s.position,
        )
    }

    #[test]
    fn spring_alone_matches_second_order_step() {
        // Ogata, Modern Control Engineering (and FACTS.md worked case): zeta 0.5, wn 10 rad/s
        // -> overshoot 16.3 %, 2 % settling about 4 / (zeta wn) = 0.8 s.
        // Released from 90 % towards a default of 40 % so the overshoot stays clear of the stop.
        let p = linear(40.0, 10.0, 0.5, 0.0);
        let (overshoot, settling, end) = step_response(&p, 90.0, 40.0, 3.0, |_| 0.0);
        let expected = (-0.5 * std::f64::consts::PI / (1.0f64 - 0.25).sqrt()).exp();
        assert!(
            (overshoot - expected).abs() < 0.005,
            "overshoot {overshoot} vs {expected}"
        );
        // 4/(zeta wn) is the envelope estimate; the true crossing of the band lies a little
        // before it for zeta 0.5.
        assert!(settling > 0.6 && settling < 0.85, "settling {settling}");
        assert!((end - 40.0).abs() < 0.05);
    }

    #[test]
    fn proportional_loop_matches_second_order_step() {
        // Ogata, Modern Control Engineering: with the spring and a proportional drive the loop
        // is x'' + c x' + (k + g) x = g r + k d, g = motor * kp / 100. Choose wn = 40 rad/s,
        // zeta = 0.3: overshoot exp(-zeta pi / sqrt(1 - zeta^2)) = 37.2 %, settling about
        // 4 / (zeta wn) = 0.33 s.
        let (k, motor, kp): (f64, f64, f64) = (400.0, 20000.0, 6.0);
        let g = motor * kp / 100.0; // 1200: k + g = 1600 = 40^2
        let wn: f64 = (k + g).sqrt();
        let zeta = 0.3;
        let p = PlantParams {
            viscous: 2.0 * zeta * wn,
            ..linear(0.0, k.sqrt(), 0.0, motor)
        };
        let r = 40.0;
        let start = 25.0; // duty 6 * 15 = 90 %: the drive never saturates
        let final_value = g * r / (k + g);
        let (overshoot, settling, end) =
            step_response(&p, start, final_value, 1.5, |x| kp * (r - x));
        let expected = (-zeta * std::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp();
        assert!(
            (overshoot - expected).abs() < 0.01,
            "overshoot {overshoot} vs {expected}"
        );
        let estimate = 4.0 / (zeta * wn);
        assert!(
            (settling - estimate).abs() < 0.2 * estimate,
            "settling {settling} vs {estimate}"
        );
        assert!((end - final_value).abs() < 0.05);
    }

    #[test]
    fn derived_parameters_reproduce_the_reference_figures() {
        // DESIGN.md reference actuator: open 0 % to 100 % in 80 ms, spring 100 % to 7 % in
        // 150 ms; required within 5 %.
        let a = reference();
        let p = PlantParams::derive(&a).expect("reference actuator derives");
        let open = time_to_reach(&p, 0.0, 100.0, 100.0, true, 1.0).expect("opens");
        let spring = time_to_reach(&p, 100.0, 7.0, 0.0, false, 1.0).expect("returns");
        assert!((open - 0.080).abs() < 0.05 * 0.080, "open {open}");
        assert!((spring - 0.150).abs() < 0.05 * 0.150, "spring {spring}");
        // And the same through `advance` in controller-period calls, counting whole periods.
        let mut s = PlantState::at_rest(0.0);
        let mut t = 0;
        while s.position < 100.0 - ARRIVAL_TOLERANCE && t < 1000 {
            s = advance(
                &p,
                s,
                100.0,
                true,
                &ActuatorCondition::HEALTHY,
                Time::from_ms(1),
            );
            t += 1;
        }
        assert!((76..=85).contains(&t), "opened in {t} ms");
    }

    #[test]
    fn springs_return_to_idle_within_one_second() {
        // FMVSS No. 124 (from memory): with the actuating force removed the throttle returns
        // to idle within 1 s (light vehicles). Idle here is 8 % (DESIGN.md). The plate must be
        // at or below idle from 1 s on, and come to rest at the default.
        let p = PlantParams::derive(&reference()).expect("derives");
        let mut s = PlantState::at_rest(100.0);
        let off = ActuatorCondition::HEALTHY;
        let mut lowest: f64 = 100.0;
        for ms in 1..=3000 {
            s = advance(&p, s, 100.0, false, &off, Time::from_ms(1));
            lowest = lowest.min(s.position);
            if ms >= 1000 {
                assert!(
                    s.position <= 8.0,
                    "at {ms} ms the plate is at {}",
                    s.position
                );
            }
        }
        assert!(
            (s.position - 7.0).abs() < DETENT_BAND,
            "rests at {}",
            s.position
        );
        // Our own design aim (no source): the plate arrives without diving far past the
        // default, i.e. the detent is not slammed.
        assert!(lowest > 5.0, "dived to {lowest}");
        assert_eq!(s.velocity, 0.0, "stiction holds it at rest");
    }

    #[test]
    fn stops_hold() {
        let p = PlantParams::derive(&reference()).expect("derives");
        let h = ActuatorCondition::HEALTHY;
        let mut s = PlantState::at_rest(50.0);
        for _ in 0..500 {
            s = advance(&p, s, 100.0, true, &h, Time::from_ms(1));
            assert!(s.position <= 100.0);
        }
        assert_eq!(
            s,
            PlantState {
                position: 100.0,
                velocity: 0.0
            }
        );
        for _ in 0..500 {
            s = advance(&p, s, -100.0, true, &h, Time::from_ms(1));
            assert!(s.position >= 0.0);
        }
        assert_eq!(
            s,
            PlantState {
                position: 0.0,
                velocity: 0.0
            }
        );
    }

    #[test]
    fn actuator_conditions_act() {
        let p = PlantParams::derive(&reference()).expect("derives");
        let start = PlantState::at_rest(7.0);
        let stuck = ActuatorCondition {
            stuck_at: Some(42.0),
            ..ActuatorCondition::HEALTHY
        };
        let s = advance(&p, start, 100.0, true, &stuck, Time::from_ms(50));
        assert_eq!(s, PlantState::at_rest(42.0));
        // A weak motor opens more slowly; a broken spring leaves the plate where it is.
        let weak = ActuatorCondition {
            torque_factor: 0.5,
            ..ActuatorCondition::HEALTHY
        };
        let healthy = advance(
            &p,
            start,
            60.0,
            true,
            &ActuatorCondition::HEALTHY,
            Time::from_ms(30),
        );
        let slow = advance(&p, start, 60.0, true, &weak, Time::from_ms(30));
        assert!(
            slow.position < healthy.position - 1.0,
            "{slow:?} vs {healthy:?}"
        );
        let broken = ActuatorCondition {
            spring_broken: true,
            ..ActuatorCondition::HEALTHY
        };
        let s = advance(
            &p,
            PlantState::at_rest(60.0),
            0.0,
            false,
            &broken,
            Time::from_ms(500),
        );
        assert_eq!(s, PlantState::at_rest(60.0));
        let s = advance(
            &p,
            PlantState::at_rest(60.0),
            0.0,
            false,
            &ActuatorCondition::HEALTHY,
            Time::from_ms(500),
        );
        assert!(s.position < 8.0);
        assert_eq!(ActuatorCondition::default(), ActuatorCondition::HEALTHY);
    }

    #[test]
    fn advance_splits_into_substeps_and_a_short_last_one() {
        let p = PlantParams::derive(&reference()).expect("derives");
        let h = ActuatorCondition::HEALTHY;
        // 1.05 sub-steps in one call equals one sub-step and a twentieth.
        let one = advance(&p, PlantState::at_rest(0.0), 100.0, true, &h, Time(100_000));
        let both = advance(&p, one, 100.0, true, &h, Time(5_000));
        let together = advance(&p, PlantState::at_rest(0.0), 100.0, true, &h, Time(105_000));
        assert_eq!(both, together);
        assert!(together.position > one.position);
        assert_eq!(advance(&p, one, 100.0, true, &h, Time::ZERO), one);
    }

    #[test]
    fn bad_inputs_do_not_panic() {
        let p = PlantParams::derive(&reference()).expect("derives");
        let h = ActuatorCondition::HEALTHY;
        let s = advance(
            &p,
            PlantState::at_rest(f64::NAN),
            f64::NAN,
            true,
            &h,
            Time::from_ms(5),
        );
        assert!(s.position.is_finite() && s.velocity.is_finite());
        let s = advance(
            &p,
            PlantState::at_rest(250.0),
            1e9,
            true,
            &h,
            Time::from_ms(5),
        );
        assert_eq!(s.position, 100.0);
    }

    #[test]
    fn rejected_figures_give_plant_errors() {
        let zero = Actuator {
            open_time: Time::ZERO,
            ..reference()
        };
        assert_eq!(
            PlantParams::derive(&zero),
            Err(PlantError::ZeroTime {
                figure: Figure::Open
            })
        );
        let zero = Actuator {
            spring_time: Time::ZERO,
            ..reference()
        };
        assert_eq!(
            PlantParams::derive(&zero),
            Err(PlantError::ZeroTime {
                figure: Figure::Spring
            })
        );
        let outside = Actuator {
            default: 120.0,
            ..reference()
        };
        assert_eq!(
            PlantParams::derive(&outside),
            Err(PlantError::PositionOutOfRange {
                what: "default",
                percent: 120.0
            })
        );
        let nan = Actuator {
            default: f64::NAN,
            ..reference()
        };
        assert!(matches!(
            PlantParams::derive(&nan),
            Err(PlantError::PositionOutOfRange { .. })
        ));
        // 0.5 ms is five sub-steps of 0.1 ms: too short to integrate.
        let fast = Actuator {
            open_time: Time(500_000),
            ..reference()
        };
        assert_eq!(
            PlantParams::derive(&fast),
            Err(PlantError::FigureTooFast {
                figure: Figure::Open,
                time: Time(500_000),
                substep: DEFAULT_SUBSTEP,
                min: 10
            })
        );
        let closing = Actuator {
            open_from: 100.0,
            open_to: 0.0,
            ..reference()
        };
        assert!(matches!(
            PlantParams::derive(&closing),
            Err(PlantError::OpenNotOpening { .. })
        ));
        let past = Actuator {
            spring_to: 3.0,
            ..reference()
        };
        assert!(matches!(
            PlantParams::derive(&past),
            Err(PlantError::SpringNotTowardsDefault { to: 3.0, .. })
        ));
        assert_eq!(
            PlantParams::derive_with_substep(&reference(), Time::ZERO),
            Err(PlantError::ZeroSubstep)
        );
        // A 10 ms sub-step resolves the 150 ms return (15 sub-steps) but the spring it needs
        // is too stiff for it.
        let coarse = Actuator {
            open_time: Time::from_ms(200),
            ..reference()
        };
        let r = PlantParams::derive_with_substep(&coarse, Time::from_ms(10));
        assert!(
            matches!(r, Err(PlantError::UnstableSubstep { .. })),
            "{r:?}"
        );
        let msg = r.err().map(|e| e.to_string()).unwrap_or_default();
        assert!(msg.contains("150 ms"), "{msg}");
    }

    #[test]
    fn other_figures_derive_and_hold() {
        // Not the reference: a slower body with a higher limp-home position, springs from
        // below the default (the opening spring), and partial figures.
        let a = Actuator {
            default: 20.0,
            open_from: 10.0,
            open_to: 90.0,
            open_time: Time::from_ms(120),
            spring_from: 0.0,
            spring_to: 20.0,
            spring_time: Time::from_ms(60),
            ..reference()
        };
        let p = PlantParams::derive(&a).expect("derives");
        let open = time_to_reach(&p, 10.0, 90.0, 100.0, true, 1.0).expect("opens");
        let spring = time_to_reach(&p, 0.0, 20.0, 0.0, false, 1.0).expect("returns");
        assert!((open - 0.120).abs() < 0.05 * 0.120, "open {open}");
        assert!((spring - 0.060).abs() < 0.05 * 0.060, "spring {spring}");
    }

    #[test]
    fn a_whole_jump_is_monotone_and_agrees_with_sub_steps() {
        // What the engine relies on when it judges an opening window at a jump's ends only:
        // every sub-step's position lies between them.
        let p = PlantParams::derive(&reference()).expect("derives");
        let fast = Plate::new(p.clone());
        let h = ActuatorCondition::HEALTHY;
        let mut taken = 0;
        for i in 0..400u32 {
            let s = PlantState {
                position: 10.0 + f64::from(i % 80),
                velocity: f64::from(i % 7) * 150.0 - 450.0,
            };
            let duty = f64::from(i % 11) * 20.0 - 100.0;
            let dt = Time(DEFAULT_SUBSTEP.0 * u64::from(5 + i % 40));
            let Some(end) = fast.jump(s, duty, true, &h, dt) else {
                continue;
            };
            taken += 1;
            let (lo, hi) = (s.position.min(end.position), s.position.max(end.position));
            let mut x = s;
            for _ in 0..dt.0 / DEFAULT_SUBSTEP.0 {
                x = advance(&p, x, duty, true, &h, DEFAULT_SUBSTEP);
                assert!(
                    x.position >= lo - 1e-9 && x.position <= hi + 1e-9,
                    "{s:?} {duty}"
                );
            }
            assert!((x.position - end.position).abs() < 1e-9, "{x:?} vs {end:?}");
        }
        assert!(taken > 50, "only {taken} jumps taken");
        // Not whole sub-steps, or a plate at rest: no jump.
        let moving = PlantState {
            position: 50.0,
            velocity: 100.0,
        };
        assert_eq!(fast.jump(moving, 10.0, true, &h, Time(150_000)), None);
        assert_eq!(
            fast.jump(PlantState::at_rest(50.0), 10.0, true, &h, Time::from_ms(5)),
            None
        );
    }

    #[test]
    fn jumps_agree_with_sub_steps() {
        // The closed form must give the sub-stepped plate up to rounding, over every kind of
        // call: at rest, moving, reversing, crossing the detent, against a stop, broken
        // springs, weak motors, short and long and ragged durations.
        let p = PlantParams::derive(&reference()).expect("derives");
        let fast = Plate::new(p.clone());
        let mut rng: u64 = 0x2545_f491_4f6c_dd1d;
        let mut next = move || {
            rng ^= rng << 13;
            rng ^= rng >> 7;
            rng ^= rng << 17;
            (rng >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut worst: f64 = 0.0;
        for _ in 0..20_000 {
            let s = PlantState {
                position: if next() < 0.1 { 7.0 } else { next() * 100.0 },
                velocity: if next() < 0.2 {
                    0.0
                } else {
                    (next() - 0.5) * 3000.0
                },
            };
            let duty = (next() - 0.5) * 220.0;
            let c = ActuatorCondition {
                stuck_at: None,
                torque_factor: if next() < 0.2 { next() } else { 1.0 },
                spring_broken: next() < 0.1,
            };
            let dt = Time((next() * 20e6) as u64);
            let on = next() < 0.9;
            let slow = advance(&p, s, duty, on, &c, dt);
            let quick = fast.advance(s, duty, on, &c, dt);
            let d = (slow.position - quick.position)
                .abs()
                .max((slow.velocity - quick.velocity).abs() * 1e-3);
            worst = worst.max(d);
        }
        assert!(worst < 1e-9, "largest difference {worst}");
    }
}
