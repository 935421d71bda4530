//! Mode-graph findings of `limpet check`: reachability, the way to a safe mode, missing and
//! shadowed transitions, overlaps, authority raised under a fault, chatter, indistinguishable
//! tracks, unread faults and times off the controller period. Guards are decided exactly by
//! [`super::guards`]; the graph itself is petgraph, with modes as nodes.

use super::guards::{self, Proof, Witness};
use crate::diag::{Diagnostic, Severity};
use crate::lang::Span;
use crate::model::{Debounce, Demand, Edge, Expr, FaultId, Healing, ModeId, Model, Source};
use crate::time::Time;
use petgraph::graph::{DiGraph, NodeIndex};
use serde::Serialize;

/// What a finding is about. The serialised names (and [`FindingKind::code`]) are stable.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum FindingKind {
    /// A mode no path of transitions from `start` reaches.
    UnreachableMode,
    /// A mode from which no `drive off` mode can be reached.
    NoPathToSafe,
    /// A mode with no way out that is not safe.
    DeadEnd,
    /// A fault handled in some modes but not in another where it can be set.
    MissingTransition,
    /// A transition that can never fire.
    ShadowedTransition,
    /// Two transitions out of one mode, to different targets, whose guards can hold together.
    OrderDependentOverlap,
    /// A transition raises authority while a fault that led into its source may still be set.
    AuthorityUnderFault,
    /// A cycle of transitions none of which has a `for` dwell.
    Chatter,
    /// Two tracks of one sensor with the same characteristic.
    IdenticalTracks,
    /// A fault no guard reads (it still leaves its tracks out of the merged value).
    UnreadFault,
    /// A fault that suspects no track and that no guard reads: setting it changes nothing.
    InertFault,
    /// A debounce, heal or dwell time that is not a whole number of controller periods.
    OffPeriodTime,
    /// A guard question exceeded the enumeration bound; the finding it would decide is open.
    Inconclusive,
    /// A transition out of a mode needs a latching fault clear that every way into the mode
    /// sets: it cannot fire before the next key on.
    LatchedExit,
}

impl FindingKind {
    /// Stable short name, the same as the serialised one.
    pub fn code(self) -> &'static str {
        match self {
            FindingKind::UnreachableMode => "unreachable-mode",
            FindingKind::NoPathToSafe => "no-path-to-safe",
            FindingKind::DeadEnd => "dead-end",
            FindingKind::MissingTransition => "missing-transition",
            FindingKind::ShadowedTransition => "shadowed-transition",
            FindingKind::OrderDependentOverlap => "order-dependent-overlap",
            FindingKind::AuthorityUnderFault => "authority-under-fault",
            FindingKind::Chatter => "chatter",
            FindingKind::IdenticalTracks => "identical-tracks",
            FindingKind::UnreadFault => "unread-fault",
            FindingKind::InertFault => "inert-fault",
            FindingKind::OffPeriodTime => "off-period-time",
            FindingKind::Inconclusive => "inconclusive",
            FindingKind::LatchedExit => "latched-exit",
        }
    }

    pub fn severity(self) -> Severity {
        match self {
            FindingKind::OrderDependentOverlap
            | FindingKind::UnreadFault
            | FindingKind::InertFault
            | FindingKind::OffPeriodTime => Severity::Warning,
            FindingKind::Inconclusive | FindingKind::LatchedExit => Severity::Note,
            _ => Severity::Error,
        }
    }

    /// Text under the caret.
    fn label(self) -> &'static str {
        match self {
            FindingKind::UnreachableMode => "never entered",
            FindingKind::NoPathToSafe => "no way to a drive-off mode from here",
            FindingKind::DeadEnd => "no way out",
            FindingKind::MissingTransition => "fault not handled here",
            FindingKind::ShadowedTransition => "never fires",
            FindingKind::OrderDependentOverlap => "overlaps an earlier transition",
            FindingKind::AuthorityUnderFault => "raises authority",
            FindingKind::Chatter => "part of an undwelt cycle",
            FindingKind::IdenticalTracks => "same characteristic",
            FindingKind::UnreadFault => "no guard reads this fault",
            FindingKind::InertFault => "has no effect",
            FindingKind::OffPeriodTime => "not a whole number of periods",
            FindingKind::Inconclusive => "too large to decide",
            FindingKind::LatchedExit => "waits for the next key on",
        }
    }
}

/// One mode-graph finding.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Finding {
    pub severity: Severity,
    pub kind: FindingKind,
    pub span: Span,
    pub message: String,
    /// Text under the caret: the kind's own, unless the finding is about something else
    /// than the kind usually points at (the policy name rather than a mode).
    pub label: &'static str,
    pub hint: String,
    pub related: Vec<(Span, String)>,
}

impl Finding {
    fn new(kind: FindingKind, span: Span, message: String, hint: impl Into<String>) -> Finding {
        Finding {
            severity: kind.severity(),
            kind,
            span,
            message,
            label: kind.label(),
            hint: hint.into(),
            related: Vec::new(),
        }
    }

    fn labelled(mut self, label: &'static str) -> Finding {
        self.label = label;
        self
    }

    fn with_related(mut self, span: Span, label: impl Into<String>) -> Finding {
        self.related.push((span, label.into()));
        self
    }
}

impl From<Finding> for Diagnostic {
    fn from(f: Finding) -> Diagnostic {
        Diagnostic {
            severity: f.severity,
            code: f.kind.code(),
            message: f.message,
            span: f.span,
            label: f.label.to_string(),
            hint: f.hint,
            related: f.related,
        }
    }
}

/// Every finding on the model, sorted by position in the file, then kind, then message.
pub fn analyse(model: &Model) -> Vec<Finding> {
    let mut a = Analysis::new(model);
    a.shadowing();
    let graph = a.graph();
    let reachable = algo::reachable(&graph, &[NodeIndex::new(model.start)]);
    a.reachability(&graph, &reachable);
    a.missing(&reachable);
    a.latched_exits(&reachable);
    a.overlaps();
    a.authority();
    a.chatter();
    a.tracks();
    a.unread();
    a.periods();
    a.flush_open_questions();
    let mut out = a.out;
    out.sort_by(|x, y| {
        (x.span.start, x.span.end, x.kind, &x.message).cmp(&(
            y.span.start,
            y.span.end,
            y.kind,
            &y.message,
        ))
    });
    out.dedup();
    out
}

struct Analysis<'m> {
    m: &'m Model,
    /// Expanded edges out of each mode, in the order they are tried.
    edges: Vec<Vec<Edge>>,
    /// Per mode and edge: false when the edge is proven never to fire.
    live: Vec<Vec<bool>>,
    out: Vec<Finding>,
    /// Undecided questions per transition span, in the order asked, with the largest
    /// enumeration any of them needed; one note per transition is emitted at the end.
    open_questions: Vec<(Span, Vec<String>, u128)>,
}

impl<'m> Analysis<'m> {
    fn new(m: &'m Model) -> Analysis<'m> {
        let edges: Vec<Vec<Edge>> = (0..m.modes.len()).map(|i| m.edges_from(i)).collect();
        let live = edges.iter().map(|es| vec![true; es.len()]).collect();
        Analysis {
            m,
            edges,
            live,
            out: Vec::new(),
            open_questions: Vec::new(),
        }
    }

    fn guard(&self, e: &Edge) -> &'m Expr {
        &self.m.transitions[e.transition].guard
    }

    fn dwell(&self, e: &Edge) -> Time {
        self.m.transitions[e.transition].dwell.unwrap_or(Time::ZERO)
    }

    fn span(&self, e: &Edge) -> Span {
        self.m.transitions[e.transition].span
    }

    fn mode(&self, id: ModeId) -> &'m str {
        self.m.modes.get(id).map_or("?", |m| m.name.as_str())
    }

    fn fault(&self, id: FaultId) -> &'m str {
        self.m.faults.get(id).map_or("?", |f| f.name.as_str())
    }

    /// `normal -> idle_only`, or `any -> shutdown` for an expanded `any`.
    fn edge_name(&self, e: &Edge) -> String {
        match self.m.transitions[e.transition].from {
            Source::Any => format!("any -> {}", self.mode(e.to)),
            Source::Mode(_) => format!("{} -> {}", self.mode(e.from), self.mode(e.to)),
        }
    }

    fn live_edges(&self, mode: ModeId) -> impl Iterator<Item = &Edge> {
        self.edges[mode]
            .iter()
            .zip(&self.live[mode])
            .filter(|(_, l)| **l)
            .map(|(e, _)| e)
    }

    fn inconclusive(&mut self, span: Span, what: String, t: guards::TooLarge) {
        match self
            .open_questions
            .iter_mut()
            .find(|(sp, _, _)| *sp == span)
        {
            Some((_, qs, needed)) => {
                if !qs.contains(&what) {
                    qs.push(what);
                }
                *needed = (*needed).max(t.needed);
            }
            None => self.open_questions.push((span, vec![what], t.needed)),
        }
    }

    /// One note per transition whose questions were too large: a long guard is asked several
    /// questions (can it fire, does it overlap, does it need each fault clear), and one
    /// note naming them all reads better than one note each.
    fn flush_open_questions(&mut self) {
        for (span, qs, needed) in std::mem::take(&mut self.open_questions) {
            let message = match qs.as_slice() {
                [one] => format!(
                    "could not decide {one}: it needs {needed} valuations, over the bound of {}",
                    guards::MAX_ASSIGNMENTS
                ),
                _ => format!(
                    "could not decide {} questions about this transition: {} (the largest needs {needed} valuations, over the bound of {})",
                    qs.len(),
                    qs.join("; "),
                    guards::MAX_ASSIGNMENTS
                ),
            };
            self.out.push(Finding::new(
                FindingKind::Inconclusive,
                span,
                message,
                "split the guard into simpler transitions",
            ));
        }
    }

    /// A transition can never fire when its guard is unsatisfiable, or when every valuation
    /// that satisfies it satisfies an earlier undwelt guard (which fires at once), or an
    /// earlier undwelt guard or one earlier guard whose dwell is no longer than its own (which
    /// then has held at least as long, and fires first).
    fn shadowing(&mut self) {
        for mode in 0..self.m.modes.len() {
            for j in 0..self.edges[mode].len() {
                let ej = self.edges[mode][j];
                let gj = self.guard(&ej);
                let where_ = format!("`{}` in mode `{}`", self.edge_name(&ej), self.mode(mode));
                match guards::satisfiable(self.m, gj) {
                    Witness::None => {
                        self.live[mode][j] = false;
                        self.out.push(Finding::new(
                            FindingKind::ShadowedTransition,
                            self.span(&ej),
                            format!("transition {where_} can never fire: its guard can never hold"),
                            "remove the transition or correct its guard",
                        ));
                        continue;
                    }
                    Witness::Inconclusive(t) => {
                        self.inconclusive(
                            self.span(&ej),
                            format!("whether transition {where_} can fire"),
                            t,
                        );
                        continue;
                    }
                    Witness::Found(_) => {}
                }
                let earlier: Vec<Edge> = self.edges[mode][..j].to_vec();
                let undwelt: Vec<Edge> = earlier
                    .iter()
                    .copied()
                    .filter(|e| self.dwell(e) == Time::ZERO)
                    .collect();
                let mut candidates: Vec<Vec<Edge>> = vec![undwelt.clone()];
                for e in &earlier {
                    let d = self.dwell(e);
                    if d > Time::ZERO && d <= self.dwell(&ej) {
                        let mut set = undwelt.clone();
                        set.push(*e);
                        candidates.push(set);
                    }
                }
                for cover in candidates {
                    if cover.is_empty() {
                        continue;
                    }
                    let mut exprs = vec![gj];
                    exprs.extend(cover.iter().map(|e| self.guard(e)));
                    let w = guards::search(self.m, &exprs, |v| {
                        v.holds(gj) && !exprs[1..].iter().any(|g| v.holds(g))
                    });
                    match w {
                        Witness::None => {
                            self.live[mode][j] = false;
                            let cover = self.minimal_cover(gj, cover);
                            let mut f = Finding::new(
                                FindingKind::ShadowedTransition,
                                self.span(&ej),
                                format!(
                                    "transition {where_} can never fire: earlier transitions cover its guard"
                                ),
                                "move it before the transitions that cover it, or narrow their guards",
                            );
                            for e in &cover {
                                f = f.with_related(
                                    self.span(e),
                                    format!("`{}` is tried first", self.edge_name(e)),
                                );
                            }
                            self.out.push(f);
                            break;
                        }
                        Witness::Inconclusive(t) => {
                            self.inconclusive(
                                self.span(&ej),
                                format!("whether transition {where_} is shadowed"),
                                t,
                            );
                            break;
                        }
                        Witness::Found(_) => {}
                    }
                }
            }
        }
    }

    /// Drops, one at a time in order, the covering transitions that are not needed, so the
    /// finding names only those that do the shadowing.
    fn minimal_cover(&self, gj: &Expr, mut cover: Vec<Edge>) -> Vec<Edge> {
        let mut k = 0;
        while k < cover.len() && cover.len() > 1 {
            let rest: Vec<Edge> = cover
                .iter()
                .enumerate()
                .filter(|(i, _)| *i != k)
                .map(|(_, e)| *e)
                .collect();
            let mut exprs = vec![gj];
            exprs.extend(rest.iter().map(|e| self.guard(e)));
            let w = guards::search(self.m, &exprs, |v| {
                v.holds(gj) && !exprs[1..].iter().any(|g| v.holds(g))
            });
            if w.is_none() {
                cover = rest;
            } else {
                k += 1;
            }
        }
        cover
    }

    /// Modes as nodes (node index = mode id), live edges as edges weighted by transition.
    fn graph(&self) -> DiGraph<ModeId, usize> {
        let mut g = DiGraph::new();
        for i in 0..self.m.modes.len() {
            g.add_node(i);
        }
        for mode in 0..self.m.modes.len() {
            for e in self.live_edges(mode) {
                if e.to < self.m.modes.len() {
                    g.add_edge(NodeIndex::new(e.from), NodeIndex::new(e.to), e.transition);
                }
            }
        }
        g
    }

    fn reachability(&mut self, g: &DiGraph<ModeId, usize>, reachable: &[bool]) {
        let m = self.m;
        let start = self.mode(m.start);
        for (i, mode) in m.modes.iter().enumerate() {
            if !reachable.get(i).copied().unwrap_or(false) {
                let mut f = Finding::new(
                    FindingKind::UnreachableMode,
                    mode.span,
                    format!(
                        "mode `{}` is unreachable from `start` (`{start}`)",
                        mode.name
                    ),
                    "add a transition into it, or remove it",
                );
                for (k, es) in self.edges.iter().enumerate() {
                    for (e, live) in es.iter().zip(&self.live[k]) {
                        if e.to == i && !live {
                            f = f.with_related(
                                self.span(e),
                                format!("`{}` would enter it but never fires", self.edge_name(e)),
                            );
                        }
                    }
                }
                self.out.push(f);
            }
        }
        let safe: Vec<NodeIndex> = (0..m.modes.len())
            .filter(|&i| m.modes[i].is_safe())
            .map(NodeIndex::new)
            .collect();
        if safe.is_empty() {
            if !m.modes.is_empty() {
                self.out.push(
                    Finding::new(
                        FindingKind::NoPathToSafe,
                        m.name_span,
                        format!(
                            "policy `{}` has no `drive off` mode: no mode can reach a safe state",
                            m.name
                        ),
                        "add a mode with `drive off` and transitions into it",
                    )
                    .labelled("no mode here drives off"),
                );
            }
            return;
        }
        let reaching = algo::reaching(g, &safe);
        for (i, mode) in m.modes.iter().enumerate() {
            if reaching.get(i).copied().unwrap_or(false) {
                continue;
            }
            if self.live_edges(i).next().is_none() {
                self.out.push(Finding::new(
                    FindingKind::DeadEnd,
                    mode.span,
                    format!(
                        "mode `{}` has no way out and is not safe (`drive off`)",
                        mode.name
                    ),
                    "add a transition to a drive-off mode, e.g. `any -> shutdown when ...`",
                ));
            } else {
                self.out.push(Finding::new(
                    FindingKind::NoPathToSafe,
                    mode.span,
                    format!(
                        "no `drive off` mode can be reached from mode `{}`",
                        mode.name
                    ),
                    "add a transition from it (or from a mode it reaches) to a drive-off mode",
                ));
            }
        }
    }

    /// A fault some live transition reacts to in one mode must be reacted to in every other
    /// reachable mode, unless that mode is safe or tolerates it. Monitors run in every mode,
    /// so every fault can be set anywhere. Unreachable modes are left to their own finding.
    fn missing(&mut self, reachable: &[bool]) {
        let m = self.m;
        for f in 0..m.faults.len() {
            let mut handled: Vec<(ModeId, Edge)> = Vec::new();
            let mut unhandled: Vec<ModeId> = Vec::new();
            for mode in 0..m.modes.len() {
                if !reachable.get(mode).copied().unwrap_or(false) || m.modes[mode].is_safe() {
                    continue;
                }
                match self
                    .live_edges(mode)
                    .find(|e| guards::reacts_to(m, self.guard(e), f))
                {
                    Some(e) => handled.push((mode, *e)),
                    None if !m.modes[mode].tolerates.contains(&f) => unhandled.push(mode),
                    None => {}
                }
            }
            if handled.is_empty() {
                continue;
            }
            let names: Vec<String> = handled
                .iter()
                .map(|(md, _)| format!("`{}`", self.mode(*md)))
                .collect();
            for mode in unhandled {
                let mut finding = Finding::new(
                    FindingKind::MissingTransition,
                    m.modes[mode].span,
                    format!(
                        "fault `{}` can be set in mode `{}` but no transition out of it reacts; it is handled in {}",
                        self.fault(f),
                        self.mode(mode),
                        names.join(", ")
                    ),
                    format!(
                        "add a transition out of `{}` that reacts to `{}`, or declare `tolerates {}` in it",
                        self.mode(mode),
                        self.fault(f),
                        self.fault(f)
                    ),
                );
                for (md, e) in &handled {
                    finding = finding.with_related(
                        self.span(e),
                        format!("handled in `{}` here", self.mode(*md)),
                    );
                }
                self.out.push(finding);
            }
        }
    }

    /// A latching fault that every live way into a mode requires set is set on entry and
    /// stays set until key on, so a transition out that needs it clear cannot fire before
    /// then. The start mode is entered at key on with every fault clear, so it is left out.
    fn latched_exits(&mut self, reachable: &[bool]) {
        let m = self.m;
        let n = m.modes.len();
        for mode in 0..n {
            if mode == m.start || !reachable.get(mode).copied().unwrap_or(false) {
                continue;
            }
            let entering: Vec<Edge> = (0..n)
                .filter(|&k| reachable.get(k).copied().unwrap_or(false))
                .flat_map(|k| self.live_edges(k).copied().collect::<Vec<_>>())
                .filter(|e| e.to == mode && e.from != mode)
                .collect();
            if entering.is_empty() {
                continue;
            }
            for (f, fault) in m.faults.iter().enumerate() {
                if fault.healing != Healing::Latch {
                    continue;
                }
                let set = Expr::Fault {
                    fault: f,
                    span: Span::default(),
                };
                let clear = Expr::Not {
                    e: Box::new(set.clone()),
                };
                // Undecided questions stay quiet here: this is a note, and the guards
                // concerned get their own inconclusive note elsewhere.
                if !entering
                    .iter()
                    .all(|e| guards::implies(m, self.guard(e), &set).holds())
                {
                    continue;
                }
                let outs: Vec<Edge> = self.live_edges(mode).copied().collect();
                for e in outs {
                    if e.to == mode || !guards::implies(m, self.guard(&e), &clear).holds() {
                        continue;
                    }
                    let mut finding = Finding::new(
                        FindingKind::LatchedExit,
                        self.span(&e),
                        format!(
                            "`{}` needs `{}` clear, but every way into `{}` sets it and it latches: this transition cannot fire before the next key on",
                            self.edge_name(&e),
                            fault.name,
                            self.mode(mode)
                        ),
                        format!(
                            "give `{}` a `heal` time if recovery is meant, or remove the transition",
                            fault.name
                        ),
                    );
                    let mut seen: Vec<usize> = Vec::new();
                    for via in &entering {
                        if !seen.contains(&via.transition) {
                            seen.push(via.transition);
                            finding = finding.with_related(
                                self.span(via),
                                format!("sets `{}` on the way in", fault.name),
                            );
                        }
                    }
                    finding = finding.with_related(fault.span, "latches");
                    self.out.push(finding);
                }
            }
        }
    }

    fn overlaps(&mut self) {
        for mode in 0..self.m.modes.len() {
            let live: Vec<Edge> = self.live_edges(mode).copied().collect();
            for (j, ej) in live.iter().enumerate() {
                for ei in &live[..j] {
                    if ei.to == ej.to {
                        continue;
                    }
                    let (gi, gj) = (self.guard(ei), self.guard(ej));
                    let (ni, nj) = (self.edge_name(ei), self.edge_name(ej));
                    match guards::overlap(self.m, gi, gj) {
                        Witness::Found(a) => {
                            let dwells = if self.dwell(ei) != self.dwell(ej) {
                                " once both dwells have elapsed"
                            } else {
                                ""
                            };
                            // Fail-safe order tries the more conservative reaction first;
                            // say which way round this pair is.
                            let hint = if raises(self.m, ej.to, ei.to) {
                                format!(
                                    "the winner `{}` is less conservative than `{}`: check the order, or make the guards exclusive",
                                    self.mode(ei.to),
                                    self.mode(ej.to)
                                )
                            } else if raises(self.m, ei.to, ej.to) {
                                format!(
                                    "the more conservative `{}` wins, as fail-safe order asks; make the guards exclusive if either must not fire here",
                                    self.mode(ei.to)
                                )
                            } else {
                                "neither target is more conservative: make the guards exclusive, or order them deliberately".to_string()
                            };
                            self.out.push(
                                Finding::new(
                                    FindingKind::OrderDependentOverlap,
                                    self.span(ej),
                                    format!(
                                        "in mode `{}`, the guards of `{ni}` and `{nj}` can hold together, e.g. {}; `{ni}` is tried first and wins{dwells}",
                                        self.mode(mode),
                                        compact(&a)
                                    ),
                                    hint,
                                )
                                .with_related(self.span(ei), format!("`{ni}` wins")),
                            );
                        }
                        Witness::Inconclusive(t) => {
                            self.inconclusive(
                                self.span(ej),
                                format!("whether `{ni}` and `{nj}` overlap"),
                                t,
                            );
                        }
                        Witness::None => {}
                    }
                }
            }
        }
    }

    /// Authority raised while a fault that led into the source may still be set: the faults
    /// that led into a mode are those read by the guard of a live transition entering it
    /// (by name or through `suspect()`) with which that guard can hold; the raising guard
    /// must imply each is clear.
    fn authority(&mut self) {
        let m = self.m;
        let n = m.modes.len();
        // led[mode] = (fault, entering edge) pairs, first entering edge per fault.
        let mut led: Vec<Vec<(FaultId, Edge)>> = vec![Vec::new(); n];
        for mode in 0..n {
            for e in self.live_edges(mode) {
                let g = self.guard(e);
                for f in guards::faults_read(m, g) {
                    let can = !guards::satisfiable_with_fault(m, g, f).is_none();
                    if can && e.to < n && !led[e.to].iter().any(|(x, _)| *x == f) {
                        led[e.to].push((f, *e));
                    }
                }
            }
        }
        for (mode, led_in) in led.iter().enumerate() {
            let edges: Vec<Edge> = self.live_edges(mode).copied().collect();
            for e in edges {
                if e.to >= n || !raises(m, mode, e.to) {
                    continue;
                }
                let g = self.guard(&e);
                let mut open: Vec<(FaultId, Edge)> = Vec::new();
                for (f, via) in led_in {
                    let clear = Expr::Not {
                        e: Box::new(Expr::Fault {
                            fault: *f,
                            span: Span::default(),
                        }),
                    };
                    match guards::implies(m, g, &clear) {
                        Proof::Holds => {}
                        Proof::Counterexample(_) => open.push((*f, *via)),
                        Proof::Inconclusive(t) => {
                            let what = format!(
                                "whether `{}` requires `{}` clear",
                                self.edge_name(&e),
                                self.fault(*f)
                            );
                            self.inconclusive(self.span(&e), what, t);
                        }
                    }
                }
                if open.is_empty() {
                    continue;
                }
                let names: Vec<String> = open
                    .iter()
                    .map(|(f, _)| format!("`{}`", self.fault(*f)))
                    .collect();
                let latched: Vec<String> = open
                    .iter()
                    .filter(|(f, _)| {
                        m.faults
                            .get(*f)
                            .is_some_and(|x| x.healing == Healing::Latch)
                    })
                    .map(|(f, _)| format!("`{}`", self.fault(*f)))
                    .collect();
                let first = open[0].0;
                let example = match m.faults.get(first).and_then(|f| f.suspects.first()) {
                    Some(t) => format!(
                        "not suspect({})",
                        guards::signal_name(m, crate::model::Signal::Track { track: *t })
                    ),
                    None => format!("not {}", self.fault(first)),
                };
                let pronoun = if open.len() == 1 { "it" } else { "them" };
                let mut hint = format!("require {pronoun} clear in the guard, e.g. `{example}`");
                if !latched.is_empty() {
                    hint.push_str(&format!(
                        "; {} latch, so once required clear the transition waits for the next key on",
                        latched.join(", ")
                    ));
                }
                let mut f = Finding::new(
                    FindingKind::AuthorityUnderFault,
                    self.span(&e),
                    format!(
                        "`{}` raises authority ({} to {}) while {}, which led into `{}`, may still be set",
                        self.edge_name(&e),
                        authority_name(m, mode),
                        authority_name(m, e.to),
                        names.join(", "),
                        self.mode(mode)
                    ),
                    hint,
                );
                let mut seen: Vec<usize> = Vec::new();
                for (_, via) in &open {
                    if !seen.contains(&via.transition) {
                        seen.push(via.transition);
                        let which: Vec<String> = open
                            .iter()
                            .filter(|(_, v)| v.transition == via.transition)
                            .map(|(x, _)| format!("`{}`", self.fault(*x)))
                            .collect();
                        f = f.with_related(
                            self.span(via),
                            format!("{} led into `{}` here", which.join(", "), self.mode(mode)),
                        );
                    }
                }
                self.out.push(f);
            }
        }
    }

    /// Cycles among live transitions with no `for` dwell: the controller can switch on
    /// every step.
    fn chatter(&mut self) {
        let mut g: DiGraph<ModeId, usize> = DiGraph::new();
        for i in 0..self.m.modes.len() {
            g.add_node(i);
        }
        for mode in 0..self.m.modes.len() {
            let es: Vec<Edge> = self.live_edges(mode).copied().collect();
            for e in es {
                if self.dwell(&e) == Time::ZERO && e.to < self.m.modes.len() {
                    g.add_edge(NodeIndex::new(e.from), NodeIndex::new(e.to), e.transition);
                }
            }
        }
        for cycle in algo::cycles(&g) {
            let members: Vec<ModeId> = cycle.iter().map(|n| n.index()).collect();
            let mut inside: Vec<Edge> = Vec::new();
            for &md in &members {
                for e in self.live_edges(md) {
                    if self.dwell(e) == Time::ZERO && members.contains(&e.to) {
                        inside.push(*e);
                    }
                }
            }
            inside.sort_by_key(|e| (e.transition, e.from));
            let Some(first) = inside.first().copied() else {
                continue;
            };
            let names: Vec<String> = members
                .iter()
                .map(|md| format!("`{}`", self.mode(*md)))
                .collect();
            let mut f = Finding::new(
                FindingKind::Chatter,
                self.span(&first),
                format!(
                    "modes {} form a cycle whose transitions have no `for` dwell: the controller can switch on every step",
                    names.join(", ")
                ),
                "give at least one transition of the cycle a `for` dwell",
            );
            for e in &inside[1..] {
                f = f.with_related(
                    self.span(e),
                    format!("`{}` has no dwell", self.edge_name(e)),
                );
            }
            self.out.push(f);
        }
    }

    /// Two tracks of one sensor with the same characteristic: a short between them reads as
    /// two agreeing tracks. Piecewise-linear characteristics that agree at every breakpoint
    /// of both agree everywhere (extrapolation included).
    fn tracks(&mut self) {
        for s in &self.m.sensors {
            for (j, tj) in s.tracks.iter().enumerate() {
                for ti in &s.tracks[..j] {
                    let same = ti
                        .points
                        .iter()
                        .chain(&tj.points)
                        .all(|&(p, _)| (ti.volts_at(p) - tj.volts_at(p)).abs() <= 1e-9);
                    if same && !ti.points.is_empty() && !tj.points.is_empty() {
                        self.out.push(
                            Finding::new(
                                FindingKind::IdenticalTracks,
                                tj.span,
                                format!(
                                    "tracks `{}.{}` and `{}.{}` have the same characteristic: a short between them is undetectable",
                                    s.name, ti.name, s.name, tj.name
                                ),
                                "give one track a different slope (e.g. half the voltage) or the opposite direction",
                            )
                            .with_related(ti.span, "same characteristic"),
                        );
                    }
                }
            }
        }
    }

    /// Faults no guard reads, by name or through `suspect()` of a track they suspect.
    fn unread(&mut self) {
        let m = self.m;
        let mut read = vec![false; m.faults.len()];
        for t in &m.transitions {
            for f in guards::faults_read(m, &t.guard) {
                if let Some(r) = read.get_mut(f) {
                    *r = true;
                }
            }
        }
        for (i, f) in m.faults.iter().enumerate() {
            if read[i] {
                continue;
            }
            if f.suspects.is_empty() {
                self.out.push(Finding::new(
                    FindingKind::InertFault,
                    f.span,
                    format!("fault `{}` suspects no track and no guard reads it: setting it changes nothing", f.name),
                    format!("react to it in a transition guard (`when {}`), or remove it", f.name),
                ));
            } else {
                let tracks: Vec<String> = f
                    .suspects
                    .iter()
                    .map(|t| {
                        format!(
                            "`{}`",
                            guards::signal_name(m, crate::model::Signal::Track { track: *t })
                        )
                    })
                    .collect();
                self.out.push(Finding::new(
                    FindingKind::UnreadFault,
                    f.span,
                    format!(
                        "no guard reads fault `{}`: it only leaves {} out of the merged value",
                        f.name,
                        tracks.join(", ")
                    ),
                    format!(
                        "react to it in a transition guard (`when {}`), if a mode change is meant",
                        f.name
                    ),
                ));
            }
        }
    }

    /// Times the controller can only count in whole steps. Rounding is up: a condition that
    /// must hold for `T` holds once `ceil(T / period)` steps have seen it.
    fn periods(&mut self) {
        let m = self.m;
        let p = m.period.0;
        if p == 0 {
            return;
        }
        let check = |what: String, t: Time, span: Span, out: &mut Vec<Finding>| {
            if !t.0.is_multiple_of(p) {
                let steps = t.0.div_ceil(p);
                out.push(Finding::new(
                    FindingKind::OffPeriodTime,
                    span,
                    format!(
                        "{what} {t} is not a multiple of the period {}: it takes {steps} steps, {} (rounded up)",
                        m.period,
                        Time(steps.saturating_mul(p))
                    ),
                    format!("write {} or {}", Time((t.0 / p).saturating_mul(p)), Time(steps.saturating_mul(p))),
                ));
            }
        };
        let mut out = Vec::new();
        for f in &m.faults {
            if let Debounce::Time { set } = f.debounce {
                check(format!("debounce of `{}`", f.name), set, f.span, &mut out);
            }
            if let Healing::After { time } = f.healing {
                check(format!("heal time of `{}`", f.name), time, f.span, &mut out);
            }
        }
        for t in &m.transitions {
            if let Some(d) = t.dwell {
                let from = match t.from {
                    Source::Any => "any".to_string(),
                    Source::Mode(md) => self.mode(md).to_string(),
                };
                check(
                    format!("dwell of `{from} -> {}`", self.mode(t.to)),
                    d,
                    t.span,
                    &mut out,
                );
            }
        }
        self.out.extend(out);
    }
}

/// Driver authority of a demand: drive off < a fixed or input demand (idle-like) < the pedal.
fn rank(d: &Demand) -> u8 {
    match d {
        Demand::DriveOff => 0,
        Demand::Fixed { .. } | Demand::Input { .. } => 1,
        Demand::Sensor { .. } => 2,
    }
}

/// Highest opening a mode can command: its limit, capped by a fixed demand or an input's
/// band; with the drive off, the springs' default position.
fn ceiling(m: &Model, mode: ModeId) -> f64 {
    let md = &m.modes[mode];
    match md.demand {
        Demand::DriveOff => m.actuator.default,
        Demand::Fixed { percent } => percent.min(md.limit),
        Demand::Input { input } => m.inputs.get(input).map_or(md.limit, |i| i.hi.min(md.limit)),
        Demand::Sensor { .. } => md.limit,
    }
}

/// Going from `s` to `t` gives the driver more say, or lets the plate open further.
fn raises(m: &Model, s: ModeId, t: ModeId) -> bool {
    rank(&m.modes[t].demand) > rank(&m.modes[s].demand) || ceiling(m, t) > ceiling(m, s) + 1e-9
}

fn authority_name(m: &Model, mode: ModeId) -> String {
    let md = &m.modes[mode];
    let what = match md.demand {
        Demand::DriveOff => "drive off".to_string(),
        Demand::Fixed { percent } => format!("fixed {} %", crate::time::trim(percent)),
        Demand::Input { input } => m
            .inputs
            .get(input)
            .map_or("input".to_string(), |i| i.name.clone()),
        Demand::Sensor { sensor } => m
            .sensors
            .get(sensor)
            .map_or("sensor".to_string(), |s| s.name.clone()),
    };
    if md.is_safe() {
        what
    } else {
        format!("{what} up to {} %", crate::time::trim(ceiling(m, mode)))
    }
}

/// The set faults and every non-fault entry of a witness; clear faults are implied.
fn compact(a: &guards::Assignment) -> String {
    let kept: Vec<String> = a
        .entries
        .iter()
        .filter(|e| !matches!(e, guards::Entry::Fault { set: false, .. }))
        .map(|e| e.to_string())
        .collect();
    if kept.is_empty() {
        "every fault clear".to_string()
    } else {
        format!("{} (other faults clear)", kept.join(", "))
    }
}

/// Graph algorithms over petgraph, generic in node and edge weights.
pub mod algo {
    use petgraph::Direction;
    use petgraph::graph::{DiGraph, NodeIndex};

    fn search<N, E>(g: &DiGraph<N, E>, from: &[NodeIndex], dir: Direction) -> Vec<bool> {
        let mut seen = vec![false; g.node_count()];
        let mut stack: Vec<NodeIndex> = Vec::new();
        for &s in from {
            if s.index() < seen.len() && !seen[s.index()] {
                seen[s.index()] = true;
                stack.push(s);
            }
        }
        while let Some(n) = stack.pop() {
            for next in g.neighbors_directed(n, dir) {
                if !seen[next.index()] {
                    seen[next.index()] = true;
                    stack.push(next);
                }
            }
        }
        seen
    }

    /// `result[n]` is true iff a directed path of zero or more edges leads from one of `from`
    /// to `n` (so every start is reachable from itself). Indices out of range are ignored.
    pub fn reachable<N, E>(g: &DiGraph<N, E>, from: &[NodeIndex]) -> Vec<bool> {
        search(g, from, Direction::Outgoing)
    }

    /// `result[n]` is true iff a directed path of zero or more edges leads from `n` to one of
    /// `to`.
    pub fn reaching<N, E>(g: &DiGraph<N, E>, to: &[NodeIndex]) -> Vec<bool> {
        search(g, to, Direction::Incoming)
    }

    /// Every strongly connected component that contains a cycle (two or more nodes, or one
    /// node with an edge to itself), each sorted by node index, the list sorted by its
    /// smallest node. Every cycle of the graph lies within exactly one of them.
    pub fn cycles<N, E>(g: &DiGraph<N, E>) -> Vec<Vec<NodeIndex>> {
        let mut out: Vec<Vec<NodeIndex>> = petgraph::algo::tarjan_scc(g)
            .into_iter()
            .filter(|c| c.len() > 1 || c.first().is_some_and(|&n| g.find_edge(n, n).is_some()))
            .map(|mut c| {
                c.sort();
                c
            })
            .collect();
        out.sort();
        out
    }

    #[cfg(test)]
    mod tests {
        use super::*;

        fn graph(n: usize, edges: &[(usize, usize)]) -> DiGraph<(), ()> {
            let mut g = DiGraph::new();
            for _ in 0..n {
                g.add_node(());
            }
            for &(a, b) in edges {
                g.add_edge(NodeIndex::new(a), NodeIndex::new(b), ());
            }
            g
        }

        #[test]
        fn reachable_follows_edges_forward() {
            let g = graph(4, &[(0, 1), (1, 2), (3, 0)]);
            assert_eq!(
                reachable(&g, &[NodeIndex::new(0)]),
                vec![true, true, true, false]
            );
            assert_eq!(reachable(&graph(1, &[]), &[NodeIndex::new(0)]), vec![true]);
            assert_eq!(reachable(&g, &[NodeIndex::new(9)]), vec![false; 4]);
        }

        #[test]
        fn reaching_follows_edges_backward() {
            let g = graph(4, &[(0, 1), (1, 2), (3, 0)]);
            assert_eq!(
                reaching(&g, &[NodeIndex::new(1)]),
                vec![true, true, false, true]
            );
            assert_eq!(
                reaching(&g, &[NodeIndex::new(2), NodeIndex::new(3)]),
                vec![true, true, true, true]
            );
        }

        #[test]
        fn cycles_are_components_with_a_loop() {
            let n = NodeIndex::new;
            assert!(cycles(&graph(3, &[(0, 1), (1, 2)])).is_empty());
            assert_eq!(cycles(&graph(1, &[(0, 0)])), vec![vec![n(0)]]);
            assert_eq!(
                cycles(&graph(4, &[(2, 1), (1, 2), (0, 3), (3, 0), (0, 1)])),
                vec![vec![n(0), n(3)], vec![n(1), n(2)]]
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::guards::tests::{and, f, model, not, or, pedal, suspect};
    use crate::model::{Compare, Mode, Transition};

    /// A hand-built model on the guard tests' sensors and faults (f0 suspects pedal.a, f1
    /// pedal.b, f2 both, f3 nothing); modes and transitions get distinct spans so findings can
    /// be told apart: mode k at 100+k, transition i at 1000+i.
    struct B {
        m: Model,
    }

    impl B {
        fn new() -> B {
            B { m: model() }
        }

        fn mode_with(&mut self, name: &str, demand: Demand, limit: f64) -> ModeId {
            let k = self.m.modes.len();
            self.m.modes.push(Mode {
                name: name.into(),
                span: Span::new(100 + k, 101 + k),
                demand,
                limit,
                rate: None,
                tolerates: Vec::new(),
            });
            k
        }

        fn pedal_mode(&mut self, name: &str) -> ModeId {
            self.mode_with(name, Demand::Sensor { sensor: 0 }, 100.0)
        }

        fn idle_mode(&mut self, name: &str) -> ModeId {
            self.mode_with(name, Demand::Input { input: 0 }, 100.0)
        }

        fn safe_mode(&mut self, name: &str) -> ModeId {
            self.mode_with(name, Demand::DriveOff, 100.0)
        }

        fn tr(
            &mut self,
            from: Option<ModeId>,
            to: ModeId,
            guard: Expr,
            dwell_ms: Option<u64>,
        ) -> Span {
            let i = self.m.transitions.len();
            let span = Span::new(1000 + i, 1001 + i);
            self.m.transitions.push(Transition {
                span,
                from: from.map_or(Source::Any, Source::Mode),
                to,
                guard,
                dwell: dwell_ms.map(Time::from_ms),
            });
            span
        }

        /// Reads every fault once in a guard out of `from` (to keep unread-fault findings out
        /// of tests about something else) and reaches the safe mode.
        fn run(&self) -> Vec<Finding> {
            analyse(&self.m)
        }
    }

    fn kinds(fs: &[Finding], k: FindingKind) -> Vec<&Finding> {
        fs.iter().filter(|f| f.kind == k).collect()
    }

    /// normal -> off on every fault: no findings at all.
    fn clean() -> (B, ModeId, ModeId) {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let off = b.safe_mode("off");
        b.tr(None, off, or(vec![f(0), f(1), f(2), f(3)]), None);
        (b, n, off)
    }

    #[test]
    fn a_clean_model_has_no_findings() {
        let (b, _, _) = clean();
        assert_eq!(b.run(), vec![]);
    }

    #[test]
    fn unreachable_mode() {
        let (mut b, _, off) = clean();
        let lost = b.idle_mode("lost");
        b.tr(Some(lost), off, Expr::True, None);
        let fs = b.run();
        let u = kinds(&fs, FindingKind::UnreachableMode);
        assert_eq!(u.len(), 1);
        assert_eq!(u[0].span, b.m.modes[lost].span);
        assert_eq!(
            u[0].message,
            "mode `lost` is unreachable from `start` (`normal`)"
        );
        assert_eq!(u[0].severity, Severity::Error);
    }

    #[test]
    fn a_dead_edge_does_not_make_a_mode_reachable() {
        let (mut b, n, off) = clean();
        let lost = b.idle_mode("lost");
        let dead = b.tr(Some(n), lost, and(vec![f(0), not(f(0))]), None);
        b.tr(Some(lost), off, Expr::True, None);
        let fs = b.run();
        let u = kinds(&fs, FindingKind::UnreachableMode);
        assert_eq!(u.len(), 1);
        assert_eq!(u[0].related[0].0, dead);
        assert_eq!(kinds(&fs, FindingKind::ShadowedTransition)[0].span, dead);
    }

    #[test]
    fn dead_end_and_no_path_to_safe() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let idle = b.idle_mode("idle");
        let stuck = b.idle_mode("stuck");
        let off = b.safe_mode("off");
        b.tr(Some(n), off, or(vec![f(0), f(1), f(2), f(3)]), None);
        b.tr(Some(n), idle, suspect(0), None);
        b.tr(Some(idle), stuck, suspect(1), None);
        let fs = b.run();
        let d = kinds(&fs, FindingKind::DeadEnd);
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].span, b.m.modes[stuck].span);
        let p = kinds(&fs, FindingKind::NoPathToSafe);
        assert_eq!(p.len(), 1);
        assert_eq!(p[0].span, b.m.modes[idle].span);
        assert_eq!(
            p[0].message,
            "no `drive off` mode can be reached from mode `idle`"
        );
    }

    #[test]
    fn no_safe_mode_at_all() {
        let mut b = B::new();
        b.pedal_mode("normal");
        let fs = b.run();
        let p = kinds(&fs, FindingKind::NoPathToSafe);
        assert_eq!(p.len(), 1);
        assert_eq!(p[0].span, b.m.name_span);
        // The caret is on the policy name, not a mode: the label says so.
        assert_eq!(p[0].label, "no mode here drives off");
    }

    #[test]
    fn missing_transition_names_fault_mode_and_handlers() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        let off = b.safe_mode("off");
        b.tr(None, off, or(vec![f(0), f(1), f(2)]), None);
        let h = b.tr(Some(n), reduced, f(3), None);
        let fs = b.run();
        let mt = kinds(&fs, FindingKind::MissingTransition);
        assert_eq!(mt.len(), 1);
        assert_eq!(mt[0].span, b.m.modes[reduced].span);
        assert_eq!(
            mt[0].message,
            "fault `f3` can be set in mode `reduced` but no transition out of it reacts; it is handled in `normal`"
        );
        assert_eq!(
            mt[0].related,
            vec![(h, "handled in `normal` here".to_string())]
        );
        // Declaring `tolerates f3` in reduced silences it.
        b.m.modes[reduced].tolerates.push(3);
        assert!(kinds(&b.run(), FindingKind::MissingTransition).is_empty());
    }

    #[test]
    fn reacting_through_suspect_or_merged_counts() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        let off = b.safe_mode("off");
        b.tr(None, off, f(3), None);
        b.tr(Some(n), reduced, or(vec![f(0), suspect(1)]), None);
        // reduced reacts to f0 (and f1, f2) by reading the merged pedal.
        b.tr(Some(reduced), off, pedal(Compare::Above { x: 50.0 }), None);
        let fs = b.run();
        assert!(
            kinds(&fs, FindingKind::MissingTransition).is_empty(),
            "{fs:#?}"
        );
    }

    #[test]
    fn shadowed_by_earlier_undwelt_guards() {
        let (mut b, n, _) = clean();
        let idle = b.idle_mode("idle");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        b.tr(Some(idle), n, Expr::True, Some(100));
        b.tr(Some(reduced), n, Expr::True, Some(100));
        let first = b.tr(Some(n), idle, pedal(Compare::Below { x: 10.0 }), None);
        // below 3 lies inside below 10: shadowed.
        let later = b.tr(Some(n), reduced, pedal(Compare::Below { x: 3.0 }), None);
        let fs = b.run();
        let s = kinds(&fs, FindingKind::ShadowedTransition);
        assert_eq!(s.len(), 1, "{fs:#?}");
        assert_eq!(s[0].span, later);
        assert_eq!(
            s[0].related,
            vec![(first, "`normal -> idle` is tried first".to_string())]
        );
        // Reduced is then unreachable: the shadowed edge does not count.
        assert_eq!(
            kinds(&fs, FindingKind::UnreachableMode)[0].span,
            b.m.modes[reduced].span
        );
    }

    #[test]
    fn shadowed_through_the_suspect_dependency() {
        // suspect(pedal.b) needs f1 or f2 set, and the earlier any -> off fires on either.
        let (mut b, n, _) = clean();
        let idle = b.idle_mode("idle");
        b.tr(Some(idle), n, Expr::True, Some(100));
        let later = b.tr(Some(n), idle, suspect(1), None);
        let fs = b.run();
        let s = kinds(&fs, FindingKind::ShadowedTransition);
        assert_eq!(s.iter().map(|f| f.span).collect::<Vec<_>>(), vec![later]);
        // suspect(pedal.b) with f3 clear is not covered by `f0 or f1`.
        b.m.transitions[0].guard = or(vec![f(0), f(3)]);
        assert!(kinds(&b.run(), FindingKind::ShadowedTransition).is_empty());
    }

    #[test]
    fn dwell_decides_shadowing() {
        let (mut b, n, _) = clean();
        let idle = b.idle_mode("idle");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        b.tr(Some(idle), n, Expr::True, Some(100));
        b.tr(Some(reduced), n, Expr::True, Some(100));
        // Earlier guard dwells 500 ms; the later one fires at once: not shadowed.
        b.tr(Some(n), idle, pedal(Compare::Below { x: 10.0 }), Some(500));
        let later = b.tr(Some(n), reduced, pedal(Compare::Below { x: 3.0 }), None);
        let fs = b.run();
        assert!(
            kinds(&fs, FindingKind::ShadowedTransition).is_empty(),
            "{fs:#?}"
        );
        // Later dwell at least as long: shadowed.
        b.m.transitions[4].dwell = Some(Time::from_ms(500));
        let fs = b.run();
        let s = kinds(&fs, FindingKind::ShadowedTransition);
        assert_eq!(s.len(), 1);
        assert_eq!(s[0].span, later);
    }

    #[test]
    fn overlap_reports_witness_and_winner() {
        let (mut b, n, _) = clean();
        let idle = b.idle_mode("idle");
        b.tr(
            Some(idle),
            n,
            not(or(vec![f(0), f(1), f(2), f(3)])),
            Some(100),
        );
        // The any -> off guard (f0..f3) and `pedal above 50 %` can both hold.
        let later = b.tr(Some(n), idle, pedal(Compare::Above { x: 50.0 }), None);
        let fs = b.run();
        let o = kinds(&fs, FindingKind::OrderDependentOverlap);
        assert_eq!(o.len(), 1, "{fs:#?}");
        assert_eq!(o[0].span, later);
        assert_eq!(o[0].severity, Severity::Warning);
        assert_eq!(
            o[0].message,
            "in mode `normal`, the guards of `any -> off` and `normal -> idle` can hold together, e.g. f0=set, pedal=51 % (other faults clear); `any -> off` is tried first and wins"
        );
    }

    #[test]
    fn exclusive_guards_do_not_overlap() {
        let (mut b, n, off) = clean();
        let idle = b.idle_mode("idle");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        b.m.transitions[0].from = Source::Mode(idle);
        b.tr(Some(reduced), off, Expr::True, None);
        b.tr(Some(n), idle, and(vec![suspect(0), suspect(1)]), None);
        // Exclusive through the suspect dependency: not suspect(pedal.a) rules out f0 and f2.
        b.tr(Some(n), reduced, and(vec![not(suspect(0)), f(1)]), None);
        let fs = b.run();
        assert!(
            kinds(&fs, FindingKind::OrderDependentOverlap).is_empty(),
            "{fs:#?}"
        );
    }

    #[test]
    fn authority_raised_while_fault_may_be_set() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let idle = b.idle_mode("idle");
        let off = b.safe_mode("off");
        b.tr(None, off, f(3), None);
        let into = b.tr(Some(n), idle, suspect(0), None);
        // Back to normal with only f2 required clear: f0 may still be set.
        let back = b.tr(Some(idle), n, not(f(2)), Some(1000));
        let fs = b.run();
        let a = kinds(&fs, FindingKind::AuthorityUnderFault);
        assert_eq!(a.len(), 1, "{fs:#?}");
        assert_eq!(a[0].span, back);
        assert_eq!(
            a[0].message,
            "`idle -> normal` raises authority (idle_request up to 12 % to pedal up to 100 %) while `f0`, which led into `idle`, may still be set"
        );
        assert_eq!(
            a[0].related,
            vec![(into, "`f0` led into `idle` here".to_string())]
        );
        // Requiring suspect(pedal.a) clear settles it.
        b.m.transitions[2].guard = not(suspect(0));
        assert!(kinds(&b.run(), FindingKind::AuthorityUnderFault).is_empty());
    }

    #[test]
    fn a_latched_fault_that_led_in_blocks_the_way_out() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let idle = b.idle_mode("idle");
        let off = b.safe_mode("off");
        b.m.faults[1].healing = Healing::Latch;
        b.tr(None, off, f(3), None);
        let into = b.tr(Some(n), idle, and(vec![f(1), not(f(3))]), None);
        let back = b.tr(Some(idle), n, and(vec![not(f(1)), not(f(3))]), Some(1000));
        let fs = b.run();
        let l = kinds(&fs, FindingKind::LatchedExit);
        assert_eq!(l.len(), 1, "{fs:#?}");
        assert_eq!(l[0].severity, Severity::Note);
        assert_eq!(l[0].span, back);
        assert_eq!(
            l[0].message,
            "`idle -> normal` needs `f1` clear, but every way into `idle` sets it and it latches: this transition cannot fire before the next key on"
        );
        assert_eq!(
            l[0].related[0],
            (into, "sets `f1` on the way in".to_string())
        );
        // Healing instead of latching: the way back can fire.
        b.m.faults[1].healing = Healing::Immediate;
        assert!(kinds(&b.run(), FindingKind::LatchedExit).is_empty());
        // Latching again, but a second way in that does not need f1: not always set.
        b.m.faults[1].healing = Healing::Latch;
        b.tr(Some(n), idle, f(2), None);
        assert!(kinds(&b.run(), FindingKind::LatchedExit).is_empty());
    }

    #[test]
    fn the_start_mode_is_entered_with_every_fault_clear() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let idle = b.idle_mode("idle");
        let off = b.safe_mode("off");
        b.m.faults[1].healing = Healing::Latch;
        b.tr(None, off, f(3), None);
        // Back into the start mode only on f1, out of it only with f1 clear: at key on
        // f1 is clear, so the way out can fire.
        b.tr(Some(idle), n, and(vec![f(1), not(f(3))]), None);
        b.tr(Some(n), idle, and(vec![not(f(1)), not(f(3))]), None);
        assert!(kinds(&b.run(), FindingKind::LatchedExit).is_empty());
    }

    #[test]
    fn lowering_authority_needs_no_clearance() {
        let mut b = B::new();
        let n = b.pedal_mode("normal");
        let reduced = b.mode_with("reduced", Demand::Sensor { sensor: 0 }, 35.0);
        let idle = b.idle_mode("idle");
        let off = b.safe_mode("off");
        b.tr(None, off, f(3), None);
        b.tr(Some(n), reduced, suspect(0), None);
        b.tr(Some(reduced), idle, Expr::True, Some(100));
        b.tr(Some(idle), n, not(suspect(0)), Some(100));
        let fs = b.run();
        // reduced (pedal up to 35 %) -> idle (idle_request up to 12 %) lowers both measures.
        assert!(
            kinds(&fs, FindingKind::AuthorityUnderFault).is_empty(),
            "{fs:#?}"
        );
    }

    #[test]
    fn chatter_on_undwelt_cycles() {
        let (mut b, n, _) = clean();
        let idle = b.idle_mode("idle");
        let there = b.tr(Some(n), idle, pedal(Compare::Above { x: 50.0 }), None);
        let back = b.tr(Some(idle), n, pedal(Compare::Below { x: 40.0 }), None);
        let fs = b.run();
        let c = kinds(&fs, FindingKind::Chatter);
        assert_eq!(c.len(), 1, "{fs:#?}");
        assert_eq!(c[0].span, there);
        assert_eq!(c[0].related[0].0, back);
        // A dwell on one of them breaks it.
        b.m.transitions[2].dwell = Some(Time::from_ms(200));
        assert!(kinds(&b.run(), FindingKind::Chatter).is_empty());
    }

    #[test]
    fn identical_tracks() {
        let (mut b, _, _) = clean();
        assert!(kinds(&b.run(), FindingKind::IdenticalTracks).is_empty());
        // Same line written with other breakpoints: 0.8 V at 0 %, 2.4 V at 50 %.
        b.m.sensors[0].tracks[1].points = vec![(0.0, 0.8), (50.0, 2.4)];
        b.m.sensors[0].tracks[1].span = Span::new(50, 51);
        let fs = b.run();
        let t = kinds(&fs, FindingKind::IdenticalTracks);
        assert_eq!(t.len(), 1);
        assert_eq!(t[0].span, Span::new(50, 51));
        assert_eq!(
            t[0].message,
            "tracks `pedal.a` and `pedal.b` have the same characteristic: a short between them is undetectable"
        );
    }

    #[test]
    fn unread_and_inert_faults() {
        let mut b = B::new();
        b.pedal_mode("normal");
        let off = b.safe_mode("off");
        b.tr(None, off, f(2), None);
        let fs = b.run();
        let u = kinds(&fs, FindingKind::UnreadFault);
        assert_eq!(
            u.iter().map(|f| f.message.as_str()).collect::<Vec<_>>(),
            vec![
                "no guard reads fault `f0`: it only leaves `pedal.a` out of the merged value",
                "no guard reads fault `f1`: it only leaves `pedal.b` out of the merged value",
            ]
        );
        let i = kinds(&fs, FindingKind::InertFault);
        assert_eq!(i.len(), 1);
        assert_eq!(i[0].severity, Severity::Warning);
        // suspect(pedal.a) reads f0 and f2, not f1.
        b.m.transitions[0].guard = suspect(0);
        let fs = b.run();
        assert_eq!(kinds(&fs, FindingKind::UnreadFault).len(), 1);
    }

    #[test]
    fn times_off_the_period() {
        let (mut b, _, _) = clean();
        b.m.faults[0].debounce = Debounce::Time {
            set: Time::from_ms(12),
        };
        b.m.faults[1].healing = Healing::After {
            time: Time::from_ms(200),
        };
        b.m.transitions[0].dwell = Some(Time::from_ms(7));
        let fs = b.run();
        let o = kinds(&fs, FindingKind::OffPeriodTime);
        assert_eq!(
            o.iter().map(|f| f.message.as_str()).collect::<Vec<_>>(),
            vec![
                "debounce of `f0` 12 ms is not a multiple of the period 5 ms: it takes 3 steps, 15 ms (rounded up)",
                "dwell of `any -> off` 7 ms is not a multiple of the period 5 ms: it takes 2 steps, 10 ms (rounded up)",
            ]
        );
        assert_eq!(o[0].hint, "write 10 ms or 15 ms");
    }

    #[test]
    fn kind_codes_match_their_serialised_names() {
        let all = [
            FindingKind::UnreachableMode,
            FindingKind::NoPathToSafe,
            FindingKind::DeadEnd,
            FindingKind::MissingTransition,
            FindingKind::ShadowedTransition,
            FindingKind::OrderDependentOverlap,
            FindingKind::AuthorityUnderFault,
            FindingKind::Chatter,
            FindingKind::IdenticalTracks,
            FindingKind::UnreadFault,
            FindingKind::InertFault,
            FindingKind::OffPeriodTime,
            FindingKind::Inconclusive,
            FindingKind::LatchedExit,
        ];
        for k in all {
            assert_eq!(
                serde_json::to_value(k).ok(),
                Some(serde_json::Value::String(k.code().to_string()))
            );
        }
    }

    #[test]
    fn findings_render_as_diagnostics() {
        let (mut b, _, _) = clean();
        let lost = b.idle_mode("lost");
        b.m.modes[lost].span = Span::new(0, 4);
        let d: Vec<Diagnostic> = b.run().into_iter().map(Diagnostic::from).collect();
        let text = crate::diag::render("p.limp", "lost {}\n", &d);
        assert!(
            text.contains(
                "error[unreachable-mode]: mode `lost` is unreachable from `start` (`normal`)"
            ),
            "{text}"
        );
        assert!(text.contains("never entered"), "{text}");
    }
}

#[cfg(test)]
mod reference {
    use super::*;

    /// A guard over a dozen signals is asked three questions, each too large; they come out
    /// as one note on the transition, not three.
    #[test]
    fn undecided_questions_on_one_transition_make_one_note() {
        let src = include_str!("../../tests/fixtures/findings/inconclusive.limp");
        let m = crate::model::lower(src).expect("fixture lowers");
        let fs = analyse(&m);
        let open: Vec<&Finding> = fs
            .iter()
            .filter(|f| f.kind == FindingKind::Inconclusive)
            .collect();
        assert_eq!(open.len(), 1, "{fs:#?}");
        assert!(
            open[0]
                .message
                .starts_with("could not decide 3 questions about this transition: whether transition `idle_only -> normal` in mode `idle_only` can fire; "),
            "{}",
            open[0].message
        );
        assert!(
            open[0]
                .message
                .contains("(the largest needs 15750000 valuations, over the bound of 1048576)")
        );
    }

    /// What `analyse` says on the reference policy. Judged by hand (see the analysis report):
    /// both errors are real gaps of rev 1; the overlaps are deliberate fail-safe ordering.
    #[test]
    fn findings_on_the_van_policy() {
        let src = include_str!("../../scenarios/van/van_throttle.limp");
        let m = crate::model::lower(src).expect("reference policy lowers");
        let fs = analyse(&m);
        let line = |s: Span| src[..s.start].matches('\n').count() + 1;
        let got: Vec<(usize, &str)> = fs.iter().map(|f| (line(f.span), f.kind.code())).collect();
        assert_eq!(
            got,
            vec![
                (44, "missing-transition"),
                (52, "order-dependent-overlap"),
                (53, "order-dependent-overlap"),
                (53, "order-dependent-overlap"),
                (54, "order-dependent-overlap"),
                (55, "order-dependent-overlap"),
                (56, "order-dependent-overlap"),
                (56, "authority-under-fault"),
            ]
        );
        assert!(
            fs[0].message.contains("`brake_conflict`") && fs[0].message.contains("`reduced_power`")
        );
        let auth = &fs[7];
        assert_eq!(
            auth.message,
            "`idle_only -> normal` raises authority (idle_request up to 12 % to pedal up to 100 %) while `pedal_a_low`, `pedal_a_high`, `pedal_b_low`, `pedal_b_high`, which led into `idle_only`, may still be set"
        );
        assert_eq!(
            auth.hint,
            "require them clear in the guard, e.g. `not suspect(pedal.a)`"
        );
        // Within reduced_power the way back to normal and the way on to idle_only are
        // exclusive only through suspect(): pedal_disagree suspects both tracks.
        assert!(!fs.iter().any(|f| {
            f.kind == FindingKind::OrderDependentOverlap
                && f.message
                    .contains("`reduced_power -> idle_only` and `reduced_power -> normal`")
        }));
        // Every overlap here has the safer target winning.
        for f in fs
            .iter()
            .filter(|f| f.kind == FindingKind::OrderDependentOverlap)
        {
            assert!(f.hint.contains("as fail-safe order asks"), "{}", f.hint);
        }
    }
}
