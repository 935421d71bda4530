//! Approved traces: `limpet run --approved DIR` compares each scenario's text trace with the
//! one stored as `DIR/<scenario>.trace` and shows a unified diff on a difference;
//! `--approve` stores the new traces instead. A failed expectation fails the run either way.

use crate::app::{Exit, Outcome, RunConfig};
use std::path::{Path, PathBuf};

/// The approved file of a scenario: its file stem with `.trace`.
pub fn approved_path(dir: &str, scenario: &str) -> PathBuf {
    let stem = Path::new(scenario)
        .file_stem()
        .map_or_else(|| "scenario".into(), |s| s.to_string_lossy().into_owned());
    Path::new(dir).join(format!("{stem}.trace"))
}

/// Replays each scenario and compares (or, with `approve`, stores) its full text trace.
/// Exit 1 when a trace differs from its approved one or none is stored; 2 on bad input.
pub fn run_approved(paths: &[String], cfg: &RunConfig, dir: &str, approve: bool) -> Outcome {
    let mut opts = crate::sim::engine::RunOptions::default();
    if let Some(s) = cfg.sample_every {
        opts.sample_every = s;
    }
    let mut stdout = String::new();
    let mut stderr = String::new();
    let mut exit = Exit::Holds;
    if approve && let Err(e) = std::fs::create_dir_all(dir) {
        return Outcome::bad_input(format!("error: cannot create `{dir}`: {e}\n"));
    }
    for p in paths {
        let r = match crate::app::replay(p, cfg.policy.as_deref(), opts) {
            Ok(r) => r,
            Err(e) => {
                stderr.push_str(&e);
                exit = exit.max(Exit::BadInput);
                continue;
            }
        };
        if !r.trace.passed() {
            stdout.push_str(&format!("{p}: an expectation fails\n"));
            exit = exit.max(Exit::Finding);
        }
        let text = r.trace.to_text(false);
        let file = approved_path(dir, p);
        let shown = file.to_string_lossy().replace('\\', "/");
        if approve {
            if let Err(e) = crate::app::write_atomically(&file, &text) {
                stderr.push_str(&format!("error: cannot write `{shown}`: {e}\n"));
                exit = exit.max(Exit::BadInput);
            } else {
                stdout.push_str(&format!("approved {p} -> {shown}\n"));
            }
            continue;
        }
        match std::fs::read_to_string(&file) {
            Ok(old) if old == text => stdout.push_str(&format!("{p}: matches {shown}\n")),
            Ok(old) => {
                stdout.push_str(&format!("{p}: differs from {shown}\n"));
                stdout.push_str(&crate::fmt::unified_diff(&shown, &old, &text));
                exit = exit.max(Exit::Finding);
            }
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                stdout.push_str(&format!(
                    "{p}: no approved trace `{shown}` yet (run with --approve to store this one)\n"
                ));
                exit = exit.max(Exit::Finding);
            }
            Err(e) => {
                stderr.push_str(&format!("error: cannot read `{shown}`: {e}\n"));
                exit = exit.max(Exit::BadInput);
            }
        }
    }
    Outcome {
        stdout,
        stderr,
        exit,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_approved_file_is_named_after_the_scenario_stem() {
        assert_eq!(
            approved_path("approved", "scenarios/van/pedal_a_open.scenario"),
            Path::new("approved").join("pedal_a_open.trace")
        );
    }
}
