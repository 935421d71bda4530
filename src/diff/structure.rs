//! What a revision changes in the resolved model: every policy item added, removed, renamed
//! or changed, one [`Change`] per field, with guards and conditions compared by meaning.

use super::joint::{Comparison, Joint};
use crate::model::{Debounce, Demand, Fault, Healing, Mode, Model, Requirement, Source};
use crate::report::text::{demand, expr};
use crate::time::trim;
use serde::Serialize;

/// The part of the policy a change is in, in the order the report lists them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Section {
    Policy,
    Sensors,
    Inputs,
    Switches,
    Actuator,
    Faults,
    Modes,
    Transitions,
    Requirements,
}

impl Section {
    pub fn title(self) -> &'static str {
        match self {
            Section::Policy => "policy",
            Section::Sensors => "sensors",
            Section::Inputs => "inputs",
            Section::Switches => "switches",
            Section::Actuator => "actuator",
            Section::Faults => "faults",
            Section::Modes => "modes",
            Section::Transitions => "transitions",
            Section::Requirements => "requirements",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Kind {
    Added,
    Removed,
    Renamed,
    Changed,
}

/// One change: an item added, removed or renamed, or one field of it changed.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Change {
    pub section: Section,
    pub kind: Kind,
    /// `fault`, `mode`, `transition`, `sensor`, ...
    pub noun: &'static str,
    /// The item's name in the new revision (the old one for a removal); for a transition
    /// `normal -> idle_only`; empty for the actuator and the policy header.
    pub name: String,
    /// The field that changed; empty unless `kind` is `changed`.
    pub field: String,
    pub old: Option<String>,
    pub new: Option<String>,
    /// For a guard or condition: where the two revisions differ.
    pub comparison: Option<Comparison>,
}

impl Change {
    /// The item as the report names it: faults by their bare name (they are what a review
    /// talks about most), everything else with its noun.
    pub fn item(&self) -> String {
        match (self.noun, self.name.is_empty()) {
            (n, true) => n.to_string(),
            ("fault", false) if self.kind == Kind::Changed => self.name.clone(),
            (n, false) => format!("{n} {}", self.name),
        }
    }

    /// The one-line form: `pedal_disagree: debounce 40 ms -> 80 ms`.
    pub fn line(&self) -> String {
        let o = self.old.as_deref().unwrap_or("-");
        let n = self.new.as_deref().unwrap_or("-");
        match self.kind {
            Kind::Added => format!("added {}: {n}", self.item()),
            Kind::Removed => format!("removed {}: {o}", self.item()),
            Kind::Renamed => format!("renamed {} {o} -> {n}", self.noun),
            Kind::Changed if self.field.is_empty() => format!("{}: {o} -> {n}", self.item()),
            Kind::Changed => format!("{}: {} {o} -> {n}", self.item(), self.field),
        }
    }
}

/// The structural comparison of two revisions.
pub struct Structure {
    pub changes: Vec<Change>,
    /// Old fault index -> new fault index, for faults kept or renamed.
    pub fault_map: Vec<Option<usize>>,
    /// Old mode index -> new mode index, for modes kept or renamed.
    pub mode_map: Vec<Option<usize>>,
}

pub fn compare(old: &Model, new: &Model) -> Structure {
    let mut c = Vec::new();
    policy_header(old, new, &mut c);
    sensors(old, new, &mut c);
    inputs_and_switches(old, new, &mut c);
    actuator(old, new, &mut c);
    // Renames first: a guard is compared modulo them.
    let probe = Joint::new(old, new, &[]);
    let fault_renames = fault_renames(old, new, &probe);
    let joint = Joint::new(old, new, &fault_renames);
    let fault_map: Vec<Option<usize>> = (0..old.faults.len())
        .map(|i| {
            fault_renames
                .iter()
                .find(|(o, _)| *o == i)
                .map(|(_, n)| *n)
                .or_else(|| new.fault_id(&old.faults[i].name))
        })
        .collect();
    faults(old, new, &joint, &fault_map, &mut c);
    let mode_map = mode_map(old, new, &fault_map);
    modes(old, new, &fault_map, &mode_map, &mut c);
    transitions(old, new, &joint, &mode_map, &mut c);
    requirements(old, new, &mut c);
    Structure {
        changes: c,
        fault_map,
        mode_map,
    }
}

fn changed(
    c: &mut Vec<Change>,
    section: Section,
    noun: &'static str,
    name: &str,
    field: &str,
    old: String,
    new: String,
) {
    if old != new {
        c.push(Change {
            section,
            kind: Kind::Changed,
            noun,
            name: name.to_string(),
            field: field.to_string(),
            old: Some(old),
            new: Some(new),
            comparison: None,
        });
    }
}

fn added(c: &mut Vec<Change>, section: Section, noun: &'static str, name: &str, what: String) {
    c.push(Change {
        section,
        kind: Kind::Added,
        noun,
        name: name.to_string(),
        field: String::new(),
        old: None,
        new: Some(what),
        comparison: None,
    });
}

fn removed(c: &mut Vec<Change>, section: Section, noun: &'static str, name: &str, what: String) {
    c.push(Change {
        section,
        kind: Kind::Removed,
        noun,
        name: name.to_string(),
        field: String::new(),
        old: Some(what),
        new: None,
        comparison: None,
    });
}

fn pct(x: f64) -> String {
    format!("{} %", trim(x))
}

fn volts(x: f64) -> String {
    format!("{} V", trim(x))
}

fn policy_header(old: &Model, new: &Model, c: &mut Vec<Change>) {
    let s = Section::Policy;
    let p = "policy";
    changed(c, s, p, "", "name", old.name.clone(), new.name.clone());
    changed(
        c,
        s,
        p,
        "",
        "period",
        old.period.to_string(),
        new.period.to_string(),
    );
    changed(c, s, p, "", "supply", volts(old.supply), volts(new.supply));
    changed(
        c,
        s,
        p,
        "",
        "feedback",
        old.sensors[old.feedback].name.clone(),
        new.sensors[new.feedback].name.clone(),
    );
    // The start mode is compared under the mode map in `modes`.
}

fn characteristic(t: &crate::model::Track) -> String {
    t.points
        .iter()
        .map(|(p, v)| format!("{:.2} V at {}", v, pct(*p)))
        .collect::<Vec<_>>()
        .join(", ")
}

fn sensor_text(s: &crate::model::Sensor) -> String {
    let tracks: Vec<&str> = s.tracks.iter().map(|t| t.name.as_str()).collect();
    format!(
        "tracks {}; filter {}; open reads {}; combine {}",
        tracks.join(", "),
        s.filter,
        volts(s.open_reads),
        combine(s.combine)
    )
}

fn combine(c: crate::model::Combine) -> &'static str {
    match c {
        crate::model::Combine::Min => "min",
        crate::model::Combine::Max => "max",
    }
}

fn sensors(old: &Model, new: &Model, c: &mut Vec<Change>) {
    let s = Section::Sensors;
    for o in &old.sensors {
        let Some(n) = new.sensors.iter().find(|n| n.name == o.name) else {
            removed(c, s, "sensor", &o.name, sensor_text(o));
            continue;
        };
        for ot in &o.tracks {
            match n.tracks.iter().find(|t| t.name == ot.name) {
                Some(nt) => changed(
                    c,
                    s,
                    "sensor",
                    &o.name,
                    &format!("track {}", ot.name),
                    characteristic(ot),
                    characteristic(nt),
                ),
                None => changed(
                    c,
                    s,
                    "sensor",
                    &o.name,
                    &format!("track {}", ot.name),
                    characteristic(ot),
                    "(removed)".into(),
                ),
            }
        }
        for nt in &n.tracks {
            if !o.tracks.iter().any(|t| t.name == nt.name) {
                changed(
                    c,
                    s,
                    "sensor",
                    &o.name,
                    &format!("track {}", nt.name),
                    "(none)".into(),
                    characteristic(nt),
                );
            }
        }
        changed(
            c,
            s,
            "sensor",
            &o.name,
            "filter",
            o.filter.to_string(),
            n.filter.to_string(),
        );
        changed(
            c,
            s,
            "sensor",
            &o.name,
            "open reads",
            volts(o.open_reads),
            volts(n.open_reads),
        );
        changed(
            c,
            s,
            "sensor",
            &o.name,
            "combine",
            combine(o.combine).into(),
            combine(n.combine).into(),
        );
    }
    for n in &new.sensors {
        if old.sensor_id(&n.name).is_none() {
            added(c, s, "sensor", &n.name, sensor_text(n));
        }
    }
}

fn inputs_and_switches(old: &Model, new: &Model, c: &mut Vec<Change>) {
    let band = |i: &crate::model::Input| format!("{} .. {}", pct(i.lo), pct(i.hi));
    for o in &old.inputs {
        match new.inputs.iter().find(|n| n.name == o.name) {
            Some(n) => changed(
                c,
                Section::Inputs,
                "input",
                &o.name,
                "band",
                band(o),
                band(n),
            ),
            None => removed(c, Section::Inputs, "input", &o.name, band(o)),
        }
    }
    for n in &new.inputs {
        if !old.inputs.iter().any(|o| o.name == n.name) {
            added(c, Section::Inputs, "input", &n.name, band(n));
        }
    }
    for o in &old.switches {
        if !new.switches.iter().any(|n| n.name == o.name) {
            removed(c, Section::Switches, "switch", &o.name, "switch".into());
        }
    }
    for n in &new.switches {
        if !old.switches.iter().any(|o| o.name == n.name) {
            added(c, Section::Switches, "switch", &n.name, "switch".into());
        }
    }
}

fn actuator(old: &Model, new: &Model, c: &mut Vec<Change>) {
    let (o, n) = (&old.actuator, &new.actuator);
    let s = Section::Actuator;
    let a = "actuator";
    changed(c, s, a, "", "default", pct(o.default), pct(n.default));
    changed(c, s, a, "", "idle", pct(o.idle), pct(n.idle));
    let mv =
        |from: f64, to: f64, t: crate::time::Time| format!("{} to {} in {t}", pct(from), pct(to));
    changed(
        c,
        s,
        a,
        "",
        "open",
        mv(o.open_from, o.open_to, o.open_time),
        mv(n.open_from, n.open_to, n.open_time),
    );
    changed(
        c,
        s,
        a,
        "",
        "spring",
        mv(o.spring_from, o.spring_to, o.spring_time),
        mv(n.spring_from, n.spring_to, n.spring_time),
    );
}

fn debounce_text(d: &Debounce) -> String {
    match *d {
        Debounce::Time { set } => set.to_string(),
        Debounce::Counter {
            up,
            down,
            fail,
            pass,
        } => format!("count up {up} down {down} to {fail} pass {pass}"),
    }
}

fn healing_text(h: &Healing) -> String {
    match *h {
        Healing::Immediate => "at once".into(),
        Healing::After { time } => time.to_string(),
        Healing::Latch => "latch".into(),
    }
}

fn suspects_text(m: &Model, f: &Fault) -> String {
    if f.suspects.is_empty() {
        return "(none)".into();
    }
    let mut v: Vec<String> = f.suspects.iter().map(|t| m.track_name(*t)).collect();
    v.sort();
    v.join(", ")
}

fn fault_text(m: &Model, f: &Fault) -> String {
    let mut s = String::new();
    if !f.suspects.is_empty() {
        s.push_str(&format!("suspects {} ", suspects_text(m, f)));
    }
    s.push_str(&format!("when {}", expr(m, &f.condition)));
    match f.debounce {
        Debounce::Time { set } if set.0 > 0 => s.push_str(&format!(" for {set}")),
        Debounce::Time { .. } => {}
        d @ Debounce::Counter { .. } => s.push_str(&format!(" {}", debounce_text(&d))),
    }
    match f.healing {
        Healing::Immediate => {}
        Healing::After { time } => s.push_str(&format!(" heal {time}")),
        Healing::Latch => s.push_str(" latch"),
    }
    if let Some(code) = &f.code {
        s.push_str(&format!(" code {code}"));
    }
    s
}

/// Old-only and new-only faults with the same definition under different names, paired in
/// file order.
fn fault_renames(old: &Model, new: &Model, probe: &Joint) -> Vec<(usize, usize)> {
    let mut pairs: Vec<(usize, usize)> = Vec::new();
    for (oi, o) in old.faults.iter().enumerate() {
        if new.fault_id(&o.name).is_some() {
            continue;
        }
        let found = new.faults.iter().enumerate().find(|(ni, n)| {
            old.fault_id(&n.name).is_none()
                && !pairs.iter().any(|(_, p)| p == ni)
                && suspects_text(old, o) == suspects_text(new, n)
                && o.debounce == n.debounce
                && o.healing == n.healing
                && o.code == n.code
                && probe.compare(&o.condition, &n.condition) == Comparison::Same
        });
        if let Some((ni, _)) = found {
            pairs.push((oi, ni));
        }
    }
    pairs
}

fn faults(old: &Model, new: &Model, joint: &Joint, map: &[Option<usize>], c: &mut Vec<Change>) {
    let s = Section::Faults;
    for (oi, o) in old.faults.iter().enumerate() {
        let Some(ni) = map[oi] else {
            removed(c, s, "fault", &o.name, fault_text(old, o));
            continue;
        };
        let n = &new.faults[ni];
        if n.name != o.name {
            c.push(Change {
                section: s,
                kind: Kind::Renamed,
                noun: "fault",
                name: n.name.clone(),
                field: String::new(),
                old: Some(o.name.clone()),
                new: Some(n.name.clone()),
                comparison: None,
            });
        }
        let name = &n.name;
        changed(
            c,
            s,
            "fault",
            name,
            "suspects",
            suspects_text(old, o),
            suspects_text(new, n),
        );
        let cmp = joint.compare(&o.condition, &n.condition);
        if cmp != Comparison::Same {
            c.push(Change {
                section: s,
                kind: Kind::Changed,
                noun: "fault",
                name: name.clone(),
                field: "condition".into(),
                old: Some(expr(old, &o.condition)),
                new: Some(expr(new, &n.condition)),
                comparison: Some(cmp),
            });
        }
        changed(
            c,
            s,
            "fault",
            name,
            "debounce",
            debounce_text(&o.debounce),
            debounce_text(&n.debounce),
        );
        changed(
            c,
            s,
            "fault",
            name,
            "heal",
            healing_text(&o.healing),
            healing_text(&n.healing),
        );
        let code = |x: &Option<String>| x.clone().unwrap_or_else(|| "(none)".into());
        changed(c, s, "fault", name, "code", code(&o.code), code(&n.code));
    }
    for (ni, n) in new.faults.iter().enumerate() {
        if !map.contains(&Some(ni)) {
            added(c, s, "fault", &n.name, fault_text(new, n));
        }
    }
}

/// A mode's definition in terms that do not depend on either revision's indices.
fn mode_key(m: &Model, mode: &Mode, fault_name: &dyn Fn(usize) -> String) -> String {
    let mut tol: Vec<String> = mode.tolerates.iter().map(|f| fault_name(*f)).collect();
    tol.sort();
    format!("{} | tolerates {}", demand(m, mode), tol.join(", "))
}

fn mode_map(old: &Model, new: &Model, fault_map: &[Option<usize>]) -> Vec<Option<usize>> {
    // Old tolerated faults under their new names, so a fault rename does not hide a mode rename.
    let old_fault = |f: usize| match fault_map.get(f).copied().flatten() {
        Some(n) => new.faults[n].name.clone(),
        None => old
            .faults
            .get(f)
            .map_or_else(String::new, |x| x.name.clone()),
    };
    let new_fault = |f: usize| {
        new.faults
            .get(f)
            .map_or_else(String::new, |x| x.name.clone())
    };
    let mut map: Vec<Option<usize>> = old.modes.iter().map(|m| new.mode_id(&m.name)).collect();
    for (oi, o) in old.modes.iter().enumerate() {
        if map[oi].is_some() {
            continue;
        }
        let key = mode_key(old, o, &old_fault);
        let found = new.modes.iter().enumerate().position(|(ni, n)| {
            old.mode_id(&n.name).is_none()
                && !map.contains(&Some(ni))
                && mode_key(new, n, &new_fault) == key
        });
        map[oi] = found;
    }
    map
}

fn tolerates_text(m: &Model, mode: &Mode) -> String {
    if mode.tolerates.is_empty() {
        return "(none)".into();
    }
    let mut v: Vec<&str> = mode
        .tolerates
        .iter()
        .filter_map(|f| m.faults.get(*f).map(|f| f.name.as_str()))
        .collect();
    v.sort_unstable();
    v.join(", ")
}

fn demand_only(m: &Model, mode: &Mode) -> String {
    match mode.demand {
        Demand::Sensor { sensor } => m.sensors[sensor].name.clone(),
        Demand::Input { input } => m.inputs[input].name.clone(),
        Demand::Fixed { percent } => pct(percent),
        Demand::DriveOff => "drive off".into(),
    }
}

fn modes(
    old: &Model,
    new: &Model,
    fault_map: &[Option<usize>],
    map: &[Option<usize>],
    c: &mut Vec<Change>,
) {
    let s = Section::Modes;
    let mode_text = |m: &Model, mode: &Mode| {
        let t = tolerates_text(m, mode);
        if t == "(none)" {
            demand(m, mode)
        } else {
            format!("{}  tolerates {t}", demand(m, mode))
        }
    };
    for (oi, o) in old.modes.iter().enumerate() {
        let Some(ni) = map[oi] else {
            removed(c, s, "mode", &o.name, mode_text(old, o));
            continue;
        };
        let n = &new.modes[ni];
        if n.name != o.name {
            c.push(Change {
                section: s,
                kind: Kind::Renamed,
                noun: "mode",
                name: n.name.clone(),
                field: String::new(),
                old: Some(o.name.clone()),
                new: Some(n.name.clone()),
                comparison: None,
            });
        }
        let name = &n.name;
        changed(
            c,
            s,
            "mode",
            name,
            "demand",
            demand_only(old, o),
            demand_only(new, n),
        );
        let limit = |x: f64| if x < 100.0 { pct(x) } else { "none".into() };
        changed(c, s, "mode", name, "limit", limit(o.limit), limit(n.limit));
        let rate = |r: Option<f64>| r.map_or("none".into(), |r| format!("{} %/s", trim(r)));
        changed(c, s, "mode", name, "rate", rate(o.rate), rate(n.rate));
        // Tolerated faults compared under the new names.
        let mut ot: Vec<String> = o
            .tolerates
            .iter()
            .map(|f| match fault_map.get(*f).copied().flatten() {
                Some(nf) => new.faults[nf].name.clone(),
                None => old
                    .faults
                    .get(*f)
                    .map_or_else(String::new, |x| x.name.clone()),
            })
            .collect();
        ot.sort();
        let ot = if ot.is_empty() {
            "(none)".to_string()
        } else {
            ot.join(", ")
        };
        changed(c, s, "mode", name, "tolerates", ot, tolerates_text(new, n));
    }
    for (ni, n) in new.modes.iter().enumerate() {
        if !map.contains(&Some(ni)) {
            added(c, s, "mode", &n.name, mode_text(new, n));
        }
    }
    let start_old = match map.get(old.start).copied().flatten() {
        Some(n) => new.modes[n].name.clone(),
        None => old.modes[old.start].name.clone(),
    };
    changed(
        c,
        Section::Policy,
        "policy",
        "",
        "start",
        start_old,
        new.modes[new.start].name.clone(),
    );
}

/// `(source, target)` of a transition under the new mode names, and its occurrence among
/// transitions with the same pair.
fn transition_keys(m: &Model, name: &dyn Fn(usize) -> String) -> Vec<(String, String, usize)> {
    let mut keys: Vec<(String, String, usize)> = Vec::new();
    for t in &m.transitions {
        let from = match t.from {
            Source::Any => "any".to_string(),
            Source::Mode(i) => name(i),
        };
        let to = name(t.to);
        let n = keys.iter().filter(|k| k.0 == from && k.1 == to).count();
        keys.push((from, to, n));
    }
    keys
}

fn key_name(k: &(String, String, usize)) -> String {
    if k.2 == 0 {
        format!("{} -> {}", k.0, k.1)
    } else {
        format!("{} -> {} (#{})", k.0, k.1, k.2 + 1)
    }
}

fn dwell_text(d: Option<crate::time::Time>) -> String {
    d.map_or("none".into(), |t| t.to_string())
}

fn transition_text(m: &Model, t: &crate::model::Transition) -> String {
    match t.dwell {
        Some(d) => format!("when {} for {d}", expr(m, &t.guard)),
        None => format!("when {}", expr(m, &t.guard)),
    }
}

fn transitions(
    old: &Model,
    new: &Model,
    joint: &Joint,
    map: &[Option<usize>],
    c: &mut Vec<Change>,
) {
    let s = Section::Transitions;
    let old_name = |i: usize| match map.get(i).copied().flatten() {
        Some(n) => new.modes[n].name.clone(),
        None => old
            .modes
            .get(i)
            .map_or_else(String::new, |m| m.name.clone()),
    };
    let new_name = |i: usize| {
        new.modes
            .get(i)
            .map_or_else(String::new, |m| m.name.clone())
    };
    let ok = transition_keys(old, &old_name);
    let nk = transition_keys(new, &new_name);
    for (oi, k) in ok.iter().enumerate() {
        let ot = &old.transitions[oi];
        let Some(ni) = nk.iter().position(|x| x == k) else {
            removed(c, s, "transition", &key_name(k), transition_text(old, ot));
            continue;
        };
        let nt = &new.transitions[ni];
        let name = key_name(k);
        let cmp = joint.compare(&ot.guard, &nt.guard);
        if cmp != Comparison::Same {
            c.push(Change {
                section: s,
                kind: Kind::Changed,
                noun: "transition",
                name: name.clone(),
                field: "guard".into(),
                old: Some(expr(old, &ot.guard)),
                new: Some(expr(new, &nt.guard)),
                comparison: Some(cmp),
            });
        }
        changed(
            c,
            s,
            "transition",
            &name,
            "dwell",
            dwell_text(ot.dwell),
            dwell_text(nt.dwell),
        );
    }
    for (ni, k) in nk.iter().enumerate() {
        if !ok.contains(k) {
            added(
                c,
                s,
                "transition",
                &key_name(k),
                transition_text(new, &new.transitions[ni]),
            );
        }
    }
    // The first transition whose guard holds fires: the order of those kept matters.
    let kept_old: Vec<String> = ok.iter().filter(|k| nk.contains(k)).map(key_name).collect();
    let kept_new: Vec<String> = nk.iter().filter(|k| ok.contains(k)).map(key_name).collect();
    if kept_old != kept_new {
        changed(
            c,
            s,
            "transitions",
            "",
            "order",
            kept_old.join(", "),
            kept_new.join(", "),
        );
    }
}

fn requirement_text(r: &Requirement) -> String {
    match r {
        Requirement::Excess { limit, within, .. } => {
            format!("excess below {} within {within}", pct(*limit))
        }
        Requirement::Never {
            above,
            unless_driver: Some(d),
            ..
        } => format!(
            "never above {} unless driver above {}",
            pct(*above),
            pct(*d)
        ),
        Requirement::Never { above, .. } => format!("never above {}", pct(*above)),
        Requirement::IdleAfterRelease { within, .. } => format!("idle within {within} of release"),
    }
}

fn requirement_kind(r: &Requirement) -> &'static str {
    match r {
        Requirement::Excess { .. } => "excess",
        Requirement::Never { .. } => "ceiling",
        Requirement::IdleAfterRelease { .. } => "idle",
    }
}

fn requirements(old: &Model, new: &Model, c: &mut Vec<Change>) {
    let s = Section::Requirements;
    let scope = |m: &Model| match m.assure.as_ref().map(|a| a.faults) {
        Some(crate::model::FaultScope::Single) => "single".to_string(),
        Some(crate::model::FaultScope::Double) => "double".to_string(),
        None => "(no assure block)".to_string(),
    };
    changed(c, s, "assure", "", "faults", scope(old), scope(new));
    let reqs = |m: &Model| -> Vec<(String, String)> {
        let mut out: Vec<(String, String)> = Vec::new();
        for r in m.assure.iter().flat_map(|a| a.requirements.iter()) {
            let k = requirement_kind(r);
            let n = out.iter().filter(|x| x.0.starts_with(k)).count();
            let key = if n == 0 {
                k.to_string()
            } else {
                format!("{k} #{}", n + 1)
            };
            out.push((key, requirement_text(r)));
        }
        out
    };
    let (or, nr) = (reqs(old), reqs(new));
    for (k, t) in &or {
        match nr.iter().find(|x| &x.0 == k) {
            Some((_, nt)) => changed(c, s, "requirement", k, "", t.clone(), nt.clone()),
            None => removed(c, s, "requirement", k, t.clone()),
        }
    }
    for (k, t) in &nr {
        if !or.iter().any(|x| &x.0 == k) {
            added(c, s, "requirement", k, t.clone());
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const VAN: &str = include_str!("../../scenarios/van/van_throttle.limp");

    fn lines(old: &str, new: &str) -> Vec<String> {
        let (Ok(o), Ok(n)) = (crate::model::lower(old), crate::model::lower(new)) else {
            panic!("fixture does not lower");
        };
        compare(&o, &n).changes.iter().map(Change::line).collect()
    }

    #[test]
    fn identical_policies_have_no_changes() {
        assert!(lines(VAN, VAN).is_empty());
    }

    #[test]
    fn a_debounce_and_a_limit_are_one_line_each() {
        let new = VAN
            .replace(
                "|pedal.a - pedal.b| above 6 % for 40 ms",
                "|pedal.a - pedal.b| above 6 % for 80 ms",
            )
            .replace("limit 35 %", "limit 30 %");
        assert_eq!(
            lines(VAN, &new),
            vec![
                "pedal_disagree: debounce 40 ms -> 80 ms",
                "mode reduced_power: limit 35 % -> 30 %",
            ]
        );
    }

    #[test]
    fn a_renamed_fault_and_mode_are_renames_not_removals() {
        let new = VAN
            .replace("brake_conflict", "brake_override")
            .replace("idle_only", "idle_hold");
        assert_eq!(
            lines(VAN, &new),
            vec![
                "renamed fault brake_conflict -> brake_override",
                "renamed mode idle_only -> idle_hold"
            ]
        );
    }

    #[test]
    fn a_rename_with_a_changed_definition_is_a_removal_and_an_addition() {
        let new = VAN
            .replace("brake and pedal above 10 %", "brake and pedal above 12 %")
            .replace("brake_conflict", "brake_override");
        let l = lines(VAN, &new);
        assert!(
            l.iter()
                .any(|x| x.starts_with("removed fault brake_conflict")),
            "{l:?}"
        );
        assert!(
            l.iter()
                .any(|x| x.starts_with("added fault brake_override")),
            "{l:?}"
        );
    }

    #[test]
    fn swapped_transitions_report_the_order() {
        let a = "normal        -> idle_only     when pedal_disagree or brake_conflict\n";
        let b = "normal        -> reduced_power when suspect(pedal.a) or suspect(pedal.b)\n";
        let new = VAN.replace(&format!("  {a}  {b}"), &format!("  {b}  {a}"));
        assert_ne!(new, VAN, "the fixture text moved");
        let l = lines(VAN, &new);
        assert_eq!(l.len(), 1, "{l:?}");
        assert!(l[0].starts_with("transitions: order "), "{l:?}");
    }
}
