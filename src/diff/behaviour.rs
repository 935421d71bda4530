//! What a revision changes in behaviour: every scenario of a folder replayed against both
//! revisions (first divergence, verdicts, detection instants, modes), and the reaction
//! matrices of both compared row by row.

use crate::model::Model;
use crate::prove::{Proof, Row};
use crate::sim::trace::{EventKind, Trace};
use crate::time::{Time, trim};
use serde::{Serialize, Serializer};

/// Instants in JSON are seconds, as in the trace's own JSON.
fn secs_opt<S: Serializer>(t: &Option<Time>, s: S) -> Result<S::Ok, S::Error> {
    match t {
        Some(t) => s.serialize_f64(t.as_secs_f64()),
        None => s.serialize_none(),
    }
}

fn path_secs<S: Serializer>(p: &[(Time, String)], s: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeSeq;
    let mut seq = s.serialize_seq(Some(p.len()))?;
    for (t, m) in p {
        seq.serialize_element(&serde_json::json!({ "t": t.as_secs_f64(), "mode": m }))?;
    }
    seq.end()
}

/// Old names under the new revision's: a renamed fault or mode is the same one.
pub struct Names<'a> {
    pub old: &'a Model,
    pub new: &'a Model,
    pub fault_map: &'a [Option<usize>],
    pub mode_map: &'a [Option<usize>],
}

impl Names<'_> {
    pub fn old_fault(&self, f: usize) -> String {
        match self.fault_map.get(f).copied().flatten() {
            Some(n) => self.new.faults[n].name.clone(),
            None => self
                .old
                .faults
                .get(f)
                .map_or_else(|| format!("fault#{f}"), |x| x.name.clone()),
        }
    }

    pub fn old_mode(&self, m: usize) -> String {
        match self.mode_map.get(m).copied().flatten() {
            Some(n) => self.new.modes[n].name.clone(),
            None => self
                .old
                .modes
                .get(m)
                .map_or_else(|| format!("mode#{m}"), |x| x.name.clone()),
        }
    }

    fn new_fault(&self, f: usize) -> String {
        self.new
            .faults
            .get(f)
            .map_or_else(|| format!("fault#{f}"), |x| x.name.clone())
    }

    fn new_mode(&self, m: usize) -> String {
        self.new
            .modes
            .get(m)
            .map_or_else(|| format!("mode#{m}"), |x| x.name.clone())
    }
}

/// One expectation's verdict in each revision (`None`: the scenario did not replay there).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct VerdictChange {
    pub expectation: String,
    pub old: Option<bool>,
    pub new: Option<bool>,
}

/// When a fault first set in each revision.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DetectionChange {
    pub fault: String,
    #[serde(serialize_with = "secs_opt")]
    pub old: Option<Time>,
    #[serde(serialize_with = "secs_opt")]
    pub new: Option<Time>,
}

/// One scenario replayed against both revisions.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ScenarioDiff {
    /// The file name.
    pub scenario: String,
    /// Why the scenario does not replay against a revision.
    pub old_error: Option<String>,
    pub new_error: Option<String>,
    /// Every expectation, changed or not.
    pub verdicts: Vec<VerdictChange>,
    /// The first instant at which the events or the samples differ.
    #[serde(serialize_with = "secs_opt")]
    pub diverge_at: Option<Time>,
    pub detections: Vec<DetectionChange>,
    /// Modes entered, with the instant, starting with the initial mode.
    #[serde(serialize_with = "path_secs")]
    pub old_modes: Vec<(Time, String)>,
    #[serde(serialize_with = "path_secs")]
    pub new_modes: Vec<(Time, String)>,
}

impl ScenarioDiff {
    pub fn verdicts_changed(&self) -> bool {
        self.verdicts.iter().any(|v| v.old != v.new)
    }

    pub fn modes_changed(&self) -> bool {
        self.old_modes != self.new_modes
    }

    pub fn differs(&self) -> bool {
        self.old_error.is_some()
            || self.new_error.is_some()
            || self.verdicts_changed()
            || self.diverge_at.is_some()
    }
}

/// `normal, reduced_power at 1.02 s`.
pub fn mode_path(p: &[(Time, String)]) -> String {
    p.iter()
        .enumerate()
        .map(|(i, (t, m))| {
            if i == 0 {
                m.clone()
            } else {
                format!("{m} at {} s", trim(t.as_secs_f64()))
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

/// A scenario that does not even parse is bad input, not a behaviour difference.
pub struct Unreadable(pub String);

/// Replays one scenario file against both revisions.
pub fn scenario(path: &std::path::Path, names: &Names) -> Result<ScenarioDiff, Unreadable> {
    let shown = path.to_string_lossy().replace('\\', "/");
    let src = crate::app::Source::read(&shown).map_err(Unreadable)?;
    let (ast, diags) = crate::lang::scenario::parse(&src.text);
    let Some(ast) = ast else {
        return Err(Unreadable(crate::diag::render(
            &src.path, &src.text, &diags,
        )));
    };
    let replay = |m: &Model, which: &str| -> Result<Trace, String> {
        let script = crate::sim::script::resolve(&ast, m).map_err(|d| {
            format!(
                "does not resolve against the {which} revision: {}",
                d.first().map_or("", |d| d.message.as_str())
            )
        })?;
        crate::sim::engine::run(m, &script, crate::sim::engine::RunOptions::default()).map_err(
            |e| format!("the {which} revision's actuator gives no throttle-body model: {e}"),
        )
    };
    let file = path
        .file_name()
        .map_or_else(|| shown.clone(), |n| n.to_string_lossy().into_owned());
    let (o, n) = (replay(names.old, "old"), replay(names.new, "new"));
    let mut d = ScenarioDiff {
        scenario: file,
        old_error: o.as_ref().err().cloned(),
        new_error: n.as_ref().err().cloned(),
        verdicts: Vec::new(),
        diverge_at: None,
        detections: Vec::new(),
        old_modes: Vec::new(),
        new_modes: Vec::new(),
    };
    match (&o, &n) {
        (Ok(o), Ok(n)) => compare_traces(o, n, names, &mut d),
        (Ok(t), Err(_)) => {
            d.verdicts = t
                .expectations
                .iter()
                .map(|v| VerdictChange {
                    expectation: v.text.clone(),
                    old: Some(v.passed),
                    new: None,
                })
                .collect();
        }
        (Err(_), Ok(t)) => {
            d.verdicts = t
                .expectations
                .iter()
                .map(|v| VerdictChange {
                    expectation: v.text.clone(),
                    old: None,
                    new: Some(v.passed),
                })
                .collect();
        }
        (Err(_), Err(_)) => {}
    }
    Ok(d)
}

/// An event in revision-independent words: names under the new revision, and a transition
/// without the guard text (a reworded but equivalent guard fires the same way).
fn event_key(
    k: &EventKind,
    fault: &dyn Fn(usize) -> String,
    mode: &dyn Fn(usize) -> String,
) -> String {
    match k {
        EventKind::Script { text } => text.clone(),
        EventKind::Break { text } => format!("break {text}"),
        EventKind::Mend { text } => format!("mend {text}"),
        EventKind::FaultPending { fault: f } => format!("fault {} pending", fault(*f)),
        EventKind::FaultLapsed { fault: f } => format!("fault {} lapsed", fault(*f)),
        EventKind::FaultSet { fault: f } => format!("fault {} set", fault(*f)),
        EventKind::FaultCleared { fault: f } => format!("fault {} cleared", fault(*f)),
        EventKind::Transition { from, to, .. } => format!("mode {} -> {}", mode(*from), mode(*to)),
    }
}

/// Sample rows as the text trace shows them (two decimals), so float noise below what a
/// reader sees is not a divergence.
fn sample_key(s: &crate::sim::trace::TraceSample, mode: &dyn Fn(usize) -> String) -> String {
    format!(
        "{:.2} {:.2} {:.2} {:.2} {:.2} {} {}",
        s.driver,
        s.pedal,
        s.target,
        s.opening,
        s.duty,
        if s.key_on {
            mode(s.mode)
        } else {
            String::new()
        },
        s.key_on
    )
}

fn compare_traces(o: &Trace, n: &Trace, names: &Names, d: &mut ScenarioDiff) {
    let of = |f: usize| names.old_fault(f);
    let om = |m: usize| names.old_mode(m);
    let nf = |f: usize| names.new_fault(f);
    let nm = |m: usize| names.new_mode(m);
    // Verdicts pair by position: the script is the same, so are its expectations.
    let count = o.expectations.len().max(n.expectations.len());
    for i in 0..count {
        let (ov, nv) = (o.expectations.get(i), n.expectations.get(i));
        d.verdicts.push(VerdictChange {
            expectation: nv.or(ov).map_or_else(String::new, |v| v.text.clone()),
            old: ov.map(|v| v.passed),
            new: nv.map(|v| v.passed),
        });
    }
    let mut first: Option<Time> = None;
    let mut note = |t: Time| first = Some(first.map_or(t, |f: Time| f.min(t)));
    let ev = o.events.len().max(n.events.len());
    for i in 0..ev {
        let a = o
            .events
            .get(i)
            .map(|e| (e.at, event_key(&e.kind, &of, &om)));
        let b = n
            .events
            .get(i)
            .map(|e| (e.at, event_key(&e.kind, &nf, &nm)));
        if a != b {
            let t = match (&a, &b) {
                (Some(x), Some(y)) => x.0.min(y.0),
                (Some(x), None) | (None, Some(x)) => x.0,
                (None, None) => Time::ZERO,
            };
            note(t);
            break;
        }
    }
    let sm = o.samples.len().max(n.samples.len());
    for i in 0..sm {
        let a = o.samples.get(i).map(|s| (s.at, sample_key(s, &om)));
        let b = n.samples.get(i).map(|s| (s.at, sample_key(s, &nm)));
        if a != b {
            let t = match (&a, &b) {
                (Some(x), Some(y)) => x.0.min(y.0),
                (Some(x), None) | (None, Some(x)) => x.0,
                (None, None) => Time::ZERO,
            };
            note(t);
            break;
        }
    }
    d.diverge_at = first;
    // First set instant of every fault either revision sets, under the new names.
    let sets = |t: &Trace, name: &dyn Fn(usize) -> String| -> Vec<(String, Time)> {
        let mut v: Vec<(String, Time)> = Vec::new();
        for e in &t.events {
            if let EventKind::FaultSet { fault } = e.kind {
                let nmf = name(fault);
                if !v.iter().any(|x| x.0 == nmf) {
                    v.push((nmf, e.at));
                }
            }
        }
        v
    };
    let (os, ns) = (sets(o, &of), sets(n, &nf));
    let mut faults: Vec<&String> = os.iter().chain(ns.iter()).map(|x| &x.0).collect();
    faults.sort();
    faults.dedup();
    for f in faults {
        let a = os.iter().find(|x| &x.0 == f).map(|x| x.1);
        let b = ns.iter().find(|x| &x.0 == f).map(|x| x.1);
        if a != b {
            d.detections.push(DetectionChange {
                fault: f.clone(),
                old: a,
                new: b,
            });
        }
    }
    let path = |t: &Trace, start: String, mode: &dyn Fn(usize) -> String| {
        let mut p = vec![(Time::ZERO, start)];
        for e in &t.events {
            if let EventKind::Transition { to, .. } = e.kind {
                p.push((e.at, mode(to)));
            }
        }
        p
    };
    d.old_modes = path(o, names.old_mode(names.old.start), &om);
    d.new_modes = path(n, names.new_mode(names.new.start), &nm);
}

/// One reaction-matrix column that changed in a row.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CellChange {
    pub column: String,
    pub old: String,
    pub new: String,
}

/// A row of the reaction matrix that differs, by fault description.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RowChange {
    pub fault: String,
    /// `None` when the row exists in one revision only.
    pub in_old: bool,
    pub in_new: bool,
    pub cells: Vec<CellChange>,
}

/// Both reaction matrices compared.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MatrixDiff {
    /// What the searches covered (the same settings for both).
    pub coverage: String,
    pub rows: usize,
    pub changed: Vec<RowChange>,
    /// A search of either revision hit a bound: its `?` cells are not verdicts.
    pub bound_hit: bool,
    /// A search of either revision left cells unresolved (unconfirmed candidates).
    pub unresolved: bool,
    /// Rows that a search of either revision stopped short of closing: only their verdicts
    /// are compared.
    pub verdicts_only: usize,
}

fn ms(t: Option<Time>) -> String {
    t.map_or("-".into(), |t| format!("{} ms", trim(t.as_ms_f64())))
}

/// A cell a review compares: its column, its text, and for a figure measured at the
/// resolution, its value.
type Cell = (String, String, Option<f64>);

/// The cells of a row that a review compares, names under the new revision.
fn row_cells(
    m: &Model,
    p: &Proof,
    row: &Row,
    fault: &dyn Fn(usize) -> String,
    mode: &dyn Fn(usize) -> String,
) -> Vec<Cell> {
    let r = &row.result;
    let list = |xs: &[usize], f: &dyn Fn(usize) -> String| {
        if xs.is_empty() {
            "-".to_string()
        } else {
            let mut v: Vec<String> = xs.iter().map(|x| f(*x)).collect();
            v.sort();
            v.join(",")
        }
    };
    let mut c: Vec<Cell> = vec![
        ("detected by".to_string(), list(&r.monitors, fault), None),
        (
            "worst detection".to_string(),
            crate::prove::report::detection(r),
            None,
        ),
        ("ends in".to_string(), list(&r.end_modes, mode), None),
        ("to safe".to_string(), ms(r.to_safe), None),
        (
            "worst excess".to_string(),
            format!("{:.1} %", r.worst_excess.max(0.0)),
            Some(r.worst_excess.max(0.0)),
        ),
    ];
    let verdicts = crate::prove::report::verdicts(p, row);
    for (req, v) in p.requirements.iter().zip(verdicts) {
        c.push((req.text(m), v.to_string(), None));
    }
    c
}

/// The columns of figures a search takes over the part of the space it searched (the rest
/// are verdicts).
const FIGURES: [&str; 5] = [
    "detected by",
    "worst detection",
    "ends in",
    "to safe",
    "worst excess",
];

fn is_figure(c: &Cell) -> bool {
    FIGURES.contains(&c.0.as_str())
}

/// Whether two cells of a column differ. A figure taken over merged states is an estimate
/// within the resolution (a merged state stands for its first visitor, up to a resolution
/// away), so two figures closer than that are not told apart.
fn differ(old: &Cell, new: Option<&Cell>, resolution: f64) -> bool {
    match (old, new) {
        ((_, _, Some(a)), Some((_, _, Some(b)))) => (a - b).abs() > resolution,
        (_, Some(n)) => old.1 != n.1,
        (_, None) => old.1 != "-",
    }
}

/// Compares two proofs row by row, matching rows by their fault description.
pub fn matrices(po: &Proof, pn: &Proof, names: &Names) -> MatrixDiff {
    let of = |f: usize| names.old_fault(f);
    let om = |m: usize| names.old_mode(m);
    let nf = |f: usize| names.new_fault(f);
    let nm = |m: usize| names.new_mode(m);
    let resolution = po.config.resolution.max(pn.config.resolution);
    // Per row: its fault, its cells, and whether its search closed.
    let rows = |p: &Proof, m: &Model, f: &dyn Fn(usize) -> String, md: &dyn Fn(usize) -> String| {
        p.rows
            .iter()
            .map(|r| {
                (
                    r.describe(m),
                    row_cells(m, p, r, f, md),
                    r.result.searched_to.is_none(),
                )
            })
            .collect::<Vec<_>>()
    };
    let old_rows = rows(po, names.old, &of, &om);
    let new_rows = rows(pn, names.new, &nf, &nm);
    let mut changed = Vec::new();
    let mut verdicts_only = 0;
    for (fault, oc, o_closed) in &old_rows {
        match new_rows.iter().find(|x| &x.0 == fault) {
            None => changed.push(RowChange {
                fault: fault.clone(),
                in_old: true,
                in_new: false,
                cells: Vec::new(),
            }),
            Some((_, nc, n_closed)) => {
                let mut cells = Vec::new();
                // A search stopped short of closing (the bound, or every requirement already
                // violated) took its figures over the part it searched, which moves with the
                // state space: only the verdicts of such a row are compared.
                let figures = *o_closed && *n_closed;
                verdicts_only += usize::from(!figures);
                let oc: Vec<&Cell> = oc.iter().filter(|c| figures || !is_figure(c)).collect();
                let nc: Vec<&Cell> = nc.iter().filter(|c| figures || !is_figure(c)).collect();
                for o in oc.iter().copied() {
                    let n = nc.iter().find(|x| x.0 == o.0).copied();
                    if differ(o, n, resolution) {
                        cells.push(CellChange {
                            column: o.0.clone(),
                            old: o.1.clone(),
                            new: n.map_or("-".into(), |x| x.1.clone()),
                        });
                    }
                }
                for n in nc {
                    if !oc.iter().any(|x| x.0 == n.0) {
                        cells.push(CellChange {
                            column: n.0.clone(),
                            old: "-".into(),
                            new: n.1.clone(),
                        });
                    }
                }
                if !cells.is_empty() {
                    changed.push(RowChange {
                        fault: fault.clone(),
                        in_old: true,
                        in_new: true,
                        cells,
                    });
                }
            }
        }
    }
    for (fault, _, _) in &new_rows {
        if !old_rows.iter().any(|x| &x.0 == fault) {
            changed.push(RowChange {
                fault: fault.clone(),
                in_old: false,
                in_new: true,
                cells: Vec::new(),
            });
        }
    }
    MatrixDiff {
        coverage: format!(
            "{}; figures within the resolution ({} %) of each other count as the same",
            crate::prove::report::coverage(names.new, pn),
            trim(resolution)
        ),
        rows: old_rows.len().max(new_rows.len()),
        changed,
        bound_hit: po.bound_hit() || pn.bound_hit(),
        unresolved: po.unresolved() || pn.unresolved(),
        verdicts_only,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const VAN: &str = include_str!("../../scenarios/van/van_throttle.limp");

    #[test]
    fn figures_closer_than_the_resolution_are_the_same() {
        let fig = |v: f64| ("worst excess".to_string(), format!("{v:.1} %"), Some(v));
        let text = |t: &str| ("ends in".to_string(), t.to_string(), None);
        assert!(!differ(&fig(38.4), Some(&fig(42.5)), 10.0));
        assert!(differ(&fig(38.4), Some(&fig(48.5)), 10.0));
        assert!(differ(&fig(38.4), Some(&fig(38.6)), 0.1));
        assert!(differ(&text("shutdown"), Some(&text("idle_only")), 10.0));
        assert!(!differ(&text("shutdown"), Some(&text("shutdown")), 10.0));
        assert!(differ(&fig(3.0), None, 10.0));
    }

    /// A row that one search closed and the other stopped at its bound is compared by its
    /// verdicts only: the bounded search saw a few periods after the injection, so its
    /// figures (no monitor has tripped yet, say) are not the policy's.
    #[test]
    fn rows_stopped_short_compare_only_their_verdicts() {
        let Ok(m) = crate::model::lower(VAN) else {
            panic!("fixture does not lower");
        };
        let run = |max_states: usize| {
            let cfg = crate::prove::Config {
                only: Some("pedal.a open".into()),
                max_states,
                jobs: 1,
                ..crate::prove::Config::default()
            };
            let Ok(p) = crate::prove::prove(&m, &cfg, &|_, _, _| {}) else {
                panic!("the van's actuator is usable");
            };
            p
        };
        let (closed, bounded) = (run(10_000_000), run(30_000));
        assert_eq!(closed.rows[0].result.searched_to, None);
        assert!(bounded.rows[0].result.truncated);
        // The figures differ: the bounded search stopped before the range check tripped.
        assert_ne!(
            closed.rows[0].result.monitors,
            bounded.rows[0].result.monitors
        );
        let st = crate::diff::structure::compare(&m, &m);
        let names = Names {
            old: &m,
            new: &m,
            fault_map: &st.fault_map,
            mode_map: &st.mode_map,
        };
        let d = matrices(&closed, &bounded, &names);
        assert_eq!(d.verdicts_only, 1);
        assert_eq!(d.changed.len(), 1, "{:?}", d.changed);
        for c in &d.changed[0].cells {
            assert!(!FIGURES.contains(&c.column.as_str()), "{c:?}");
            assert_eq!(c.new, "?", "{c:?}");
        }
        assert_eq!(matrices(&closed, &closed, &names).verdicts_only, 0);
    }

    #[test]
    fn matrix_rows_pair_by_fault_and_report_the_changed_columns() {
        let (Ok(old), Ok(new)) = (
            crate::model::lower(VAN),
            crate::model::lower(&VAN.replace("within 200 ms", "within 100 ms")),
        ) else {
            panic!("fixture does not lower");
        };
        let cfg = crate::prove::Config {
            // A fault whose search closes, so that the figures
            // are the policies' own and not where a bound happened to cut each search off.
            only: Some("throttle.a open".into()),
            jobs: 1,
            ..crate::prove::Config::default()
        };
        let quiet = |_: usize, _: usize, _: usize| {};
        let (Ok(po), Ok(pn)) = (
            crate::prove::prove(&old, &cfg, &quiet),
            crate::prove::prove(&new, &cfg, &quiet),
        ) else {
            panic!("the van's actuator is usable");
        };
        let st = crate::diff::structure::compare(&old, &new);
        let names = Names {
            old: &old,
            new: &new,
            fault_map: &st.fault_map,
            mode_map: &st.mode_map,
        };
        assert!(!po.bound_hit() && !pn.bound_hit());
        let same = matrices(&po, &po, &names);
        assert!(same.changed.is_empty(), "{:?}", same.changed);
        let d = matrices(&po, &pn, &names);
        assert_eq!(d.rows, 1);
        assert_eq!(d.changed.len(), 1, "{:?}", d.changed);
        let row = &d.changed[0];
        assert_eq!(row.fault, "throttle.a open");
        let cols: Vec<&str> = row.cells.iter().map(|c| c.column.as_str()).collect();
        assert_eq!(cols.first(), Some(&"excess below 5 % within 200 ms"));
        assert_eq!(cols.last(), Some(&"excess below 5 % within 100 ms"));
        assert_eq!(row.cells[0].new, "-");
        assert_eq!(row.cells[cols.len() - 1].old, "-");
        // A shorter excess time caps the excess timer lower, so the search merges other
        // states: another requirement may then meet (or stop meeting) unconfirmed candidates.
        // That may change its cell between held and unresolved, and in no other way.
        for c in &row.cells[1..cols.len() - 1] {
            let pair = [c.old.as_str(), c.new.as_str()];
            assert!(
                pair.contains(&"ok") && pair.contains(&"unresolved"),
                "{c:?}"
            );
        }
    }
}
