//! The cone of influence of a controller state: which parts of its memory can still change
//! the plate or the mode. A part outside it (a pedal filter once the mode is absorbing and
//! ignores the pedal, the debounce of a monitor no live guard reads) can differ between two
//! states without either ever behaving differently, so the search leaves it out of the
//! visited-set key. Exact for the verdicts: the requirements read the plate, the twin and the
//! driver only.
//!
//! A transition is dead while its guard is false for good: it requires `not F` of a fault
//! that is set and latched (or `not suspect(T)` of a track such a fault suspects), and latched
//! faults stay set until the next key on, which the search never does. The live transitions
//! out of the current mode read guards; the mode's demand and, with the drive on, the feedback
//! loop read sensors; monitors that those read, or that suspect a track they read, read
//! further sensors and monitors. The closure is the cone.

use crate::controller::{Relevance, State};
use crate::model::{Demand, Expr, Model, Signal, Term, TrackRef};

/// Cones by mode and latched faults (see [`Cone::cached`]).
pub type ConeCache = std::collections::HashMap<
    (usize, u128),
    (Relevance, bool),
    std::hash::BuildHasherDefault<super::search::PassThrough>,
>;

/// Per-model tables for [`Cone::relevance`].
pub struct Cone {
    /// Transitions out of each mode, in the order they are tried.
    exits: Vec<Vec<usize>>,
    /// First flattened track index of each sensor.
    base: Vec<usize>,
    /// Faults suspecting each flattened track.
    suspecters: Vec<Vec<usize>>,
    /// Per fault: what its condition reads directly.
    reads: Vec<Reads>,
}

/// What an expression reads.
#[derive(Clone, Debug, Default)]
struct Reads {
    tracks: Vec<usize>,
    faults: Vec<usize>,
    target: bool,
}

impl Cone {
    pub fn new(model: &Model) -> Cone {
        let mut base = Vec::with_capacity(model.sensors.len());
        let mut n = 0;
        for s in &model.sensors {
            base.push(n);
            n += s.tracks.len();
        }
        let mut suspecters = vec![Vec::new(); n];
        for (f, fault) in model.faults.iter().enumerate() {
            for t in &fault.suspects {
                if let Some(i) = flat(model, &base, *t) {
                    suspecters[i].push(f);
                }
            }
        }
        let mut cone = Cone {
            exits: (0..model.modes.len())
                .map(|m| model.edges_from(m).iter().map(|e| e.transition).collect())
                .collect(),
            base,
            suspecters,
            reads: Vec::new(),
        };
        cone.reads = model
            .faults
            .iter()
            .map(|f| {
                let mut r = Reads::default();
                cone.expr_reads(model, &f.condition, &mut r);
                // A plausibility check is held while a fault suspecting one of its tracks is
                // pending or set: those faults' states steer it.
                if f.plausibility {
                    for t in &f.reads {
                        if let Some(i) = flat(model, &cone.base, *t) {
                            r.faults.extend(cone.suspecters[i].iter().copied());
                        }
                    }
                }
                r
            })
            .collect();
        cone
    }

    fn sensor_reads(&self, model: &Model, sensor: usize, r: &mut Reads) {
        let Some(s) = model.sensors.get(sensor) else {
            return;
        };
        for t in 0..s.tracks.len() {
            let i = self.base[sensor] + t;
            r.tracks.push(i);
            r.faults.extend(self.suspecters[i].iter().copied());
        }
    }

    fn signal_reads(&self, model: &Model, sig: Signal, r: &mut Reads) {
        match sig {
            Signal::Track { track } | Signal::TrackVolts { track } => {
                if let Some(i) = flat(model, &self.base, track) {
                    r.tracks.push(i);
                }
            }
            Signal::Merged { sensor } => self.sensor_reads(model, sensor, r),
            Signal::Input { .. } => {}
            Signal::Target => r.target = true,
        }
    }

    fn expr_reads(&self, model: &Model, e: &Expr, r: &mut Reads) {
        e.for_each_atom(&mut |a| match a {
            Expr::Fault { fault, .. } => r.faults.push(*fault),
            Expr::Suspect { track, .. } => {
                if let Some(i) = flat(model, &self.base, *track) {
                    r.faults.extend(self.suspecters[i].iter().copied());
                }
            }
            Expr::Compare { term, .. } => match *term {
                Term::Signal { signal } => self.signal_reads(model, signal, r),
                Term::Diff { a, b } | Term::AbsDiff { a, b } => {
                    self.signal_reads(model, a, r);
                    self.signal_reads(model, b, r);
                }
            },
            _ => {}
        });
    }

    /// Whether `e` is false for as long as the latched faults of `st` stay set.
    fn dead(&self, model: &Model, e: &Expr, st: &State) -> bool {
        match e {
            Expr::Not { e } => match e.as_ref() {
                Expr::Fault { fault, .. } => st.latched(model, *fault),
                Expr::Suspect { track, .. } => flat(model, &self.base, *track)
                    .is_some_and(|i| self.suspecters[i].iter().any(|&f| st.latched(model, f))),
                _ => false,
            },
            Expr::And { es } => es.iter().any(|x| self.dead(model, x, st)),
            Expr::Or { es } => !es.is_empty() && es.iter().all(|x| self.dead(model, x, st)),
            _ => false,
        }
    }

    /// As [`Cone::relevance`], remembered: the cone depends on the state only through its
    /// mode and which faults are latched.
    pub fn cached<'c>(
        &self,
        cache: &'c mut ConeCache,
        model: &Model,
        st: &State,
    ) -> &'c (Relevance, bool) {
        if model.faults.len() > 128 {
            // Too many faults for the mask: no sharing.
            cache.clear();
        }
        let mut mask = 0u128;
        for f in 0..model.faults.len().min(128) {
            if st.latched(model, f) {
                mask |= 1 << f;
            }
        }
        cache.entry((st.mode(), mask)).or_insert_with(|| {
            let mut rel = Relevance::default();
            let driver = self.relevance(model, st, &mut rel);
            (rel, driver)
        })
    }

    /// Fills `rel` with the cone of `st`; returns whether the driver's sensor is in it (the
    /// driver can then still steer the controller's memory).
    pub fn relevance(&self, model: &Model, st: &State, rel: &mut Relevance) -> bool {
        let ntracks = self.suspecters.len();
        rel.tracks.clear();
        rel.tracks.resize(ntracks, false);
        rel.faults.clear();
        rel.faults.resize(model.faults.len(), false);
        rel.transitions.clear();
        rel.transitions.resize(model.transitions.len(), false);
        rel.target = false;
        rel.integral = false;
        let mut r = Reads::default();
        let mode = st.mode();
        for &t in self.exits.get(mode).map_or(&[][..], |v| v.as_slice()) {
            let guard = &model.transitions[t].guard;
            if self.dead(model, guard, st) {
                continue;
            }
            rel.transitions[t] = true;
            self.expr_reads(model, guard, &mut r);
        }
        if let Some(m) = model.modes.get(mode) {
            match m.demand {
                Demand::Sensor { sensor } => self.sensor_reads(model, sensor, &mut r),
                Demand::Input { .. } | Demand::Fixed { .. } | Demand::DriveOff => {}
            }
            if !matches!(m.demand, Demand::DriveOff) {
                self.sensor_reads(model, model.feedback, &mut r);
                rel.integral = true;
                // A slew limit steps from the last target.
                rel.target |= m.rate.is_some();
            }
        }
        // Close over the monitors read.
        let mut work: Vec<usize> = Vec::new();
        loop {
            rel.target |= r.target;
            for &i in &r.tracks {
                rel.tracks[i] = true;
            }
            for &f in &r.faults {
                if !rel.faults[f] {
                    rel.faults[f] = true;
                    work.push(f);
                }
            }
            r = Reads::default();
            let Some(f) = work.pop() else { break };
            let fr = &self.reads[f];
            r.tracks.extend_from_slice(&fr.tracks);
            r.faults.extend_from_slice(&fr.faults);
            r.target = fr.target;
        }
        model.driver.is_some_and(|d| {
            let n = model.sensors.get(d).map_or(0, |s| s.tracks.len());
            (0..n).any(|t| rel.tracks[self.base[d] + t])
        })
    }
}

fn flat(model: &Model, base: &[usize], t: TrackRef) -> Option<usize> {
    let b = *base.get(t.sensor)?;
    (t.track < model.sensors.get(t.sensor)?.tracks.len()).then_some(b + t.track)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::system::{System, Vehicle};
    use crate::time::Time;

    fn reference() -> Model {
        let src = include_str!("../../scenarios/van/van_throttle.limp");
        crate::model::lower(src).expect("reference lowers")
    }

    /// Drives a fault-free van with the pedal at `pedal` for `steps` periods, with `inj`
    /// broken at the start, and returns the controller state.
    fn state_after(model: &Model, inj: Option<&str>, pedal: f64, steps: u64) -> State {
        let v = Vehicle::new(model).expect("plant");
        let mut sys = System::new(&v);
        if let Some(name) = inj {
            let i = crate::prove::space::fault_space(model)
                .into_iter()
                .find(|i| crate::faults::describe(model, i) == name)
                .expect("catalogued");
            sys.inject(i, Time::ZERO);
        }
        let d = model.driver.expect("driver");
        for k in 0..steps {
            let now = Time(model.period.0 * k);
            sys.set_position(d, pedal);
            sys.controller_tick(now, &mut Vec::new());
            sys.advance_plant(now, model.period);
        }
        sys.controller_state().expect("stepped").clone()
    }

    #[test]
    fn normal_mode_depends_on_everything_the_pedal_loop_reads() {
        let m = reference();
        let cone = Cone::new(&m);
        let st = state_after(&m, None, 30.0, 40);
        let mut rel = Relevance::default();
        assert!(
            cone.relevance(&m, &st, &mut rel),
            "the pedal steers normal mode"
        );
        assert!(rel.tracks.iter().all(|&t| t), "{rel:?}");
        assert!(rel.integral);
        // Every monitor is read by some guard out of normal (directly or through suspect()).
        assert!(rel.faults.iter().all(|&f| f), "{rel:?}");
    }

    #[test]
    fn shutdown_forgets_the_pedal_and_idle_only_with_a_latched_disagreement_too() {
        let m = reference();
        let cone = Cone::new(&m);
        let mut rel = Relevance::default();
        // A throttle track open: range fault latched, shutdown, no exits, drive off.
        let st = state_after(&m, Some("throttle.a open"), 30.0, 40);
        assert_eq!(m.modes[st.mode()].name, "shutdown");
        assert!(!cone.relevance(&m, &st, &mut rel), "{rel:?}");
        assert!(rel.tracks.iter().all(|&t| !t) && !rel.integral, "{rel:?}");
        // A pedal track offset the range checks miss: the disagreement latches, idle_only's
        // way back to normal needs `not pedal_disagree`, so it is dead and the pedal leaves
        // the cone; the throttle loop and the shutdown monitors stay.
        let st = state_after(&m, Some("pedal.a offset +1 V"), 30.0, 40);
        assert_eq!(m.modes[st.mode()].name, "idle_only");
        assert!(!cone.relevance(&m, &st, &mut rel), "{rel:?}");
        let tracks: Vec<bool> = rel.tracks.clone();
        assert_eq!(tracks, vec![false, false, true, true]);
        let on: Vec<&str> = m
            .faults
            .iter()
            .zip(&rel.faults)
            .filter(|(_, on)| **on)
            .map(|(f, _)| f.name.as_str())
            .collect();
        assert_eq!(
            on,
            [
                "throttle_a_range",
                "throttle_b_range",
                "throttle_disagree",
                "tracking"
            ]
        );
    }
}
