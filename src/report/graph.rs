//! The mode graph as Graphviz DOT and as JSON: modes labelled with their demand and limit,
//! the safe (drive-off) modes marked, edges labelled with their guard and dwell.

use super::text;
use crate::model::{Model, Source};
use serde::Serialize;

fn dot_escape(s: &str) -> String {
    s.replace('\\', "\\\\").replace('"', "\\\"")
}

/// DOT text; `any` transitions are drawn once per source mode, as the controller tries them.
pub fn dot(m: &Model) -> String {
    let mut out = format!("digraph \"{}\" {{\n", dot_escape(&m.name));
    out.push_str("  rankdir=LR;\n  node [shape=box, style=rounded, fontname=\"Helvetica\"];\n");
    out.push_str("  edge [fontname=\"Helvetica\", fontsize=10];\n");
    out.push_str("  __start [shape=point, width=0.15];\n");
    for (i, mode) in m.modes.iter().enumerate() {
        let label = format!(
            "{}\\n{}",
            dot_escape(&mode.name),
            dot_escape(&text::demand(m, mode))
        );
        let style = if mode.is_safe() {
            ", shape=box, style=\"rounded,bold,filled\", fillcolor=\"#dbe9f6\", peripheries=2"
        } else {
            ""
        };
        out.push_str(&format!("  m{i} [label=\"{label}\"{style}];\n"));
    }
    out.push_str(&format!("  __start -> m{};\n", m.start));
    for e in m.edges() {
        let t = &m.transitions[e.transition];
        let mut label = text::expr(m, &t.guard);
        if let Some(d) = t.dwell {
            label.push_str(&format!(" for {d}"));
        }
        let order = m
            .edges_from(e.from)
            .iter()
            .position(|x| *x == e)
            .map_or(0, |p| p + 1);
        let any = if t.from == Source::Any {
            ", style=dashed"
        } else {
            ""
        };
        out.push_str(&format!(
            "  m{} -> m{} [label=\"{}. {}\"{}];\n",
            e.from,
            e.to,
            order,
            dot_escape(&label),
            any
        ));
    }
    out.push_str("}\n");
    out
}

#[derive(Serialize)]
struct JsonMode<'a> {
    name: &'a str,
    demand: String,
    limit: f64,
    rate: Option<f64>,
    safe: bool,
    start: bool,
}

#[derive(Serialize)]
struct JsonEdge<'a> {
    from: &'a str,
    to: &'a str,
    /// Position among the transitions tried from `from`, starting at 1.
    order: usize,
    guard: String,
    dwell_ms: Option<f64>,
    any: bool,
}

pub fn json(m: &Model) -> String {
    let modes: Vec<JsonMode> = m
        .modes
        .iter()
        .enumerate()
        .map(|(i, md)| JsonMode {
            name: &md.name,
            demand: text::demand(m, md),
            limit: md.limit,
            rate: md.rate,
            safe: md.is_safe(),
            start: i == m.start,
        })
        .collect();
    let mut edges = Vec::new();
    for from in 0..m.modes.len() {
        for (k, e) in m.edges_from(from).iter().enumerate() {
            let t = &m.transitions[e.transition];
            edges.push(JsonEdge {
                from: &m.modes[e.from].name,
                to: &m.modes[e.to].name,
                order: k + 1,
                guard: text::expr(m, &t.guard),
                dwell_ms: t.dwell.map(|d| d.as_ms_f64()),
                any: t.from == Source::Any,
            });
        }
    }
    let v = serde_json::json!({ "policy": m.name, "modes": modes, "edges": edges });
    format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
}
