//! Diagnostics: a severity, a span, a message, a label and a hint, rendered like a compiler's
//! (path:line:col, the source line, a caret). The rendering crate appears only here.

use crate::lang::Span;
use codespan_reporting::diagnostic::{Diagnostic as CsDiagnostic, Label, Severity as CsSeverity};
use codespan_reporting::files::SimpleFile;
use codespan_reporting::term::{self, Config};
use serde::Serialize;

#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    Error,
    Warning,
    Note,
}

/// One finding about an input file, with everything needed to render it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Diagnostic {
    pub severity: Severity,
    /// Stable short name of the kind of problem, e.g. `unknown-name`.
    pub code: &'static str,
    pub message: String,
    pub span: Span,
    /// Text under the caret.
    pub label: String,
    /// What to do about it; empty for none.
    pub hint: String,
    /// Further places that matter, each with its own label.
    pub related: Vec<(Span, String)>,
}

impl Diagnostic {
    pub fn error(code: &'static str, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Error,
            code,
            message: message.into(),
            span,
            label: String::new(),
            hint: String::new(),
            related: Vec::new(),
        }
    }

    pub fn warning(code: &'static str, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Warning,
            ..Diagnostic::error(code, span, message)
        }
    }

    pub fn with_label(mut self, label: impl Into<String>) -> Diagnostic {
        self.label = label.into();
        self
    }

    pub fn with_hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hint = hint.into();
        self
    }

    pub fn with_related(mut self, span: Span, label: impl Into<String>) -> Diagnostic {
        self.related.push((span, label.into()));
        self
    }

    /// A line given twice where one is allowed (`period`, `length`, ...).
    pub fn duplicate_item(what: &str, span: Span, first: Span) -> Diagnostic {
        Diagnostic::error("duplicate-item", span, format!("`{what}` is given twice"))
            .with_label("given again here")
            .with_related(first, "first given here")
            .with_hint(format!("keep one `{what}` line"))
    }

    /// A required line that is absent, with an example of it.
    pub fn missing_item(span: Span, what: &str, label: String, example: &str) -> Diagnostic {
        Diagnostic::error("missing-item", span, format!("{what} is missing"))
            .with_label(label)
            .with_hint(format!("add a line such as `{example}`"))
    }

    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }
}

/// Renders diagnostics without colour, at a fixed layout, so output does not depend on the
/// terminal.
pub fn render(path: &str, source: &str, diags: &[Diagnostic]) -> String {
    let file = SimpleFile::new(path, source);
    let config = Config::default();
    let mut out = String::new();
    for d in diags {
        let sev = match d.severity {
            Severity::Error => CsSeverity::Error,
            Severity::Warning => CsSeverity::Warning,
            Severity::Note => CsSeverity::Note,
        };
        let clamp = |s: Span| {
            let end = s.end.min(source.len());
            let start = s.start.min(end);
            start..end
        };
        let mut labels = vec![Label::primary((), clamp(d.span)).with_message(d.label.clone())];
        for (s, l) in &d.related {
            labels.push(Label::secondary((), clamp(*s)).with_message(l.clone()));
        }
        let mut cs = CsDiagnostic::new(sev)
            .with_code(d.code)
            .with_message(d.message.clone())
            .with_labels(labels);
        if !d.hint.is_empty() {
            cs = cs.with_notes(vec![format!("hint: {}", d.hint)]);
        }
        let mut buf = String::new();
        if term::emit_to_string(&mut buf, &config, &file, &cs).is_err() {
            buf = format!("{}: {}: {}\n", path, d.code, d.message);
        }
        out.push_str(&buf);
    }
    out
}

/// The closest of `candidates` to a misspelt `name`, for "did you mean" hints.
pub fn did_you_mean<'a>(
    name: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<&'a str> {
    let mut best: Option<(usize, &str)> = None;
    for c in candidates {
        let d = strsim::damerau_levenshtein(name, c);
        let limit = (name.len().max(c.len()) / 3).max(1);
        if d <= limit && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    best.map(|(_, c)| c)
}

/// `path:line:col` of a byte offset (1-based line and column, column in characters).
pub fn location(path: &str, source: &str, offset: usize) -> String {
    let offset = offset.min(source.len());
    let before = &source[..source.floor_char_boundary(offset)];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    format!("{path}:{line}:{col}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn did_you_mean_finds_near_names() {
        assert_eq!(
            did_you_mean("reduced_powr", ["normal", "reduced_power"]),
            Some("reduced_power")
        );
        assert_eq!(did_you_mean("xyz", ["normal", "reduced_power"]), None);
    }

    #[test]
    fn location_counts_lines_and_columns() {
        assert_eq!(location("f", "ab\ncd", 4), "f:2:2");
        assert_eq!(location("f", "ab", 0), "f:1:1");
    }
}
