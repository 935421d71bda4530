//! `limpet fmt`: rewrites policies (`.limp`) and scenarios (`.scenario`) in the canonical
//! layout of `lang::print`, or with `--check` reports which would change. A file that does not
//! parse is never written; a file that is written is replaced atomically.

use crate::app::{Exit, Outcome};
use crate::diag;
use crate::lang::print;
use std::io::Read;
use std::path::Path;

/// The languages `fmt` knows, by file extension.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Language {
    Policy,
    Scenario,
}

impl Language {
    /// The language of a path by its extension; `-` (standard input) is a policy.
    pub fn of(path: &str) -> Option<Language> {
        if path == "-" {
            return Some(Language::Policy);
        }
        match Path::new(path).extension().and_then(|e| e.to_str()) {
            Some("limp") => Some(Language::Policy),
            Some("scenario") => Some(Language::Scenario),
            _ => None,
        }
    }
}

/// Formats one text: the canonical text, or the rendered syntax diagnostics.
pub fn format_text(lang: Language, name: &str, text: &str) -> Result<String, String> {
    let r = match lang {
        Language::Policy => print::format_policy(text),
        Language::Scenario => print::format_scenario(text),
    };
    r.map_err(|d| diag::render(name, text, &d))
}

/// `limpet fmt FILE...`. Without `check` each file that is not in the canonical layout is
/// rewritten (and `-` is read from standard input and written to standard output). With
/// `check` (or `diff`, which implies it) nothing is written: the files that would change are
/// listed, each followed by a unified diff under `diff`. Exit 0 when all is canonical (or was
/// rewritten), 1 when `check` found a file that would change, 2 when a file could not be read
/// or parsed (its diagnostics on standard error; it is left alone).
pub fn run(files: &[String], check: bool, diff: bool) -> Outcome {
    run_with(files, check, diff, &mut std::io::stdin())
}

/// [`run`] with standard input given, for tests.
pub fn run_with(files: &[String], check: bool, diff: bool, stdin: &mut dyn Read) -> Outcome {
    let check = check || diff;
    let mut out = Outcome {
        stdout: String::new(),
        stderr: String::new(),
        exit: Exit::Holds,
    };
    if files.is_empty() {
        out.stderr.push_str(
            "error: no files given\n  = hint: limpet fmt FILE... (`-` for standard input)\n",
        );
        out.exit = Exit::BadInput;
        return out;
    }
    let mut worst = Exit::Holds;
    for path in files {
        let e = one(path, check, diff, stdin, &mut out);
        worst = worst.max(e);
    }
    out.exit = worst;
    out
}

fn one(path: &str, check: bool, diff: bool, stdin: &mut dyn Read, out: &mut Outcome) -> Exit {
    let Some(lang) = Language::of(path) else {
        out.stderr.push_str(&format!(
            "error: `{path}` is neither a policy nor a scenario\n  = hint: fmt recognises files by extension: .limp or .scenario\n"
        ));
        return Exit::BadInput;
    };
    let (name, text) = if path == "-" {
        let mut bytes = Vec::new();
        if let Err(e) = stdin.read_to_end(&mut bytes) {
            out.stderr
                .push_str(&format!("error: cannot read standard input: {e}\n"));
            return Exit::BadInput;
        }
        match String::from_utf8(bytes) {
            Ok(t) => ("<stdin>".to_string(), t),
            Err(e) => {
                out.stderr.push_str(&format!(
                    "error: standard input is not UTF-8 text (invalid byte at offset {})\n",
                    e.utf8_error().valid_up_to()
                ));
                return Exit::BadInput;
            }
        }
    } else {
        match crate::app::Source::read(path) {
            Ok(s) => (s.path, s.text),
            Err(e) => {
                out.stderr.push_str(&e);
                return Exit::BadInput;
            }
        }
    };
    let formatted = match format_text(lang, &name, &text) {
        Ok(f) => f,
        Err(rendered) => {
            out.stderr.push_str(&rendered);
            out.stderr.push_str(&format!(
                "error: `{name}` does not parse; it was not changed\n"
            ));
            return Exit::BadInput;
        }
    };
    let changed = formatted != text;
    if check {
        if changed {
            out.stdout.push_str(&format!("would reformat {name}\n"));
            if diff {
                out.stdout.push_str(&unified_diff(&name, &text, &formatted));
            }
            return Exit::Finding;
        }
        return Exit::Holds;
    }
    if path == "-" {
        out.stdout.push_str(&formatted);
        return Exit::Holds;
    }
    if !changed {
        return Exit::Holds;
    }
    match write_atomically(Path::new(path), &formatted) {
        Ok(()) => Exit::Holds,
        Err(e) => {
            out.stderr
                .push_str(&format!("error: cannot write `{path}`: {e}\n"));
            Exit::BadInput
        }
    }
}

/// A unified diff (three lines of context) from `old` to `new`, headed `a/NAME` and `b/NAME`.
pub fn unified_diff(name: &str, old: &str, new: &str) -> String {
    let d = similar::TextDiff::from_lines(old, new);
    let mut s = d
        .unified_diff()
        .context_radius(3)
        .header(&format!("a/{name}"), &format!("b/{name}"))
        .to_string();
    if !s.is_empty() && !s.ends_with('\n') {
        s.push('\n');
    }
    s
}

/// Writes `text` to a temporary file beside `path`, then renames it over `path`, so a reader
/// never sees half a file and a failure leaves the original alone. The original's permissions
/// are kept.
pub fn write_atomically(path: &Path, text: &str) -> std::io::Result<()> {
    use std::io::Write;
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => std::path::PathBuf::from("."),
    };
    let file_name = path
        .file_name()
        .map_or_else(|| "file".into(), |n| n.to_string_lossy().into_owned());
    let tmp = dir.join(format!(
        ".{file_name}.limpet-fmt-{}.tmp",
        std::process::id()
    ));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(text.as_bytes())?;
        f.sync_all()?;
        if let Ok(meta) = std::fs::metadata(path) {
            std::fs::set_permissions(&tmp, meta.permissions())?;
        }
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tmpdir(tag: &str) -> std::path::PathBuf {
        let d = std::env::temp_dir().join(format!("limpet-fmt-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).expect("temp dir");
        d
    }

    const MESSY: &str = "policy p{period 5ms # tick\nswitch  brake}\n";
    const CANON: &str = "policy p {\n  period 5 ms                  # tick\n  switch brake\n}\n";

    #[test]
    fn rewrites_a_messy_file_and_leaves_no_temp_file() {
        let d = tmpdir("rewrite");
        let f = d.join("p.limp");
        std::fs::write(&f, MESSY).expect("write");
        let o = run(&[f.to_string_lossy().into_owned()], false, false);
        assert_eq!(o.exit, Exit::Holds, "{}", o.stderr);
        assert_eq!(std::fs::read_to_string(&f).expect("read"), CANON);
        let names: Vec<_> = std::fs::read_dir(&d)
            .expect("dir")
            .filter_map(|e| e.ok())
            .map(|e| e.file_name())
            .collect();
        assert_eq!(names.len(), 1, "{names:?}");
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn check_writes_nothing_and_reports_with_a_diff() {
        let d = tmpdir("check");
        let f = d.join("p.limp");
        std::fs::write(&f, MESSY).expect("write");
        let name = f.to_string_lossy().into_owned();
        let o = run(std::slice::from_ref(&name), true, true);
        assert_eq!(o.exit, Exit::Finding);
        assert!(o.stdout.starts_with(&format!("would reformat {name}\n")));
        assert!(o.stdout.contains("-switch  brake}"), "{}", o.stdout);
        assert!(o.stdout.contains("+  switch brake"), "{}", o.stdout);
        assert_eq!(std::fs::read_to_string(&f).expect("read"), MESSY);
        std::fs::write(&f, CANON).expect("write");
        let o = run(&[name], true, false);
        assert_eq!((o.exit, o.stdout.as_str()), (Exit::Holds, ""));
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn a_file_that_does_not_parse_is_left_alone() {
        let d = tmpdir("broken");
        let f = d.join("p.limp");
        let broken = "policy p {\n  perod 5 ms\n}\n";
        std::fs::write(&f, broken).expect("write");
        let o = run(&[f.to_string_lossy().into_owned()], false, false);
        assert_eq!(o.exit, Exit::BadInput);
        assert!(o.stderr.contains("error[syntax]"), "{}", o.stderr);
        assert_eq!(std::fs::read_to_string(&f).expect("read"), broken);
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn standard_input_goes_to_standard_output() {
        let o = run_with(&["-".to_string()], false, false, &mut MESSY.as_bytes());
        assert_eq!((o.exit, o.stdout.as_str()), (Exit::Holds, CANON));
        let o = run_with(&["-".to_string()], true, false, &mut MESSY.as_bytes());
        assert_eq!(
            (o.exit, o.stdout.as_str()),
            (Exit::Finding, "would reformat <stdin>\n")
        );
    }

    #[test]
    fn unknown_extensions_are_refused() {
        let o = run(&["notes.txt".to_string()], false, false);
        assert_eq!(o.exit, Exit::BadInput);
        assert!(o.stderr.contains(".limp or .scenario"));
    }
}
