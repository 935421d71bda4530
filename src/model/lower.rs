//! Lowering: the policy AST resolved into the model. Names become indices, quantities are
//! checked for their unit kind and range and normalised, defaults are applied. Every error is
//! collected; a model is returned only when there were none.

// Each item kind both claims a name and lowers; keeping the two steps visible reads better
// than folding the claim into match guards.
#![allow(clippy::collapsible_match)]

use super::*;
use crate::diag::{Diagnostic, did_you_mean};
use crate::lang::policy::{
    self as ast, CmpAst, ExprAst, Item, PolicyAst, Quantity, SignalAst, TermAst, Unit,
};

/// Parses and lowers a policy; on failure returns every error (syntax or meaning).
pub fn lower(src: &str) -> Result<Model, Vec<Diagnostic>> {
    match load(src) {
        (Some(m), _) => Ok(m),
        (None, d) => Err(d),
    }
}

/// Parses and lowers a policy, returning the model (when there was no error) and every
/// diagnostic, warnings included.
pub fn load(src: &str) -> (Option<Model>, Vec<Diagnostic>) {
    let (tree, mut diags) = crate::lang::policy::parse(src);
    match tree {
        Some(t) => {
            let (m, d) = lower_ast(&t);
            diags.extend(d);
            (m, diags)
        }
        None => (None, diags),
    }
}

/// Lowers a parsed policy.
pub fn lower_ast(tree: &PolicyAst) -> (Option<Model>, Vec<Diagnostic>) {
    let mut cx = Lower { diags: Vec::new() };
    let model = cx.policy(tree);
    let has_error = cx.diags.iter().any(Diagnostic::is_error);
    (if has_error { None } else { model }, cx.diags)
}

/// What kind of quantity a place wants.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
enum Kind {
    Time,
    Volts,
    Percent,
    Rate,
}

impl Kind {
    fn words(self) -> &'static str {
        match self {
            Kind::Time => "a time (s, ms or us)",
            Kind::Volts => "a voltage (V or mV)",
            Kind::Percent => "a position (%)",
            Kind::Rate => "a rate (%/s)",
        }
    }
    fn example(self) -> &'static str {
        match self {
            Kind::Time => "20 ms",
            Kind::Volts => "0.25 V",
            Kind::Percent => "35 %",
            Kind::Rate => "25 %/s",
        }
    }
    fn of(u: Unit) -> Kind {
        match u {
            Unit::Volt | Unit::MilliVolt => Kind::Volts,
            Unit::Percent => Kind::Percent,
            Unit::PercentPerSec => Kind::Rate,
            Unit::Sec | Unit::MilliSec | Unit::MicroSec => Kind::Time,
        }
    }
}

/// Names visible in conditions and guards.
struct Names<'a> {
    sensors: &'a [Sensor],
    inputs: &'a [Input],
    switches: &'a [Switch],
    faults: &'a [(String, Span)],
    feedback: Option<SensorId>,
}

/// Where an expression is lowered: a fault condition reads signals only.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Place {
    Condition,
    Guard,
}

struct Lower {
    diags: Vec<Diagnostic>,
}

const RESERVED: [&str; 3] = ["any", "target", "actuator"];

impl Lower {
    fn err(&mut self, d: Diagnostic) {
        self.diags.push(d);
    }

    /// A quantity of the wanted kind, normalised: seconds for times (returned as f64 seconds),
    /// volts, percent, percent per second. `None` after reporting when it is not usable.
    fn qty(&mut self, q: &Quantity, want: Kind, what: &str) -> Option<f64> {
        if q.text.is_empty() {
            return None;
        }
        if !q.value.is_finite() {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    q.span,
                    format!("{what} is not a finite number"),
                )
                .with_label("too large to represent")
                .with_hint(format!(
                    "write an ordinary number, e.g. `{}`",
                    want.example()
                )),
            );
            return None;
        }
        let Some(unit) = q.unit else {
            self.err(
                Diagnostic::error("missing-unit", q.span, format!("{what} has no unit"))
                    .with_label(format!("expected {}", want.words()))
                    .with_hint(format!(
                        "every quantity carries its unit, e.g. `{} {}`",
                        q.text,
                        unit_for(want)
                    )),
            );
            return None;
        };
        if Kind::of(unit) != want {
            self.err(
                Diagnostic::error(
                    "wrong-unit",
                    q.span,
                    format!("{what} must be {}, found `{}`", want.words(), unit.text()),
                )
                .with_label(format!("this is {}", Kind::of(unit).words()))
                .with_hint(format!("write it as e.g. `{}`", want.example())),
            );
            return None;
        }
        Some(match unit {
            Unit::MilliVolt => q.value / 1000.0,
            Unit::Sec => q.value,
            Unit::MilliSec => q.value / 1e3,
            Unit::MicroSec => q.value / 1e6,
            _ => q.value,
        })
    }

    fn time(&mut self, q: &Quantity, what: &str) -> Option<Time> {
        let secs = self.qty(q, Kind::Time, what)?;
        if secs < 0.0 {
            self.err(
                Diagnostic::error("out-of-range", q.span, format!("{what} is negative"))
                    .with_label("a time cannot be negative")
                    .with_hint("write a time of zero or more"),
            );
            return None;
        }
        match Time::from_secs_f64(secs) {
            Some(t) if secs <= 3600.0 => Some(t),
            _ => {
                self.err(
                    Diagnostic::error(
                        "out-of-range",
                        q.span,
                        format!("{what} is longer than an hour"),
                    )
                    .with_label("out of range")
                    .with_hint("times in a policy are milliseconds to seconds"),
                );
                None
            }
        }
    }

    fn percent(&mut self, q: &Quantity, what: &str) -> Option<f64> {
        let v = self.qty(q, Kind::Percent, what)?;
        if !(0.0..=100.0).contains(&v) {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    q.span,
                    format!("{what} is outside 0 % .. 100 %"),
                )
                .with_label("a position of travel is between 0 % and 100 %")
                .with_hint("positions are percent of the full travel"),
            );
            return None;
        }
        Some(v)
    }

    fn volts(&mut self, q: &Quantity, what: &str, lo: f64, hi: f64) -> Option<f64> {
        let v = self.qty(q, Kind::Volts, what)?;
        if v < lo || v > hi {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    q.span,
                    format!(
                        "{what} is outside {} V .. {} V",
                        crate::time::trim(lo),
                        crate::time::trim(hi)
                    ),
                )
                .with_label("out of range")
                .with_hint("sensor voltages lie between ground and the sensor supply"),
            );
            return None;
        }
        Some(v)
    }

    fn duplicate(&mut self, what: &str, name: &str, span: Span, first: Span) {
        self.err(
            Diagnostic::error(
                "duplicate-name",
                span,
                format!("{what} `{name}` is declared twice"),
            )
            .with_label("declared again here")
            .with_related(first, "first declared here")
            .with_hint("names must be unique; rename or remove one"),
        );
    }

    fn once<T>(&mut self, slot: &mut Option<(T, Span)>, value: T, span: Span, what: &str) {
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
            format!("needs {what}"),
            example,
        ));
    }

    fn unknown(&mut self, what: &str, name: &str, span: Span, candidates: &[&str]) {
        let mut d = Diagnostic::error("unknown-name", span, format!("unknown {what} `{name}`"))
            .with_label(format!("no {what} of this name"));
        d = match did_you_mean(name, candidates.iter().copied()) {
            Some(c) => d.with_hint(format!("did you mean `{c}`?")),
            None if candidates.is_empty() => d.with_hint(format!("the policy declares no {what}")),
            None => d.with_hint(format!("known: {}", candidates.join(", "))),
        };
        self.err(d);
    }

    fn policy(&mut self, tree: &PolicyAst) -> Option<Model> {
        let mut period: Option<(Option<Time>, Span)> = None;
        let mut supply: Option<(Option<f64>, Span)> = None;
        let mut start: Option<(&ast::Ident, Span)> = None;
        let mut actuator_ast: Option<(&ast::ActuatorAst, Span)> = None;
        let mut assure_ast: Option<(&ast::AssureAst, Span)> = None;
        for item in &tree.items {
            match item {
                Item::Period(q, sp) => {
                    let v = self.time(q, "the period");
                    self.once(&mut period, v, *sp, "period");
                }
                Item::Supply(q, sp) => {
                    let v = self.volts(q, "the supply", 0.5, 60.0);
                    self.once(&mut supply, v, *sp, "supply");
                }
                Item::Start(i, sp) => self.once(&mut start, i, *sp, "start"),
                Item::Actuator(a) => self.once(&mut actuator_ast, a, a.span, "actuator"),
                Item::Assure(a) => self.once(&mut assure_ast, a, a.span, "assure"),
                _ => {}
            }
        }
        let head = Span::new(tree.span.start, tree.name.span.end);
        let period = match period {
            Some((Some(p), sp)) if p == Time::ZERO => {
                self.err(
                    Diagnostic::error("out-of-range", sp, "the period is zero")
                        .with_label("the controller task needs a period")
                        .with_hint("typical controller periods are 1 ms to 10 ms"),
                );
                None
            }
            Some((p, _)) => p,
            None => {
                self.missing(head, "the controller `period`", "period 5 ms");
                None
            }
        };
        // The supply defaults to the common 5 V sensor reference.
        let supply = match supply {
            Some((v, _)) => v,
            None => Some(5.0),
        };
        let supply_v = supply.unwrap_or(5.0);

        // Top-level names share one namespace so that a bare name in a guard is unambiguous.
        let mut seen: Vec<(String, Span)> = Vec::new();
        let mut claim = |me: &mut Lower, what: &str, id: &ast::Ident| -> bool {
            if id.name.is_empty() {
                return false;
            }
            if RESERVED.contains(&id.name.as_str()) {
                me.err(
                    Diagnostic::error(
                        "reserved-name",
                        id.span,
                        format!("`{}` is a reserved word", id.name),
                    )
                    .with_label(format!("cannot name a {what}"))
                    .with_hint("choose another name"),
                );
                return false;
            }
            if let Some((_, first)) = seen.iter().find(|(n, _)| *n == id.name) {
                me.duplicate(what, &id.name, id.span, *first);
                return false;
            }
            seen.push((id.name.clone(), id.span));
            true
        };

        let mut sensors = Vec::new();
        let mut inputs = Vec::new();
        let mut switches = Vec::new();
        let mut fault_names: Vec<(String, Span)> = Vec::new();
        for item in &tree.items {
            match item {
                Item::Sensor(s) => {
                    if claim(self, "sensor", &s.name) {
                        sensors.push(self.sensor(s, supply_v));
                    }
                }
                Item::Input(i) => {
                    if claim(self, "input", &i.name) {
                        let lo = self.percent(&i.lo, "the input's lower bound");
                        let hi = self.percent(&i.hi, "the input's upper bound");
                        if let (Some(lo), Some(hi)) = (lo, hi)
                            && lo > hi
                        {
                            self.err(
                                Diagnostic::error(
                                    "out-of-range",
                                    i.span,
                                    "the input band is empty",
                                )
                                .with_label(format!(
                                    "{} % is above {} %",
                                    crate::time::trim(lo),
                                    crate::time::trim(hi)
                                ))
                                .with_hint("write the band as `LOW .. HIGH`"),
                            );
                        }
                        inputs.push(Input {
                            name: i.name.name.clone(),
                            span: i.span,
                            lo: lo.unwrap_or(0.0),
                            hi: hi.unwrap_or(100.0),
                        });
                    }
                }
                Item::Switch(id, sp) => {
                    if claim(self, "switch", id) {
                        switches.push(Switch {
                            name: id.name.clone(),
                            span: *sp,
                        });
                    }
                }
                Item::Fault(f) => {
                    if claim(self, "fault", &f.name) {
                        fault_names.push((f.name.name.clone(), f.name.span));
                    }
                }
                _ => {}
            }
        }

        // Actuator and feedback sensor.
        let (actuator, feedback_name) = match actuator_ast {
            Some((a, _)) => self.actuator(a),
            None => {
                self.missing(head, "the `actuator` block", "actuator { default 7 % ... }");
                (None, None)
            }
        };
        let feedback = match &feedback_name {
            Some(id) => match sensors.iter().position(|s| s.sensor.name == id.name) {
                Some(i) => Some(i),
                None => {
                    let names: Vec<&str> = sensors.iter().map(|s| s.sensor.name.as_str()).collect();
                    self.unknown("sensor", &id.name, id.span, &names);
                    None
                }
            },
            None => match sensors.iter().position(|s| s.sensor.name == "throttle") {
                Some(i) => Some(i),
                None => {
                    if actuator_ast.is_some() {
                        let sp = actuator_ast.map_or(head, |(a, _)| a.span);
                        self.err(
                            Diagnostic::error("missing-item", sp, "no plate position feedback sensor")
                                .with_label("the position loop needs feedback")
                                .with_hint("declare `sensor throttle { ... }` or name one with `feedback NAME` in the actuator block"),
                        );
                    }
                    None
                }
            },
        };
        let driver = (0..sensors.len()).find(|&i| Some(i) != feedback);
        // Combine defaults to the side that closes: lower reading for the driver's sensor,
        // higher reading for the plate feedback.
        for (i, s) in sensors.iter_mut().enumerate() {
            if s.combine_default {
                s.sensor.combine = if Some(i) == feedback {
                    Combine::Max
                } else {
                    Combine::Min
                };
            }
        }
        let sensors: Vec<Sensor> = sensors.into_iter().map(|s| s.sensor).collect();

        let names = Names {
            sensors: &sensors,
            inputs: &inputs,
            switches: &switches,
            faults: &fault_names,
            feedback,
        };

        // Faults.
        let mut faults = Vec::new();
        let mut fault_seen: Vec<&str> = Vec::new();
        for item in &tree.items {
            if let Item::Fault(f) = item {
                if fault_seen.contains(&f.name.name.as_str())
                    || !fault_names
                        .iter()
                        .any(|(n, s)| *n == f.name.name && *s == f.name.span)
                {
                    continue;
                }
                fault_seen.push(&f.name.name);
                if let Some(lowered) = self.fault(f, &names, period) {
                    faults.push(lowered);
                }
            }
        }

        // Modes.
        let mut modes: Vec<Mode> = Vec::new();
        let mut mode_seen: Vec<(String, Span)> = Vec::new();
        for item in &tree.items {
            if let Item::Mode(m) = item {
                if RESERVED.contains(&m.name.name.as_str()) {
                    self.err(
                        Diagnostic::error(
                            "reserved-name",
                            m.name.span,
                            format!("`{}` is a reserved word", m.name.name),
                        )
                        .with_label("cannot name a mode")
                        .with_hint("choose another name"),
                    );
                    continue;
                }
                if let Some((_, first)) = mode_seen.iter().find(|(n, _)| *n == m.name.name) {
                    let first = *first;
                    self.duplicate("mode", &m.name.name, m.name.span, first);
                    continue;
                }
                mode_seen.push((m.name.name.clone(), m.name.span));
                modes.push(self.mode(m, &names));
            }
        }
        let mode_names: Vec<&str> = modes.iter().map(|m| m.name.as_str()).collect();
        let resolve_mode = |me: &mut Lower, id: &ast::Ident| -> Option<ModeId> {
            let found = modes.iter().position(|m| m.name == id.name);
            if found.is_none() {
                me.unknown("mode", &id.name, id.span, &mode_names);
            }
            found
        };

        let start_id = match start {
            Some((id, _)) => resolve_mode(self, id),
            None => {
                self.missing(head, "the `start` mode", "start normal");
                None
            }
        };
        let start_span = start.map_or(head, |(_, s)| s);

        // Transitions.
        let mut transitions = Vec::new();
        for item in &tree.items {
            if let Item::Transition(t) = item {
                let from = if t.from.name == "any" {
                    Some(Source::Any)
                } else {
                    resolve_mode(self, &t.from).map(Source::Mode)
                };
                let to = if t.to.name == "any" {
                    self.err(
                        Diagnostic::error(
                            "unknown-name",
                            t.to.span,
                            "a transition cannot lead to `any`",
                        )
                        .with_label("`any` is only a source")
                        .with_hint("name the mode the transition leads to"),
                    );
                    None
                } else {
                    resolve_mode(self, &t.to)
                };
                let guard = self.expr(&t.guard, &names, Place::Guard);
                let dwell = t.dwell.as_ref().and_then(|q| {
                    let d = self.time(q, "the transition dwell")?;
                    if let Some(p) = period
                        && d < p
                    {
                        self.err(
                            Diagnostic::error(
                                "short-dwell",
                                q.span,
                                format!("the dwell {d} is shorter than one period ({p})"),
                            )
                            .with_label("the guard is only evaluated once per period")
                            .with_hint(format!(
                                "write at least `for {p}`, or drop `for` to fire on the first step"
                            )),
                        );
                        return None;
                    }
                    Some(d)
                });
                if let (Some(from), Some(to), Some(guard)) = (from, to, guard) {
                    if from == Source::Mode(to) {
                        self.err(
                            Diagnostic::error(
                                "self-transition",
                                t.span,
                                "a transition leads back to its own mode",
                            )
                            .with_label("from and to are the same mode")
                            .with_hint("a mode does not transition to itself; remove the line"),
                        );
                        continue;
                    }
                    transitions.push(Transition {
                        span: t.span,
                        from,
                        to,
                        guard,
                        dwell,
                    });
                }
            }
        }

        // Mode `tolerates` lists.
        for item in &tree.items {
            if let Item::Mode(m) = item {
                let Some(mi) = modes
                    .iter()
                    .position(|x| x.name == m.name.name && x.span == m.span)
                else {
                    continue;
                };
                for it in &m.items {
                    if let ast::ModeItem::Tolerates(ids, _) = it {
                        for id in ids {
                            match fault_names.iter().position(|(n, _)| *n == id.name) {
                                Some(f) => modes[mi].tolerates.push(f),
                                None => {
                                    let cands: Vec<&str> =
                                        fault_names.iter().map(|(n, _)| n.as_str()).collect();
                                    self.unknown("fault", &id.name, id.span, &cands);
                                }
                            }
                        }
                    }
                }
            }
        }

        let assure = assure_ast.and_then(|(a, _)| self.assure(a, driver));

        let (Some(period), Some(supply), Some(actuator), Some(feedback), Some(start)) =
            (period, supply, actuator, feedback, start_id)
        else {
            return None;
        };
        Some(Model {
            name: tree.name.name.clone(),
            name_span: tree.name.span,
            period,
            supply,
            sensors,
            feedback,
            driver,
            inputs,
            switches,
            actuator,
            faults,
            modes,
            start,
            start_span,
            transitions,
            assure,
        })
    }

    fn sensor(&mut self, s: &ast::SensorAst, supply: f64) -> SensorDraft {
        let mut tracks: Vec<Track> = Vec::new();
        let mut filter: Option<(Option<Time>, Span)> = None;
        let mut open: Option<(Option<f64>, Span)> = None;
        let mut combine: Option<(Option<Combine>, Span)> = None;
        for it in &s.items {
            match it {
                ast::SensorItem::Track { name, points, span } => {
                    if let Some(first) = tracks.iter().find(|t| t.name == name.name) {
                        let first = first.span;
                        self.duplicate("track", &name.name, name.span, first);
                        continue;
                    }
                    let mut pts = Vec::new();
                    for (v, p) in points {
                        let v = self.volts(v, "a track voltage", 0.0, supply);
                        let p = self.percent(p, "a track position");
                        if let (Some(v), Some(p)) = (v, p) {
                            pts.push((p, v));
                        }
                    }
                    if pts.len() == points.len() {
                        self.check_characteristic(name, &pts, *span);
                    }
                    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
                    tracks.push(Track {
                        name: name.name.clone(),
                        span: *span,
                        points: pts,
                    });
                }
                ast::SensorItem::Filter(q, sp) => {
                    let v = self.time(q, "the filter time constant");
                    self.once(&mut filter, v, *sp, "filter");
                }
                ast::SensorItem::OpenReads(q, sp) => {
                    let v = self.volts(q, "the open-wire level", 0.0, supply);
                    self.once(&mut open, v, *sp, "open reads");
                }
                ast::SensorItem::Combine(id, sp) => {
                    let c = match id.name.as_str() {
                        "min" => Some(Combine::Min),
                        "max" => Some(Combine::Max),
                        _ => None,
                    };
                    self.once(&mut combine, c, *sp, "combine");
                }
            }
        }
        if tracks.is_empty() {
            self.err(
                Diagnostic::error(
                    "missing-item",
                    s.name.span,
                    format!("sensor `{}` has no track", s.name.name),
                )
                .with_label("needs at least one track")
                .with_hint("add e.g. `track a: 0.80 V at 0 %, 4.00 V at 100 %`"),
            );
        }
        let filter = filter.and_then(|(v, _)| v).unwrap_or(Time::ZERO);
        let open_reads = open.and_then(|(v, _)| v).unwrap_or(0.0);
        let combine_default = combine.is_none();
        let combine = combine.and_then(|(v, _)| v).unwrap_or(Combine::Min);
        SensorDraft {
            sensor: Sensor {
                name: s.name.name.clone(),
                span: s.span,
                tracks,
                filter,
                open_reads,
                combine,
            },
            combine_default,
        }
    }

    /// A characteristic needs two points with distinct positions and strictly monotonic volts.
    fn check_characteristic(&mut self, name: &ast::Ident, pts: &[(f64, f64)], span: Span) {
        if pts.len() < 2 {
            self.err(
                Diagnostic::error(
                    "track-points",
                    span,
                    format!("track `{}` has fewer than two points", name.name),
                )
                .with_label("one point does not make a characteristic")
                .with_hint(
                    "give the volts at two positions, e.g. `0.80 V at 0 %, 4.00 V at 100 %`",
                ),
            );
            return;
        }
        let mut sorted = pts.to_vec();
        sorted.sort_by(|a, b| a.0.total_cmp(&b.0));
        let distinct_pos = sorted.windows(2).all(|w| w[1].0 > w[0].0);
        let rising = sorted.windows(2).all(|w| w[1].1 > w[0].1);
        let falling = sorted.windows(2).all(|w| w[1].1 < w[0].1);
        if !distinct_pos || !(rising || falling) {
            let why = if !distinct_pos {
                "two points share a position"
            } else if sorted.windows(2).any(|w| w[1].1 == w[0].1) {
                "the voltage does not change with position"
            } else {
                "the voltage rises and falls"
            };
            self.err(
                Diagnostic::error("flat-track", span, format!("track `{}` has a flat or non-monotonic characteristic", name.name))
                    .with_label(why)
                    .with_hint("the voltage must strictly rise (or strictly fall) with position, or the position cannot be read back"),
            );
        }
    }

    fn actuator(&mut self, a: &ast::ActuatorAst) -> (Option<Actuator>, Option<ast::Ident>) {
        let mut default: Option<(Option<f64>, Span)> = None;
        let mut idle: Option<(Option<f64>, Span)> = None;
        type Move = (Option<f64>, Option<f64>, Option<Time>);
        let mut open: Option<(Move, Span)> = None;
        let mut spring: Option<(Move, Span)> = None;
        let mut feedback: Option<(ast::Ident, Span)> = None;
        for it in &a.items {
            match it {
                ast::ActuatorItem::Default(q, sp) => {
                    let v = self.percent(q, "the default position");
                    self.once(&mut default, v, *sp, "default");
                }
                ast::ActuatorItem::Idle(q, sp) => {
                    let v = self.percent(q, "the idle position");
                    self.once(&mut idle, v, *sp, "idle");
                }
                ast::ActuatorItem::Open {
                    from,
                    to,
                    time,
                    span,
                } => {
                    let m = (
                        self.percent(from, "the start"),
                        self.percent(to, "the end"),
                        self.time(time, "the full-drive time"),
                    );
                    self.once(&mut open, m, *span, "open");
                }
                ast::ActuatorItem::Spring {
                    from,
                    to,
                    time,
                    span,
                } => {
                    let m = (
                        self.percent(from, "the start"),
                        self.percent(to, "the end"),
                        self.time(time, "the spring-return time"),
                    );
                    self.once(&mut spring, m, *span, "spring");
                }
                ast::ActuatorItem::Feedback(id, sp) => {
                    self.once(&mut feedback, id.clone(), *sp, "feedback")
                }
            }
        }
        let mut ok = true;
        for (slot, what, ex) in [
            (default.is_some(), "the `default` position", "default 7 %"),
            (idle.is_some(), "the `idle` position", "idle 8 %"),
            (
                open.is_some(),
                "the full-drive figure `open`",
                "open 0 % to 100 % in 80 ms",
            ),
            (
                spring.is_some(),
                "the spring-return figure `spring`",
                "spring 100 % to 7 % in 150 ms",
            ),
        ] {
            if !slot {
                self.missing(a.span, what, ex);
                ok = false;
            }
        }
        let feedback = feedback.map(|(id, _)| id);
        if !ok {
            return (None, feedback);
        }
        let (
            Some((Some(default), _)),
            Some((Some(idle), _)),
            Some(((Some(of), Some(ot), Some(otime)), osp)),
            Some(((Some(sf), Some(st), Some(stime)), ssp)),
        ) = (default, idle, open, spring)
        else {
            return (None, feedback);
        };
        let mut ok = true;
        if ot <= of {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    osp,
                    "the full-drive figure does not open the plate",
                )
                .with_label("the end must be above the start")
                .with_hint("write e.g. `open 0 % to 100 % in 80 ms`"),
            );
            ok = false;
        }
        if st >= sf {
            self.err(
                Diagnostic::error(
                    "out-of-range",
                    ssp,
                    "the spring-return figure does not close the plate",
                )
                .with_label("the end must be below the start")
                .with_hint("write e.g. `spring 100 % to 7 % in 150 ms`"),
            );
            ok = false;
        }
        for (t, sp, what) in [(otime, osp, "full-drive"), (stime, ssp, "spring-return")] {
            if t == Time::ZERO {
                self.err(
                    Diagnostic::error("out-of-range", sp, format!("the {what} time is zero"))
                        .with_label("a plate has inertia")
                        .with_hint("throttle bodies take tens of milliseconds to move"),
                );
                ok = false;
            }
        }
        if !ok {
            return (None, feedback);
        }
        (
            Some(Actuator {
                span: a.span,
                default,
                idle,
                open_from: of,
                open_to: ot,
                open_time: otime,
                spring_from: sf,
                spring_to: st,
                spring_time: stime,
            }),
            feedback,
        )
    }

    fn track_ref(&mut self, t: &ast::TrackRefAst, names: &Names<'_>) -> Option<TrackRef> {
        let sensor_names: Vec<&str> = names.sensors.iter().map(|s| s.name.as_str()).collect();
        let Some(s) = names.sensors.iter().position(|x| x.name == t.sensor.name) else {
            self.unknown("sensor", &t.sensor.name, t.sensor.span, &sensor_names);
            return None;
        };
        let tracks: Vec<&str> = names.sensors[s]
            .tracks
            .iter()
            .map(|x| x.name.as_str())
            .collect();
        match tracks.iter().position(|x| *x == t.track.name) {
            Some(i) => Some(TrackRef {
                sensor: s,
                track: i,
            }),
            None => {
                self.unknown(
                    &format!("track of `{}`", t.sensor.name),
                    &t.track.name,
                    t.track.span,
                    &tracks,
                );
                None
            }
        }
    }

    fn fault(
        &mut self,
        f: &ast::FaultAst,
        names: &Names<'_>,
        period: Option<Time>,
    ) -> Option<Fault> {
        let _ = period;
        let mut suspects = Vec::new();
        let mut ok = true;
        for t in &f.suspects {
            match self.track_ref(t, names) {
                Some(r) if !suspects.contains(&r) => suspects.push(r),
                Some(_) => {}
                None => ok = false,
            }
        }
        let condition = self.expr(&f.condition, names, Place::Condition);
        let debounce = match &f.debounce {
            None => Some(Debounce::Time { set: Time::ZERO }),
            Some(ast::DebounceAst::For(q, _)) => self
                .time(q, "the debounce time")
                .map(|set| Debounce::Time { set }),
            Some(ast::DebounceAst::Count {
                up,
                down,
                fail,
                pass,
                span,
            }) => {
                let c = |me: &mut Lower, i: &ast::Integer, what: &str, min: i64| -> Option<u32> {
                    if i.value < min || i.value > 1_000_000 {
                        me.err(
                            Diagnostic::error("out-of-range", i.span, format!("the {what} is outside {min} .. 1000000"))
                                .with_label("out of range")
                                .with_hint("counter debouncing counts whole steps, e.g. `count up 2 down 1 to 10`"),
                        );
                        None
                    } else {
                        Some(i.value as u32)
                    }
                };
                let up = c(self, up, "increment", 1);
                let down = c(self, down, "decrement", 1);
                let failv = c(self, fail, "failed threshold", 1);
                let passv = match pass {
                    Some(p) => c(self, p, "passed threshold", 0),
                    None => Some(0),
                };
                match (up, down, failv, passv) {
                    (Some(up), Some(down), Some(fail), Some(pass)) => {
                        if pass >= fail {
                            self.err(
                                Diagnostic::error(
                                    "out-of-range",
                                    *span,
                                    "the passed threshold is not below the failed threshold",
                                )
                                .with_label("the counter could never move between them")
                                .with_hint("write e.g. `count up 2 down 1 to 10 pass 0`"),
                            );
                            None
                        } else {
                            Some(Debounce::Counter {
                                up,
                                down,
                                fail,
                                pass,
                            })
                        }
                    }
                    _ => None,
                }
            }
        };
        let healing = match &f.healing {
            None => Some(Healing::Immediate),
            Some(ast::HealingAst::Latch(_)) => Some(Healing::Latch),
            Some(ast::HealingAst::Heal(q, sp)) => {
                if matches!(debounce, Some(Debounce::Counter { .. })) {
                    self.err(
                        Diagnostic::error(
                            "heal-with-counter",
                            *sp,
                            "`heal` does not combine with counter debouncing",
                        )
                        .with_label("the counter's passed threshold already heals the fault")
                        .with_hint("drop `heal`, or use `for TIME` debouncing"),
                    );
                    None
                } else {
                    self.time(q, "the heal time")
                        .map(|time| Healing::After { time })
                }
            }
        };
        let code = match &f.code {
            Some(c) if !is_dtc(&c.name) => {
                self.err(
                    Diagnostic::error(
                        "bad-code",
                        c.span,
                        format!("`{}` is not a trouble code", c.name),
                    )
                    .with_label("expected a letter P, C, B or U and four hex digits")
                    .with_hint("SAE J2012 codes look like `P2122`"),
                );
                None
            }
            Some(c) => Some(c.name.clone()),
            None => None,
        };
        let condition = condition?;
        let mut reads = Vec::new();
        condition.for_each_atom(&mut |a| {
            if let Expr::Compare { term, .. } = a {
                for s in term_signals(term) {
                    if let Signal::Track { track } | Signal::TrackVolts { track } = s
                        && !reads.contains(&track)
                    {
                        reads.push(track);
                    }
                }
            }
        });
        reads.sort();
        let plausibility = reads.len() >= 2;
        if !ok {
            return None;
        }
        Some(Fault {
            name: f.name.name.clone(),
            span: f.span,
            suspects,
            condition,
            debounce: debounce?,
            healing: healing?,
            code,
            plausibility,
            reads,
        })
    }

    fn mode(&mut self, m: &ast::ModeAst, names: &Names<'_>) -> Mode {
        let mut demand: Option<(Option<Demand>, Span)> = None;
        let mut limit: Option<(Option<f64>, Span)> = None;
        let mut rate: Option<(Option<f64>, Span)> = None;
        for it in &m.items {
            match it {
                ast::ModeItem::Demand(d, sp) => {
                    let v = match d {
                        ast::DemandAst::Fixed(q) => self
                            .percent(q, "the demand")
                            .map(|percent| Demand::Fixed { percent }),
                        ast::DemandAst::Name(id) => self.demand_name(id, names),
                    };
                    self.once(&mut demand, v, *sp, "demand");
                }
                ast::ModeItem::DriveOff(sp) => self.once(
                    &mut demand,
                    Some(Demand::DriveOff),
                    *sp,
                    "demand or drive off",
                ),
                ast::ModeItem::Limit(q, sp) => {
                    let v = self.percent(q, "the limit");
                    self.once(&mut limit, v, *sp, "limit");
                }
                ast::ModeItem::Rate(q, sp) => {
                    let v = self.qty(q, Kind::Rate, "the rate").and_then(|r| {
                        if r <= 0.0 {
                            self.err(
                                Diagnostic::error(
                                    "out-of-range",
                                    q.span,
                                    "the rate is not positive",
                                )
                                .with_label("a slew rate must be above zero")
                                .with_hint("drop `rate` for an unlimited slew"),
                            );
                            None
                        } else {
                            Some(r)
                        }
                    });
                    self.once(&mut rate, v, *sp, "rate");
                }
                ast::ModeItem::Tolerates(..) => {}
            }
        }
        let demand = match demand {
            Some((Some(d), _)) => d,
            Some((None, _)) => Demand::DriveOff,
            None => {
                self.err(
                    Diagnostic::error(
                        "missing-item",
                        m.name.span,
                        format!(
                            "mode `{}` says neither what it demands nor `drive off`",
                            m.name.name
                        ),
                    )
                    .with_label("needs a demand")
                    .with_hint(
                        "add `demand pedal`, `demand idle_request`, `demand 10 %` or `drive off`",
                    ),
                );
                Demand::DriveOff
            }
        };
        Mode {
            name: m.name.name.clone(),
            span: m.span,
            demand,
            limit: limit.and_then(|(v, _)| v).unwrap_or(100.0),
            rate: rate.and_then(|(v, _)| v),
            tolerates: Vec::new(),
        }
    }

    fn demand_name(&mut self, id: &ast::Ident, names: &Names<'_>) -> Option<Demand> {
        if let Some(s) = names.sensors.iter().position(|s| s.name == id.name) {
            if Some(s) == names.feedback {
                self.err(
                    Diagnostic::error(
                        "bad-demand",
                        id.span,
                        format!("a mode cannot demand the feedback sensor `{}`", id.name),
                    )
                    .with_label("this is the plate's own position")
                    .with_hint("demand the pedal, an input or a fixed position"),
                );
                return None;
            }
            return Some(Demand::Sensor { sensor: s });
        }
        if let Some(i) = names.inputs.iter().position(|x| x.name == id.name) {
            return Some(Demand::Input { input: i });
        }
        let mut cands: Vec<&str> = names.sensors.iter().map(|s| s.name.as_str()).collect();
        cands.extend(names.inputs.iter().map(|s| s.name.as_str()));
        self.unknown("sensor or input", &id.name, id.span, &cands);
        None
    }

    fn assure(&mut self, a: &ast::AssureAst, driver: Option<SensorId>) -> Option<Assure> {
        let mut scope: Option<(Option<FaultScope>, Span)> = None;
        let mut reqs = Vec::new();
        for it in &a.items {
            match it {
                ast::AssureItem::Faults(id, sp) => {
                    let v = match id.name.as_str() {
                        "single" => Some(FaultScope::Single),
                        "double" => Some(FaultScope::Double),
                        _ => {
                            self.unknown("fault scope", &id.name, id.span, &["single", "double"]);
                            None
                        }
                    };
                    self.once(&mut scope, v, *sp, "faults");
                }
                ast::AssureItem::Excess {
                    below,
                    within,
                    span,
                } => {
                    let limit = self.percent(below, "the excess limit");
                    let within = self.time(within, "the fault-tolerant time interval");
                    if let (Some(limit), Some(within)) = (limit, within) {
                        reqs.push(Requirement::Excess {
                            limit,
                            within,
                            span: *span,
                        });
                    }
                }
                ast::AssureItem::Never {
                    above,
                    unless,
                    span,
                } => {
                    let above = self.percent(above, "the ceiling");
                    let unless_driver = match unless {
                        None => Some(None),
                        Some((who, q)) => {
                            if who.name != "driver" {
                                self.unknown(
                                    "ground-truth signal",
                                    &who.name,
                                    who.span,
                                    &["driver"],
                                );
                                None
                            } else if driver.is_none() {
                                self.err(
                                    Diagnostic::error(
                                        "missing-item",
                                        who.span,
                                        "`driver` needs a sensor the driver moves",
                                    )
                                    .with_label("no pedal sensor is declared")
                                    .with_hint(
                                        "declare a pedal sensor besides the throttle feedback",
                                    ),
                                );
                                None
                            } else {
                                self.percent(q, "the driver threshold").map(Some)
                            }
                        }
                    };
                    if let (Some(above), Some(unless_driver)) = (above, unless_driver) {
                        reqs.push(Requirement::Never {
                            above,
                            unless_driver,
                            span: *span,
                        });
                    }
                }
                ast::AssureItem::Idle { within, span } => {
                    if let Some(within) = self.time(within, "the return-to-idle time") {
                        reqs.push(Requirement::IdleAfterRelease {
                            within,
                            span: *span,
                        });
                    }
                }
            }
        }
        Some(Assure {
            span: a.span,
            faults: scope.and_then(|(v, _)| v).unwrap_or(FaultScope::Single),
            requirements: reqs,
        })
    }

    fn expr(&mut self, e: &ExprAst, names: &Names<'_>, place: Place) -> Option<Expr> {
        match e {
            ExprAst::Or(es, _) | ExprAst::And(es, _) => {
                let parts: Vec<Option<Expr>> =
                    es.iter().map(|x| self.expr(x, names, place)).collect();
                let parts: Option<Vec<Expr>> = parts.into_iter().collect();
                let parts = parts?;
                Some(if matches!(e, ExprAst::Or(..)) {
                    Expr::Or { es: parts }
                } else {
                    Expr::And { es: parts }
                })
            }
            ExprAst::Not(x, _) => Some(Expr::Not {
                e: Box::new(self.expr(x, names, place)?),
            }),
            ExprAst::Paren(x, _) => self.expr(x, names, place),
            ExprAst::Name(id) => self.name_atom(id, names, place),
            ExprAst::Suspect(t, sp) => {
                if place == Place::Condition {
                    self.err(
                        Diagnostic::error(
                            "fault-in-condition",
                            *sp,
                            "a fault condition cannot read `suspect(...)`",
                        )
                        .with_label("monitors read signals, not other faults")
                        .with_hint("use `suspect(...)` in transition guards"),
                    );
                    return None;
                }
                let track = self.track_ref(t, names)?;
                Some(Expr::Suspect { track, span: *sp })
            }
            ExprAst::Compare(t, c, sp) => {
                let (term, kind) = self.term(t, names)?;
                let cmp = self.cmp(c, kind)?;
                Some(Expr::Compare {
                    term,
                    cmp,
                    span: *sp,
                })
            }
        }
    }

    fn name_atom(&mut self, id: &ast::Ident, names: &Names<'_>, place: Place) -> Option<Expr> {
        if let Some(f) = names.faults.iter().position(|(n, _)| *n == id.name) {
            if place == Place::Condition {
                self.err(
                    Diagnostic::error(
                        "fault-in-condition",
                        id.span,
                        format!("a fault condition cannot read the fault `{}`", id.name),
                    )
                    .with_label("monitors read signals, not other faults")
                    .with_hint("name faults in transition guards; a condition compares signals"),
                );
                return None;
            }
            return Some(Expr::Fault {
                fault: f,
                span: id.span,
            });
        }
        if let Some(s) = names.switches.iter().position(|x| x.name == id.name) {
            return Some(Expr::Switch {
                switch: s,
                span: id.span,
            });
        }
        if names.sensors.iter().any(|s| s.name == id.name)
            || names.inputs.iter().any(|s| s.name == id.name)
            || id.name == "target"
        {
            self.err(
                Diagnostic::error(
                    "not-a-condition",
                    id.span,
                    format!("`{}` is a signal, not a condition", id.name),
                )
                .with_label("a signal needs a comparison")
                .with_hint(format!("compare it, e.g. `{} above 10 %`", id.name)),
            );
            return None;
        }
        let mut cands: Vec<&str> = names.switches.iter().map(|s| s.name.as_str()).collect();
        if place == Place::Guard {
            cands.extend(names.faults.iter().map(|(n, _)| n.as_str()));
        }
        let what = if place == Place::Guard {
            "fault or switch"
        } else {
            "switch"
        };
        self.unknown(what, &id.name, id.span, &cands);
        None
    }

    fn signal(&mut self, s: &SignalAst, names: &Names<'_>) -> Option<(Signal, Kind)> {
        let parts: Vec<&str> = s.parts.iter().map(|p| p.name.as_str()).collect();
        let sensor_names: Vec<&str> = names.sensors.iter().map(|s| s.name.as_str()).collect();
        match parts.as_slice() {
            ["target"] => Some((Signal::Target, Kind::Percent)),
            [one] => {
                if let Some(i) = names.sensors.iter().position(|x| x.name == *one) {
                    return Some((Signal::Merged { sensor: i }, Kind::Percent));
                }
                if let Some(i) = names.inputs.iter().position(|x| x.name == *one) {
                    return Some((Signal::Input { input: i }, Kind::Percent));
                }
                let mut c = sensor_names.clone();
                c.extend(names.inputs.iter().map(|s| s.name.as_str()));
                c.push("target");
                self.unknown("signal", one, s.span, &c);
                None
            }
            [_, _] | [_, _, _] => {
                let t = ast::TrackRefAst {
                    sensor: s.parts[0].clone(),
                    track: s.parts[1].clone(),
                    span: s.span,
                };
                let track = self.track_ref(&t, names)?;
                if parts.len() == 2 {
                    Some((Signal::Track { track }, Kind::Percent))
                } else if parts[2] == "volts" {
                    Some((Signal::TrackVolts { track }, Kind::Volts))
                } else {
                    self.unknown("track reading", parts[2], s.parts[2].span, &["volts"]);
                    None
                }
            }
            _ => None,
        }
    }

    fn term(&mut self, t: &TermAst, names: &Names<'_>) -> Option<(Term, Kind)> {
        match t {
            TermAst::Signal(s) => {
                let (signal, k) = self.signal(s, names)?;
                Some((Term::Signal { signal }, k))
            }
            TermAst::Diff(a, b, sp) | TermAst::AbsDiff(a, b, sp) => {
                let sa = self.signal(a, names);
                let sb = self.signal(b, names);
                let ((a_sig, ka), (b_sig, kb)) = (sa?, sb?);
                if ka != kb {
                    self.err(
                        Diagnostic::error(
                            "wrong-unit",
                            *sp,
                            "the difference mixes volts and percent",
                        )
                        .with_label(format!("{} against {}", ka.words(), kb.words()))
                        .with_hint(
                            "compare tracks in percent (`pedal.a - pedal.b`) or both in volts",
                        ),
                    );
                    return None;
                }
                if a_sig == b_sig {
                    self.err(
                        Diagnostic::error(
                            "self-comparison",
                            *sp,
                            "the difference compares a signal with itself",
                        )
                        .with_label("always zero")
                        .with_hint("a plausibility check compares two different tracks"),
                    );
                    return None;
                }
                for sig in [a_sig, b_sig] {
                    if let Signal::Track { track } | Signal::TrackVolts { track } = sig {
                        let sensor = &names.sensors[track.sensor];
                        if sensor.tracks.len() < 2 {
                            self.err(
                                Diagnostic::error(
                                    "single-track-plausibility",
                                    *sp,
                                    format!(
                                        "sensor `{}` has one track; a plausibility check needs two",
                                        sensor.name
                                    ),
                                )
                                .with_label("nothing independent to compare against")
                                .with_hint("add a second track to the sensor, or drop the check"),
                            );
                            return None;
                        }
                    }
                }
                let term = if matches!(t, TermAst::AbsDiff(..)) {
                    Term::AbsDiff { a: a_sig, b: b_sig }
                } else {
                    Term::Diff { a: a_sig, b: b_sig }
                };
                Some((term, ka))
            }
        }
    }

    fn cmp(&mut self, c: &CmpAst, kind: Kind) -> Option<Compare> {
        let v = |me: &mut Lower, q: &Quantity| -> Option<f64> {
            let x = me.qty(q, kind, "the threshold")?;
            Some(x)
        };
        Some(match c {
            CmpAst::Above(q) => Compare::Above { x: v(self, q)? },
            CmpAst::Below(q) => Compare::Below { x: v(self, q)? },
            CmpAst::Outside(a, b) | CmpAst::Inside(a, b) => {
                let lo = v(self, a);
                let hi = v(self, b);
                let (lo, hi) = (lo?, hi?);
                if lo > hi {
                    self.err(
                        Diagnostic::error("out-of-range", a.span.join(b.span), "the band is empty")
                            .with_label("the lower bound is above the upper")
                            .with_hint("write the band as `LOW .. HIGH`"),
                    );
                    return None;
                }
                if matches!(c, CmpAst::Outside(..)) {
                    Compare::Outside { lo, hi }
                } else {
                    Compare::Inside { lo, hi }
                }
            }
        })
    }
}

struct SensorDraft {
    sensor: Sensor,
    combine_default: bool,
}

fn unit_for(k: Kind) -> &'static str {
    match k {
        Kind::Time => "ms",
        Kind::Volts => "V",
        Kind::Percent => "%",
        Kind::Rate => "%/s",
    }
}

/// SAE J2012 form: a system letter (P, C, B, U) and four hexadecimal characters.
fn is_dtc(s: &str) -> bool {
    let b = s.as_bytes();
    b.len() == 5
        && matches!(b[0], b'P' | b'C' | b'B' | b'U')
        && b[1..]
            .iter()
            .all(|c| c.is_ascii_hexdigit() && !c.is_ascii_lowercase())
}

/// The signals a term reads.
pub fn term_signals(t: &Term) -> Vec<Signal> {
    match *t {
        Term::Signal { signal } => vec![signal],
        Term::Diff { a, b } | Term::AbsDiff { a, b } => vec![a, b],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const REFERENCE: &str = include_str!("../../scenarios/van/van_throttle.limp");

    #[test]
    fn reference_policy_lowers_with_every_meaning() {
        let m = lower(REFERENCE).expect("reference lowers");
        assert_eq!(m.period, Time::from_ms(5));
        assert_eq!(m.supply, 5.0);
        assert_eq!(m.sensors.len(), 2);
        assert_eq!(m.sensors[m.feedback].name, "throttle");
        assert_eq!(m.driver, Some(0));
        assert_eq!(m.sensors[0].combine, Combine::Min);
        assert_eq!(m.sensors[1].combine, Combine::Max);
        assert_eq!(m.sensors[0].filter, Time::from_ms(8));
        assert_eq!(m.faults.len(), 10);
        let dis = &m.faults[m.fault_id("pedal_disagree").unwrap()];
        assert!(dis.plausibility);
        assert_eq!(dis.healing, Healing::Latch);
        assert_eq!(
            dis.debounce,
            Debounce::Time {
                set: Time::from_ms(40)
            }
        );
        assert_eq!(dis.code.as_deref(), Some("P2138"));
        let tracking = &m.faults[m.fault_id("tracking").unwrap()];
        assert!(
            !tracking.plausibility,
            "tracking reads merged values, not two tracks"
        );
        assert!(tracking.suspects.is_empty());
        let low = &m.faults[m.fault_id("pedal_a_low").unwrap()];
        assert_eq!(
            low.healing,
            Healing::After {
                time: Time::from_ms(200)
            }
        );
        assert!(
            matches!(low.condition, Expr::Compare { cmp: Compare::Below { x }, .. } if x == 0.25)
        );
        assert_eq!(m.modes.len(), 4);
        assert_eq!(m.modes[1].limit, 35.0);
        assert_eq!(m.modes[1].rate, Some(25.0));
        assert!(m.modes[3].is_safe());
        assert_eq!(m.start, 0);
        assert_eq!(m.transitions.len(), 6);
        assert_eq!(m.transitions[0].from, Source::Any);
        assert_eq!(m.transitions[5].dwell, Some(Time::from_ms(1000)));
        // `any -> shutdown` is tried first from every other mode and not from shutdown itself.
        assert_eq!(m.edges_from(0)[0].to, 3);
        assert!(m.edges_from(3).is_empty());
        let a = m.assure.as_ref().unwrap();
        assert_eq!(a.requirements.len(), 3);
        assert_eq!(m.actuator.spring_time, Time::from_ms(150));
    }

    #[test]
    fn characteristic_reads_back() {
        let m = lower(REFERENCE).unwrap();
        let b = &m.sensors[1].tracks[1]; // 4.50 V at 0 %, 0.50 V at 100 %
        assert!((b.volts_at(25.0) - 3.5).abs() < 1e-12);
        assert!((b.percent_at(3.5) - 25.0).abs() < 1e-12);
        assert!(!b.rising());
    }

    fn errors(src: &str) -> Vec<&'static str> {
        match lower(src) {
            Ok(_) => Vec::new(),
            Err(d) => d.iter().map(|d| d.code).collect(),
        }
    }

    #[test]
    fn independent_meaning_errors_are_all_reported() {
        let src = REFERENCE
            .replace("filter 8 ms", "filter 8")
            .replace("start normal", "start normall");
        assert_eq!(errors(&src), vec!["missing-unit", "unknown-name"]);
    }

    #[test]
    fn dtc_form() {
        assert!(is_dtc("P2122"));
        assert!(is_dtc("U0100"));
        assert!(!is_dtc("P212"));
        assert!(!is_dtc("X2122"));
        assert!(!is_dtc("P21g2"));
    }
}
