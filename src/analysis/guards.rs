//! Exact reasoning over guards: satisfiability, implication, equivalence and overlap, by
//! enumerating every feasible valuation of the atoms the guards mention (fault-set booleans,
//! switches, and one representative per interval of each numeric term's line), within a bound.
//!
//! What "exact" covers: fault-set booleans are the free variables and `suspect(T)` is derived
//! from them (true iff some set fault suspects `T`); comparisons on one numeric term share one
//! line, partitioned at every threshold, so `pedal below 3 %` and `pedal above 10 %` can never
//! both hold; `a - b`, `b - a` and `|a - b|` share the line of `a - b`; an input's value lies in
//! its band; a sensor's merged value is pinned to 0 % (`combine min`) or 100 % (`combine max`)
//! while every one of its tracks is suspected. Distinct terms are otherwise independent (the
//! merged value is not tied to the individual tracks, nor volts to percent); this
//! over-approximates what can hold together, never under-approximates it.

use crate::model::{Combine, Compare, Expr, FaultId, Model, Signal, SwitchId, Term, TrackRef};
use crate::time::trim;
use serde::Serialize;
use std::fmt;

/// Most valuations one question may enumerate (2^20). Beyond it the answer is
/// [`TooLarge`], never a guess and never a hang.
pub const MAX_ASSIGNMENTS: u128 = 1 << 20;

/// The enumeration a question needed exceeded [`MAX_ASSIGNMENTS`].
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct TooLarge {
    /// Valuations the question would have needed (saturating).
    pub needed: u128,
}

/// Answer to "is there a valuation such that ...".
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "answer", content = "assignment", rename_all = "kebab-case")]
pub enum Witness {
    Found(Assignment),
    None,
    Inconclusive(TooLarge),
}

impl Witness {
    pub fn found(&self) -> Option<&Assignment> {
        match self {
            Witness::Found(a) => Some(a),
            _ => None,
        }
    }

    /// Proven that no valuation exists (not merely not found within the bound).
    pub fn is_none(&self) -> bool {
        matches!(self, Witness::None)
    }
}

/// Answer to "does this hold for every valuation".
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "answer", content = "counterexample", rename_all = "kebab-case")]
pub enum Proof {
    Holds,
    Counterexample(Assignment),
    Inconclusive(TooLarge),
}

impl Proof {
    pub fn holds(&self) -> bool {
        matches!(self, Proof::Holds)
    }

    pub fn counterexample(&self) -> Option<&Assignment> {
        match self {
            Proof::Counterexample(a) => Some(a),
            _ => None,
        }
    }

    fn from_witness(w: Witness) -> Proof {
        match w {
            Witness::Found(a) => Proof::Counterexample(a),
            Witness::None => Proof::Holds,
            Witness::Inconclusive(t) => Proof::Inconclusive(t),
        }
    }
}

/// One entry of an assignment, in the words of the policy.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Entry {
    Fault {
        name: String,
        set: bool,
    },
    Suspect {
        track: String,
        yes: bool,
    },
    Switch {
        name: String,
        on: bool,
    },
    Value {
        term: String,
        value: f64,
        unit: &'static str,
    },
}

impl fmt::Display for Entry {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Entry::Fault { name, set } => {
                write!(f, "{name}={}", if *set { "set" } else { "clear" })
            }
            Entry::Suspect { track, yes } => {
                write!(f, "suspect({track})={}", if *yes { "yes" } else { "no" })
            }
            Entry::Switch { name, on } => write!(f, "{name}={}", if *on { "on" } else { "off" }),
            Entry::Value { term, value, unit } => write!(f, "{term}={} {unit}", trim(*value)),
        }
    }
}

/// A valuation of the atoms of the guards asked about: the faults (set or clear), the
/// `suspect()` atoms they imply, switches, and one value per numeric term.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Assignment {
    pub entries: Vec<Entry>,
}

impl Assignment {
    /// Names of the faults this assignment sets.
    pub fn set_faults(&self) -> Vec<&str> {
        self.entries
            .iter()
            .filter_map(|e| match e {
                Entry::Fault { name, set: true } => Some(name.as_str()),
                _ => None,
            })
            .collect()
    }
}

impl fmt::Display for Assignment {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.entries.is_empty() {
            return write!(f, "(any state)");
        }
        for (i, e) in self.entries.iter().enumerate() {
            if i > 0 {
                write!(f, ", ")?;
            }
            write!(f, "{e}")?;
        }
        Ok(())
    }
}

/// Some valuation makes `e` hold.
pub fn satisfiable(model: &Model, e: &Expr) -> Witness {
    search(model, &[e], |v| v.holds(e))
}

/// Every valuation that makes `a` hold makes `b` hold; otherwise a counterexample (`a` holds,
/// `b` does not).
pub fn implies(model: &Model, a: &Expr, b: &Expr) -> Proof {
    Proof::from_witness(search(model, &[a, b], |v| v.holds(a) && !v.holds(b)))
}

/// `a` and `b` hold on exactly the same valuations; otherwise one where they differ.
pub fn equivalent(model: &Model, a: &Expr, b: &Expr) -> Proof {
    Proof::from_witness(search(model, &[a, b], |v| v.holds(a) != v.holds(b)))
}

/// A valuation on which both hold.
pub fn overlap(model: &Model, a: &Expr, b: &Expr) -> Witness {
    search(model, &[a, b], |v| v.holds(a) && v.holds(b))
}

/// `e` holds on some valuation where fault `f` is set.
pub fn satisfiable_with_fault(model: &Model, e: &Expr, f: FaultId) -> Witness {
    let fe = Expr::Fault {
        fault: f,
        span: Default::default(),
    };
    overlap(model, e, &fe)
}

/// The general question: a valuation of the atoms of `exprs` on which `pred` holds. `pred`
/// reads the valuation through [`Valuation::holds`], so callers may ask about expressions
/// rewritten onto this model's indices (see [`rename_faults`]), as long as their atoms are
/// among those of `exprs`.
pub fn search(model: &Model, exprs: &[&Expr], mut pred: impl FnMut(&Valuation) -> bool) -> Witness {
    let space = Space::new(model, exprs);
    let needed = space.size();
    if needed > MAX_ASSIGNMENTS {
        return Witness::Inconclusive(TooLarge { needed });
    }
    let mut v = Valuation {
        space: &space,
        faults: vec![false; space.faults.len()],
        switches: vec![false; space.switches.len()],
        values: vec![0.0; space.lines.len()],
    };
    for index in 0..needed {
        v.decode(index);
        if !v.feasible() {
            continue;
        }
        if pred(&v) {
            return Witness::Found(v.assignment());
        }
    }
    Witness::None
}

/// Rewrites the fault indices of an expression, e.g. onto another revision's numbering.
pub fn rename_faults(e: &Expr, map: &impl Fn(FaultId) -> FaultId) -> Expr {
    match e {
        Expr::Fault { fault, span } => Expr::Fault {
            fault: map(*fault),
            span: *span,
        },
        Expr::Not { e } => Expr::Not {
            e: Box::new(rename_faults(e, map)),
        },
        Expr::And { es } => Expr::And {
            es: es.iter().map(|e| rename_faults(e, map)).collect(),
        },
        Expr::Or { es } => Expr::Or {
            es: es.iter().map(|e| rename_faults(e, map)).collect(),
        },
        other => other.clone(),
    }
}

/// Faults a guard names directly, sorted, without repeats.
pub fn named_faults(e: &Expr) -> Vec<FaultId> {
    let mut out = Vec::new();
    e.for_each_atom(&mut |a| {
        if let Expr::Fault { fault, .. } = a {
            out.push(*fault);
        }
    });
    out.sort_unstable();
    out.dedup();
    out
}

/// Tracks a guard names in `suspect()`, sorted, without repeats.
pub fn suspected_tracks(e: &Expr) -> Vec<TrackRef> {
    let mut out = Vec::new();
    e.for_each_atom(&mut |a| {
        if let Expr::Suspect { track, .. } = a {
            out.push(*track);
        }
    });
    out.sort_unstable();
    out.dedup();
    out
}

/// Faults a guard reads: those it names and those that suspect a track it names in
/// `suspect()`. Sorted, without repeats.
pub fn faults_read(model: &Model, e: &Expr) -> Vec<FaultId> {
    let mut out = named_faults(e);
    for t in suspected_tracks(e) {
        out.extend(suspecting(model, t));
    }
    out.sort_unstable();
    out.dedup();
    out
}

/// A guard reacts to a fault when it names it, names `suspect(T)` of a track the fault
/// suspects, or reads the merged value of a sensor one of whose tracks the fault suspects.
pub fn reacts_to(model: &Model, e: &Expr, f: FaultId) -> bool {
    let Some(fault) = model.faults.get(f) else {
        return false;
    };
    let mut hit = false;
    e.for_each_atom(&mut |a| match a {
        Expr::Fault { fault, .. } => hit |= *fault == f,
        Expr::Suspect { track, .. } => hit |= fault.suspects.contains(track),
        Expr::Compare { term, .. } => {
            for s in term_signals(term) {
                if let Signal::Merged { sensor } = s {
                    hit |= fault.suspects.iter().any(|t| t.sensor == sensor);
                }
            }
        }
        _ => {}
    });
    hit
}

/// Faults that suspect track `t`, in index order.
pub fn suspecting(model: &Model, t: TrackRef) -> impl Iterator<Item = FaultId> + '_ {
    model
        .faults
        .iter()
        .enumerate()
        .filter(move |(_, f)| f.suspects.contains(&t))
        .map(|(i, _)| i)
}

fn term_signals(t: &Term) -> Vec<Signal> {
    match *t {
        Term::Signal { signal } => vec![signal],
        Term::Diff { a, b } | Term::AbsDiff { a, b } => vec![a, b],
    }
}

/// The numeric line a term lives on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum LineKey {
    Single(Signal),
    /// The value on the line is `a - b`.
    Pair(Signal, Signal),
}

/// How a term reads its line's value `v`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum View {
    Same,
    Negated,
    Abs,
}

impl View {
    fn apply(self, v: f64) -> f64 {
        match self {
            View::Same => v,
            View::Negated => -v,
            View::Abs => v.abs(),
        }
    }

    /// Line values where the view of the line crosses `x`.
    fn preimages(self, x: f64) -> Vec<f64> {
        match self {
            View::Same => vec![x],
            View::Negated => vec![-x],
            View::Abs => vec![x, -x],
        }
    }
}

struct Line {
    key: LineKey,
    /// One value per feasible region of the line, ascending.
    reps: Vec<f64>,
    /// For a merged value: the sensor's tracks and the value it takes with all suspected.
    pin: Option<(Vec<TrackRef>, f64)>,
    /// The term as first written, for printing the assignment.
    term: Term,
}

/// A line while a question is being collected: key, term as first written, thresholds
/// (with any finite domain bounds and pin), and the pin of a merged value.
type Draft = (LineKey, Term, Vec<f64>, Option<(Vec<TrackRef>, f64)>);

/// The variables of one question.
struct Space<'m> {
    model: &'m Model,
    faults: Vec<FaultId>,
    switches: Vec<SwitchId>,
    /// `suspect()` atoms mentioned, for printing.
    suspects: Vec<TrackRef>,
    lines: Vec<Line>,
}

impl<'m> Space<'m> {
    fn new(model: &'m Model, exprs: &[&Expr]) -> Space<'m> {
        let mut faults = Vec::new();
        let mut switches = Vec::new();
        let mut suspects = Vec::new();
        // (key, term as first seen, thresholds on the line, pin)
        let mut lines: Vec<Draft> = Vec::new();
        for e in exprs {
            e.for_each_atom(&mut |a| match a {
                Expr::Fault { fault, .. } => faults.push(*fault),
                Expr::Suspect { track, .. } => {
                    suspects.push(*track);
                    faults.extend(suspecting(model, *track));
                }
                Expr::Switch { switch, .. } => switches.push(*switch),
                Expr::Compare { term, cmp, .. } => {
                    let (key, view) = line_of(term, &lines);
                    let idx = match lines.iter().position(|l| l.0 == key) {
                        Some(i) => i,
                        None => {
                            let (bounds, pin) = domain_of(model, key);
                            if let Some((tracks, _)) = &pin {
                                for t in tracks {
                                    faults.extend(suspecting(model, *t));
                                }
                            }
                            let mut ts = bounds;
                            if let Some((_, p)) = &pin {
                                ts.push(*p);
                            }
                            lines.push((key, *term, ts, pin));
                            lines.len() - 1
                        }
                    };
                    let xs: Vec<f64> = match *cmp {
                        Compare::Above { x } | Compare::Below { x } => vec![x],
                        Compare::Outside { lo, hi } | Compare::Inside { lo, hi } => vec![lo, hi],
                    };
                    for x in xs {
                        lines[idx].2.extend(view.preimages(x));
                    }
                }
                _ => {}
            });
        }
        faults.sort_unstable();
        faults.dedup();
        switches.sort_unstable();
        switches.dedup();
        suspects.sort_unstable();
        suspects.dedup();
        let lines = lines
            .into_iter()
            .map(|(key, term, ts, pin)| {
                let (lo, hi) = match key {
                    LineKey::Single(Signal::Input { input }) => model
                        .inputs
                        .get(input)
                        .map_or((f64::NEG_INFINITY, f64::INFINITY), |i| (i.lo, i.hi)),
                    _ => (f64::NEG_INFINITY, f64::INFINITY),
                };
                let mut reps = representatives(ts, lo, hi);
                // Order only decides which witness is reported first: values a sensor
                // usually shows come before the extrapolated ones.
                let (plo, phi) = usual_range(model, key);
                reps.sort_by_key(|v| !(plo..=phi).contains(v));
                Line {
                    key,
                    reps,
                    pin,
                    term,
                }
            })
            .collect();
        Space {
            model,
            faults,
            switches,
            suspects,
            lines,
        }
    }

    /// Valuations to enumerate (saturating).
    fn size(&self) -> u128 {
        let mut n: u128 = 1;
        let bits = self.faults.len() + self.switches.len();
        for _ in 0..bits {
            n = n.saturating_mul(2);
        }
        for l in &self.lines {
            n = n.saturating_mul(l.reps.len().max(1) as u128);
        }
        n
    }
}

/// Finds the line of a term among those already seen (so `b - a` joins `a - b`).
fn line_of(term: &Term, seen: &[Draft]) -> (LineKey, View) {
    match *term {
        Term::Signal { signal } => (LineKey::Single(signal), View::Same),
        Term::Diff { a, b } | Term::AbsDiff { a, b } => {
            let abs = matches!(term, Term::AbsDiff { .. });
            let reversed = seen.iter().any(|l| l.0 == LineKey::Pair(b, a)) && a != b;
            let key = if reversed {
                LineKey::Pair(b, a)
            } else {
                LineKey::Pair(a, b)
            };
            let view = match (abs, reversed) {
                (true, _) => View::Abs,
                (false, false) => View::Same,
                (false, true) => View::Negated,
            };
            (key, view)
        }
    }
}

/// Where a line's values usually lie: 0..100 % of travel (a difference -100..100 %), 0 V to
/// the supply for volts.
fn usual_range(model: &Model, key: LineKey) -> (f64, f64) {
    let volts = |s: Signal| matches!(s, Signal::TrackVolts { .. });
    match key {
        LineKey::Single(s) if volts(s) => (0.0, model.supply),
        LineKey::Single(_) => (0.0, 100.0),
        LineKey::Pair(a, _) if volts(a) => (-model.supply, model.supply),
        LineKey::Pair(..) => (-100.0, 100.0),
    }
}

/// Finite bounds to add as thresholds, and the pin of a merged value.
fn domain_of(model: &Model, key: LineKey) -> (Vec<f64>, Option<(Vec<TrackRef>, f64)>) {
    match key {
        LineKey::Single(Signal::Input { input }) => match model.inputs.get(input) {
            Some(i) => (vec![i.lo, i.hi], None),
            None => (Vec::new(), None),
        },
        LineKey::Single(Signal::Merged { sensor }) => match model.sensors.get(sensor) {
            Some(s) => {
                let tracks = (0..s.tracks.len())
                    .map(|track| TrackRef { sensor, track })
                    .collect();
                let pinned = match s.combine {
                    Combine::Min => 0.0,
                    Combine::Max => 100.0,
                };
                (Vec::new(), Some((tracks, pinned)))
            }
            None => (Vec::new(), None),
        },
        _ => (Vec::new(), None),
    }
}

/// One value per region of the line cut at `ts` (each threshold itself, each open gap
/// between neighbours, and the two open ends), keeping those inside `[lo, hi]`. Every
/// comparison against these thresholds is constant on a region, so the representatives
/// cover exactly the feasible combinations of comparison outcomes.
fn representatives(mut ts: Vec<f64>, lo: f64, hi: f64) -> Vec<f64> {
    ts.retain(|x| x.is_finite());
    ts.sort_by(f64::total_cmp);
    ts.dedup();
    let mut reps = Vec::new();
    let Some((&first, &last)) = ts.first().zip(ts.last()) else {
        let v = if lo.is_finite() { lo } else { 0.0 };
        return vec![v];
    };
    let below = if first > 0.0 {
        first / 2.0
    } else {
        first - 1.0
    };
    if below < first {
        reps.push(below);
    }
    for (i, &t) in ts.iter().enumerate() {
        reps.push(t);
        if let Some(&next) = ts.get(i + 1) {
            let mid = t + (next - t) / 2.0;
            if mid > t && mid < next {
                reps.push(mid);
            }
        }
    }
    let above = if last < 0.0 { last / 2.0 } else { last + 1.0 };
    if above > last {
        reps.push(above);
    }
    reps.retain(|v| *v >= lo && *v <= hi);
    if reps.is_empty() {
        // An empty band (lo > hi): keep one value so the question stays answerable.
        reps.push(if lo.is_finite() { lo } else { 0.0 });
    }
    reps
}

/// One valuation of a question's variables.
pub struct Valuation<'s> {
    space: &'s Space<'s>,
    faults: Vec<bool>,
    switches: Vec<bool>,
    values: Vec<f64>,
}

impl Valuation<'_> {
    fn decode(&mut self, mut index: u128) {
        for b in self.faults.iter_mut().chain(self.switches.iter_mut()) {
            *b = index & 1 == 1;
            index >>= 1;
        }
        for (v, l) in self.values.iter_mut().zip(&self.space.lines) {
            let n = l.reps.len().max(1) as u128;
            *v = l.reps.get((index % n) as usize).copied().unwrap_or(0.0);
            index /= n;
        }
    }

    /// A merged value must sit at its pin while every track of its sensor is suspected.
    fn feasible(&self) -> bool {
        self.space
            .lines
            .iter()
            .zip(&self.values)
            .all(|(l, v)| match &l.pin {
                Some((tracks, p))
                    if !tracks.is_empty() && tracks.iter().all(|t| self.suspect(*t)) =>
                {
                    v == p
                }
                _ => true,
            })
    }

    /// A fault is set. Faults outside the question count as clear.
    pub fn fault(&self, f: FaultId) -> bool {
        self.space
            .faults
            .binary_search(&f)
            .is_ok_and(|i| self.faults[i])
    }

    /// Some set fault suspects `t`.
    pub fn suspect(&self, t: TrackRef) -> bool {
        let m = self.space.model;
        self.space
            .faults
            .iter()
            .zip(&self.faults)
            .any(|(f, set)| *set && m.faults.get(*f).is_some_and(|f| f.suspects.contains(&t)))
    }

    pub fn switch(&self, s: SwitchId) -> bool {
        self.space
            .switches
            .binary_search(&s)
            .is_ok_and(|i| self.switches[i])
    }

    /// Value of a term, when its line is among the question's.
    pub fn term(&self, term: &Term) -> Option<f64> {
        let (key, view) = match *term {
            Term::Signal { signal } => (LineKey::Single(signal), View::Same),
            Term::Diff { a, b } | Term::AbsDiff { a, b } => {
                let abs = matches!(term, Term::AbsDiff { .. });
                if let Some(i) = self
                    .space
                    .lines
                    .iter()
                    .position(|l| l.key == LineKey::Pair(a, b))
                {
                    let v = self.values[i];
                    return Some(if abs { v.abs() } else { v });
                }
                (
                    LineKey::Pair(b, a),
                    if abs { View::Abs } else { View::Negated },
                )
            }
        };
        let i = self.space.lines.iter().position(|l| l.key == key)?;
        Some(view.apply(self.values[i]))
    }

    /// Whether `e` holds. A comparison on a term outside the question is false.
    pub fn holds(&self, e: &Expr) -> bool {
        e.eval(&mut |a| match a {
            Expr::Fault { fault, .. } => self.fault(*fault),
            Expr::Suspect { track, .. } => self.suspect(*track),
            Expr::Switch { switch, .. } => self.switch(*switch),
            Expr::Compare { term, cmp, .. } => self.term(term).is_some_and(|v| cmp.holds(v)),
            _ => false,
        })
    }

    fn assignment(&self) -> Assignment {
        let m = self.space.model;
        let mut entries = Vec::new();
        for (f, set) in self.space.faults.iter().zip(&self.faults) {
            let name = m
                .faults
                .get(*f)
                .map_or_else(|| format!("fault#{f}"), |f| f.name.clone());
            entries.push(Entry::Fault { name, set: *set });
        }
        for t in &self.space.suspects {
            entries.push(Entry::Suspect {
                track: signal_name(m, Signal::Track { track: *t }),
                yes: self.suspect(*t),
            });
        }
        for (s, on) in self.space.switches.iter().zip(&self.switches) {
            let name = m
                .switches
                .get(*s)
                .map_or_else(|| format!("switch#{s}"), |s| s.name.clone());
            entries.push(Entry::Switch { name, on: *on });
        }
        for l in &self.space.lines {
            let value = self.term(&l.term).unwrap_or(0.0);
            entries.push(Entry::Value {
                term: term_name(m, &l.term),
                value,
                unit: crate::report::text::term_unit(&l.term),
            });
        }
        Assignment { entries }
    }
}

/// `pedal.a`, `pedal.a.volts`, `pedal`, `idle_request`, `target`.
pub fn signal_name(m: &Model, s: Signal) -> String {
    let track = |t: TrackRef| {
        let sensor = m.sensors.get(t.sensor);
        let sn = sensor.map_or_else(|| format!("sensor#{}", t.sensor), |s| s.name.clone());
        let tn = sensor
            .and_then(|s| s.tracks.get(t.track))
            .map_or_else(|| format!("{}", t.track), |t| t.name.clone());
        format!("{sn}.{tn}")
    };
    match s {
        Signal::Track { track: t } => track(t),
        Signal::TrackVolts { track: t } => format!("{}.volts", track(t)),
        Signal::Merged { sensor } => m
            .sensors
            .get(sensor)
            .map_or_else(|| format!("sensor#{sensor}"), |s| s.name.clone()),
        Signal::Input { input } => m
            .inputs
            .get(input)
            .map_or_else(|| format!("input#{input}"), |i| i.name.clone()),
        Signal::Target => "target".to_string(),
    }
}

pub fn term_name(m: &Model, t: &Term) -> String {
    match *t {
        Term::Signal { signal } => signal_name(m, signal),
        Term::Diff { a, b } => format!("{} - {}", signal_name(m, a), signal_name(m, b)),
        Term::AbsDiff { a, b } => format!("|{} - {}|", signal_name(m, a), signal_name(m, b)),
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::lang::Span;
    use crate::model::*;
    use crate::time::Time;

    /// A small model: sensor `pedal` (tracks a, b, combine min), faults f0..f3 where f0
    /// suspects pedal.a, f1 suspects pedal.b, f2 suspects both, f3 suspects nothing; switch
    /// `brake`; input `idle_request` 0 % .. 12 %.
    pub(crate) fn model() -> Model {
        let track = |name: &str, v0: f64, v1: f64| Track {
            name: name.to_string(),
            span: Span::default(),
            points: vec![(0.0, v0), (100.0, v1)],
        };
        let pa = TrackRef {
            sensor: 0,
            track: 0,
        };
        let pb = TrackRef {
            sensor: 0,
            track: 1,
        };
        let fault = |name: &str, suspects: Vec<TrackRef>| Fault {
            name: name.to_string(),
            span: Span::default(),
            suspects,
            condition: Expr::True,
            debounce: Debounce::Time {
                set: Time::from_ms(20),
            },
            healing: Healing::Immediate,
            code: None,
            plausibility: false,
            reads: Vec::new(),
        };
        Model {
            name: "t".into(),
            name_span: Span::default(),
            period: Time::from_ms(5),
            supply: 5.0,
            sensors: vec![Sensor {
                name: "pedal".into(),
                span: Span::default(),
                tracks: vec![track("a", 0.8, 4.0), track("b", 0.4, 2.0)],
                filter: Time::ZERO,
                open_reads: 0.0,
                combine: Combine::Min,
            }],
            feedback: 0,
            driver: Some(0),
            inputs: vec![Input {
                name: "idle_request".into(),
                span: Span::default(),
                lo: 0.0,
                hi: 12.0,
            }],
            switches: vec![Switch {
                name: "brake".into(),
                span: Span::default(),
            }],
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
            faults: vec![
                fault("f0", vec![pa]),
                fault("f1", vec![pb]),
                fault("f2", vec![pa, pb]),
                fault("f3", vec![]),
            ],
            modes: Vec::new(),
            start: 0,
            start_span: Span::default(),
            transitions: Vec::new(),
            assure: None,
        }
    }

    pub(crate) fn f(i: FaultId) -> Expr {
        Expr::Fault {
            fault: i,
            span: Span::default(),
        }
    }
    pub(crate) fn not(e: Expr) -> Expr {
        Expr::Not { e: Box::new(e) }
    }
    pub(crate) fn and(es: Vec<Expr>) -> Expr {
        Expr::And { es }
    }
    pub(crate) fn or(es: Vec<Expr>) -> Expr {
        Expr::Or { es }
    }
    pub(crate) fn suspect(track: usize) -> Expr {
        Expr::Suspect {
            track: TrackRef { sensor: 0, track },
            span: Span::default(),
        }
    }
    pub(crate) fn cmp(signal: Signal, c: Compare) -> Expr {
        Expr::Compare {
            term: Term::Signal { signal },
            cmp: c,
            span: Span::default(),
        }
    }
    pub(crate) fn pedal(c: Compare) -> Expr {
        cmp(Signal::Merged { sensor: 0 }, c)
    }
    fn brake() -> Expr {
        Expr::Switch {
            switch: 0,
            span: Span::default(),
        }
    }

    #[test]
    fn distributive_law_holds() {
        // Hand truth table: a or (b and c) and (a or b) and (a or c) agree on all 8 rows.
        let m = model();
        let l = or(vec![f(0), and(vec![f(1), f(3)])]);
        let r = and(vec![or(vec![f(0), f(1)]), or(vec![f(0), f(3)])]);
        assert_eq!(equivalent(&m, &l, &r), Proof::Holds);
        // Dropping one conjunct breaks it: a=clear, b=set, c=clear is a counterexample.
        let wrong = or(vec![f(0), f(1)]);
        let cx = equivalent(&m, &l, &wrong);
        let cx = cx.counterexample().expect("not equivalent");
        assert_eq!(cx.to_string(), "f0=clear, f1=set, f3=clear");
    }

    #[test]
    fn double_negation_and_contradiction() {
        let m = model();
        assert!(equivalent(&m, &not(not(f(0))), &f(0)).holds());
        assert!(satisfiable(&m, &and(vec![f(0), not(f(0))])).is_none());
        assert!(satisfiable(&m, &Expr::True).found().is_some());
        assert!(satisfiable(&m, &not(Expr::True)).is_none());
    }

    #[test]
    fn implication_gives_a_counterexample() {
        let m = model();
        assert!(implies(&m, &and(vec![f(0), f(1)]), &f(0)).holds());
        let p = implies(&m, &f(0), &and(vec![f(0), f(1)]));
        assert_eq!(
            p.counterexample().map(|a| a.to_string()).as_deref(),
            Some("f0=set, f1=clear")
        );
    }

    #[test]
    fn thresholds_on_one_term_are_dependent() {
        let m = model();
        let low = pedal(Compare::Below { x: 3.0 });
        let high = pedal(Compare::Above { x: 10.0 });
        assert!(overlap(&m, &low, &high).is_none());
        // below 3 implies below 10; not the other way round (3 % itself is the first witness).
        assert!(implies(&m, &low, &pedal(Compare::Below { x: 10.0 })).holds());
        let cx = implies(&m, &pedal(Compare::Below { x: 10.0 }), &low);
        assert_eq!(
            cx.counterexample().map(|a| a.to_string()).as_deref(),
            Some("f0=clear, f1=clear, f2=clear, pedal=3 %")
        );
        // Boundaries: above 3 and below 3 leave out exactly 3; inside 3..10 includes both ends.
        let a3 = pedal(Compare::Above { x: 3.0 });
        assert!(
            equivalent(
                &m,
                &not(or(vec![low.clone(), a3])),
                &pedal(Compare::Inside { lo: 3.0, hi: 3.0 })
            )
            .holds()
        );
        assert!(
            equivalent(
                &m,
                &not(pedal(Compare::Inside { lo: 3.0, hi: 10.0 })),
                &pedal(Compare::Outside { lo: 3.0, hi: 10.0 })
            )
            .holds()
        );
    }

    #[test]
    fn difference_terms_share_a_line() {
        let m = model();
        let a = Signal::Track {
            track: TrackRef {
                sensor: 0,
                track: 0,
            },
        };
        let b = Signal::Track {
            track: TrackRef {
                sensor: 0,
                track: 1,
            },
        };
        let abs = |c| Expr::Compare {
            term: Term::AbsDiff { a, b },
            cmp: c,
            span: Span::default(),
        };
        let diff = |a, b, c| Expr::Compare {
            term: Term::Diff { a, b },
            cmp: c,
            span: Span::default(),
        };
        // |a - b| above 6 is a - b above 6 or b - a above 6.
        let l = abs(Compare::Above { x: 6.0 });
        let r = or(vec![
            diff(a, b, Compare::Above { x: 6.0 }),
            diff(b, a, Compare::Above { x: 6.0 }),
        ]);
        assert!(equivalent(&m, &l, &r).holds());
        // |a - b| is never negative.
        assert!(satisfiable(&m, &abs(Compare::Below { x: 0.0 })).is_none());
    }

    #[test]
    fn inputs_stay_in_their_band() {
        let m = model();
        let idle = |c| cmp(Signal::Input { input: 0 }, c);
        assert!(satisfiable(&m, &idle(Compare::Above { x: 12.0 })).is_none());
        assert!(
            satisfiable(&m, &idle(Compare::Above { x: 11.0 }))
                .found()
                .is_some()
        );
        assert!(satisfiable(&m, &idle(Compare::Below { x: 0.0 })).is_none());
    }

    #[test]
    fn suspect_follows_the_faults() {
        let m = model();
        // suspect(pedal.a) with every fault suspecting it clear cannot hold.
        let e = and(vec![suspect(0), not(f(0)), not(f(2))]);
        assert!(satisfiable(&m, &e).is_none());
        // f2 suspects both tracks: setting it makes both suspect.
        assert!(implies(&m, &f(2), &and(vec![suspect(0), suspect(1)])).holds());
        // Both suspected, yet f2 clear: needs f0 and f1.
        let w = satisfiable(&m, &and(vec![suspect(0), suspect(1), not(f(2))]));
        assert_eq!(
            w.found().map(|a| a.to_string()).as_deref(),
            Some("f0=set, f1=set, f2=clear, suspect(pedal.a)=yes, suspect(pedal.b)=yes")
        );
        // f3 suspects nothing and so has no bearing on suspect().
        assert!(implies(&m, &suspect(0), &or(vec![f(0), f(2)])).holds());
    }

    #[test]
    fn merged_value_is_pinned_when_all_tracks_are_suspected() {
        // Combine min: with both pedal tracks suspected the merged pedal reads 0 %.
        let m = model();
        let e = and(vec![
            suspect(0),
            suspect(1),
            pedal(Compare::Above { x: 10.0 }),
        ]);
        assert!(satisfiable(&m, &e).is_none());
        let e = and(vec![
            suspect(0),
            suspect(1),
            pedal(Compare::Below { x: 3.0 }),
        ]);
        assert!(satisfiable(&m, &e).found().is_some());
        // With one track left the merged value is free.
        let e = and(vec![
            suspect(0),
            not(suspect(1)),
            pedal(Compare::Above { x: 10.0 }),
        ]);
        assert!(satisfiable(&m, &e).found().is_some());
    }

    #[test]
    fn switches_and_printing() {
        let m = model();
        let e = and(vec![brake(), pedal(Compare::Above { x: 10.0 }), not(f(3))]);
        let w = satisfiable(&m, &e);
        assert_eq!(
            w.found().map(|a| a.to_string()).as_deref(),
            Some("f0=clear, f1=clear, f2=clear, f3=clear, brake=on, pedal=11 %")
        );
    }

    #[test]
    fn large_questions_are_inconclusive() {
        // 21 faults named: 2^21 valuations, over the bound.
        let mut m = model();
        let extra = m.faults[3].clone();
        m.faults.extend(std::iter::repeat_n(extra, 17));
        let e = and((0..21).map(f).collect());
        assert_eq!(
            satisfiable(&m, &e),
            Witness::Inconclusive(TooLarge { needed: 1 << 21 })
        );
        // 20 faults fit.
        let e = and((0..20).map(f).collect());
        assert!(satisfiable(&m, &e).found().is_some());
    }

    #[test]
    fn representatives_cover_every_region() {
        assert_eq!(
            representatives(vec![3.0, 10.0, 3.0], f64::NEG_INFINITY, f64::INFINITY),
            vec![1.5, 3.0, 6.5, 10.0, 11.0]
        );
        assert_eq!(
            representatives(vec![0.0, 12.0, 5.0], 0.0, 12.0),
            vec![0.0, 2.5, 5.0, 8.5, 12.0]
        );
        assert_eq!(
            representatives(vec![-2.0], f64::NEG_INFINITY, f64::INFINITY),
            vec![-3.0, -2.0, -1.0]
        );
    }

    #[test]
    fn reacts_to_names_suspects_and_merged_reads() {
        let m = model();
        assert!(reacts_to(&m, &f(3), 3));
        assert!(reacts_to(&m, &suspect(0), 2));
        assert!(!reacts_to(&m, &suspect(0), 1));
        assert!(reacts_to(&m, &pedal(Compare::Below { x: 3.0 }), 1));
        assert!(!reacts_to(&m, &pedal(Compare::Below { x: 3.0 }), 3));
        assert_eq!(faults_read(&m, &and(vec![suspect(1), f(3)])), vec![1, 2, 3]);
    }
}
