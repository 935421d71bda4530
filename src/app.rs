//! The commands behind the binary: each takes resolved options and returns what to print and
//! the exit status, so that the binary stays a thin shell and tests can call commands directly.

use crate::diag::{self, Diagnostic, Severity};
use crate::model::{self, Model};
use serde::Serialize;

/// Exit statuses shared by every command.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum Exit {
    /// Everything holds.
    Holds = 0,
    /// A finding, a failed expectation or a violated requirement.
    Finding = 1,
    /// Unreadable input or bad usage.
    BadInput = 2,
    /// A bound was hit before a verdict.
    Inconclusive = 3,
}

/// What a command prints and how it exits.
#[derive(Debug)]
pub struct Outcome {
    pub stdout: String,
    pub stderr: String,
    pub exit: Exit,
}

impl Outcome {
    pub fn bad_input(stderr: String) -> Outcome {
        Outcome {
            stdout: String::new(),
            stderr,
            exit: Exit::BadInput,
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Format {
    #[default]
    Text,
    Json,
    Markdown,
    Dot,
    Csv,
    Vcd,
    Svg,
}

/// A source file as read, with the name it is shown under.
pub struct Source {
    pub path: String,
    pub text: String,
}

impl Source {
    pub fn read(path: &str) -> Result<Source, String> {
        let bytes =
            std::fs::read(path).map_err(|e| format!("error: cannot read `{path}`: {e}\n"))?;
        // A policy is text; invalid UTF-8 is reported, not guessed at.
        let text = String::from_utf8(bytes).map_err(|e| {
            format!(
                "error: `{path}` is not UTF-8 text (invalid byte at offset {})\n",
                e.utf8_error().valid_up_to()
            )
        })?;
        Ok(Source {
            path: path.to_string(),
            text,
        })
    }
}

/// Reads and lowers a policy: the model plus its warnings, or the rendered errors.
pub fn load_policy(path: &str) -> Result<(Source, Model, Vec<Diagnostic>), String> {
    let src = Source::read(path)?;
    let (m, diags) = model::load(&src.text);
    match m {
        Some(m) => Ok((src, m, diags)),
        None => Err(diag::render(&src.path, &src.text, &diags)),
    }
}

#[derive(Serialize)]
struct JsonFinding<'a> {
    severity: Severity,
    kind: &'a str,
    message: &'a str,
    location: String,
    line: usize,
    column: usize,
    hint: &'a str,
}

fn line_col(src: &str, offset: usize) -> (usize, usize) {
    let before = &src[..src.floor_char_boundary(offset.min(src.len()))];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// `limpet check`: parse, lower and analyse a policy.
pub fn check(path: &str, format: Format, deny_warnings: bool) -> Outcome {
    let src = match Source::read(path) {
        Ok(s) => s,
        Err(e) => return Outcome::bad_input(e),
    };
    let (m, mut diags) = model::load(&src.text);
    let Some(m) = m else {
        return Outcome::bad_input(diag::render(&src.path, &src.text, &diags));
    };
    diags.extend(crate::analysis::findings(&m));
    if deny_warnings {
        for d in &mut diags {
            if d.severity == Severity::Warning {
                d.severity = Severity::Error;
            }
        }
    }
    // Grouped by severity, in source order within each group.
    diags.sort_by(|a, b| {
        a.severity
            .cmp(&b.severity)
            .then(a.span.start.cmp(&b.span.start))
    });
    let errors = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .count();
    let warnings = diags
        .iter()
        .filter(|d| d.severity == Severity::Warning)
        .count();
    let summary = format!(
        "{}: {} error{}, {} warning{} ({} modes, {} faults, {} transitions)",
        m.name,
        errors,
        if errors == 1 { "" } else { "s" },
        warnings,
        if warnings == 1 { "" } else { "s" },
        m.modes.len(),
        m.faults.len(),
        m.transitions.len()
    );
    let stdout = match format {
        Format::Json => {
            let findings: Vec<JsonFinding> = diags
                .iter()
                .map(|d| {
                    let (line, column) = line_col(&src.text, d.span.start);
                    JsonFinding {
                        severity: d.severity,
                        kind: d.code,
                        message: &d.message,
                        location: format!("{}:{line}:{column}", src.path),
                        line,
                        column,
                        hint: &d.hint,
                    }
                })
                .collect();
            let v = serde_json::json!({
                "policy": m.name,
                "path": src.path,
                "errors": errors,
                "warnings": warnings,
                "findings": findings,
                "summary": summary,
            });
            format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
        }
        _ => {
            let mut out = diag::render(&src.path, &src.text, &diags);
            out.push_str(&summary);
            out.push('\n');
            out
        }
    };
    Outcome {
        stdout,
        stderr: String::new(),
        exit: if errors > 0 {
            Exit::Finding
        } else {
            Exit::Holds
        },
    }
}

/// `limpet graph`: the mode graph as DOT or JSON.
pub fn graph(path: &str, format: Format) -> Outcome {
    let (_, m, _) = match load_policy(path) {
        Ok(x) => x,
        Err(e) => return Outcome::bad_input(e),
    };
    let stdout = match format {
        Format::Json => crate::report::graph::json(&m),
        Format::Dot | Format::Text => crate::report::graph::dot(&m),
        other => {
            return Outcome::bad_input(format!(
                "error: `graph` writes dot or json, not {other:?}\n  = hint: use --format dot or --format json\n"
            ));
        }
    };
    Outcome {
        stdout,
        stderr: String::new(),
        exit: Exit::Holds,
    }
}
/// Options of `limpet run`, resolved from the flags.
#[derive(Clone, Debug, Default)]
pub struct RunConfig {
    /// Overrides the policy path each script names.
    pub policy: Option<String>,
    pub sample_every: Option<crate::time::Time>,
    pub format: Format,
    /// Print only the verdicts.
    pub quiet: bool,
}

/// A scenario read, resolved against its policy, and replayed.
pub struct Replay {
    pub scenario: Source,
    pub model: Model,
    /// The script as resolved, for views that need its expectations.
    pub script: crate::sim::script::Script,
    pub trace: crate::sim::trace::Trace,
}

/// Reads a scenario and its policy (relative to the scenario file unless overridden),
/// resolves and replays it. Errors come rendered, ready for standard error.
pub fn replay(
    path: &str,
    policy_override: Option<&str>,
    opts: crate::sim::engine::RunOptions,
) -> Result<Replay, String> {
    let src = Source::read(path)?;
    let (ast, diags) = crate::lang::scenario::parse(&src.text);
    let Some(ast) = ast else {
        return Err(diag::render(&src.path, &src.text, &diags));
    };
    let policy_path = match policy_override {
        Some(p) => p.to_string(),
        None => {
            let written = ast.items.iter().find_map(|i| match i {
                crate::lang::scenario::Item::Policy { path, .. } => Some(path.value.clone()),
                _ => None,
            });
            let Some(written) = written else {
                let d = Diagnostic::error(
                    "missing-item",
                    ast.name.span,
                    "the scenario names no policy",
                )
                .with_label("needs `policy \"FILE\"`")
                .with_hint(
                    "add `policy \"van_throttle.limp\"` (relative to this file), or pass --policy",
                );
                return Err(diag::render(&src.path, &src.text, &[d]));
            };
            let base = std::path::Path::new(path)
                .parent()
                .unwrap_or(std::path::Path::new(""));
            base.join(written).to_string_lossy().into_owned()
        }
    };
    let (_, model, _) = load_policy(&policy_path)?;
    let script = crate::sim::script::resolve(&ast, &model)
        .map_err(|d| diag::render(&src.path, &src.text, &d))?;
    let trace = crate::sim::engine::run(&model, &script, opts)
        .map_err(|e| format!("error: the actuator figures of `{policy_path}` give no usable throttle-body model: {e}\n"))?;
    Ok(Replay {
        scenario: src,
        model,
        script,
        trace,
    })
}

/// `limpet run`: replays each script; exit 1 when any expectation fails.
pub fn run(paths: &[String], cfg: &RunConfig) -> Outcome {
    let mut opts = crate::sim::engine::RunOptions::default();
    if let Some(s) = cfg.sample_every {
        opts.sample_every = s;
    }
    let mut stdout = String::new();
    let mut stderr = String::new();
    let mut exit = Exit::Holds;
    for p in paths {
        let r = match replay(p, cfg.policy.as_deref(), opts) {
            Ok(r) => r,
            Err(e) => {
                stderr.push_str(&e);
                exit = exit.max(Exit::BadInput);
                continue;
            }
        };
        if !r.trace.passed() {
            exit = exit.max(Exit::Finding);
        }
        match cfg.format {
            Format::Json => stdout.push_str(&r.trace.to_json()),
            Format::Csv => stdout.push_str(&r.trace.to_csv()),
            Format::Vcd => stdout.push_str(&crate::report::vcd::write(&r.trace)),
            Format::Svg => {
                stdout.push_str(&crate::report::plot::svg(&r.trace, &r.script.expectations))
            }
            _ => {
                stdout.push_str(&r.trace.to_text(cfg.quiet));
                if paths.len() > 1 {
                    stdout.push('\n');
                }
            }
        }
    }
    Outcome {
        stdout,
        stderr,
        exit,
    }
}

/// Options of `limpet prove`.
#[derive(Clone, Debug, Default)]
pub struct ProveConfig {
    pub search: crate::prove::Config,
    pub format: Format,
    /// Where counterexample scripts go.
    pub counterexamples: Option<String>,
    /// Show a progress bar (on a terminal).
    pub progress: bool,
}

/// Path of `target` relative to directory `from` (both relative to the working directory or
/// both absolute), for the `policy "..."` line of a written script.
fn relative_to(target: &std::path::Path, from: &std::path::Path) -> String {
    use std::path::Component;
    let abs = |p: &std::path::Path| -> std::path::PathBuf {
        let p = if p.is_absolute() {
            p.to_path_buf()
        } else {
            std::env::current_dir().unwrap_or_default().join(p)
        };
        let mut out = std::path::PathBuf::new();
        for c in p.components() {
            match c {
                Component::ParentDir => {
                    out.pop();
                }
                Component::CurDir => {}
                other => out.push(other),
            }
        }
        out
    };
    let (t, f) = (abs(target), abs(from));
    let tc: Vec<_> = t.components().collect();
    let fc: Vec<_> = f.components().collect();
    let common = tc.iter().zip(&fc).take_while(|(a, b)| a == b).count();
    let mut rel = std::path::PathBuf::new();
    for _ in common..fc.len() {
        rel.push("..");
    }
    for c in &tc[common..] {
        rel.push(c);
    }
    rel.to_string_lossy().replace('\\', "/")
}

/// Writes a file atomically: a temporary file beside it, then a rename.
pub fn write_atomically(path: &std::path::Path, text: &str) -> std::io::Result<()> {
    let dir = path.parent().unwrap_or(std::path::Path::new("."));
    let name = path
        .file_name()
        .map_or("out".into(), |n| n.to_string_lossy().into_owned());
    let tmp = dir.join(format!(".{name}.limpet-{}.tmp", std::process::id()));
    std::fs::write(&tmp, text)?;
    std::fs::rename(&tmp, path).inspect_err(|_| {
        let _ = std::fs::remove_file(&tmp);
    })
}

/// `limpet prove`: exhaustive fault search. Exit 0 all hold, 1 violated, 3 a bound was hit.
pub fn prove(path: &str, cfg: &ProveConfig) -> Outcome {
    let (_, m, _) = match load_policy(path) {
        Ok(x) => x,
        Err(e) => return Outcome::bad_input(e),
    };
    if m.assure.is_none() {
        return Outcome::bad_input(format!(
            "error: `{path}` has no `assure` block: there is nothing to prove\n  = hint: add e.g. `assure {{ faults single  excess below 5 % within 200 ms }}`\n"
        ));
    }
    let started = std::time::Instant::now();
    let bar = if cfg.progress {
        let b = indicatif::ProgressBar::new(0);
        b.set_style(
            indicatif::ProgressStyle::with_template("{bar:30} {pos}/{len} fault sets, {msg}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        Some(b)
    } else {
        None
    };
    let progress = |done: usize, total: usize, states: usize| {
        if let Some(b) = &bar {
            b.set_length(total as u64);
            b.set_position(done as u64);
            let secs = started.elapsed().as_secs_f64().max(1e-3);
            b.set_message(format!(
                "{states} states, {:.0} states/s",
                states as f64 / secs
            ));
        }
    };
    let proof = match crate::prove::prove(&m, &cfg.search, &progress) {
        Ok(p) => p,
        Err(e) => {
            return Outcome::bad_input(format!(
                "error: the actuator figures give no usable throttle-body model: {e}\n"
            ));
        }
    };
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let wall = started.elapsed().as_secs_f64();
    let mut stdout = match cfg.format {
        Format::Json => crate::prove::report::json(&m, &proof),
        Format::Markdown => crate::prove::report::markdown(&m, &proof),
        _ => crate::prove::report::text(&m, &proof),
    };
    let mut stderr = format!(
        "wall time {wall:.2} s, {:.0} states/s\n",
        proof.states as f64 / wall.max(1e-9)
    );
    if let Some(dir) = &cfg.counterexamples {
        let dirp = std::path::Path::new(dir);
        if let Err(e) = std::fs::create_dir_all(dirp) {
            return Outcome::bad_input(format!("error: cannot create `{dir}`: {e}\n"));
        }
        let policy_rel = relative_to(std::path::Path::new(path), dirp);
        let mut n = 0;
        for (ri, row) in proof.rows.iter().enumerate() {
            for v in &row.result.violations {
                n += 1;
                let name = format!(
                    "cx{:03}_{}",
                    ri + 1,
                    proof.requirements[v.requirement].short()
                );
                let text = crate::prove::report::script(&m, &proof, row, v, &name, &policy_rel);
                let file = dirp.join(format!("{name}.scenario"));
                if let Err(e) = write_atomically(&file, &text) {
                    return Outcome::bad_input(format!(
                        "error: cannot write `{}`: {e}\n",
                        file.display()
                    ));
                }
            }
        }
        // The drives that came nearest where a cell is unresolved: what a reviewer replays
        // first to judge it.
        let mut near = 0;
        for (ri, row) in proof.rows.iter().enumerate() {
            for (qi, req) in proof.requirements.iter().enumerate() {
                let Some(nm) = row.result.nearest.get(qi).and_then(Option::as_ref) else {
                    continue;
                };
                if row.verdict(qi) != crate::prove::Verdict::Unresolved {
                    continue;
                }
                near += 1;
                let name = format!("near{:03}_{}", ri + 1, req.short());
                let text =
                    crate::prove::report::near_script(&m, &proof, row, qi, nm, &name, &policy_rel);
                let file = dirp.join(format!("{name}.scenario"));
                if let Err(e) = write_atomically(&file, &text) {
                    return Outcome::bad_input(format!(
                        "error: cannot write `{}`: {e}\n",
                        file.display()
                    ));
                }
            }
        }
        if cfg.format == Format::Text {
            stdout.push_str(&format!(
                "{n} counterexample script(s) and {near} near-miss script(s) (unresolved cells) written to {dir}\n"
            ));
        }
    }
    let exit = if proof.violated() {
        Exit::Finding
    } else if proof.inconclusive() {
        Exit::Inconclusive
    } else {
        Exit::Holds
    };
    if exit == Exit::Inconclusive {
        stderr.push_str("inconclusive: a bound was hit, or candidate violations stayed unconfirmed, before a verdict (see the summary)\n");
    }
    Outcome {
        stdout,
        stderr,
        exit,
    }
}
