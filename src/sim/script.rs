//! Scenario scripts resolved against a policy model: names become indices, quantities become
//! SI values checked for unit and physical range, faults become `crate::faults::Injection`s.
//! The simulator takes a [`Script`] only, so nothing unchecked reaches it.

use crate::diag::{Diagnostic, did_you_mean};
use crate::faults::{ActuatorFault, Injection, SensorFault, TrackFault};
use crate::lang::Span;
use crate::lang::scenario::{
    ActionAst, ExpectAst, FaultForm, Item, Quantity, ScenarioAst, SetValue, Target, Unit,
};
use crate::model::{FaultId, InputId, ModeId, Model, SensorId, SwitchId, TrackRef};
use crate::time::{Time, trim};
use serde::Serialize;

pub use crate::lang::scenario::FaultKind;

/// The longest run a script may ask for: bounds the memory and time of one replay.
pub const MAX_LENGTH: Time = Time(600 * 1_000_000_000);

/// A scenario resolved against one policy.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Script {
    pub name: String,
    /// The policy file as written, relative to the scenario file.
    pub policy_path: String,
    pub length: Time,
    /// Sorted by time; events at one instant keep their file order.
    pub events: Vec<ScriptEvent>,
    pub expectations: Vec<Expectation>,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ScriptEvent {
    pub at: Time,
    pub span: Span,
    pub action: Action,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Action {
    /// The true position of a sensor the driver moves (never the feedback sensor). With
    /// `over`, a linear ramp from the position at the event instant; a zero ramp is `None`.
    Position {
        sensor: SensorId,
        percent: f64,
        over: Option<Time>,
    },
    Break(Injection),
    /// Mends every active injection that `target` covers (see [`MendTarget::covers`]) and,
    /// when `fault` is given, that is of this kind.
    Mend {
        target: MendTarget,
        fault: Option<FaultKind>,
    },
    KeyOff,
    KeyOn,
    Switch {
        switch: SwitchId,
        on: bool,
    },
    /// An analog input's demand, in percent (the controller clamps it into the input's band).
    Input {
        input: InputId,
        percent: f64,
    },
}

/// What a `mend` line names.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum MendTarget {
    Track(TrackRef),
    Sensor(SensorId),
    Actuator,
}

impl MendTarget {
    /// Whether mending this target removes `inj`. A track covers faults injected on it and
    /// bridges that reach it from the other end (a bridge is one short between two wires); a
    /// sensor covers its ground and supply faults and every fault on its tracks.
    pub fn covers(&self, inj: &Injection) -> bool {
        match (*self, *inj) {
            (MendTarget::Track(t), Injection::Track { track, fault }) => {
                track == t || matches!(fault, TrackFault::Bridged { other } if other == t)
            }
            (MendTarget::Sensor(s), Injection::Track { track, .. }) => track.sensor == s,
            (MendTarget::Sensor(s), Injection::Sensor { sensor, .. }) => sensor == s,
            (MendTarget::Actuator, Injection::Actuator { .. }) => true,
            _ => false,
        }
    }
}

impl FaultKind {
    /// The kind of an injection, for `mend TARGET KIND`.
    pub fn of(inj: &Injection) -> FaultKind {
        match inj {
            Injection::Track { fault, .. } => match fault {
                TrackFault::Open => FaultKind::Open,
                TrackFault::ShortGround => FaultKind::ShortGround,
                TrackFault::ShortSupply => FaultKind::ShortSupply,
                TrackFault::Stuck => FaultKind::Stuck,
                TrackFault::Offset { .. } => FaultKind::Offset,
                TrackFault::Gain { .. } => FaultKind::Gain,
                TrackFault::Bridged { .. } => FaultKind::Bridged,
                TrackFault::Intermittent { .. } => FaultKind::Intermittent,
            },
            Injection::Sensor { fault, .. } => match fault {
                SensorFault::GroundOffset { .. } => FaultKind::GroundOffset,
                SensorFault::Supply { .. } => FaultKind::Supply,
            },
            Injection::Actuator { fault } => match fault {
                ActuatorFault::Stuck => FaultKind::Stuck,
                ActuatorFault::Weak { .. } => FaultKind::Weak,
                ActuatorFault::SpringBroken => FaultKind::SpringBroken,
            },
        }
    }
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Expectation {
    /// Canonical text, e.g. `fault pedal_a_low by 1.05 s`.
    pub text: String,
    pub span: Span,
    pub kind: ExpectKind,
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ExpectKind {
    /// The fault is set at instant `by`.
    FaultBy { fault: FaultId, by: Time },
    /// The mode is active at instant `by`.
    ModeBy { mode: ModeId, by: Time },
    /// The mode is active at no instant of the run.
    ModeNever { mode: ModeId },
    /// The fault is set at no instant of the run.
    FaultNever { fault: FaultId },
    /// The true opening stays at or below `x` percent on every plant sub-step in `from..=to`.
    OpeningAtMost { x: f64, from: Time, to: Time },
    /// The true opening stays at or above `x` percent on every plant sub-step in `from..=to`.
    OpeningAtLeast { x: f64, from: Time, to: Time },
}

/// Parses a scenario file (re-export of [`crate::lang::scenario::parse`] for callers of the
/// simulator).
pub fn parse_script(src: &str) -> (Option<ScenarioAst>, Vec<Diagnostic>) {
    crate::lang::scenario::parse(src)
}

/// Resolves a parsed scenario against a policy model; on failure every error found.
pub fn resolve(ast: &ScenarioAst, model: &Model) -> Result<Script, Vec<Diagnostic>> {
    let mut r = Resolver {
        model,
        diags: Vec::new(),
    };
    let script = r.script(ast);
    match script {
        Some(s) if r.diags.is_empty() => Ok(s),
        _ => Err(r.diags),
    }
}

/// The physical kind a place wants, for unit checks and wording.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Kind {
    Time,
    Percent,
    Volts,
}

impl Kind {
    fn of(u: Unit) -> Kind {
        match u {
            Unit::Micros | Unit::Millis | Unit::Seconds => Kind::Time,
            Unit::Percent => Kind::Percent,
            Unit::Volts | Unit::Millivolts => Kind::Volts,
        }
    }

    fn words(self) -> &'static str {
        match self {
            Kind::Time => "a time",
            Kind::Percent => "a percentage",
            Kind::Volts => "a voltage",
        }
    }

    fn units(self) -> &'static str {
        match self {
            Kind::Time => "`ms`, `s` or `us`",
            Kind::Percent => "`%`",
            Kind::Volts => "`V` or `mV`",
        }
    }

    fn unit(self) -> &'static str {
        match self {
            Kind::Time => "ms",
            Kind::Percent => "%",
            Kind::Volts => "V",
        }
    }
}

/// What a `break` or `mend` target resolved to.
#[derive(Clone, Copy)]
enum Place {
    Track(TrackRef),
    Sensor(SensorId),
    Actuator,
}

impl Place {
    fn words(self) -> &'static str {
        match self {
            Place::Track(_) => "a track",
            Place::Sensor(_) => "a sensor",
            Place::Actuator => "the actuator",
        }
    }

    fn admits(self, k: FaultKind) -> bool {
        use FaultKind::*;
        match self {
            Place::Track(_) => {
                matches!(
                    k,
                    Open | ShortGround
                        | ShortSupply
                        | Stuck
                        | Offset
                        | Gain
                        | Bridged
                        | Intermittent
                )
            }
            Place::Sensor(_) => matches!(k, GroundOffset | Supply),
            Place::Actuator => matches!(k, Stuck | Weak | SpringBroken),
        }
    }
}

struct Resolver<'a> {
    model: &'a Model,
    diags: Vec<Diagnostic>,
}

impl Resolver<'_> {
    fn err(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }

    fn script(&mut self, ast: &ScenarioAst) -> Option<Script> {
        let mut policy: Option<(String, Span)> = None;
        let mut length: Option<(Option<Time>, Span)> = None;
        for item in &ast.items {
            match item {
                Item::Policy { path, span } => {
                    if path.value.trim().is_empty() {
                        self.err(
                            Diagnostic::error("empty-path", path.span, "the policy path is empty")
                                .with_label("no file named")
                                .with_hint("name the policy file, relative to this scenario: `policy \"van_throttle.limp\"`"),
                        );
                    }
                    self.once("policy", &mut policy, path.value.clone(), *span);
                }
                Item::Length { length: q, span } => {
                    let t = self.length(q);
                    self.once("length", &mut length, t, *span);
                }
                Item::Event(_) | Item::Expect(_) => {}
            }
        }
        if policy.is_none() {
            self.missing(ast.name.span, "the policy", "policy \"van_throttle.limp\"");
        }
        if length.is_none() {
            self.missing(ast.name.span, "the length of the run", "length 3.5 s");
        }
        let end = length.and_then(|(t, _)| t);

        let mut events = Vec::new();
        let mut expectations = Vec::new();
        for item in &ast.items {
            match item {
                Item::Event(e) => {
                    let at = self.time(&e.at, "the event time");
                    if let (Some(at), Some(end)) = (at, end) {
                        self.before_end(at, end, e.at.span, "the event time");
                    }
                    let action = self.action(&e.action);
                    if let (Some(at), Some(action)) = (at, action) {
                        events.push(ScriptEvent {
                            at,
                            span: e.span,
                            action,
                        });
                    }
                }
                Item::Expect(x) => {
                    if let Some((text, kind)) = self.expectation(&x.kind, end) {
                        expectations.push(Expectation {
                            text,
                            span: x.span,
                            kind,
                        });
                    }
                }
                Item::Policy { .. } | Item::Length { .. } => {}
            }
        }
        // `sort_by_key` is stable: events at one instant act in file order.
        events.sort_by_key(|e| e.at);
        Some(Script {
            name: ast.name.text.clone(),
            policy_path: policy?.0,
            length: end?,
            events,
            expectations,
        })
    }

    fn once<T>(&mut self, what: &str, slot: &mut Option<(T, Span)>, value: T, span: Span) {
        if let Some((_, first)) = slot {
            let first = *first;
            self.err(Diagnostic::duplicate_item(what, span, first));
        } else {
            *slot = Some((value, span));
        }
    }

    fn missing(&mut self, span: Span, what: &str, example: &str) {
        self.err(Diagnostic::missing_item(
            span,
            what,
            format!("this scenario needs {what}"),
            example,
        ));
    }

    fn length(&mut self, q: &Quantity) -> Option<Time> {
        let t = self.time(q, "the length")?;
        if t == Time::ZERO {
            self.err(
                Diagnostic::error("out-of-range", q.span, "the length of the run is zero")
                    .with_label("nothing would run")
                    .with_hint("give the run a length such as `length 3.5 s`"),
            );
            return None;
        }
        if t > MAX_LENGTH {
            self.err(
                Diagnostic::error("out-of-range", q.span, format!("the length {t} is over the limit of {MAX_LENGTH}"))
                    .with_label("too long")
                    .with_hint("a scenario replays at most 10 minutes; split a longer drive into several scripts"),
            );
            return None;
        }
        Some(t)
    }

    fn before_end(&mut self, t: Time, end: Time, span: Span, what: &str) {
        if t > end {
            self.err(
                Diagnostic::error(
                    "after-end",
                    span,
                    format!("{what} {t} is after the end of the run at {end}"),
                )
                .with_label("after the end")
                .with_hint("move it before the end or lengthen the run with `length`"),
            );
        }
    }

    /// A quantity's value in SI (seconds, volts) or percent, after the unit checks.
    fn qty(&mut self, q: &Quantity, want: Kind, what: &str) -> Option<f64> {
        let Some(unit) = &q.unit else {
            self.err(
                Diagnostic::error("missing-unit", q.span, format!("{what} has no unit"))
                    .with_label(format!("expected {}", want.words()))
                    .with_hint(format!(
                        "every quantity carries its unit, e.g. `{} {}`; {} takes {}",
                        q.number,
                        want.unit(),
                        want.words(),
                        want.units()
                    )),
            );
            return None;
        };
        let Some(u) = unit.unit else {
            self.err(
                Diagnostic::error(
                    "wrong-unit",
                    unit.span,
                    format!("`{}` is not a unit", unit.text),
                )
                .with_label(format!("expected {}", want.units()))
                .with_hint(format!(
                    "{what} is {}, in {}",
                    want.words(),
                    want.units()
                )),
            );
            return None;
        };
        if Kind::of(u) != want {
            self.err(
                Diagnostic::error(
                    "wrong-unit",
                    unit.span,
                    format!("{what} must be in {}, found `{}`", want.units(), u.text()),
                )
                .with_label(format!("this is {}", Kind::of(u).words()))
                .with_hint(format!(
                    "write it in {}, e.g. `{} {}`",
                    want.units(),
                    q.number,
                    want.unit()
                )),
            );
            return None;
        }
        if !q.value.is_finite() {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    q.number_span,
                    format!("{what} is not a finite number"),
                )
                .with_label("too large to represent")
                .with_hint("write an ordinary number"),
            );
            return None;
        }
        Some(match u {
            Unit::Micros => q.value * 1e-6,
            Unit::Millis => q.value * 1e-3,
            Unit::Millivolts => q.value * 1e-3,
            Unit::Seconds | Unit::Percent | Unit::Volts => q.value,
        })
    }

    fn time(&mut self, q: &Quantity, what: &str) -> Option<Time> {
        let secs = self.qty(q, Kind::Time, what)?;
        if secs < 0.0 {
            self.err(
                Diagnostic::error("out-of-range", q.span, format!("{what} is negative"))
                    .with_label("a time cannot be negative")
                    .with_hint("script times count from the start of the run at `0 s`"),
            );
            return None;
        }
        // Anything beyond the run limit is an error at the caller; bounding it here keeps the
        // conversion exact and the message about the limit.
        match Time::from_secs_f64(secs) {
            Some(t) => Some(t),
            None => {
                self.err(
                    Diagnostic::error(
                        "out-of-range",
                        q.span,
                        format!("{what} is too large to represent"),
                    )
                    .with_label("too large")
                    .with_hint(format!("a run lasts at most {MAX_LENGTH}")),
                );
                None
            }
        }
    }

    fn ranged(
        &mut self,
        q: &Quantity,
        want: Kind,
        what: &str,
        lo: f64,
        hi: f64,
        why: &str,
    ) -> Option<f64> {
        let v = self.qty(q, want, what)?;
        if v < lo || v > hi {
            let unit = if want == Kind::Volts { "V" } else { "%" };
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    q.span,
                    format!(
                        "{what} is outside {} {unit} .. {} {unit}",
                        trim(lo),
                        trim(hi)
                    ),
                )
                .with_label("out of range")
                .with_hint(why.to_string()),
            );
            return None;
        }
        Some(v)
    }

    fn position(&mut self, q: &Quantity, what: &str) -> Option<f64> {
        self.ranged(
            q,
            Kind::Percent,
            what,
            0.0,
            100.0,
            "positions are percent of the full travel, 0 % to 100 %",
        )
    }

    fn demand(&mut self, q: &Quantity, what: &str) -> Option<f64> {
        let why = "an input's demand is 0 % to 100 % (the controller then clamps it into the input's band)";
        self.ranged(q, Kind::Percent, what, 0.0, 100.0, why)
    }

    fn unknown(&mut self, what: &str, name: &str, span: Span, candidates: &[&str]) {
        let mut d = Diagnostic::error("unknown-name", span, format!("unknown {what} `{name}`"))
            .with_label(format!("the policy has no {what} of this name"));
        d = match did_you_mean(name, candidates.iter().copied()) {
            Some(c) => d.with_hint(format!("did you mean `{c}`?")),
            None if candidates.is_empty() => d.with_hint(format!("the policy declares no {what}")),
            None => d.with_hint(format!("known: {}", candidates.join(", "))),
        };
        self.err(d);
    }

    fn action(&mut self, a: &ActionAst) -> Option<Action> {
        match a {
            ActionAst::Set { name, value, .. } => self.set(&name.text, name.span, value),
            ActionAst::Key { on, .. } => Some(if on.on { Action::KeyOn } else { Action::KeyOff }),
            ActionAst::Break { target, fault, .. } => {
                let place = self.place(target)?;
                let kind = fault.form.kind();
                if !self.admits(place, kind, target, fault.span) {
                    return None;
                }
                self.injection(place, &fault.form, target)
                    .map(Action::Break)
            }
            ActionAst::Mend { target, kind, .. } => {
                let place = self.place(target)?;
                if let Some(k) = kind
                    && !self.admits(place, k.kind, target, k.span)
                {
                    return None;
                }
                let target = match place {
                    Place::Track(t) => MendTarget::Track(t),
                    Place::Sensor(s) => MendTarget::Sensor(s),
                    Place::Actuator => MendTarget::Actuator,
                };
                Some(Action::Mend {
                    target,
                    fault: kind.map(|k| k.kind),
                })
            }
        }
    }

    /// `NAME X %`, `NAME X % over T` or `NAME on|off`.
    fn set(&mut self, name: &str, span: Span, value: &SetValue) -> Option<Action> {
        let m = self.model;
        let sensor = m.sensor_id(name);
        let input = m.inputs.iter().position(|i| i.name == name);
        let switch = m.switches.iter().position(|s| s.name == name);
        match value {
            SetValue::Level { value, over } => {
                if let Some(s) = sensor {
                    if s == m.feedback {
                        self.err(
                            Diagnostic::error(
                                "feedback-position",
                                span,
                                format!("a script cannot set `{name}`: it is the plate position feedback"),
                            )
                            .with_label("the plant moves this sensor")
                            .with_hint(format!(
                                "the plate goes where the controller and springs put it; to disturb its \
                                 feedback, break a track instead, e.g. `break {name}.{} stuck`",
                                m.sensors[s].tracks.first().map_or("a", |t| t.name.as_str())
                            )),
                        );
                        return None;
                    }
                    let percent = self.position(value, &format!("the position of `{name}`"));
                    let over = match over {
                        Some(q) => Some(self.time(q, "the ramp time")?),
                        None => None,
                    };
                    return Some(Action::Position {
                        sensor: s,
                        percent: percent?,
                        over: over.filter(|t| *t > Time::ZERO),
                    });
                }
                if let Some(i) = input {
                    if let Some(q) = over {
                        self.err(
                            Diagnostic::error(
                                "no-ramp",
                                q.span,
                                format!("`{name}` is an input and takes no ramp"),
                            )
                            .with_label("ramps apply to sensor positions only")
                            .with_hint(format!("set the input in steps: `{name} X %`")),
                        );
                    }
                    let percent = self.demand(value, &format!("the input `{name}`"))?;
                    return over
                        .is_none()
                        .then_some(Action::Input { input: i, percent });
                }
                if switch.is_some() {
                    self.err(
                        Diagnostic::error(
                            "wrong-target",
                            value.span,
                            format!("`{name}` is a switch, not a position"),
                        )
                        .with_label("a switch is on or off")
                        .with_hint(format!("write `{name} on` or `{name} off`")),
                    );
                    return None;
                }
                self.unknown_settable(name, span);
                None
            }
            SetValue::Switch { on } => {
                if let Some(sw) = switch {
                    return Some(Action::Switch {
                        switch: sw,
                        on: on.on,
                    });
                }
                if sensor.is_some() || input.is_some() {
                    let what = if sensor.is_some() {
                        "a sensor"
                    } else {
                        "an input"
                    };
                    self.err(
                        Diagnostic::error(
                            "wrong-target",
                            on.span,
                            format!("`{name}` is {what}, not a switch"),
                        )
                        .with_label("only a switch is on or off")
                        .with_hint(format!("give a position, e.g. `{name} 20 %`")),
                    );
                    return None;
                }
                self.unknown_settable(name, span);
                None
            }
        }
    }

    fn unknown_settable(&mut self, name: &str, span: Span) {
        let m = self.model;
        let mut names: Vec<&str> = Vec::new();
        names.extend(
            m.sensors
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != m.feedback)
                .map(|(_, s)| s.name.as_str()),
        );
        names.extend(m.inputs.iter().map(|i| i.name.as_str()));
        names.extend(m.switches.iter().map(|s| s.name.as_str()));
        self.unknown("sensor, input or switch", name, span, &names);
    }

    fn place(&mut self, t: &Target) -> Option<Place> {
        let m = self.model;
        let sensor = m.sensor_id(&t.base.text);
        match (&t.track, sensor) {
            (Some(track), Some(s)) => match m.track_ref(&t.base.text, &track.text) {
                Some(r) => Some(Place::Track(r)),
                None => {
                    // Track names are a letter or two, too short for a spelling suggestion:
                    // list them all.
                    let names: Vec<String> = m.sensors[s]
                        .tracks
                        .iter()
                        .map(|k| format!("`{}.{}`", t.base.text, k.name))
                        .collect();
                    self.err(
                        Diagnostic::error(
                            "unknown-name",
                            track.span,
                            format!("sensor `{}` has no track `{}`", t.base.text, track.text),
                        )
                        .with_label("no track of this name")
                        .with_hint(format!("its tracks: {}", names.join(", "))),
                    );
                    None
                }
            },
            (Some(_), None) => {
                let names: Vec<&str> = m.sensors.iter().map(|s| s.name.as_str()).collect();
                self.unknown("sensor", &t.base.text, t.base.span, &names);
                None
            }
            (None, Some(s)) => Some(Place::Sensor(s)),
            (None, None) if t.base.text == "actuator" => Some(Place::Actuator),
            (None, None) => {
                let mut names: Vec<String> = m.sensors.iter().map(|s| s.name.clone()).collect();
                names.push("actuator".into());
                let tracks: Vec<String> = (0..m.sensors.len())
                    .flat_map(|s| {
                        (0..m.sensors[s].tracks.len()).map(move |k| TrackRef {
                            sensor: s,
                            track: k,
                        })
                    })
                    .map(|r| m.track_name(r))
                    .collect();
                names.extend(tracks);
                let refs: Vec<&str> = names.iter().map(String::as_str).collect();
                self.unknown("sensor, track or actuator", &t.base.text, t.span, &refs);
                None
            }
        }
    }

    /// Checks that a kind of fault can happen where the script puts it.
    fn admits(&mut self, place: Place, kind: FaultKind, target: &Target, span: Span) -> bool {
        if place.admits(kind) {
            return true;
        }
        let m = self.model;
        let hint = match place {
            Place::Sensor(s) if Place::Track(TrackRef { sensor: s, track: 0 }).admits(kind) => {
                let track = m.sensors[s].tracks.first().map_or("a", |t| t.name.as_str());
                format!("`{}` is a fault of one wire: name a track, e.g. `{}.{track}`", kind.words(), target.text())
            }
            Place::Track(r) if Place::Sensor(r.sensor).admits(kind) => format!(
                "`{}` hits the whole sensor: write `{}` without a track",
                kind.words(),
                m.sensors[r.sensor].name
            ),
            _ => "on a track: `open`, `short ground`, `short supply`, `stuck`, `offset`, `gain`, `bridged`, \
                  `intermittent`; on a sensor: `ground offset`, `supply`; on the actuator: `stuck`, `weak`, \
                  `spring broken`"
                .to_string(),
        };
        self.err(
            Diagnostic::error(
                "wrong-target",
                span,
                format!(
                    "`{}` is not a fault of {} (`{}`)",
                    kind.words(),
                    place.words(),
                    target.text()
                ),
            )
            .with_label(format!("not a fault of {}", place.words()))
            .with_related(target.span, format!("this is {}", place.words()))
            .with_hint(hint),
        );
        false
    }

    fn injection(&mut self, place: Place, form: &FaultForm, target: &Target) -> Option<Injection> {
        let supply = self.model.supply;
        let volts_why = format!(
            "an offset is at most the sensor supply ({} V) either way",
            trim(supply)
        );
        match place {
            Place::Track(track) => {
                let fault = match form {
                    FaultForm::Open => TrackFault::Open,
                    FaultForm::ShortGround => TrackFault::ShortGround,
                    FaultForm::ShortSupply => TrackFault::ShortSupply,
                    FaultForm::Stuck => TrackFault::Stuck,
                    FaultForm::Offset { volts } => TrackFault::Offset {
                        volts: self.ranged(
                            volts,
                            Kind::Volts,
                            "the offset",
                            -supply,
                            supply,
                            &volts_why,
                        )?,
                    },
                    FaultForm::Gain { percent } => TrackFault::Gain {
                        factor: self.ranged(
                            percent,
                            Kind::Percent,
                            "the gain",
                            0.0,
                            200.0,
                            "a gain fault scales the signal by 0 % to 200 %",
                        )? / 100.0,
                    },
                    FaultForm::Bridged { other } => TrackFault::Bridged {
                        other: self.bridge(track, other, target)?,
                    },
                    FaultForm::Intermittent { open, every } => {
                        let o = self.time(open, "the open time");
                        let e = self.time(every, "the repeat period");
                        let (o, e) = (o?, e?);
                        if o == Time::ZERO || o >= e {
                            self.err(
                                Diagnostic::error(
                                    "out-of-range",
                                    open.span.join(every.span),
                                    format!("an intermittent open of {o} every {e} is never or always open"),
                                )
                                .with_label("the open time must be above zero and below the period")
                                .with_hint("e.g. `intermittent open 10 ms every 100 ms`; for a lasting break write `open`"),
                            );
                            return None;
                        }
                        TrackFault::Intermittent { open: o, every: e }
                    }
                    _ => return None,
                };
                Some(Injection::Track { track, fault })
            }
            Place::Sensor(sensor) => {
                let fault = match form {
                    FaultForm::GroundOffset { volts } => SensorFault::GroundOffset {
                        volts: self.ranged(
                            volts,
                            Kind::Volts,
                            "the ground offset",
                            -supply,
                            supply,
                            &volts_why,
                        )?,
                    },
                    FaultForm::Supply { volts } => SensorFault::Supply {
                        volts: self.ranged(
                            volts,
                            Kind::Volts,
                            "the faulty supply",
                            0.0,
                            2.0 * supply,
                            &format!(
                                "a supply fault lies between 0 V and twice the nominal {} V",
                                trim(supply)
                            ),
                        )?,
                    },
                    _ => return None,
                };
                Some(Injection::Sensor { sensor, fault })
            }
            Place::Actuator => {
                let fault = match form {
                    FaultForm::Stuck => ActuatorFault::Stuck,
                    FaultForm::SpringBroken => ActuatorFault::SpringBroken,
                    FaultForm::Weak { percent } => ActuatorFault::Weak {
                        factor: self.ranged(
                            percent,
                            Kind::Percent,
                            "the remaining torque",
                            0.0,
                            100.0,
                            "a weak motor keeps 0 % to 100 % of its torque",
                        )? / 100.0,
                    },
                    _ => return None,
                };
                Some(Injection::Actuator { fault })
            }
        }
    }

    /// The far end of `bridged`: another track of the same sensor (the wires of one sensor run
    /// in one harness and connector; a short to another sensor is not in the catalogue).
    fn bridge(&mut self, track: TrackRef, other: &Target, target: &Target) -> Option<TrackRef> {
        let m = self.model;
        let Some(o) = other.track.as_ref() else {
            let first = m.sensors[track.sensor]
                .tracks
                .iter()
                .enumerate()
                .find(|(i, _)| *i != track.track);
            let example = first.map_or(String::new(), |(_, t)| {
                format!(", e.g. `{}.{}`", m.sensors[track.sensor].name, t.name)
            });
            self.err(
                Diagnostic::error(
                    "bad-bridge",
                    other.span,
                    format!("`bridged` needs a track, found `{}`", other.text()),
                )
                .with_label("not a track")
                .with_hint(format!("name the track the wire is shorted to{example}")),
            );
            return None;
        };
        let Some(r) = m.track_ref(&other.base.text, &o.text) else {
            // Resolving it as a place reports the unknown sensor or track.
            let _ = self.place(other);
            return None;
        };
        if r == track {
            self.err(
                Diagnostic::error(
                    "bad-bridge",
                    other.span,
                    format!("`{}` is bridged to itself", target.text()),
                )
                .with_label("the same track")
                .with_related(target.span, "bridged from here")
                .with_hint("a bridge shorts two different tracks of one sensor"),
            );
            return None;
        }
        if r.sensor != track.sensor {
            self.err(
                Diagnostic::error(
                    "bad-bridge",
                    other.span,
                    format!(
                        "`{}` and `{}` belong to different sensors",
                        target.text(),
                        other.text()
                    ),
                )
                .with_label(format!("a track of `{}`", m.sensors[r.sensor].name))
                .with_related(
                    target.span,
                    format!("a track of `{}`", m.sensors[track.sensor].name),
                )
                .with_hint("a bridge shorts two tracks of one sensor, which share a connector"),
            );
            return None;
        }
        Some(r)
    }

    fn mode(&mut self, name: &crate::lang::scenario::Ident) -> Option<ModeId> {
        let id = self.model.mode_id(&name.text);
        if id.is_none() {
            let names: Vec<&str> = self.model.modes.iter().map(|m| m.name.as_str()).collect();
            self.unknown("mode", &name.text, name.span, &names);
        }
        id
    }

    fn fault(&mut self, name: &crate::lang::scenario::Ident) -> Option<FaultId> {
        let id = self.model.fault_id(&name.text);
        if id.is_none() {
            let names: Vec<&str> = self.model.faults.iter().map(|f| f.name.as_str()).collect();
            self.unknown("fault", &name.text, name.span, &names);
        }
        id
    }

    fn instant(&mut self, q: &Quantity, what: &str, end: Option<Time>) -> Option<Time> {
        let t = self.time(q, what)?;
        if let Some(end) = end {
            self.before_end(t, end, q.span, what);
        }
        Some(t)
    }

    fn expectation(&mut self, x: &ExpectAst, end: Option<Time>) -> Option<(String, ExpectKind)> {
        let m = self.model;
        match x {
            ExpectAst::FaultBy { fault, by } => {
                let f = self.fault(fault);
                let by = self.instant(by, "the expected instant", end);
                let (f, by) = (f?, by?);
                Some((
                    format!("fault {} by {by}", m.faults[f].name),
                    ExpectKind::FaultBy { fault: f, by },
                ))
            }
            ExpectAst::FaultNever { fault } => {
                let f = self.fault(fault)?;
                Some((
                    format!("fault never {}", m.faults[f].name),
                    ExpectKind::FaultNever { fault: f },
                ))
            }
            ExpectAst::ModeBy { mode, by } => {
                let md = self.mode(mode);
                let by = self.instant(by, "the expected instant", end);
                let (md, by) = (md?, by?);
                Some((
                    format!("mode {} by {by}", m.modes[md].name),
                    ExpectKind::ModeBy { mode: md, by },
                ))
            }
            ExpectAst::ModeNever { mode } => {
                let md = self.mode(mode)?;
                Some((
                    format!("mode never {}", m.modes[md].name),
                    ExpectKind::ModeNever { mode: md },
                ))
            }
            ExpectAst::Opening(o) => {
                let (bound, x, from, to) = (&o.bound, &o.x, &o.from, &o.to);
                let v = self.position(x, "the opening");
                let f = self.time(from, "the window start");
                let t = self.instant(to, "the window end", end);
                let (v, f, t) = (v?, f?, t?);
                if f > t {
                    self.err(
                        Diagnostic::error(
                            "bad-window",
                            from.span.join(to.span),
                            format!("the window starts at {f}, after its end at {t}"),
                        )
                        .with_label("from is after to")
                        .with_hint(format!("swap the instants: `from {t} to {f}`")),
                    );
                    return None;
                }
                let words = if bound.at_most { "at most" } else { "at least" };
                let text = format!("opening {words} {} % from {f} to {t}", trim(v));
                let kind = if bound.at_most {
                    ExpectKind::OpeningAtMost {
                        x: v,
                        from: f,
                        to: t,
                    }
                } else {
                    ExpectKind::OpeningAtLeast {
                        x: v,
                        from: f,
                        to: t,
                    }
                };
                Some((text, kind))
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const REFERENCE: &str = include_str!("../../scenarios/van/pedal_a_open.scenario");
    const VAN: &str = include_str!("../../scenarios/van/van_throttle.limp");

    fn van() -> Model {
        match crate::model::lower(VAN) {
            Ok(m) => m,
            Err(d) => panic!(
                "the reference policy lowers: {}",
                crate::diag::render("van_throttle.limp", VAN, &d)
            ),
        }
    }

    /// Parse and resolve; the rendered diagnostics, or a listing of the script.
    fn check(path: &str, src: &str, model: &Model) -> String {
        let (ast, mut diags) = parse_script(src);
        if let Some(ast) = ast.filter(|_| diags.is_empty()) {
            match resolve(&ast, model) {
                Ok(s) => return listing(&s, model),
                Err(d) => diags.extend(d),
            }
        }
        crate::diag::render(path, src, &diags)
    }

    fn listing(s: &Script, m: &Model) -> String {
        let mut out = format!(
            "scenario {} (policy {:?}, length {})\n",
            s.name, s.policy_path, s.length
        );
        for e in &s.events {
            let what = match &e.action {
                Action::Position {
                    sensor,
                    percent,
                    over,
                } => {
                    let ramp = over.map_or(String::new(), |t| format!(" over {t}"));
                    format!(
                        "position {} {} %{ramp}",
                        m.sensors[*sensor].name,
                        trim(*percent)
                    )
                }
                Action::Break(inj) => format!("break {}", injection_text(inj, m)),
                Action::Mend { target, fault } => {
                    let t = match target {
                        MendTarget::Track(r) => m.track_name(*r),
                        MendTarget::Sensor(s) => m.sensors[*s].name.clone(),
                        MendTarget::Actuator => "actuator".into(),
                    };
                    format!(
                        "mend {t}{}",
                        fault.map_or(String::new(), |k| format!(" ({})", k.words()))
                    )
                }
                Action::KeyOff => "key off".into(),
                Action::KeyOn => "key on".into(),
                Action::Switch { switch, on } => {
                    format!(
                        "switch {} {}",
                        m.switches[*switch].name,
                        if *on { "on" } else { "off" }
                    )
                }
                Action::Input { input, percent } => {
                    format!("input {} {} %", m.inputs[*input].name, trim(*percent))
                }
            };
            out.push_str(&format!("  at {}: {what}\n", e.at));
        }
        for x in &s.expectations {
            out.push_str(&format!("  expect {}\n", x.text));
        }
        out
    }

    /// An injection with names, its parameters in SI, for reading snapshots.
    fn injection_text(inj: &Injection, m: &Model) -> String {
        match *inj {
            Injection::Track { track, fault } => {
                let f = match fault {
                    TrackFault::Offset { volts } => format!("offset {} V", trim(volts)),
                    TrackFault::Gain { factor } => format!("gain x{}", trim(factor)),
                    TrackFault::Bridged { other } => format!("bridged to {}", m.track_name(other)),
                    TrackFault::Intermittent { open, every } => {
                        format!("intermittent open {open} every {every}")
                    }
                    other => FaultKind::of(&Injection::Track {
                        track,
                        fault: other,
                    })
                    .words()
                    .to_string(),
                };
                format!("track {}: {f}", m.track_name(track))
            }
            Injection::Sensor { sensor, fault } => {
                let f = match fault {
                    SensorFault::GroundOffset { volts } => {
                        format!("ground offset {} V", trim(volts))
                    }
                    SensorFault::Supply { volts } => format!("supply {} V", trim(volts)),
                };
                format!("sensor {}: {f}", m.sensors[sensor].name)
            }
            Injection::Actuator { fault } => match fault {
                ActuatorFault::Weak { factor } => format!("actuator: weak x{}", trim(factor)),
                other => format!(
                    "actuator: {}",
                    FaultKind::of(&Injection::Actuator { fault: other }).words()
                ),
            },
        }
    }

    #[test]
    fn the_reference_resolves() {
        let m = van();
        let (ast, diags) = parse_script(REFERENCE);
        assert_eq!(diags, vec![]);
        let s = resolve(&ast.expect("parses"), &m).expect("resolves");
        assert_eq!(s.name, "pedal_a_open");
        assert_eq!(s.policy_path, "van_throttle.limp");
        assert_eq!(s.length, Time::from_ms(3500));
        let pedal = m.sensor_id("pedal").expect("pedal");
        let a = m.track_ref("pedal", "a").expect("pedal.a");
        let actions: Vec<(u64, &Action)> = s
            .events
            .iter()
            .map(|e| (e.at.0 / 1_000_000, &e.action))
            .collect();
        assert_eq!(
            actions,
            vec![
                (
                    0,
                    &Action::Position {
                        sensor: pedal,
                        percent: 0.0,
                        over: None
                    }
                ),
                (
                    200,
                    &Action::Position {
                        sensor: pedal,
                        percent: 35.0,
                        over: Some(Time::from_ms(300))
                    }
                ),
                (
                    1000,
                    &Action::Break(Injection::Track {
                        track: a,
                        fault: TrackFault::Open
                    })
                ),
                (
                    1600,
                    &Action::Position {
                        sensor: pedal,
                        percent: 90.0,
                        over: None
                    }
                ),
                (
                    2200,
                    &Action::Mend {
                        target: MendTarget::Track(a),
                        fault: None
                    }
                ),
                (
                    2400,
                    &Action::Position {
                        sensor: pedal,
                        percent: 0.0,
                        over: None
                    }
                ),
            ]
        );
        let texts: Vec<&str> = s.expectations.iter().map(|x| x.text.as_str()).collect();
        assert_eq!(
            texts,
            vec![
                "fault pedal_a_low by 1.05 s",
                "mode reduced_power by 1.05 s",
                "opening at most 36 % from 1.1 s to 2.4 s",
                "mode never shutdown",
                "mode normal by 3.5 s",
            ]
        );
        assert_eq!(
            s.expectations[2].kind,
            ExpectKind::OpeningAtMost {
                x: 36.0,
                from: Time::from_ms(1100),
                to: Time::from_ms(2400)
            }
        );
        assert_eq!(
            &REFERENCE[s.expectations[0].span.start..s.expectations[0].span.end],
            "expect fault pedal_a_low by 1.05 s"
        );
    }

    #[test]
    fn events_sort_by_time_keeping_file_order_at_one_instant() {
        let m = van();
        let src = "scenario s {\n policy \"p\"\n length 1 s\n at 500 ms brake on\n at 100 ms key off\n at 500 ms key on\n at 100 ms pedal 5 %\n}";
        let (ast, _) = parse_script(src);
        let s = resolve(&ast.expect("parses"), &m).expect("resolves");
        let brake = m
            .switches
            .iter()
            .position(|s| s.name == "brake")
            .expect("brake");
        let pedal = m.sensor_id("pedal").expect("pedal");
        let got: Vec<_> = s.events.iter().map(|e| (e.at, e.action.clone())).collect();
        assert_eq!(
            got,
            vec![
                (Time::from_ms(100), Action::KeyOff),
                (
                    Time::from_ms(100),
                    Action::Position {
                        sensor: pedal,
                        percent: 5.0,
                        over: None
                    }
                ),
                (
                    Time::from_ms(500),
                    Action::Switch {
                        switch: brake,
                        on: true
                    }
                ),
                (Time::from_ms(500), Action::KeyOn),
            ]
        );
    }

    #[test]
    fn units_convert_to_si() {
        let m = van();
        let src = "scenario s {\n policy \"p\"\n length 2 s\n at 1500 us break pedal.a offset -250 mV\n at 0.25 s break pedal intermittent open 1 ms every 3 ms\n}";
        let (ast, _) = parse_script(src);
        // The second line puts a track fault on a sensor, so the whole resolve fails; the first
        // is checked through a script without it.
        assert!(resolve(ast.as_ref().expect("parses"), &m).is_err());
        let src =
            "scenario s {\n policy \"p\"\n length 2 s\n at 1500 us break pedal.a offset -250 mV\n}";
        let (ast, _) = parse_script(src);
        let s = resolve(&ast.expect("parses"), &m).expect("resolves");
        assert_eq!(s.events[0].at, Time(1_500_000));
        let Action::Break(Injection::Track {
            fault: TrackFault::Offset { volts },
            ..
        }) = s.events[0].action
        else {
            panic!("an offset")
        };
        assert!((volts + 0.25).abs() < 1e-12);
    }

    #[test]
    fn mend_covers_bridges_from_either_end() {
        let m = van();
        let a = m.track_ref("pedal", "a").expect("a");
        let b = m.track_ref("pedal", "b").expect("b");
        let t = m.track_ref("throttle", "a").expect("throttle.a");
        let bridge = Injection::Track {
            track: a,
            fault: TrackFault::Bridged { other: b },
        };
        assert!(MendTarget::Track(a).covers(&bridge));
        assert!(MendTarget::Track(b).covers(&bridge));
        assert!(!MendTarget::Track(t).covers(&bridge));
        assert!(MendTarget::Sensor(a.sensor).covers(&bridge));
        assert!(!MendTarget::Actuator.covers(&bridge));
        assert!(MendTarget::Actuator.covers(&Injection::Actuator {
            fault: ActuatorFault::SpringBroken
        }));
        assert_eq!(FaultKind::of(&bridge), FaultKind::Bridged);
    }

    #[test]
    fn fixtures() {
        let m = van();
        insta::with_settings!({
            snapshot_path => "../../tests/fixtures/scenario/snapshots",
            prepend_module_to_snapshot => false,
        }, {
            insta::glob!("../../tests/fixtures/scenario", "*.scenario", |path| {
                let src = std::fs::read_to_string(path).expect("fixture readable");
                let name = path.file_name().and_then(|n| n.to_str()).unwrap_or("fixture");
                insta::assert_snapshot!(check(name, &src, &m));
            });
        });
    }

    proptest! {
        #[test]
        fn no_byte_string_makes_resolve_panic(bytes in proptest::collection::vec(any::<u8>(), 0..300)) {
            let m = van();
            let text = String::from_utf8_lossy(&bytes);
            if let (Some(ast), _) = parse_script(&text) {
                let _ = resolve(&ast, &m);
            }
        }

        #[test]
        fn mangled_references_resolve_or_explain(cut in 0usize..600, junk in "[ -~\n]{0,12}") {
            let m = van();
            let mut text = REFERENCE.to_string();
            let at = text.floor_char_boundary(cut.min(text.len()));
            text.insert_str(at, &junk);
            let (ast, diags) = parse_script(&text);
            if let Some(ast) = ast {
                // A failure always explains itself.
                if let Err(d) = resolve(&ast, &m) {
                    prop_assert!(!d.is_empty());
                }
            } else {
                prop_assert!(!diags.is_empty());
            }
        }
    }
}
