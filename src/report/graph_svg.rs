//! The mode graph drawn as SVG: through Graphviz `dot -Tsvg` when it is installed, else with a
//! layout of our own that always works (modes in columns by breadth-first depth from the start
//! mode, edges as curves with their guards). Safe (drive-off) modes are marked in both.

use super::plot::xml_escape;
use super::text;
use crate::app::{Exit, Outcome};
use crate::model::{Model, Source};
use std::fmt::Write as _;
use std::io::Write as _;

/// `limpet graph --format svg`.
pub fn command(path: &str) -> Outcome {
    match crate::app::load_policy(path) {
        Ok((_, m, _)) => Outcome {
            stdout: svg(&m),
            stderr: String::new(),
            exit: Exit::Holds,
        },
        Err(e) => Outcome::bad_input(e),
    }
}

/// The graph through `dot` when it runs, else [`layout_svg`].
pub fn svg(m: &Model) -> String {
    dot_svg(m).unwrap_or_else(|| layout_svg(m))
}

/// `dot -Tsvg` over [`super::graph::dot`], from `<svg` on (no XML prolog, so it can be inlined
/// in HTML); `None` when `dot` is missing or fails.
pub fn dot_svg(m: &Model) -> Option<String> {
    let mut child = std::process::Command::new("dot")
        .arg("-Tsvg")
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::null())
        .spawn()
        .ok()?;
    let input = super::graph::dot(m);
    // Writing from this thread while dot writes back could block on a full pipe for a huge
    // graph; a writer thread avoids that.
    let mut stdin = child.stdin.take()?;
    let writer = std::thread::spawn(move || stdin.write_all(input.as_bytes()));
    let out = child.wait_with_output().ok()?;
    let wrote = writer.join().ok()?.is_ok();
    if !out.status.success() || !wrote {
        return None;
    }
    let text = String::from_utf8(out.stdout).ok()?;
    let start = text.find("<svg")?;
    Some(text[start..].to_string())
}

/// Breadth-first depth of each mode from the start mode over the edges; modes not reached get
/// one column past the deepest.
pub fn depths(m: &Model) -> Vec<usize> {
    let n = m.modes.len();
    let mut depth: Vec<Option<usize>> = vec![None; n];
    if m.start < n {
        depth[m.start] = Some(0);
        let mut queue = std::collections::VecDeque::from([m.start]);
        while let Some(u) = queue.pop_front() {
            let d = depth[u].unwrap_or(0);
            for e in m.edges_from(u) {
                if e.to < n && depth[e.to].is_none() {
                    depth[e.to] = Some(d + 1);
                    queue.push_back(e.to);
                }
            }
        }
    }
    let deepest = depth.iter().flatten().max().copied().unwrap_or(0);
    let unreached = if depth.iter().any(|d| d.is_some()) {
        deepest + 1
    } else {
        0
    };
    depth.into_iter().map(|d| d.unwrap_or(unreached)).collect()
}

/// Columns for the drawing: BFS depth, then the target of an edge within one column is pushed
/// one column right (a bounded number of rounds, so cycles cannot loop), because an edge
/// between two boxes of one column would have to cross the boxes between them.
pub fn columns(m: &Model) -> Vec<usize> {
    let mut depth = depths(m);
    let n = m.modes.len();
    for _ in 0..n {
        let mut moved = false;
        for t in &m.transitions {
            let (Source::Mode(u), v) = (t.from, t.to) else {
                continue;
            };
            if u < n && v < n && u != v && v != m.start && depth[u] == depth[v] {
                depth[v] += 1;
                moved = true;
            }
        }
        if !moved {
            break;
        }
    }
    // Close gaps left by pushes, keeping the order of columns.
    let mut used: Vec<usize> = depth.clone();
    used.sort_unstable();
    used.dedup();
    depth
        .iter()
        .map(|d| used.iter().position(|x| x == d).unwrap_or(0))
        .collect()
}

/// Approximate width of text in the sans-serif we ask for, in pixels.
fn text_width(s: &str, size: f64) -> f64 {
    s.chars().count() as f64 * size * 0.56
}

const NODE_H: f64 = 48.0;
const ROW_GAP: f64 = 60.0;
const LABEL_SIZE: f64 = 12.0;
const PAD: f64 = 30.0;
const LANE: f64 = 26.0;

struct Node {
    x: f64,
    y: f64,
    w: f64,
}

/// How an edge is drawn in our layout.
enum Route {
    /// To the next column: a curve from the right side to the left side.
    Adjacent,
    /// Forward past a column: up to a lane above the boxes, across, down.
    Over(usize),
    /// Backward or within a column: down to a lane under the boxes, across, up.
    Under(usize),
}

/// Our own layout, deterministic and dependency-free. Transitions `from any` are drawn once,
/// entering their target from below, instead of once per source mode.
pub fn layout_svg(m: &Model) -> String {
    let n = m.modes.len();
    let col = columns(m);
    let ncols = col.iter().max().map_or(0, |d| d + 1);
    let mut by_col: Vec<Vec<usize>> = vec![Vec::new(); ncols];
    for (i, &d) in col.iter().enumerate() {
        by_col[d].push(i);
    }
    let demand: Vec<String> = m.modes.iter().map(|md| text::demand(m, md)).collect();
    let widths: Vec<f64> = (0..n)
        .map(|i| {
            text_width(&m.modes[i].name, 15.0)
                .max(text_width(&demand[i], 12.0))
                .max(60.0)
                + 28.0
        })
        .collect();
    // The transitions to draw, with their order among those tried from the source (for an
    // `any` transition, its order from the first mode it applies to).
    let label_of = |ti: usize, from: usize| {
        let t = &m.transitions[ti];
        let mut label = text::expr(m, &t.guard);
        if let Some(d) = t.dwell {
            let _ = write!(label, " for {d}");
        }
        let order = m
            .edges_from(from)
            .iter()
            .position(|e| e.transition == ti)
            .map_or(0, |p| p + 1);
        format!("{order}. {label}")
    };
    let mut lines: Vec<(usize, usize, usize, String)> = Vec::new(); // (transition, from, to, label)
    let mut from_any: Vec<(usize, usize, String)> = Vec::new(); // (transition, to, label)
    for (ti, t) in m.transitions.iter().enumerate() {
        if t.to >= n {
            continue;
        }
        match t.from {
            Source::Mode(u) if u < n => lines.push((ti, u, t.to, label_of(ti, u))),
            Source::Mode(_) => {}
            Source::Any => {
                let first = m
                    .edges()
                    .iter()
                    .find(|e| e.transition == ti)
                    .map_or(t.to, |e| e.from);
                from_any.push((ti, t.to, format!("from any mode: {}", label_of(ti, first))));
            }
        }
    }
    let mut over = 0;
    let mut under = 0;
    let routes: Vec<Route> = lines
        .iter()
        .map(|&(_, u, v, _)| {
            if col[v] == col[u] + 1 {
                Route::Adjacent
            } else if col[v] > col[u] {
                over += 1;
                Route::Over(over - 1)
            } else {
                under += 1;
                Route::Under(under - 1)
            }
        })
        .collect();
    // The gap after a column fits the longest label of an adjacent edge leaving it.
    let mut gap = vec![120.0f64; ncols];
    for (l, r) in lines.iter().zip(&routes) {
        if matches!(r, Route::Adjacent) {
            gap[col[l.1]] = gap[col[l.1]].max(text_width(&l.3, LABEL_SIZE) + 40.0);
        }
    }
    let col_w: Vec<f64> = by_col
        .iter()
        .map(|c| c.iter().map(|&i| widths[i]).fold(0.0, f64::max))
        .collect();
    // Below each box that `any` transitions enter, room for their labels.
    let any_rows = |i: usize| from_any.iter().filter(|a| a.1 == i).count() as f64;
    let rows_h = |c: &Vec<usize>| {
        c.iter()
            .map(|&i| NODE_H + any_rows(i) * 18.0 + if any_rows(i) > 0.0 { 24.0 } else { 0.0 })
            .sum::<f64>()
            + c.len().saturating_sub(1) as f64 * ROW_GAP
    };
    let body_h = by_col.iter().map(rows_h).fold(0.0, f64::max);
    let top = PAD + 30.0 + LANE * over as f64 + 10.0;
    let mut nodes: Vec<Node> = (0..n)
        .map(|_| Node {
            x: 0.0,
            y: 0.0,
            w: 0.0,
        })
        .collect();
    let mut x = PAD + 40.0;
    let mut right = x;
    for (c, members) in by_col.iter().enumerate() {
        let mut y = top + (body_h - rows_h(members)) / 2.0;
        for &i in members {
            nodes[i] = Node {
                x: x + (col_w[c] - widths[i]) / 2.0,
                y,
                w: widths[i],
            };
            y += NODE_H + any_rows(i) * 18.0 + if any_rows(i) > 0.0 { 24.0 } else { 0.0 };
            y += ROW_GAP;
        }
        right = x + col_w[c];
        x += col_w[c] + gap[c];
    }
    let bottom = top + body_h;
    // Labels on the lanes may reach past the last box.
    let lane_label_right = lines
        .iter()
        .zip(&routes)
        .filter(|(_, r)| !matches!(r, Route::Adjacent))
        .map(|(l, _)| {
            let (a, b) = (&nodes[l.1], &nodes[l.2]);
            let mid = (a.x + a.w / 2.0 + b.x + b.w / 2.0) / 2.0;
            mid + text_width(&l.3, LABEL_SIZE) / 2.0
        })
        .chain(from_any.iter().map(|a| {
            let b = &nodes[a.1];
            b.x + b.w / 2.0 + text_width(&a.2, LABEL_SIZE) / 2.0
        }))
        .fold(right, f64::max);
    let width = (lane_label_right + PAD).max(240.0);
    let height = bottom + 30.0 + LANE * under as f64 + PAD;

    let mut o = String::new();
    let _ = writeln!(
        o,
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{width:.0}\" height=\"{height:.0}\" viewBox=\"0 0 {width:.0} {height:.0}\" font-family=\"sans-serif\">"
    );
    let _ = writeln!(o, "<title>mode graph of {}</title>", xml_escape(&m.name));
    o.push_str("<defs><marker id=\"limpet-arrow\" viewBox=\"0 0 10 10\" refX=\"10\" refY=\"5\" markerWidth=\"8\" markerHeight=\"8\" orient=\"auto-start-reverse\"><path d=\"M0,0 L10,5 L0,10 z\" fill=\"#444\"/></marker></defs>\n");
    let _ = writeln!(
        o,
        "<rect x=\"0\" y=\"0\" width=\"{width:.0}\" height=\"{height:.0}\" fill=\"#ffffff\"/>"
    );
    let _ = writeln!(
        o,
        "<text x=\"{PAD}\" y=\"{:.0}\" font-size=\"16\" font-weight=\"bold\">mode graph: {}</text>",
        PAD,
        xml_escape(&m.name)
    );

    let label = |o: &mut String, x: f64, y: f64, text: &str| {
        let lw = text_width(text, LABEL_SIZE) + 8.0;
        let _ = writeln!(
            o,
            "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"{lw:.1}\" height=\"16\" fill=\"#ffffff\" fill-opacity=\"0.9\"/>",
            x - lw / 2.0,
            y - 12.0
        );
        let _ = writeln!(
            o,
            "<text class=\"guard\" x=\"{x:.1}\" y=\"{y:.1}\" font-size=\"{LABEL_SIZE}\" text-anchor=\"middle\" fill=\"#222\">{}</text>",
            xml_escape(text)
        );
    };
    let mut pair_rank: Vec<(usize, usize)> = Vec::new();
    for (l, r) in lines.iter().zip(&routes) {
        let (u, v, text) = (l.1, l.2, &l.3);
        let (a, b) = (&nodes[u], &nodes[v]);
        let (d, lx, ly) = if u == v {
            // A loop over the box's top right corner.
            let (x0, y0) = (a.x + a.w - 24.0, a.y);
            let d = format!(
                "M{x0:.1},{y0:.1} C{:.1},{:.1} {:.1},{:.1} {:.1},{:.1}",
                x0 - 10.0,
                y0 - 36.0,
                x0 + 40.0,
                y0 - 36.0,
                x0 + 24.0,
                y0 + 10.0
            );
            (d, x0 + 16.0, y0 - 32.0)
        } else {
            match *r {
                Route::Adjacent => {
                    let rank = pair_rank.iter().filter(|p| **p == (u, v)).count() as f64;
                    pair_rank.push((u, v));
                    let (x0, y0) = (a.x + a.w, a.y + NODE_H / 2.0 - 6.0 + rank * 12.0);
                    let (x1, y1) = (b.x, b.y + NODE_H / 2.0 - 6.0 + rank * 12.0);
                    let mx = (x0 + x1) / 2.0;
                    let d = format!(
                        "M{x0:.1},{y0:.1} C{mx:.1},{y0:.1} {mx:.1},{y1:.1} {x1:.1},{y1:.1}"
                    );
                    (d, mx, (y0 + y1) / 2.0 - 5.0 + rank * 16.0)
                }
                Route::Over(lane) => {
                    // Out of the right side into the gap, up to the lane, across, down in the
                    // gap before the target and into its left side: never through a box.
                    let ly = top - 10.0 - LANE * (over - lane) as f64 + LANE;
                    let jog = 12.0 + 6.0 * (lane % 4) as f64;
                    let (x0, y0) = (a.x + a.w, a.y + NODE_H / 2.0 - 8.0);
                    let (x1, y1) = (b.x, b.y + NODE_H / 2.0 - 8.0);
                    let d = format!(
                        "M{x0:.1},{y0:.1} L{:.1},{y0:.1} L{:.1},{ly:.1} L{:.1},{ly:.1} L{:.1},{y1:.1} L{x1:.1},{y1:.1}",
                        x0 + jog,
                        x0 + jog,
                        x1 - jog,
                        x1 - jog
                    );
                    (d, (x0 + x1) / 2.0, ly - 3.0)
                }
                Route::Under(lane) => {
                    // Out of the left side, down to the lane, across, up in the gap after the
                    // target and into its right side.
                    let ly = bottom + 20.0 + LANE * lane as f64;
                    let jog = 12.0 + 6.0 * (lane % 4) as f64;
                    let (x0, y0) = (a.x, a.y + NODE_H / 2.0 + 8.0);
                    let (x1, y1) = (b.x + b.w, b.y + NODE_H / 2.0 + 8.0);
                    let d = format!(
                        "M{x0:.1},{y0:.1} L{:.1},{y0:.1} L{:.1},{ly:.1} L{:.1},{ly:.1} L{:.1},{y1:.1} L{x1:.1},{y1:.1}",
                        x0 - jog,
                        x0 - jog,
                        x1 + jog,
                        x1 + jog
                    );
                    (d, (x0 + x1) / 2.0, ly - 3.0)
                }
            }
        };
        let _ = writeln!(
            o,
            "<path class=\"edge\" d=\"{d}\" fill=\"none\" stroke=\"#444\" stroke-width=\"1.4\" marker-end=\"url(#limpet-arrow)\"/>"
        );
        label(&mut o, lx, ly, text);
    }
    // `any` transitions: a dashed stub entering the box from below, labels under it.
    let mut stacked: Vec<usize> = Vec::new();
    for (_, v, text) in &from_any {
        let b = &nodes[*v];
        let k = stacked.iter().filter(|x| *x == v).count() as f64;
        stacked.push(*v);
        let cx = b.x + b.w / 2.0;
        if k == 0.0 {
            let _ = writeln!(
                o,
                "<path class=\"edge any\" d=\"M{cx:.1},{:.1} L{cx:.1},{:.1}\" fill=\"none\" stroke=\"#444\" stroke-width=\"1.4\" stroke-dasharray=\"5 3\" marker-end=\"url(#limpet-arrow)\"/>",
                b.y + NODE_H + 22.0,
                b.y + NODE_H
            );
        }
        label(&mut o, cx, b.y + NODE_H + 36.0 + k * 18.0, text);
    }

    // The start marker.
    if let Some(s) = nodes.get(m.start) {
        let y = s.y + NODE_H / 2.0;
        let _ = writeln!(
            o,
            "<circle cx=\"{:.1}\" cy=\"{y:.1}\" r=\"5\" fill=\"#222\"/><path d=\"M{:.1},{y:.1} L{:.1},{y:.1}\" stroke=\"#222\" stroke-width=\"1.4\" marker-end=\"url(#limpet-arrow)\"/>",
            s.x - 34.0,
            s.x - 29.0,
            s.x
        );
    }
    for (i, md) in m.modes.iter().enumerate() {
        let nd = &nodes[i];
        let safe = md.is_safe();
        let fill = if safe { "#dbe9f6" } else { "#fbfbf7" };
        let _ = writeln!(
            o,
            "<g class=\"mode{}\"><rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{NODE_H}\" rx=\"9\" fill=\"{fill}\" stroke=\"#333\" stroke-width=\"{}\"/>",
            if safe { " safe" } else { "" },
            nd.x,
            nd.y,
            nd.w,
            if safe { 2.2 } else { 1.2 }
        );
        if safe {
            // A second outline, as DOT's `peripheries=2` draws it.
            let _ = writeln!(
                o,
                "<rect x=\"{:.1}\" y=\"{:.1}\" width=\"{:.1}\" height=\"{:.1}\" rx=\"12\" fill=\"none\" stroke=\"#333\" stroke-width=\"1.2\"/>",
                nd.x - 4.0,
                nd.y - 4.0,
                nd.w + 8.0,
                NODE_H + 8.0
            );
        }
        let cx = nd.x + nd.w / 2.0;
        let _ = writeln!(
            o,
            "<text x=\"{cx:.1}\" y=\"{:.1}\" font-size=\"15\" font-weight=\"bold\" text-anchor=\"middle\">{}</text>",
            nd.y + 20.0,
            xml_escape(&md.name)
        );
        let _ = writeln!(
            o,
            "<text x=\"{cx:.1}\" y=\"{:.1}\" font-size=\"12\" text-anchor=\"middle\" fill=\"#333\">{}{}</text></g>",
            nd.y + 38.0,
            xml_escape(&demand[i]),
            if safe { " (safe)" } else { "" }
        );
    }
    o.push_str("</svg>\n");
    o
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference() -> Model {
        let src = include_str!("../../scenarios/van/van_throttle.limp");
        let (m, diags) = crate::model::load(src);
        m.unwrap_or_else(|| panic!("reference policy does not load: {diags:?}"))
    }

    #[test]
    fn depths_follow_breadth_first_order() {
        let m = reference();
        let d = depths(&m);
        assert_eq!(d[m.start], 0);
        let c = columns(&m);
        // After the push, no edge between two modes stays within one column.
        for t in &m.transitions {
            if let Source::Mode(u) = t.from {
                assert!(u == t.to || c[u] != c[t.to], "{u} -> {}", t.to);
            }
        }
        // Every edge goes at most one column forward (the defining property of BFS depth).
        for e in m.edges() {
            if d[e.to] > d[e.from] {
                assert_eq!(d[e.to], d[e.from] + 1, "edge {e:?}");
            }
        }
    }

    #[test]
    fn own_layout_draws_every_mode_and_edge_and_marks_safe_modes() {
        let m = reference();
        let s = layout_svg(&m);
        for md in &m.modes {
            assert!(s.contains(&format!(">{}</text>", xml_escape(&md.name))));
        }
        // One line per transition: `any` ones once, not once per source mode.
        let drawn = s.matches("class=\"edge\"").count() + s.matches("class=\"edge any\"").count();
        let any = m
            .transitions
            .iter()
            .filter(|t| t.from == Source::Any)
            .count();
        assert!(any > 0);
        assert_eq!(
            drawn,
            m.transitions.len() - any
                + m.transitions
                    .iter()
                    .filter(|t| t.from == Source::Any)
                    .map(|t| t.to)
                    .collect::<std::collections::BTreeSet<_>>()
                    .len()
        );
        assert_eq!(s.matches("from any mode: ").count(), any);
        let safe = m.modes.iter().filter(|md| md.is_safe()).count();
        assert!(safe > 0);
        assert_eq!(s.matches("class=\"mode safe\"").count(), safe);
        assert_eq!(s.matches("(safe)</text>").count(), safe);
        assert!(s.trim_end().ends_with("</svg>"));
    }
}
