//! Views of a proof: the static pre-pass, the reaction matrix (text, markdown, JSON), the
//! stories of the counterexamples, and the counterexamples as scenario scripts.

use super::search::Violation;
use super::{Proof, Row};
use crate::faults::describe;
use crate::model::Model;
use crate::time::{Time, trim};
use std::fmt::Write;

fn ms(t: Option<Time>) -> String {
    t.map_or("-".into(), |t| format!("{} ms", trim(t.as_ms_f64())))
}

fn names(m: &Model, fs: &[usize], sep: &str) -> String {
    if fs.is_empty() {
        "-".into()
    } else {
        fs.iter()
            .map(|&f| m.faults[f].name.as_str())
            .collect::<Vec<_>>()
            .join(sep)
    }
}

fn mode_names(m: &Model, ms: &[usize], sep: &str) -> String {
    if ms.is_empty() {
        "-".into()
    } else {
        ms.iter()
            .map(|&x| m.modes[x].name.as_str())
            .collect::<Vec<_>>()
            .join(sep)
    }
}

/// The worst-detection cell: `-` when no monitor ever sees the fault, `latent` when some
/// driving keeps it unseen for the whole horizon (so a detection may come as late as the
/// driver likes), else the latest first detection.
pub fn detection(r: &super::search::FaultResult) -> String {
    if r.monitors.is_empty() {
        "-".into()
    } else if r.undetected_branch {
        "latent".into()
    } else {
        ms(r.worst_detection)
    }
}

/// How far the search went: `closed` when it ran out of new states (or reached the horizon),
/// else the time after the injection up to which every drive was searched, and why it
/// stopped there (the bound, or every requirement already violated).
pub fn searched(m: &Model, r: &super::search::FaultResult) -> String {
    match r.searched_to {
        None => "closed".into(),
        Some(steps) => {
            let t = ms(Some(Time(m.period.0 * u64::from(steps))));
            if r.truncated {
                format!("to {t} (bound)")
            } else {
                format!("stopped at {t} (all violated)")
            }
        }
    }
}

/// `ok`, `VIOLATED`, `?` (bound hit) or `unresolved` (unconfirmed candidates) per
/// requirement.
pub fn verdicts(p: &Proof, row: &Row) -> Vec<&'static str> {
    (0..p.requirements.len())
        .map(|ri| match row.verdict(ri) {
            super::Verdict::Violated => "VIOLATED",
            super::Verdict::Inconclusive => "?",
            super::Verdict::Unresolved => "unresolved",
            super::Verdict::Holds => "ok",
        })
        .collect()
}

/// The cells of one matrix row under [`COLUMNS`], lists of names joined by `sep`.
pub fn figures(m: &Model, row: &Row, sep: &str) -> Vec<String> {
    let r = &row.result;
    vec![
        row.describe(m),
        searched(m, r),
        if row.faults.len() == 1 {
            names(m, &row.seen_by, sep)
        } else {
            "".into()
        },
        names(m, &r.monitors, sep),
        detection(r),
        mode_names(m, &r.end_modes, sep),
        ms(r.to_safe),
        format!(
            "{:.1} % / {}",
            r.worst_excess.max(0.0),
            ms(Some(r.worst_excess_duration))
        ),
        format!("{:.1} %", r.worst_opening_below_ceiling),
        ms(Some(r.worst_idle_after_release)),
    ]
}

/// The cells of one matrix row, in column order: [`figures`], then the verdicts.
fn cells(m: &Model, p: &Proof, row: &Row) -> Vec<String> {
    let mut c = figures(m, row, ",");
    c.extend(verdicts(p, row).into_iter().map(String::from));
    c
}

/// The reaction matrix's columns before the one-per-requirement verdicts.
pub const COLUMNS: [&str; 10] = [
    "fault",
    "searched",
    "seen by (static)",
    "detected by",
    "worst detection",
    "ends in",
    "to safe",
    "worst excess / for",
    "worst opening, driver below",
    "release to idle",
];

fn headers(p: &Proof) -> Vec<String> {
    let mut h: Vec<String> = COLUMNS.iter().map(|s| s.to_string()).collect();
    h.extend(p.requirements.iter().map(|r| r.short().to_string()));
    h
}

/// The settings line: what "exhaustive" covered.
pub fn coverage(m: &Model, p: &Proof) -> String {
    let c = &p.config;
    format!(
        "policy {}: {} fault set{} ({}), {} states ({} fault-free), pedal grid {} %{}, resolution {} %, horizon {} after each injection, injected into every fault-free state ({} injection instants per fault on average), twin {}",
        m.name,
        p.rows.len(),
        if p.rows.len() == 1 { "" } else { "s" },
        match p.scope {
            crate::model::FaultScope::Single => "single faults",
            crate::model::FaultScope::Double => "single faults and pairs",
        },
        p.states,
        p.pre_states,
        trim(c.grid),
        if c.free_pedal {
            ", pedal free"
        } else {
            ", pedal at most one grid step per period"
        },
        trim(c.resolution),
        c.horizon,
        p.rows.iter().map(|r| r.result.roots).sum::<usize>() / p.rows.len().max(1),
        if c.exact_twin {
            "paired exactly"
        } else {
            "paired by its plate (--exact-twin to pair it whole)"
        }
    )
}

/// The static pre-pass, listed before the search results.
pub fn prepass(m: &Model, p: &Proof) -> String {
    let mut o = String::from(
        "static pre-pass: faults no monitor can see at any steady pedal and plate position\n",
    );
    let mut n = 0;
    for row in p
        .rows
        .iter()
        .filter(|r| r.faults.len() == 1 && r.seen_by.is_empty())
    {
        let _ = writeln!(o, "  {}", row.describe(m));
        n += 1;
    }
    if n == 0 {
        o.push_str("  (none)\n");
    }
    o
}

fn table(rows: &[Vec<String>], markdown: bool) -> String {
    let n = rows.first().map_or(0, |r| r.len());
    let w: Vec<usize> = (0..n)
        .map(|i| rows.iter().map(|r| r[i].chars().count()).max().unwrap_or(0))
        .collect();
    let mut o = String::new();
    for (k, r) in rows.iter().enumerate() {
        if markdown {
            let cells: Vec<String> = r.iter().map(|c| c.replace('|', "\\|")).collect();
            let _ = writeln!(o, "| {} |", cells.join(" | "));
            if k == 0 {
                let _ = writeln!(o, "|{}|", vec!["---"; n].join("|"));
            }
        } else {
            let line: Vec<String> = r
                .iter()
                .enumerate()
                .map(|(i, c)| format!("{c:<width$}", width = w[i]))
                .collect();
            let _ = writeln!(o, "{}", line.join("  ").trim_end());
        }
    }
    o
}

/// Each violation's story in a few lines.
pub fn stories(m: &Model, p: &Proof) -> String {
    let mut o = String::new();
    for row in &p.rows {
        for v in &row.result.violations {
            let req = p.requirements[v.requirement].text(m);
            let inject = Time(m.period.0 * u64::from(v.inject_step));
            let class = if row.uncorrectable {
                " (no throttle policy can correct this fault)"
            } else {
                ""
            };
            let _ = writeln!(o, "violated: {req}{class}");
            match (v.second_step, row.faults.as_slice()) {
                (Some(second), [a, b]) => {
                    let at2 = Time(m.period.0 * u64::from(second));
                    let _ = writeln!(
                        o,
                        "  fault {} injected at {}, then {} at {}",
                        describe(m, a),
                        secs(inject),
                        describe(m, b),
                        secs(at2)
                    );
                }
                _ => {
                    let _ = writeln!(
                        o,
                        "  fault {} injected at {}",
                        row.describe(m),
                        secs(inject)
                    );
                }
            }
            let start = v.pedal.get(v.inject_step as usize).copied().unwrap_or(0.0);
            let last = v.pedal.last().copied().unwrap_or(0.0);
            let _ = writeln!(
                o,
                "  driver at {} % then at {} % by {} ({} periods of pedal moves)",
                trim(start),
                trim(last),
                secs(v.at),
                v.pedal.len()
            );
            let digits = telling_digits(v.opening, v.bound);
            let _ = writeln!(
                o,
                "  opening {:.*} % at {} where the bound is {:.*} %",
                digits,
                v.opening,
                secs(v.at),
                digits,
                v.bound
            );
        }
    }
    o
}

/// The limit a requirement's nearest approach is measured against (see
/// [`super::search::FaultResult::nearest`]), and the unit both are in.
fn limit(m: &Model, r: &super::Requirement) -> (f64, &'static str) {
    match *r {
        super::Requirement::Excess { steps, .. } => {
            (Time(m.period.0 * u64::from(steps)).as_ms_f64(), "ms")
        }
        super::Requirement::Never { above, .. } => (above, "%"),
        super::Requirement::Idle { idle, .. } => (idle, "%"),
    }
}

/// How near the exact replays came to breaking requirement `ri` of a row, against its limit:
/// `89.97 % (limit 90 %)`, or a dash when no replay met the requirement's condition.
pub fn nearest(m: &Model, p: &Proof, row: &Row, ri: usize) -> String {
    let near = row
        .result
        .nearest
        .get(ri)
        .and_then(|n| n.as_ref())
        .map(|n| n.value);
    match near {
        None => "-".into(),
        Some(x) => {
            let (lim, unit) = limit(m, &p.requirements[ri]);
            let d = if unit == "ms" {
                0
            } else {
                telling_digits(x, lim)
            };
            format!("{x:.d$} {unit} (limit {} {unit})", trim(lim))
        }
    }
}

/// The unresolved cells, one line per row: how many candidates each met, and how near the
/// exact replays came. Empty when there are none.
pub fn unresolved(m: &Model, p: &Proof) -> String {
    let mut o = String::new();
    for row in &p.rows {
        let cells: Vec<String> = (0..p.requirements.len())
            .filter(|&ri| row.verdict(ri) == super::Verdict::Unresolved)
            .map(|ri| {
                format!(
                    "{} {} candidate(s), nearest replay {}",
                    p.requirements[ri].short(),
                    row.result.unconfirmed[ri],
                    nearest(m, p, row, ri)
                )
            })
            .collect();
        if !cells.is_empty() {
            let _ = writeln!(o, "  {}: {}", row.describe(m), cells.join("; "));
        }
    }
    if o.is_empty() {
        o
    } else {
        format!(
            "unresolved cells: candidates no exact replay confirmed, and the nearest an exact replay of this fault came to breaking the requirement (the highest opening where it applies, or the longest excess)\n{o}"
        )
    }
}

/// Enough decimals (2 to 6) to tell `a` from `b` in print: a plate settling onto its bound
/// from above breaks it by less than a hundredth of a percent.
fn telling_digits(a: f64, b: f64) -> usize {
    (2..=6)
        .find(|&d| format!("{a:.d$}") != format!("{b:.d$}"))
        .unwrap_or(6)
}

fn secs(t: Time) -> String {
    format!("{} s", trim(t.as_secs_f64()))
}

pub fn text(m: &Model, p: &Proof) -> String {
    let mut o = String::new();
    o.push_str(&prepass(m, p));
    o.push('\n');
    let mut rows = vec![headers(p)];
    rows.extend(p.rows.iter().map(|r| cells(m, p, r)));
    o.push_str("reaction matrix\n");
    o.push_str(&table(&rows, false));
    o.push('\n');
    let st = stories(m, p);
    if !st.is_empty() {
        o.push_str(&st);
        o.push('\n');
    }
    let un = unresolved(m, p);
    if !un.is_empty() {
        o.push_str(&un);
        o.push('\n');
    }
    o.push_str(&summary(m, p));
    o
}

pub fn summary(m: &Model, p: &Proof) -> String {
    let mut o = String::new();
    for (ri, r) in p.requirements.iter().enumerate() {
        let bad: Vec<&Row> = p
            .rows
            .iter()
            .filter(|row| row.result.violations.iter().any(|v| v.requirement == ri))
            .collect();
        let correctable = bad.iter().filter(|r| !r.uncorrectable).count();
        let count = |v: super::Verdict| p.rows.iter().filter(|r| r.verdict(ri) == v).count();
        let (bound, unresolved) = (
            count(super::Verdict::Inconclusive),
            count(super::Verdict::Unresolved),
        );
        let verdict = if correctable > 0 {
            format!("VIOLATED by {correctable} fault set(s)")
        } else if p.pre_truncated || bound > 0 {
            "inconclusive (a bound was hit)".into()
        } else if unresolved > 0 {
            format!("unresolved for {unresolved} fault set(s) (unconfirmed candidates)")
        } else {
            "holds".into()
        };
        let mut extra = if bad.len() > correctable {
            format!(
                "; violated by {} uncorrectable actuator fault(s)",
                bad.len() - correctable
            )
        } else {
            String::new()
        };
        if correctable > 0 {
            // What the other fault sets say of it.
            let holds = count(super::Verdict::Holds);
            let _ = write!(
                extra,
                "; holds for {holds}, unresolved for {unresolved}, bound hit for {bound}"
            );
        }
        let _ = writeln!(o, "{}: {verdict}{extra}", r.text(m));
    }
    if p.pre_truncated {
        let _ = writeln!(
            o,
            "bound hit: the fault-free set exceeded --max-states {}",
            p.config.max_states
        );
    }
    let bounded: Vec<&Row> = p.rows.iter().filter(|r| r.bound_hit(p)).collect();
    let truncated = bounded.len();
    if truncated > 0 {
        let depths = bounded.iter().filter_map(|r| r.result.searched_to);
        let (lo, hi) = depths.fold((u32::MAX, 0), |(lo, hi), d| (lo.min(d), hi.max(d)));
        let at = |s: u32| ms(Some(Time(m.period.0 * u64::from(s))));
        let span = if lo >= hi {
            at(hi)
        } else {
            format!("{}-{}", at(lo).trim_end_matches(" ms"), at(hi))
        };
        let _ = writeln!(
            o,
            "bound hit: {truncated} fault search(es) exceeded --max-states {} before closing; they searched every drive only to {span} after the injection (column 'searched'), so their figures cover only that much of the {} horizon",
            p.config.max_states, p.config.horizon
        );
    }
    let (cells, candidates) = p.rows.iter().fold((0, 0), |(c, n), r| {
        (0..p.requirements.len())
            .filter(|&ri| r.verdict(ri) == super::Verdict::Unresolved)
            .fold((c, n), |(c, n), ri| (c + 1, n + r.result.unconfirmed[ri]))
    });
    if cells > 0 {
        let _ = writeln!(
            o,
            "unresolved: {cells} cell(s) met {candidates} candidate violation(s) that no exact replay confirmed (states merged at the {} % resolution; the first 64 and up to --screen {} more per requirement replayed); neither held nor violated: a larger --screen may confirm some, a finer --resolution may decide them",
            trim(p.config.resolution),
            p.config.screen
        );
    }
    let _ = writeln!(o, "{}", coverage(m, p));
    o.push_str(
        "matrix figures are estimates over the stored states; VIOLATED cells are exact replays.\n",
    );
    o.push_str("limpet is a design aid, not a safety case: these verdicts hold for this model, catalogue, grid and horizon only.\n");
    o
}

pub fn markdown(m: &Model, p: &Proof) -> String {
    let mut o = format!("## Reaction matrix: `{}`\n\n", m.name);
    let mut rows = vec![headers(p)];
    rows.extend(p.rows.iter().map(|r| cells(m, p, r)));
    o.push_str(&table(&rows, true));
    o.push('\n');
    for line in summary(m, p).lines() {
        let _ = writeln!(o, "- {line}");
    }
    o
}

pub fn json(m: &Model, p: &Proof) -> String {
    let rows: Vec<serde_json::Value> = p
        .rows
        .iter()
        .map(|row| {
            let r = &row.result;
            serde_json::json!({
                "fault": row.describe(m),
                "injections": row.faults,
                "seen_by": row.seen_by.iter().map(|&f| &m.faults[f].name).collect::<Vec<_>>(),
                "uncorrectable": row.uncorrectable,
                "detected_by": r.monitors.iter().map(|&f| &m.faults[f].name).collect::<Vec<_>>(),
                "worst_detection_ms": r.worst_detection.map(|t| t.as_ms_f64()),
                "undetected_branch": r.undetected_branch,
                "ends_in": r.end_modes.iter().map(|&x| &m.modes[x].name).collect::<Vec<_>>(),
                "to_safe_ms": r.to_safe.map(|t| t.as_ms_f64()),
                "worst_excess": crate::sim::trace::round6(r.worst_excess),
                "worst_excess_duration_ms": r.worst_excess_duration.as_ms_f64(),
                "worst_opening_below_ceiling": crate::sim::trace::round6(r.worst_opening_below_ceiling),
                "worst_release_to_idle_ms": r.worst_idle_after_release.as_ms_f64(),
                "states": r.states,
                "faulty_states": r.faulty_states,
                "injection_instants": r.roots,
                "truncated": r.truncated,
                "settled_early": r.settled_early,
                "probe_drives": r.probes,
                "searched_to_ms": r.searched_to.map(|s| Time(m.period.0 * u64::from(s)).as_ms_f64()),
                "settled_branches": r.settled,
                "verdicts": verdicts(p, row),
                "unconfirmed_candidates": r.unconfirmed,
                "nearest_replay": r.nearest.iter().map(|n| n.as_ref().map(|n| crate::sim::trace::round6(n.value))).collect::<Vec<_>>(),
                "violations": r.violations.iter().map(|v| serde_json::json!({
                    "requirement": p.requirements[v.requirement].text(m),
                    "at": v.at.as_secs_f64(),
                    "opening": crate::sim::trace::round6(v.opening),
                    "bound": crate::sim::trace::round6(v.bound),
                })).collect::<Vec<_>>(),
            })
        })
        .collect();
    let v = serde_json::json!({
        "policy": m.name,
        "config": {
            "grid": p.config.grid,
            "resolution": p.config.resolution,
            "horizon_ms": p.config.horizon.as_ms_f64(),
            "max_states": p.config.max_states,
            "free_pedal": p.config.free_pedal,
            "screen": p.config.screen,
            "exact_twin": p.config.exact_twin,
        },
        "requirements": p.requirements.iter().map(|r| r.text(m)).collect::<Vec<_>>(),
        "pre_fault_states": p.pre_states,
        "states": p.states,
        "violated": p.violated(),
        "inconclusive": p.inconclusive(),
        "rows": rows,
    });
    format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
}

/// A violation as a scenario script that `limpet run --policy POLICY FILE` replays.
pub fn script(
    m: &Model,
    p: &Proof,
    row: &Row,
    v: &Violation,
    name: &str,
    policy_path: &str,
) -> String {
    let req = p.requirements[v.requirement].text(m);
    let mut o = String::new();
    let _ = writeln!(
        o,
        "# Counterexample from limpet prove: {} breaks `{req}`.",
        row.describe(m)
    );
    // The bound, rounded towards the side the opening broke it on, so the replay fails there.
    let x = (v.bound * 100.0).floor() / 100.0;
    let drive = Drive {
        pedal: &v.pedal,
        inject_step: v.inject_step,
        second_step: v.second_step,
        at: v.at,
    };
    drive.write(m, row, name, policy_path, x, &mut o);
    o
}

/// The drive that came nearest to breaking requirement `ri` of a row without breaking it
/// (see [`super::search::FaultResult::nearest`]), as a script for `limpet run`: a reviewer
/// replays it to see how close an unresolved cell's exact replays came. Its expectation holds:
/// the opening at that instant, rounded up to a hundredth.
pub fn near_script(
    m: &Model,
    p: &Proof,
    row: &Row,
    ri: usize,
    near: &super::search::NearMiss,
    name: &str,
    policy_path: &str,
) -> String {
    let req = &p.requirements[ri];
    let mut o = String::new();
    let _ = writeln!(
        o,
        "# Near miss from limpet prove: {} comes within reach of `{}` without breaking it.",
        row.describe(m),
        req.text(m)
    );
    let _ = writeln!(
        o,
        "# {}: {} at {}, against the fault-free vehicle driven the same way.",
        match req {
            super::Requirement::Excess { .. } => "longest excess",
            _ => "highest opening where it applies",
        },
        nearest(m, p, row, ri),
        near.at
    );
    let drive = Drive {
        pedal: &near.pedal,
        inject_step: near.inject_step,
        second_step: near.second_step,
        at: near.at,
    };
    drive.write(
        m,
        row,
        name,
        policy_path,
        (near.opening * 100.0).ceil() / 100.0,
        &mut o,
    );
    o
}

/// A drive from key on to instant `at`: the pedal, one grid value per controller period, and
/// the steps the faults arrive at.
struct Drive<'a> {
    pedal: &'a [f64],
    inject_step: u32,
    second_step: Option<u32>,
    at: Time,
}

impl Drive<'_> {
    /// Writes the drive as scenario `name` of the policy at `policy_path`, the faults' `break`s
    /// at their steps, with one expectation: the opening at most `x` % at `at`.
    fn write(&self, m: &Model, row: &Row, name: &str, policy_path: &str, x: f64, o: &mut String) {
        let _ = writeln!(
            o,
            "# The driver's pedal moves on the prover's grid, one value per controller period."
        );
        let _ = writeln!(o, "scenario {name} {{");
        let _ = writeln!(o, "  policy \"{policy_path}\"");
        let _ = writeln!(o, "  length {}", self.at + m.period);
        let _ = writeln!(o);
        let mut last: Option<f64> = None;
        for (k, &p) in self.pedal.iter().enumerate() {
            let at = Time(m.period.0 * k as u64);
            for (n, inj) in row.faults.iter().enumerate() {
                let step = match (n, self.second_step) {
                    (0, _) | (_, None) => self.inject_step,
                    (_, Some(s)) => s,
                };
                if k == step as usize {
                    let _ = writeln!(o, "  at {:<9} break {}", at.to_string(), describe(m, inj));
                }
            }
            if last != Some(p) {
                let _ = writeln!(o, "  at {:<9} pedal {} %", at.to_string(), trim(p));
                last = Some(p);
            }
        }
        let _ = writeln!(o);
        let _ = writeln!(
            o,
            "  expect opening at most {} % from {} to {}",
            trim(x),
            self.at,
            self.at
        );
        let _ = writeln!(o, "}}");
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stories_print_enough_decimals_to_show_the_breach() {
        assert_eq!(telling_digits(12.0, 8.0), 2);
        assert_eq!(telling_digits(8.004, 8.0), 3);
        assert_eq!(telling_digits(8.000_01, 8.0), 5);
        assert_eq!(telling_digits(8.0, 8.0), 6);
    }
}
