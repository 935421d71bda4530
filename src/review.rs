//! `limpet review DIR`: check, every scenario and the proof over one policy folder, a terminal
//! summary, and one self-contained HTML page (inline SVG and CSS, no network resources) that a
//! reviewer reads: header, cautions, findings, mode graph, reaction matrix, counterexamples
//! and scenarios.

use crate::app::{self, Exit, Format, Outcome};
use crate::model::Model;
use crate::report::html::{Counterexample, Finding, Page, ScenarioView};
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

/// Options of `limpet review`.
#[derive(Clone, Debug, Default)]
pub struct ReviewConfig {
    pub dir: String,
    /// The HTML file; `DIR/review.html` when `None`.
    pub output: Option<String>,
    pub search: crate::prove::Config,
    /// Show progress bars (on a terminal).
    pub progress: bool,
}

/// The inputs found in a review folder.
#[derive(Debug, PartialEq)]
pub struct Inputs {
    pub policy: PathBuf,
    /// Sorted by file name, so the page does not depend on directory order.
    pub scenarios: Vec<PathBuf>,
}

/// Finds the one policy and the scenarios of `dir`.
pub fn inputs(dir: &Path) -> Result<Inputs, String> {
    let rd = std::fs::read_dir(dir)
        .map_err(|e| format!("error: cannot read folder `{}`: {e}\n", dir.display()))?;
    let mut policies = Vec::new();
    let mut scenarios = Vec::new();
    for entry in rd.flatten() {
        let p = entry.path();
        if !p.is_file() {
            continue;
        }
        match p.extension().and_then(|e| e.to_str()) {
            Some("limp") => policies.push(p),
            Some("scenario") => scenarios.push(p),
            _ => {}
        }
    }
    policies.sort();
    scenarios.sort();
    match policies.len() {
        1 => Ok(Inputs {
            policy: policies.remove(0),
            scenarios,
        }),
        0 => Err(format!(
            "error: `{}` holds no .limp policy\n  = hint: a review folder holds one policy and its .scenario files\n",
            dir.display()
        )),
        _ => Err(format!(
            "error: `{}` holds {} policies ({}); a review covers one\n  = hint: put each policy in its own folder with its scenarios\n",
            dir.display(),
            policies.len(),
            policies
                .iter()
                .map(|p| file_name(p))
                .collect::<Vec<_>>()
                .join(", ")
        )),
    }
}

fn file_name(p: &Path) -> String {
    p.file_name().map_or_else(
        || p.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    )
}

/// Refuses an output path that would overwrite an input: any `.limp`/`.scenario` name, or a
/// file that is one of the inputs under another spelling.
pub fn check_output(out: &Path, inputs: &Inputs) -> Result<(), String> {
    let ext = out
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase);
    if matches!(ext.as_deref(), Some("limp" | "scenario")) {
        return Err(format!(
            "error: refusing to write the review to `{}`: that names a policy or scenario file\n  = hint: write it to an .html file, e.g. -o review.html\n",
            out.display()
        ));
    }
    if let Ok(o) = out.canonicalize() {
        let same = std::iter::once(&inputs.policy)
            .chain(&inputs.scenarios)
            .any(|i| i.canonicalize().is_ok_and(|c| c == o));
        if same {
            return Err(format!(
                "error: refusing to write the review over the input `{}`\n",
                out.display()
            ));
        }
    }
    Ok(())
}

fn bar(progress: bool, len: u64, what: &str) -> Option<indicatif::ProgressBar> {
    progress.then(|| {
        let b = indicatif::ProgressBar::new(len);
        b.set_style(
            indicatif::ProgressStyle::with_template(&format!("{{bar:30}} {{pos}}/{{len}} {what}"))
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    })
}

/// `limpet review DIR`.
pub fn review(cfg: &ReviewConfig) -> Outcome {
    let dir = Path::new(&cfg.dir);
    let inp = match inputs(dir) {
        Ok(i) => i,
        Err(e) => return Outcome::bad_input(e),
    };
    let out_path = cfg
        .output
        .as_ref()
        .map_or_else(|| dir.join("review.html"), PathBuf::from);
    if let Err(e) = check_output(&out_path, &inp) {
        return Outcome::bad_input(e);
    }
    let policy = inp.policy.to_string_lossy().into_owned();

    // 1. check
    let checked = app::check(&policy, Format::Json, false);
    if checked.exit == Exit::BadInput {
        return checked;
    }
    let (src, model, _) = match app::load_policy(&policy) {
        Ok(x) => x,
        Err(e) => return Outcome::bad_input(e),
    };
    let findings = parse_findings(&checked.stdout, &src.text);
    let check_summary = serde_json::from_str::<serde_json::Value>(&checked.stdout)
        .ok()
        .and_then(|v| v["summary"].as_str().map(String::from))
        .unwrap_or_default();

    // 2. scenarios
    let b = bar(cfg.progress, inp.scenarios.len() as u64, "scenarios");
    let mut scenarios = Vec::new();
    for p in &inp.scenarios {
        let path = p.to_string_lossy().into_owned();
        let result = app::replay(
            &path,
            Some(&policy),
            crate::sim::engine::RunOptions::default(),
        )
        .map(|r| {
            let plot = crate::report::plot::svg(&r.trace, &r.script.expectations);
            (r.trace, plot)
        });
        scenarios.push(ScenarioView {
            file: file_name(p),
            result,
        });
        if let Some(b) = &b {
            b.inc(1);
        }
    }
    if let Some(b) = b {
        b.finish_and_clear();
    }

    // 3. prove
    let proof = if model.assure.is_some() {
        let b = bar(cfg.progress, 0, "fault sets");
        let progress = |done: usize, total: usize, _states: usize| {
            if let Some(b) = &b {
                b.set_length(total as u64);
                b.set_position(done as u64);
            }
        };
        let p = crate::prove::prove(&model, &cfg.search, &progress);
        if let Some(b) = b {
            b.finish_and_clear();
        }
        match p {
            Ok(p) => Some(p),
            Err(e) => {
                return Outcome::bad_input(format!(
                    "error: the actuator figures give no usable throttle-body model: {e}\n"
                ));
            }
        }
    } else {
        None
    };
    let counterexamples = proof
        .as_ref()
        .map(|p| counterexamples(&model, p, &file_name(&inp.policy)))
        .unwrap_or_default();

    // Exit status as for prove, with check and scenario results folded in.
    let bad_input = scenarios.iter().any(|s| s.result.is_err());
    let finding = checked.exit == Exit::Finding
        || scenarios
            .iter()
            .any(|s| s.result.as_ref().is_ok_and(|(t, _)| !t.passed()))
        || proof.as_ref().is_some_and(|p| p.violated());
    let inconclusive = proof.as_ref().is_some_and(|p| p.inconclusive());
    let exit = if bad_input {
        Exit::BadInput
    } else if finding {
        Exit::Finding
    } else if inconclusive {
        Exit::Inconclusive
    } else {
        Exit::Holds
    };

    let page = Page {
        model: &model,
        policy_file: &file_name(&inp.policy),
        policy_text: &src.text,
        check_summary: &check_summary,
        findings: &findings,
        scenarios: &scenarios,
        proof: proof.as_ref(),
        counterexamples: &counterexamples,
        exit,
    };
    let html = page.html();

    // Terminal summary.
    let mut stdout = String::new();
    let _ = writeln!(
        stdout,
        "review of {} ({})",
        model.name,
        inp.policy.display()
    );
    let _ = writeln!(stdout, "check: {check_summary}");
    for s in &scenarios {
        match &s.result {
            Ok((t, _)) => {
                let held = t.expectations.iter().filter(|v| v.passed).count();
                let _ = writeln!(
                    stdout,
                    "scenario {}: {} of {} expectations hold{}",
                    t.scenario,
                    held,
                    t.expectations.len(),
                    if t.passed() { "" } else { "  FAILED" }
                );
            }
            Err(_) => {
                let _ = writeln!(stdout, "scenario {}: could not be run", s.file);
            }
        }
    }
    match &proof {
        Some(p) => {
            for line in crate::prove::report::summary(&model, p).lines() {
                let _ = writeln!(stdout, "prove: {line}");
            }
        }
        None => {
            let _ = writeln!(stdout, "prove: no assure block, nothing proved");
        }
    }
    let mut stderr: String = scenarios
        .iter()
        .filter_map(|s| s.result.as_ref().err().cloned())
        .collect();
    if let Err(e) = app::write_atomically(&out_path, &html) {
        stderr.push_str(&format!(
            "error: cannot write `{}`: {e}\n",
            out_path.display()
        ));
        return Outcome {
            stdout,
            stderr,
            exit: Exit::BadInput,
        };
    }
    let _ = writeln!(stdout, "review written to {}", out_path.display());
    Outcome {
        stdout,
        stderr,
        exit,
    }
}

fn parse_findings(json: &str, src: &str) -> Vec<Finding> {
    let Ok(v) = serde_json::from_str::<serde_json::Value>(json) else {
        return Vec::new();
    };
    let s = |x: &serde_json::Value| x.as_str().unwrap_or_default().to_string();
    v["findings"]
        .as_array()
        .map(|fs| {
            fs.iter()
                .map(|f| {
                    let line = f["line"].as_u64().unwrap_or(0) as usize;
                    Finding {
                        severity: f["severity"]
                            .as_str()
                            .map_or_else(|| f["severity"].to_string(), String::from)
                            .to_lowercase(),
                        kind: s(&f["kind"]),
                        message: s(&f["message"]),
                        location: s(&f["location"]),
                        line_text: line
                            .checked_sub(1)
                            .and_then(|l| src.lines().nth(l))
                            .unwrap_or_default()
                            .to_string(),
                        hint: s(&f["hint"]),
                    }
                })
                .collect()
        })
        .unwrap_or_default()
}

/// Each violation as a script naming the policy by file name (it replays saved beside it),
/// replayed here for its plot.
fn counterexamples(m: &Model, p: &crate::prove::Proof, policy_file: &str) -> Vec<Counterexample> {
    let mut out = Vec::new();
    for (ri, row) in p.rows.iter().enumerate() {
        for v in &row.result.violations {
            let req = &p.requirements[v.requirement];
            let name = format!("cx{:03}_{}", ri + 1, req.short());
            let script = crate::prove::report::script(m, p, row, v, &name, policy_file);
            let plot = replay_text(m, &script);
            out.push(Counterexample {
                name,
                requirement: req.text(m),
                fault: row.describe(m),
                script,
                plot,
            });
        }
    }
    out
}

fn replay_text(m: &Model, text: &str) -> Result<String, String> {
    let (ast, diags) = crate::lang::scenario::parse(text);
    let ast = ast.ok_or_else(|| crate::diag::render("counterexample", text, &diags))?;
    let script = crate::sim::script::resolve(&ast, m)
        .map_err(|d| crate::diag::render("counterexample", text, &d))?;
    let trace = crate::sim::engine::run(m, &script, crate::sim::engine::RunOptions::default())
        .map_err(|e| e.to_string())?;
    Ok(crate::report::plot::svg(&trace, &script.expectations))
}

/// `limpet review` from the command line's values: checks the search flags, then reviews.
pub fn command(dir: String, output: Option<String>, search: crate::prove::Config) -> Outcome {
    if let Err(e) =
        crate::prove::Config::check_flags(search.grid, search.resolution, search.horizon)
    {
        return Outcome::bad_input(e);
    }
    review(&ReviewConfig {
        dir,
        output,
        search,
        progress: std::io::IsTerminal::is_terminal(&std::io::stderr()),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tmp(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("limpet-review-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap_or_default();
        d
    }

    #[test]
    fn inputs_need_exactly_one_policy() {
        let d = tmp("inputs");
        assert!(inputs(&d).is_err());
        std::fs::write(d.join("a.limp"), "").unwrap_or_default();
        std::fs::write(d.join("z.scenario"), "").unwrap_or_default();
        std::fs::write(d.join("b.scenario"), "").unwrap_or_default();
        let i = inputs(&d).map_err(|e| e.to_string());
        assert_eq!(
            i.as_ref()
                .map(|i| i.scenarios.iter().map(|p| file_name(p)).collect::<Vec<_>>()),
            Ok(vec!["b.scenario".to_string(), "z.scenario".to_string()])
        );
        std::fs::write(d.join("c.limp"), "").unwrap_or_default();
        assert!(inputs(&d).is_err_and(|e| e.contains("2 policies")));
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn output_never_names_an_input() {
        let d = tmp("output");
        std::fs::write(d.join("a.limp"), "").unwrap_or_default();
        std::fs::write(d.join("s.scenario"), "").unwrap_or_default();
        let i = Inputs {
            policy: d.join("a.limp"),
            scenarios: vec![d.join("s.scenario")],
        };
        assert!(check_output(&d.join("new.scenario"), &i).is_err());
        assert!(check_output(&d.join("X.LIMP"), &i).is_err());
        assert!(check_output(&d.join("review.html"), &i).is_ok());
        // An input under another name (a link) is refused as well.
        #[cfg(unix)]
        {
            let link = d.join("link.html");
            if std::os::unix::fs::symlink(d.join("a.limp"), &link).is_ok() {
                assert!(check_output(&link, &i).is_err());
            }
        }
        let _ = std::fs::remove_dir_all(&d);
    }
}
