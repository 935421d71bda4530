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
