//! Views of a diff report: plain text for a terminal, markdown for a pull-request comment,
//! JSON for tools. All three list the same findings in the same order.

use super::Report;
use super::behaviour::{ScenarioDiff, mode_path};
use super::joint::Comparison;
use super::structure::{Change, Section};
use crate::analysis::guards::MAX_ASSIGNMENTS;
use crate::time::{Time, trim};
use std::fmt::Write;

const CAUTION: &str = "limpet is a design aid, not a substitute for a safety case, vehicle testing, or regulations and licensed engineering judgment.";

const BOUND: &str = "a search hit its state bound: cells marked `?` are not verdicts; run `limpet prove` on each revision for a full search";
/// The note on rows compared by their verdicts only.
fn verdicts_only(n: usize) -> String {
    let (rows, verb, their) = if n == 1 {
        ("row", "compares", "its")
    } else {
        ("rows", "compare", "their")
    };
    format!(
        "{n} {rows} that a search stopped short of closing (the bound, or every requirement already violated) {verb} only {their} verdicts: {their} figures cover only the part searched (column `searched` of `limpet prove`)"
    )
}

const UNRESOLVED: &str = "cells marked `unresolved` met candidate violations that no exact replay confirmed: they are not verdicts (a finer --resolution may decide them)";

fn plural(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// What a guard or condition comparison found, in a sentence.
fn comparison_text(c: &Change) -> Option<String> {
    let what = if c.field == "condition" {
        "condition"
    } else {
        "guard"
    };
    match c.comparison.as_ref()? {
        Comparison::Same => None,
        Comparison::Differs {
            assignment,
            old_holds,
        } => Some(format!(
            "differs when {assignment}: the {} {what} holds, the {} does not",
            if *old_holds { "old" } else { "new" },
            if *old_holds { "new" } else { "old" }
        )),
        Comparison::Undecided { needed } => Some(format!(
            "equivalence not decided: {needed} valuations exceed the bound of {MAX_ASSIGNMENTS}"
        )),
    }
}

fn secs(t: Time) -> String {
    format!("{} s", trim(t.as_secs_f64()))
}

fn at(t: Option<Time>) -> String {
    t.map_or("never".into(), secs)
}

fn verdict(v: Option<bool>) -> &'static str {
    match v {
        Some(true) => "pass",
        Some(false) => "FAIL",
        None => "(no run)",
    }
}

/// The one-paragraph conclusion both human views end with.
fn conclusion(r: &Report) -> String {
    let changed = r.changes.len();
    let behaving = r.scenarios.iter().filter(|s| s.differs()).count();
    let rows = r.matrix.as_ref().map_or(0, |m| m.changed.len());
    if !r.differs() && r.undecided == 0 {
        let mut s = "the revisions are equivalent: same structure and meaning".to_string();
        if !r.scenarios.is_empty() {
            s.push_str(", every scenario replays the same");
        }
        if r.matrix.is_some() {
            s.push_str(", same reaction matrix");
        }
        return s;
    }
    let mut parts = vec![plural(
        changed,
        "change in structure or meaning",
        "changes in structure or meaning",
    )];
    if !r.scenarios.is_empty() {
        parts.push(format!(
            "{} of {} behave differently",
            behaving,
            plural(r.scenarios.len(), "scenario", "scenarios")
        ));
    }
    if r.matrix.is_some() {
        parts.push(plural(
            rows,
            "reaction-matrix row changed",
            "reaction-matrix rows changed",
        ));
    }
    let head = if r.differs() {
        "the revisions differ"
    } else {
        "undecided"
    };
    format!("{head}: {}", parts.join(", "))
}

fn scenario_summary(s: &ScenarioDiff) -> String {
    let mut parts = Vec::new();
    if let Some(e) = &s.old_error {
        parts.push(e.clone());
    }
    if let Some(e) = &s.new_error {
        parts.push(e.clone());
    }
    parts.push(if s.verdicts_changed() {
        "verdicts changed".into()
    } else {
        "verdicts unchanged".into()
    });
    if let Some(t) = s.diverge_at {
        parts.push(format!("traces diverge at {}", secs(t)));
    }
    parts.join("; ")
}

pub fn text(r: &Report) -> String {
    let mut o = format!("limpet diff {} -> {}\n\n", r.old, r.new);
    if r.changes.is_empty() {
        o.push_str("structure and meaning: no change\n");
    } else {
        let _ = writeln!(
            o,
            "structure and meaning: {}",
            plural(r.changes.len(), "change", "changes")
        );
        let mut section: Option<Section> = None;
        for c in &r.changes {
            if section != Some(c.section) {
                let _ = writeln!(o, "  {}", c.section.title());
                section = Some(c.section);
            }
            let _ = writeln!(o, "    {}", c.line());
            if let Some(w) = comparison_text(c) {
                let _ = writeln!(o, "      {w}");
            }
        }
    }
    if let Some(dir) = &r.scenarios_dir {
        let differing: Vec<&ScenarioDiff> = r.scenarios.iter().filter(|s| s.differs()).collect();
        let _ = writeln!(
            o,
            "\nbehaviour: {} in {dir}, {} differ",
            plural(r.scenarios.len(), "scenario", "scenarios"),
            differing.len()
        );
        for s in &differing {
            let _ = writeln!(o, "  {}: {}", s.scenario, scenario_summary(s));
            for v in s.verdicts.iter().filter(|v| v.old != v.new) {
                let _ = writeln!(
                    o,
                    "    {} -> {}  {}",
                    verdict(v.old),
                    verdict(v.new),
                    v.expectation
                );
            }
            for d in &s.detections {
                let _ = writeln!(o, "    {} set at {} -> {}", d.fault, at(d.old), at(d.new));
            }
            if s.modes_changed() {
                let _ = writeln!(o, "    modes {}", mode_path(&s.old_modes));
                let _ = writeln!(o, "       -> {}", mode_path(&s.new_modes));
            }
        }
        let same = r.scenarios.len() - differing.len();
        if same > 0 {
            let _ = writeln!(
                o,
                "  {} the same",
                plural(same, "scenario replays", "scenarios replay")
            );
        }
    }
    if let Some(m) = &r.matrix {
        let _ = writeln!(
            o,
            "\nreaction matrix: {}, {} changed",
            plural(m.rows, "row", "rows"),
            m.changed.len()
        );
        let _ = writeln!(o, "  {}", m.coverage);
        if m.bound_hit {
            let _ = writeln!(o, "  {BOUND}");
        }
        if m.unresolved {
            let _ = writeln!(o, "  {UNRESOLVED}");
        }
        if m.verdicts_only > 0 {
            let _ = writeln!(o, "  {}", verdicts_only(m.verdicts_only));
        }
        for row in &m.changed {
            match (row.in_old, row.in_new) {
                (true, false) => {
                    let _ = writeln!(o, "  {}: only in the old revision's fault space", row.fault);
                }
                (false, true) => {
                    let _ = writeln!(o, "  {}: only in the new revision's fault space", row.fault);
                }
                _ => {
                    let cells: Vec<String> = row
                        .cells
                        .iter()
                        .map(|c| format!("{} {} -> {}", c.column, c.old, c.new))
                        .collect();
                    let _ = writeln!(o, "  {}: {}", row.fault, cells.join("; "));
                }
            }
        }
    }
    let _ = writeln!(o, "\n{}", conclusion(r));
    o
}

/// Markdown table cells: pipes escaped, line breaks flattened.
fn cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

fn code(s: &str) -> String {
    if s.is_empty() || s == "-" {
        "-".into()
    } else {
        format!("`{}`", cell(s))
    }
}

pub fn markdown(r: &Report) -> String {
    let mut o = format!(
        "## Policy diff: `{}` -> `{}`\n\n",
        cell(&r.old),
        cell(&r.new)
    );
    let c = conclusion(r);
    let mut chars = c.chars();
    let c = chars
        .next()
        .map_or_else(String::new, |f| f.to_uppercase().chain(chars).collect());
    let _ = writeln!(o, "**{c}.**\n");
    o.push_str("### Structure and meaning\n\n");
    if r.changes.is_empty() {
        o.push_str("No change: both revisions resolve to the same model.\n");
    } else {
        o.push_str("| section | item | change | old | new |\n|---|---|---|---|---|\n");
        for c in &r.changes {
            let change = match c.kind {
                super::structure::Kind::Changed if c.field.is_empty() => "changed".to_string(),
                super::structure::Kind::Changed => c.field.clone(),
                k => format!("{k:?}").to_lowercase(),
            };
            let _ = writeln!(
                o,
                "| {} | {} | {} | {} | {} |",
                c.section.title(),
                cell(&c.item()),
                cell(&change),
                code(c.old.as_deref().unwrap_or("-")),
                code(c.new.as_deref().unwrap_or("-"))
            );
        }
        let witnesses: Vec<String> = r
            .changes
            .iter()
            .filter_map(|c| comparison_text(c).map(|w| format!("- {}: {w}", cell(&c.item()))))
            .collect();
        if !witnesses.is_empty() {
            o.push_str("\nWhere the guards and conditions differ:\n\n");
            for w in witnesses {
                let _ = writeln!(o, "{w}");
            }
        }
    }
    if let Some(dir) = &r.scenarios_dir {
        let _ = writeln!(o, "\n### Behaviour: `{}`\n", cell(dir));
        let differing: Vec<&ScenarioDiff> = r.scenarios.iter().filter(|s| s.differs()).collect();
        if differing.is_empty() {
            let _ = writeln!(
                o,
                "All {} replay the same against both revisions.",
                plural(r.scenarios.len(), "scenario", "scenarios")
            );
        } else {
            o.push_str("| scenario | verdicts | traces diverge at | detection | modes |\n|---|---|---|---|---|\n");
            for s in &differing {
                let mut v: Vec<String> = s
                    .verdicts
                    .iter()
                    .filter(|v| v.old != v.new)
                    .map(|v| {
                        format!(
                            "{} -> {}: {}",
                            verdict(v.old),
                            verdict(v.new),
                            v.expectation
                        )
                    })
                    .collect();
                if let Some(e) = s.old_error.as_ref().or(s.new_error.as_ref()) {
                    v.insert(0, e.clone());
                }
                let verdicts = if v.is_empty() {
                    "unchanged".to_string()
                } else {
                    v.join("<br>")
                };
                let det: Vec<String> = s
                    .detections
                    .iter()
                    .map(|d| format!("{} {} -> {}", d.fault, at(d.old), at(d.new)))
                    .collect();
                let modes = if s.modes_changed() {
                    format!(
                        "{}<br>-> {}",
                        mode_path(&s.old_modes),
                        mode_path(&s.new_modes)
                    )
                } else {
                    "unchanged".into()
                };
                let _ = writeln!(
                    o,
                    "| {} | {} | {} | {} | {} |",
                    cell(&s.scenario),
                    cell(&verdicts),
                    s.diverge_at.map_or("-".into(), secs),
                    if det.is_empty() {
                        "unchanged".into()
                    } else {
                        cell(&det.join("<br>"))
                    },
                    cell(&modes)
                );
            }
            let same = r.scenarios.len() - differing.len();
            if same > 0 {
                let _ = writeln!(
                    o,
                    "\n{} the same.",
                    plural(same, "other scenario replays", "other scenarios replay")
                );
            }
        }
    }
    if let Some(m) = &r.matrix {
        o.push_str("\n### Reaction matrix\n\n");
        let _ = writeln!(o, "_{}_\n", cell(&m.coverage));
        if m.bound_hit {
            let _ = writeln!(o, "{BOUND}\n");
        }
        if m.unresolved {
            let _ = writeln!(o, "{UNRESOLVED}\n");
        }
        if m.verdicts_only > 0 {
            let _ = writeln!(o, "{}\n", verdicts_only(m.verdicts_only));
        }
        if m.changed.is_empty() {
            if m.rows == 1 {
                let _ = writeln!(o, "The one row is the same.");
            } else {
                let _ = writeln!(o, "All {} rows are the same.", m.rows);
            }
        } else {
            o.push_str("| fault | column | old | new |\n|---|---|---|---|\n");
            for row in &m.changed {
                if row.cells.is_empty() {
                    let (a, b) = if row.in_old {
                        ("row", "-")
                    } else {
                        ("-", "row")
                    };
                    let _ = writeln!(o, "| {} | (whole row) | {a} | {b} |", cell(&row.fault));
                }
                for c in &row.cells {
                    let _ = writeln!(
                        o,
                        "| {} | {} | {} | {} |",
                        cell(&row.fault),
                        cell(&c.column),
                        cell(&c.old),
                        cell(&c.new)
                    );
                }
            }
        }
    }
    let _ = writeln!(o, "\n> {CAUTION}");
    o
}

pub fn json(r: &Report) -> String {
    let mut v = serde_json::to_value(r).unwrap_or_default();
    if let Some(obj) = v.as_object_mut() {
        let lines: Vec<String> = r.changes.iter().map(Change::line).collect();
        obj.insert("lines".into(), serde_json::json!(lines));
        obj.insert("differs".into(), serde_json::json!(r.differs()));
        obj.insert("summary".into(), serde_json::json!(conclusion(r)));
    }
    format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
}
