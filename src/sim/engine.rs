//! The discrete-event engine: script events, controller steps every `period` and trace samples,
//! in one time-ordered sweep over integer nanoseconds, with the throttle body advanced in fixed
//! sub-steps between instants. At one instant the order is: script events, then the controller
//! step, then the sample.

use super::script::{Action, ExpectKind, Script};
use super::system::{System, Vehicle};
use super::trace::{EventKind, Trace, TraceEvent, TraceSample, Verdict};
use crate::controller::Event;
use crate::faults;
use crate::model::Model;
use crate::report::text;
use crate::time::Time;

/// How a run is sampled and integrated.
#[derive(Clone, Copy, Debug)]
pub struct RunOptions {
    /// Interval of the trace samples.
    pub sample_every: Time,
}

impl Default for RunOptions {
    fn default() -> Self {
        RunOptions {
            sample_every: Time::from_ms(10),
        }
    }
}

/// A linear move of a true position, for `pedal X % over T`.
#[derive(Clone, Copy, Debug)]
struct Ramp {
    from: f64,
    to: f64,
    t0: Time,
    t1: Time,
}

impl Ramp {
    fn at(&self, t: Time) -> f64 {
        if t >= self.t1 || self.t1 <= self.t0 {
            self.to
        } else if t <= self.t0 {
            self.from
        } else {
            let f = (t.0 - self.t0.0) as f64 / (self.t1.0 - self.t0.0) as f64;
            self.from + (self.to - self.from) * f
        }
    }
}

/// What the expectations need to know, gathered while running.
struct Watch {
    /// Per expectation: (decided, passed, decided_at, explanation).
    verdicts: Vec<Option<(bool, Time, String)>>,
    /// Last instant each fault became set, and each mode became active.
    fault_set_at: Vec<Option<Time>>,
    mode_since: Time,
    /// Extreme openings seen in each opening window: (value, instant).
    extreme: Vec<Option<(f64, Time)>>,
}

/// Replays a script against a model: the trace with every expectation's verdict.
pub fn run(
    model: &Model,
    script: &Script,
    opts: RunOptions,
) -> Result<Trace, crate::plant::PlantError> {
    let vehicle = Vehicle::new(model)?;
    Ok(run_on(&vehicle, script, opts))
}

/// [`run`] on a prepared vehicle (the script resolved against the vehicle's model). Preparing
/// one derives the plate's parameters by bisection over simulated figures, which costs more
/// than a few seconds of simulated drive: replay many scripts of one policy on one vehicle.
pub fn run_on(vehicle: &Vehicle, script: &Script, opts: RunOptions) -> Trace {
    let model = vehicle.ctl.model();
    let mut sys = System::new(vehicle);
    let period = model.period;
    let sample_every = if opts.sample_every == Time::ZERO {
        period
    } else {
        opts.sample_every
    };
    let length = script.length;

    let mut ramps: Vec<Ramp> = model
        .sensors
        .iter()
        .map(|_| Ramp {
            from: 0.0,
            to: 0.0,
            t0: Time::ZERO,
            t1: Time::ZERO,
        })
        .collect();
    let mut trace = Trace {
        scenario: script.name.clone(),
        policy: model.name.clone(),
        length,
        sample_every,
        events: Vec::new(),
        samples: Vec::new(),
        expectations: Vec::new(),
        modes: model.modes.iter().map(|m| m.name.clone()).collect(),
        faults: model.faults.iter().map(|f| f.name.clone()).collect(),
    };
    let mut watch = Watch {
        verdicts: vec![None; script.expectations.len()],
        fault_set_at: vec![None; model.faults.len()],
        mode_since: Time::ZERO,
        extreme: vec![None; script.expectations.len()],
    };

    // Instants at which `by` expectations are decided.
    let mut checks: Vec<Time> = script
        .expectations
        .iter()
        .filter_map(|e| match e.kind {
            ExpectKind::FaultBy { by, .. } | ExpectKind::ModeBy { by, .. } => Some(by),
            _ => None,
        })
        .collect();
    checks.sort();
    checks.dedup();
    let mut next_check = 0usize;
    let mut next_event = 0usize;
    let mut next_tick = Time::ZERO;
    let mut next_sample = Time::ZERO;
    let mut now = Time::ZERO;
    let mut controller_events: Vec<Event> = Vec::new();
    loop {
        // Script events at this instant, in file order.
        while next_event < script.events.len() && script.events[next_event].at <= now {
            let ev = &script.events[next_event];
            apply(
                model, &mut sys, &mut ramps, &mut trace, ev.at, &ev.action, now,
            );
            next_event += 1;
        }
        // The controller step.
        if now == next_tick {
            for (s, r) in ramps.iter().enumerate() {
                sys.set_position(s, r.at(now));
            }
            controller_events.clear();
            // The first step after key on powers the controller up in the start mode with
            // every fault forgotten: the `since` of later verdicts counts from here.
            let powering_up = sys.key_on() && sys.controller_state().is_none();
            sys.controller_tick(now, &mut controller_events);
            if powering_up {
                watch.mode_since = now;
                watch.fault_set_at.fill(None);
            }
            for e in &controller_events {
                let kind = match *e {
                    Event::FaultPending { fault } => EventKind::FaultPending { fault },
                    Event::FaultLapsed { fault } => EventKind::FaultLapsed { fault },
                    Event::FaultSet { fault } => {
                        watch.fault_set_at[fault] = Some(now);
                        EventKind::FaultSet { fault }
                    }
                    Event::FaultCleared { fault } => EventKind::FaultCleared { fault },
                    Event::Transition {
                        from,
                        to,
                        transition,
                    } => {
                        watch.mode_since = now;
                        let guard = model
                            .transitions
                            .get(transition)
                            .map_or(String::new(), |t| text::expr(model, &t.guard));
                        EventKind::Transition { from, to, guard }
                    }
                };
                trace.events.push(TraceEvent { at: now, kind });
            }
            judge_step(model, script, &sys, &mut watch, now);
            next_tick = next_tick + period;
        }
        judge_opening(script, &mut watch, now, sys.opening());
        while next_check < checks.len() && checks[next_check] <= now {
            decide_by(model, script, &sys, &mut watch, now);
            next_check += 1;
        }
        if now == next_sample {
            let driver = model.driver.map_or(0.0, |d| ramps[d].at(now));
            trace.samples.push(TraceSample {
                at: now,
                driver,
                pedal: model.driver.map_or(0.0, |d| sys.merged(d)),
                target: sys.target(),
                opening: sys.opening(),
                duty: sys.duty(),
                mode: sys.mode(),
                key_on: sys.key_on(),
            });
            next_sample = next_sample + sample_every;
        }
        if now >= length {
            break;
        }
        let next_script = script
            .events
            .get(next_event)
            .map_or(length, |e| e.at.max(now));
        let check = checks.get(next_check).copied().unwrap_or(length);
        let until = next_tick
            .min(next_sample)
            .min(next_script)
            .min(check)
            .min(length);
        // Advance the plate sub-step by sub-step, watching the opening windows on each. With
        // no undecided window open before `until`, one call integrates the same sub-steps,
        // in closed-form jumps where the plate has no event (the same plate up to rounding;
        // see `plant::Plate`).
        let step = sys.substep();
        if watching(script, &watch, now, until) {
            // A jump moves the plate monotonically, so the sub-steps inside lie between its
            // ends, and both ends are judged at the top of the sweep. With no open window
            // starting or ending strictly inside, if the far end passes every open window so
            // did every sub-step, and the extremes are at the ends: take the jump. Otherwise
            // sub-step, to find the first failing instant.
            let start = sys.plate();
            if !edge_inside(script, &watch, now, until)
                && sys.jump_plant(Time(until.0 - now.0))
                && passes(script, &watch, until, sys.opening())
            {
                now = until;
                continue;
            }
            sys.set_plate(start);
            let mut t = now;
            while t < until {
                let dt = Time((until.0 - t.0).min(step.0));
                sys.advance_plant(t, dt);
                t = t + dt;
                if t < until {
                    judge_opening(script, &mut watch, t, sys.opening());
                }
            }
        } else if until > now {
            sys.advance_plant(now, Time(until.0 - now.0));
        }
        now = until;
    }
    trace.expectations = finish(model, script, &sys, &watch, length);
    trace
}

/// Whether an undecided opening window covers some instant strictly between `from` and
/// `until` (the instants themselves are judged at the top of the sweep).
fn watching(script: &Script, w: &Watch, from: Time, until: Time) -> bool {
    open_windows(script, w).any(|win| win.from < until && win.to > from)
}

/// An `expect opening at most|at least X` window.
#[derive(Clone, Copy, Debug)]
struct Window {
    x: f64,
    from: Time,
    to: Time,
    at_most: bool,
}

impl Window {
    fn of(kind: &ExpectKind) -> Option<Window> {
        match *kind {
            ExpectKind::OpeningAtMost { x, from, to } => Some(Window {
                x,
                from,
                to,
                at_most: true,
            }),
            ExpectKind::OpeningAtLeast { x, from, to } => Some(Window {
                x,
                from,
                to,
                at_most: false,
            }),
            _ => None,
        }
    }

    fn covers(&self, t: Time) -> bool {
        t >= self.from && t <= self.to
    }

    /// Whether `opening` is outside the bound (beyond a rounding tolerance).
    fn breaks(&self, opening: f64) -> bool {
        if self.at_most {
            opening > self.x + 1e-9
        } else {
            opening < self.x - 1e-9
        }
    }

    /// Whether `opening` is further out than the extreme `v` seen so far.
    fn beyond(&self, opening: f64, v: f64) -> bool {
        if self.at_most {
            opening > v
        } else {
            opening < v
        }
    }
}

/// The opening windows not decided yet.
fn open_windows<'a>(script: &'a Script, w: &'a Watch) -> impl Iterator<Item = Window> + 'a {
    script
        .expectations
        .iter()
        .zip(&w.verdicts)
        .filter(|(_, v)| v.is_none())
        .filter_map(|(e, _)| Window::of(&e.kind))
}

/// Applies one script action at instant `now`.
fn apply(
    model: &Model,
    sys: &mut System,
    ramps: &mut [Ramp],
    trace: &mut Trace,
    at: Time,
    action: &Action,
    now: Time,
) {
    let _ = at;
    let kind = match action {
        Action::Position {
            sensor,
            percent,
            over,
        } => {
            let from = ramps[*sensor].at(now);
            let t1 = now + over.unwrap_or(Time::ZERO);
            ramps[*sensor] = Ramp {
                from,
                to: *percent,
                t0: now,
                t1,
            };
            let name = &model.sensors[*sensor].name;
            let text = match over {
                Some(o) => format!("{name} {} % over {o}", crate::time::trim(*percent)),
                None => format!("{name} {} %", crate::time::trim(*percent)),
            };
            // The plant must see the driver's position at this instant even between ticks.
            sys.set_position(*sensor, from);
            EventKind::Script { text }
        }
        Action::Break(inj) => {
            for (s, r) in ramps.iter().enumerate() {
                sys.set_position(s, r.at(now));
            }
            sys.inject(*inj, now);
            EventKind::Break {
                text: faults::describe(model, inj),
            }
        }
        Action::Mend { target, fault } => {
            let mended = sys.mend(|inj| {
                target.covers(inj) && fault.is_none_or(|k| k == super::script::FaultKind::of(inj))
            });
            let names: Vec<String> = mended.iter().map(|i| faults::describe(model, i)).collect();
            EventKind::Mend {
                text: if names.is_empty() {
                    "(nothing broken)".into()
                } else {
                    names.join(", ")
                },
            }
        }
        Action::KeyOff => {
            sys.key_off();
            EventKind::Script {
                text: "key off".into(),
            }
        }
        Action::KeyOn => {
            sys.key_on_at(now);
            EventKind::Script {
                text: "key on".into(),
            }
        }
        Action::Switch { switch, on } => {
            sys.set_switch(*switch, *on);
            EventKind::Script {
                text: format!(
                    "{} {}",
                    model.switches[*switch].name,
                    if *on { "on" } else { "off" }
                ),
            }
        }
        Action::Input { input, percent } => {
            sys.set_input(*input, *percent);
            EventKind::Script {
                text: format!(
                    "{} {} %",
                    model.inputs[*input].name,
                    crate::time::trim(*percent)
                ),
            }
        }
    };
    trace.events.push(TraceEvent { at: now, kind });
}

/// Expectations decided by the controller's state after a step.
fn judge_step(model: &Model, script: &Script, sys: &System, w: &mut Watch, now: Time) {
    for (i, e) in script.expectations.iter().enumerate() {
        if w.verdicts[i].is_some() {
            continue;
        }
        match e.kind {
            ExpectKind::ModeNever { mode } if sys.key_on() && sys.mode() == mode => {
                w.verdicts[i] = Some((
                    false,
                    now,
                    format!(
                        "mode {} became active at {} s",
                        model.modes[mode].name,
                        secs(now)
                    ),
                ));
            }
            ExpectKind::FaultNever { fault } if sys.key_on() && sys.fault_set(fault) => {
                w.verdicts[i] = Some((
                    false,
                    now,
                    format!("fault {} set at {} s", model.faults[fault].name, secs(now)),
                ));
            }
            _ => {}
        }
    }
}

/// Opening windows are watched at every instant and plant sub-step.
fn judge_opening(script: &Script, w: &mut Watch, t: Time, opening: f64) {
    for (i, e) in script.expectations.iter().enumerate() {
        if w.verdicts[i].is_some() {
            continue;
        }
        let Some(win) = Window::of(&e.kind).filter(|win| win.covers(t)) else {
            continue;
        };
        if w.extreme[i].is_none_or(|(v, _)| win.beyond(opening, v)) {
            w.extreme[i] = Some((opening, t));
        }
        if win.breaks(opening) {
            let what = if win.at_most { "reached" } else { "fell to" };
            w.verdicts[i] = Some((
                false,
                t,
                format!("the opening {what} {opening:.2} % at {} s", secs(t)),
            ));
        }
    }
}

/// Whether an undecided opening window starts or ends strictly between `from` and `until`.
fn edge_inside(script: &Script, w: &Watch, from: Time, until: Time) -> bool {
    let inside = |t: Time| t > from && t < until;
    open_windows(script, w).any(|win| inside(win.from) || inside(win.to))
}

/// Whether an opening at instant `t` breaks no undecided opening window that covers `t`.
fn passes(script: &Script, w: &Watch, t: Time, opening: f64) -> bool {
    // A NaN opening in a window does not pass (it sub-steps), though judging it breaks
    // nothing.
    open_windows(script, w).all(|win| !win.covers(t) || (!opening.is_nan() && !win.breaks(opening)))
}

fn secs(t: Time) -> String {
    crate::time::trim(t.as_secs_f64())
}

/// Verdicts for every expectation, at the end of the run.
fn finish(model: &Model, script: &Script, sys: &System, w: &Watch, length: Time) -> Vec<Verdict> {
    let _ = sys;
    script
        .expectations
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let (passed, at, why) = match (&w.verdicts[i], e.kind) {
                (Some((p, at, why)), _) => (*p, *at, why.clone()),
                (None, ExpectKind::ModeNever { mode }) => (
                    true,
                    length,
                    format!("mode {} was never active", model.modes[mode].name),
                ),
                (None, ExpectKind::FaultNever { fault }) => (
                    true,
                    length,
                    format!("fault {} was never set", model.faults[fault].name),
                ),
                (
                    None,
                    ExpectKind::OpeningAtMost { to, .. } | ExpectKind::OpeningAtLeast { to, .. },
                ) => {
                    let at = to.min(length);
                    match w.extreme[i] {
                        Some((v, t)) => (true, at, format!("extreme {v:.2} % at {} s", secs(t))),
                        None => (false, at, "the window lies outside the run".into()),
                    }
                }
                // `by` expectations are decided at their instant by `decide_by`.
                (None, _) => (false, length, "the run ended before the instant".into()),
            };
            Verdict {
                text: e.text.clone(),
                passed,
                decided_at: at,
                explanation: why,
            }
        })
        .collect()
}

/// Records the verdicts of `by` expectations: called with the state at each instant `by`.
fn decide_by(model: &Model, script: &Script, sys: &System, w: &mut Watch, now: Time) {
    for (i, e) in script.expectations.iter().enumerate() {
        if w.verdicts[i].is_some() {
            continue;
        }
        match e.kind {
            ExpectKind::FaultBy { fault, by } if by == now => {
                let name = &model.faults[fault].name;
                w.verdicts[i] = Some(if sys.fault_set(fault) {
                    let since = w.fault_set_at[fault]
                        .map_or(String::new(), |t| format!(" since {} s", secs(t)));
                    (true, now, format!("{name} set{since}"))
                } else if sys.fault_pending(fault) {
                    (
                        false,
                        now,
                        format!("{name} still pending at {} s", secs(now)),
                    )
                } else {
                    (false, now, format!("{name} not set at {} s", secs(now)))
                });
            }
            ExpectKind::ModeBy { mode, by } if by == now => {
                let name = &model.modes[mode].name;
                w.verdicts[i] = Some(if sys.key_on() && sys.mode() == mode {
                    (
                        true,
                        now,
                        format!("{name} active since {} s", secs(w.mode_since)),
                    )
                } else {
                    (
                        false,
                        now,
                        format!(
                            "{} active at {} s, not {name}",
                            model.modes[sys.mode()].name,
                            secs(now)
                        ),
                    )
                });
            }
            _ => {}
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference() -> Model {
        let (m, d) = crate::model::load(include_str!("../../scenarios/van/van_throttle.limp"));
        m.unwrap_or_else(|| panic!("reference policy lowers: {d:?}"))
    }

    fn script(model: &Model, text: &str) -> Script {
        let (ast, d) = super::super::script::parse_script(text);
        let ast = ast.unwrap_or_else(|| panic!("parses: {d:?}"));
        super::super::script::resolve(&ast, model).unwrap_or_else(|d| panic!("resolves: {d:?}"))
    }

    const DRIVE: &str = "scenario s {\n  policy \"p.limp\"\n  length 1 s\n\n  at 0 s      pedal 30 %\n  \
                         at 400 ms   key off\n  at 600 ms   key on\n\n  \
                         expect opening at most 60 % from 0.2 s to 0.3 s\n  \
                         expect mode normal by 800 ms\n}\n";

    #[test]
    fn a_shared_vehicle_replays_like_a_fresh_one() {
        let m = reference();
        let s = script(&m, DRIVE);
        let fresh = run(&m, &s, RunOptions::default()).expect("plant");
        let v = Vehicle::new(&m).expect("plant");
        let first = run_on(&v, &s, RunOptions::default());
        let again = run_on(&v, &s, RunOptions::default());
        assert_eq!(fresh, first);
        assert_eq!(first, again);
        assert!(fresh.passed(), "{}", fresh.to_text(true));
    }

    #[test]
    fn windows_are_watched_only_where_they_lie() {
        let m = reference();
        let s = script(&m, DRIVE);
        let w = Watch {
            verdicts: vec![None; s.expectations.len()],
            fault_set_at: vec![None; m.faults.len()],
            mode_since: Time::ZERO,
            extreme: vec![None; s.expectations.len()],
        };
        let ms = Time::from_ms;
        assert!(
            !watching(&s, &w, ms(0), ms(200)),
            "ends where the window starts"
        );
        assert!(watching(&s, &w, ms(195), ms(205)));
        assert!(watching(&s, &w, ms(250), ms(255)));
        assert!(
            !watching(&s, &w, ms(300), ms(305)),
            "starts where the window ends"
        );
        let mut decided = w;
        decided.verdicts[0] = Some((false, ms(250), String::new()));
        assert!(
            !watching(&s, &decided, ms(250), ms(255)),
            "a decided window"
        );
    }

    #[test]
    fn power_up_after_a_key_cycle_restarts_the_mode_clock() {
        let m = reference();
        let t = run(&m, &script(&m, DRIVE), RunOptions::default()).expect("plant");
        let v = &t.expectations[1];
        assert!(v.passed);
        assert!(v.explanation.contains("since 0.6 s"), "{}", v.explanation);
    }
}
