//! `limpet diff`: what a revision of a policy changes, on the resolved model rather than the
//! text: structure and meaning (guards compared exactly, renames recognised), and with
//! scenarios or the prover, behaviour. Revisions come from files or from git (`REV:PATH`).

pub mod behaviour;
pub mod joint;
mod render;
pub mod structure;

use crate::app::{Exit, Format, Outcome};
use crate::model::Model;
use behaviour::{MatrixDiff, Names, ScenarioDiff};
use serde::Serialize;
use structure::Change;

/// Options of `limpet diff`, resolved from the flags.
#[derive(Clone, Debug, Default)]
pub struct DiffConfig {
    pub format: Format,
    /// Replay every `*.scenario` in this folder against both revisions.
    pub scenarios: Option<String>,
    /// Compare the reaction matrices, searched with these settings.
    pub prove: Option<crate::prove::Config>,
}

/// The search settings `--prove` uses: `limpet prove`'s defaults, so that a review runs in
/// seconds rather than the minute a complete proof takes, and its matrices are the ones
/// `prove` prints for each revision; the output states them. (A coarser pedal grid is no
/// cheaper: pedal jumps of a quarter of the travel per period set plausibility checks
/// pending all the time, and the fault-free set grows past the bound before it closes.)
pub fn review_search() -> crate::prove::Config {
    crate::prove::Config::default()
}

/// One revision, read and resolved.
pub struct Revision {
    /// As given on the command line: a path or `REV:PATH`.
    pub label: String,
    pub model: Model,
}

/// Everything the comparison found.
#[derive(Serialize)]
pub struct Report {
    pub old: String,
    pub new: String,
    pub changes: Vec<Change>,
    /// Guards or conditions whose comparison exceeded the bound of the guard reasoning.
    pub undecided: usize,
    pub scenarios_dir: Option<String>,
    pub scenarios: Vec<ScenarioDiff>,
    pub matrix: Option<MatrixDiff>,
}

impl Report {
    /// The revisions differ in some respect the comparison decided.
    pub fn differs(&self) -> bool {
        self.changes
            .iter()
            .any(|c| !matches!(c.comparison, Some(joint::Comparison::Undecided { .. })))
            || self.scenarios.iter().any(ScenarioDiff::differs)
            || self.matrix.as_ref().is_some_and(|m| !m.changed.is_empty())
    }
}

/// Reads a revision's text: a file, or `REV:PATH` through `git show` in the repository
/// around the working directory. A name that exists as a file is always the file.
pub fn read_text(spec: &str) -> Result<String, String> {
    if std::path::Path::new(spec).is_file() {
        return crate::app::Source::read(spec).map(|s| s.text);
    }
    let Some((rev, path)) = spec.split_once(':') else {
        return crate::app::Source::read(spec).map(|s| s.text);
    };
    if rev.is_empty() || path.is_empty() {
        return Err(format!(
            "error: `{spec}` is neither a file nor `REV:PATH`\n  = hint: write e.g. `HEAD~1:scenarios/van/van_throttle.limp`\n"
        ));
    }
    let out = std::process::Command::new("git")
        .arg("show")
        .arg(format!("{rev}:{path}"))
        .output()
        .map_err(|e| format!("error: cannot run git to read `{spec}`: {e}\n"))?;
    if !out.status.success() {
        let why = String::from_utf8_lossy(&out.stderr);
        return Err(format!(
            "error: git cannot show `{spec}`: {}\n",
            why.trim().lines().next().unwrap_or("unknown error")
        ));
    }
    String::from_utf8(out.stdout).map_err(|e| {
        format!(
            "error: `{spec}` is not UTF-8 text (invalid byte at offset {})\n",
            e.utf8_error().valid_up_to()
        )
    })
}

/// Reads and resolves a revision; errors come rendered.
pub fn load(spec: &str) -> Result<Revision, String> {
    let text = read_text(spec)?;
    let (m, diags) = crate::model::load(&text);
    match m {
        Some(model) => Ok(Revision {
            label: spec.to_string(),
            model,
        }),
        None => Err(crate::diag::render(spec, &text, &diags)),
    }
}

/// Compares two resolved revisions. Bad input (an unreadable scenario folder or script, a
/// model the prover cannot use) comes back as the rendered error.
pub fn compare(old: &Revision, new: &Revision, cfg: &DiffConfig) -> Result<Report, String> {
    let st = structure::compare(&old.model, &new.model);
    let names = Names {
        old: &old.model,
        new: &new.model,
        fault_map: &st.fault_map,
        mode_map: &st.mode_map,
    };
    let mut scenarios = Vec::new();
    if let Some(dir) = &cfg.scenarios {
        let rd = std::fs::read_dir(dir)
            .map_err(|e| format!("error: cannot read the scenario folder `{dir}`: {e}\n"))?;
        let mut paths: Vec<std::path::PathBuf> = rd
            .filter_map(|e| e.ok())
            .map(|e| e.path())
            .filter(|p| p.extension().is_some_and(|x| x == "scenario"))
            .collect();
        paths.sort();
        if paths.is_empty() {
            return Err(format!(
                "error: the folder `{dir}` holds no `*.scenario` file\n"
            ));
        }
        for p in paths {
            scenarios.push(behaviour::scenario(&p, &names).map_err(|u| u.0)?);
        }
    }
    let matrix = match &cfg.prove {
        Some(search) => {
            let quiet = |_: usize, _: usize, _: usize| {};
            let po = crate::prove::prove(&old.model, search, &quiet).map_err(|e| {
                format!("error: the old revision's actuator gives no throttle-body model: {e}\n")
            })?;
            let pn = crate::prove::prove(&new.model, search, &quiet).map_err(|e| {
                format!("error: the new revision's actuator gives no throttle-body model: {e}\n")
            })?;
            Some(behaviour::matrices(&po, &pn, &names))
        }
        None => None,
    };
    let undecided = st
        .changes
        .iter()
        .filter(|c| matches!(c.comparison, Some(joint::Comparison::Undecided { .. })))
        .count();
    Ok(Report {
        old: old.label.clone(),
        new: new.label.clone(),
        changes: st.changes,
        undecided,
        scenarios_dir: cfg.scenarios.clone(),
        scenarios,
        matrix,
    })
}

/// `limpet diff OLD NEW`: exit 0 when the revisions are equivalent, 1 when they differ, 2 on
/// bad input, 3 when the only differences are guards the bound left undecided.
pub fn run(old: &str, new: &str, cfg: &DiffConfig) -> Outcome {
    let (o, n) = match (load(old), load(new)) {
        (Ok(o), Ok(n)) => (o, n),
        (a, b) => {
            let mut e = String::new();
            for r in [a, b] {
                if let Err(x) = r {
                    e.push_str(&x);
                }
            }
            return Outcome::bad_input(e);
        }
    };
    let report = match compare(&o, &n, cfg) {
        Ok(r) => r,
        Err(e) => return Outcome::bad_input(e),
    };
    let stdout = match cfg.format {
        Format::Text => render::text(&report),
        Format::Markdown => render::markdown(&report),
        Format::Json => render::json(&report),
        other => {
            return Outcome::bad_input(format!(
                "error: `diff` writes text, markdown or json, not {other:?}\n  = hint: use --format markdown for a pull-request comment\n"
            ));
        }
    };
    let exit = if report.differs() {
        Exit::Finding
    } else if report.undecided > 0 {
        Exit::Inconclusive
    } else {
        Exit::Holds
    };
    Outcome {
        stdout,
        stderr: String::new(),
        exit,
    }
}
