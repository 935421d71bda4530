//! Guards and conditions of two revisions compared exactly. Both are rewritten onto one joint
//! model (the new revision, extended with whatever only the old one names), atoms matched by
//! name (modulo fault renames), and the guard reasoning asked for a valuation where they differ.

use crate::analysis::guards::{self, Assignment, TooLarge, Witness};
use crate::model::{Expr, FaultId, InputId, Model, SensorId, Signal, SwitchId, Term, TrackRef};
use serde::Serialize;
use std::cell::Cell;

/// The new revision with the old revision's extra names appended, and the map from the old
/// revision's indices onto it. The new revision's indices are the joint ones unchanged.
pub struct Joint<'a> {
    pub model: Model,
    old: &'a Model,
    new: &'a Model,
    fault: Vec<FaultId>,
    sensor: Vec<SensorId>,
    /// Per old sensor, per old track: the joint track index within the joint sensor.
    track: Vec<Vec<usize>>,
    input: Vec<InputId>,
    switch: Vec<SwitchId>,
}

/// How two expressions of two revisions compare.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "answer", rename_all = "kebab-case")]
pub enum Comparison {
    /// They hold on exactly the same valuations.
    Same,
    /// A valuation on which they differ, and which side holds there.
    Differs {
        assignment: Assignment,
        old_holds: bool,
    },
    /// The enumeration would exceed the bound of the guard reasoning.
    Undecided { needed: u128 },
}

impl<'a> Joint<'a> {
    /// `renames` pairs an old fault with the new fault it is the same monitor as.
    pub fn new(old: &'a Model, new: &'a Model, renames: &[(FaultId, FaultId)]) -> Joint<'a> {
        let mut model = new.clone();
        let mut sensor = Vec::new();
        let mut track = Vec::new();
        for s in &old.sensors {
            let js = match model.sensor_id(&s.name) {
                Some(i) => i,
                None => {
                    let mut c = s.clone();
                    c.tracks.clear();
                    model.sensors.push(c);
                    model.sensors.len() - 1
                }
            };
            let mut ts = Vec::new();
            for t in &s.tracks {
                let tracks = &mut model.sensors[js].tracks;
                let jt = match tracks.iter().position(|x| x.name == t.name) {
                    Some(i) => i,
                    None => {
                        tracks.push(t.clone());
                        tracks.len() - 1
                    }
                };
                ts.push(jt);
            }
            sensor.push(js);
            track.push(ts);
        }
        let input = old
            .inputs
            .iter()
            .map(|i| {
                model
                    .inputs
                    .iter()
                    .position(|x| x.name == i.name)
                    .unwrap_or_else(|| {
                        model.inputs.push(i.clone());
                        model.inputs.len() - 1
                    })
            })
            .collect();
        let switch = old
            .switches
            .iter()
            .map(|s| {
                model
                    .switches
                    .iter()
                    .position(|x| x.name == s.name)
                    .unwrap_or_else(|| {
                        model.switches.push(s.clone());
                        model.switches.len() - 1
                    })
            })
            .collect();
        let mut j = Joint {
            model,
            old,
            new,
            fault: Vec::new(),
            sensor,
            track,
            input,
            switch,
        };
        for (i, f) in old.faults.iter().enumerate() {
            let renamed = renames.iter().find(|(o, _)| *o == i).map(|(_, n)| *n);
            let jf = match renamed.or_else(|| new.fault_id(&f.name)) {
                Some(n) => n,
                None => {
                    let mut c = f.clone();
                    c.suspects = f.suspects.iter().map(|t| j.old_track(*t)).collect();
                    c.reads = f.reads.iter().map(|t| j.old_track(*t)).collect();
                    c.condition = j.old_expr(&f.condition);
                    j.model.faults.push(c);
                    j.model.faults.len() - 1
                }
            };
            j.fault.push(jf);
        }
        j
    }

    fn old_track(&self, t: TrackRef) -> TrackRef {
        TrackRef {
            sensor: self.sensor.get(t.sensor).copied().unwrap_or(t.sensor),
            track: self
                .track
                .get(t.sensor)
                .and_then(|ts| ts.get(t.track))
                .copied()
                .unwrap_or(t.track),
        }
    }

    fn old_signal(&self, s: Signal) -> Signal {
        match s {
            Signal::Track { track } => Signal::Track {
                track: self.old_track(track),
            },
            Signal::TrackVolts { track } => Signal::TrackVolts {
                track: self.old_track(track),
            },
            Signal::Merged { sensor } => Signal::Merged {
                sensor: self.sensor.get(sensor).copied().unwrap_or(sensor),
            },
            Signal::Input { input } => Signal::Input {
                input: self.input.get(input).copied().unwrap_or(input),
            },
            Signal::Target => Signal::Target,
        }
    }

    fn old_term(&self, t: &Term) -> Term {
        match *t {
            Term::Signal { signal } => Term::Signal {
                signal: self.old_signal(signal),
            },
            Term::Diff { a, b } => Term::Diff {
                a: self.old_signal(a),
                b: self.old_signal(b),
            },
            Term::AbsDiff { a, b } => Term::AbsDiff {
                a: self.old_signal(a),
                b: self.old_signal(b),
            },
        }
    }

    /// An old expression on joint indices, atoms mapped by name. `suspect()` is left as is
    /// here; [`Joint::compare`] expands it with the old revision's own suspect relation.
    fn old_expr(&self, e: &Expr) -> Expr {
        match e {
            Expr::True => Expr::True,
            Expr::Fault { fault, span } => Expr::Fault {
                fault: self.fault.get(*fault).copied().unwrap_or(*fault),
                span: *span,
            },
            Expr::Suspect { track, span } => Expr::Suspect {
                track: self.old_track(*track),
                span: *span,
            },
            Expr::Switch { switch, span } => Expr::Switch {
                switch: self.switch.get(*switch).copied().unwrap_or(*switch),
                span: *span,
            },
            Expr::Compare { term, cmp, span } => Expr::Compare {
                term: self.old_term(term),
                cmp: *cmp,
                span: *span,
            },
            Expr::Not { e } => Expr::Not {
                e: Box::new(self.old_expr(e)),
            },
            Expr::And { es } => Expr::And {
                es: es.iter().map(|x| self.old_expr(x)).collect(),
            },
            Expr::Or { es } => Expr::Or {
                es: es.iter().map(|x| self.old_expr(x)).collect(),
            },
        }
    }

    /// The joint fault an old fault is.
    pub fn old_fault(&self, f: FaultId) -> FaultId {
        self.fault.get(f).copied().unwrap_or(f)
    }

    /// Compares an old expression with a new one. `suspect(T)` means "some set fault suspects
    /// T" in the revision that wrote it, so each side's is expanded into the disjunction of its
    /// own suspecting faults: a fault that stops suspecting a track changes the guards that
    /// read `suspect()` of it, as it changes the controller.
    pub fn compare(&self, old_e: &Expr, new_e: &Expr) -> Comparison {
        let a = self.expand_old(&self.old_expr(old_e));
        let b = expand(&b_relation(self.new), new_e);
        let old_holds = Cell::new(false);
        let w = guards::search(&self.model, &[&a, &b], |v| {
            let (x, y) = (v.holds(&a), v.holds(&b));
            old_holds.set(x);
            x != y
        });
        match w {
            Witness::None => Comparison::Same,
            Witness::Found(assignment) => Comparison::Differs {
                assignment,
                old_holds: old_holds.get(),
            },
            Witness::Inconclusive(TooLarge { needed }) => Comparison::Undecided { needed },
        }
    }

    fn expand_old(&self, e: &Expr) -> Expr {
        // The old suspect relation, on joint indices.
        let rel: Vec<(FaultId, Vec<TrackRef>)> = self
            .old
            .faults
            .iter()
            .enumerate()
            .map(|(i, f)| {
                (
                    self.old_fault(i),
                    f.suspects.iter().map(|t| self.old_track(*t)).collect(),
                )
            })
            .collect();
        expand(&rel, e)
    }
}

/// The suspect relation of the new revision (its indices are the joint ones).
fn b_relation(m: &Model) -> Vec<(FaultId, Vec<TrackRef>)> {
    m.faults
        .iter()
        .enumerate()
        .map(|(i, f)| (i, f.suspects.clone()))
        .collect()
}

/// Replaces each `suspect(T)` by the disjunction of the faults that suspect `T` under `rel`
/// (an empty disjunction, false, when none does).
fn expand(rel: &[(FaultId, Vec<TrackRef>)], e: &Expr) -> Expr {
    match e {
        Expr::Suspect { track, span } => Expr::Or {
            es: rel
                .iter()
                .filter(|(_, ts)| ts.contains(track))
                .map(|(f, _)| Expr::Fault {
                    fault: *f,
                    span: *span,
                })
                .collect(),
        },
        Expr::Not { e } => Expr::Not {
            e: Box::new(expand(rel, e)),
        },
        Expr::And { es } => Expr::And {
            es: es.iter().map(|x| expand(rel, x)).collect(),
        },
        Expr::Or { es } => Expr::Or {
            es: es.iter().map(|x| expand(rel, x)).collect(),
        },
        other => other.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const VAN: &str = include_str!("../../scenarios/van/van_throttle.limp");

    fn model(src: &str) -> Model {
        match crate::model::lower(src) {
            Ok(m) => m,
            Err(d) => panic!("fixture does not lower: {d:?}"),
        }
    }

    /// The guard of the first transition whose source and target are as named.
    fn guard<'m>(m: &'m Model, from: &str, to: &str) -> &'m Expr {
        let t = m.transitions.iter().find(|t| {
            let f = match t.from {
                crate::model::Source::Any => "any",
                crate::model::Source::Mode(i) => m.modes[i].name.as_str(),
            };
            f == from && m.modes[t.to].name == to
        });
        match t {
            Some(t) => &t.guard,
            None => panic!("no transition {from} -> {to}"),
        }
    }

    #[test]
    fn reordered_regrouped_and_doubly_negated_guards_are_the_same() {
        let old = model(VAN);
        let new = model(
            &VAN.replace(
                "normal        -> idle_only     when pedal_disagree or brake_conflict",
                "normal        -> idle_only     when not not (brake_conflict or pedal_disagree)",
            )
            .replace(
                "when pedal_disagree or (suspect(pedal.a) and suspect(pedal.b))",
                "when (suspect(pedal.b) and suspect(pedal.a)) or pedal_disagree",
            ),
        );
        let j = Joint::new(&old, &new, &[]);
        for (f, t) in [("normal", "idle_only"), ("reduced_power", "idle_only")] {
            assert_eq!(
                j.compare(guard(&old, f, t), guard(&new, f, t)),
                Comparison::Same,
                "{f} -> {t}"
            );
        }
    }

    #[test]
    fn a_dropped_disjunct_is_found_with_a_fault_state() {
        let old = model(VAN);
        let new = model(&VAN.replace(
            "when pedal_disagree or brake_conflict",
            "when pedal_disagree",
        ));
        let j = Joint::new(&old, &new, &[]);
        match j.compare(
            guard(&old, "normal", "idle_only"),
            guard(&new, "normal", "idle_only"),
        ) {
            Comparison::Differs {
                assignment,
                old_holds,
            } => {
                assert!(old_holds);
                assert_eq!(assignment.set_faults(), vec!["brake_conflict"]);
            }
            other => panic!("expected a difference, got {other:?}"),
        }
    }

    #[test]
    fn a_moved_threshold_differs_on_the_line_between() {
        let old = model(VAN);
        let new = model(&VAN.replace("pedal below 3 % for 500 ms", "pedal below 2 % for 500 ms"));
        let j = Joint::new(&old, &new, &[]);
        match j.compare(
            guard(&old, "reduced_power", "normal"),
            guard(&new, "reduced_power", "normal"),
        ) {
            Comparison::Differs {
                assignment,
                old_holds,
            } => {
                assert!(old_holds);
                let text = assignment.to_string();
                assert!(
                    text.contains("pedal=2 %") || text.contains("pedal=2.5 %"),
                    "{text}"
                );
            }
            other => panic!("expected a difference, got {other:?}"),
        }
    }

    #[test]
    fn a_rename_maps_the_old_fault_onto_the_new_one() {
        let old = model(VAN);
        let new = model(&VAN.replace("brake_conflict", "brake_override"));
        let (o, n) = (
            old.fault_id("brake_conflict").unwrap_or(usize::MAX),
            new.fault_id("brake_override").unwrap_or(usize::MAX),
        );
        let renamed = Joint::new(&old, &new, &[(o, n)]);
        let g = |m| guard(m, "normal", "idle_only");
        assert_eq!(renamed.compare(g(&old), g(&new)), Comparison::Same);
        // Without the rename the two are different monitors, and the guards differ.
        let plain = Joint::new(&old, &new, &[]);
        assert!(matches!(
            plain.compare(g(&old), g(&new)),
            Comparison::Differs { .. }
        ));
    }

    #[test]
    fn suspect_follows_each_revisions_own_suspect_relation() {
        let base = VAN.replace(
            "when suspect(pedal.a) or suspect(pedal.b)",
            "when suspect(pedal.b)",
        );
        let old = model(&base);
        // pedal_disagree no longer suspects pedal.b: `suspect(pedal.b)` reads fewer faults.
        let new = model(&base.replace(
            "fault pedal_disagree suspects pedal.a, pedal.b",
            "fault pedal_disagree suspects pedal.a",
        ));
        let j = Joint::new(&old, &new, &[]);
        let g = |m| guard(m, "normal", "reduced_power");
        match j.compare(g(&old), g(&new)) {
            Comparison::Differs { assignment, .. } => {
                assert_eq!(assignment.set_faults(), vec!["pedal_disagree"]);
            }
            other => panic!("expected a difference, got {other:?}"),
        }
    }

    #[test]
    fn conditions_on_signals_only_the_old_revision_has_still_compare() {
        let old = model(VAN);
        let new = model(&VAN.replace("switch brake", "switch brake2").replace(
            "when brake and pedal above 10 %",
            "when brake2 and pedal above 10 %",
        ));
        let j = Joint::new(&old, &new, &[]);
        let c = |m: &Model| {
            m.faults[m.fault_id("brake_conflict").unwrap_or(0)]
                .condition
                .clone()
        };
        assert!(matches!(
            j.compare(&c(&old), &c(&new)),
            Comparison::Differs { .. }
        ));
    }
}
