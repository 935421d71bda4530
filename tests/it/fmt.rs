//! `limpet fmt`: snapshots of messy fixtures, and properties over the bundled files and randomly
//! re-spaced and re-commented copies of them: the layout is a fixed point, keeps every comment
//! and means the same (same lowered model; same scenario tree).

use crate::{Rng, rel};
use limpet::lang::{print, scenario};
use proptest::prelude::*;
use serde_json::Value;
use std::path::{Path, PathBuf};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn is_scenario(p: &Path) -> bool {
    p.extension().is_some_and(|e| e == "scenario")
}

fn format(p: &Path, text: &str) -> Option<String> {
    if is_scenario(p) {
        print::format_scenario(text).ok()
    } else {
        print::format_policy(text).ok()
    }
}

/// Every bundled policy and scenario that parses, with its text.
fn bundled() -> Vec<(PathBuf, String)> {
    let mut files = Vec::new();
    for dir in [
        "scenarios/van",
        "tests/fixtures/diagnostics",
        "tests/fixtures/scenario",
        "tests/fixtures/fmt",
    ] {
        let Ok(rd) = std::fs::read_dir(root().join(dir)) else {
            continue;
        };
        let mut paths: Vec<PathBuf> = rd.filter_map(|e| e.ok()).map(|e| e.path()).collect();
        paths.sort();
        for p in paths {
            let known = is_scenario(&p) || p.extension().is_some_and(|e| e == "limp");
            let Ok(text) = std::fs::read_to_string(&p) else {
                continue;
            };
            if known && format(&p, &text).is_some() {
                files.push((p, text));
            }
        }
    }
    files
}

/// A serialised tree with everything that may differ between spellings removed: spans, the
/// number's text (its value stays), and the comments the scenario tree carries.
fn strip(v: &mut Value) {
    match v {
        // A span in a tuple variant has no key to go by: it is an object of two offsets.
        Value::Object(m) if m.len() == 2 && m.contains_key("start") && m.contains_key("end") => {
            *v = Value::Null;
        }
        Value::Object(m) => {
            m.retain(|k, _| {
                k != "span"
                    && !k.ends_with("_span")
                    && k != "text"
                    && k != "number"
                    && k != "comments"
            });
            m.values_mut().for_each(strip);
        }
        Value::Array(a) => a.iter_mut().for_each(strip),
        _ => {}
    }
}

fn stripped<T: serde::Serialize>(x: &T) -> Value {
    let mut v = serde_json::to_value(x).unwrap_or(Value::Null);
    strip(&mut v);
    v
}

/// What a text means: for a policy its tree and its lowered model (or the lowering's findings,
/// without positions); for a scenario its tree.
fn meaning(p: &Path, text: &str) -> Value {
    if is_scenario(p) {
        return stripped(&scenario::parse(text).0);
    }
    let ast = stripped(&limpet::lang::policy::parse(text).0);
    let (model, diags) = limpet::model::load(text);
    let findings: Vec<(&str, &str)> = diags.iter().map(|d| (d.code, d.message.as_str())).collect();
    serde_json::json!({ "ast": ast, "model": stripped(&model), "findings": findings })
}

/// Where two values first differ, as a path, with both sides.
fn first_difference(a: &Value, b: &Value, at: &str) -> String {
    match (a, b) {
        (Value::Object(x), Value::Object(y)) => {
            for (k, v) in x {
                match y.get(k) {
                    Some(w) if w == v => {}
                    Some(w) => return first_difference(v, w, &format!("{at}.{k}")),
                    None => return format!("{at}.{k} (missing on the right)"),
                }
            }
            format!("{at} (extra keys on the right)")
        }
        (Value::Array(x), Value::Array(y)) if x.len() == y.len() => x
            .iter()
            .zip(y)
            .enumerate()
            .find(|(_, (v, w))| v != w)
            .map_or(at.to_string(), |(i, (v, w))| {
                first_difference(v, w, &format!("{at}[{i}]"))
            }),
        _ => format!("{at}: {a} vs {b}"),
    }
}

/// The comments of a text, in order.
fn comments(p: &Path, text: &str) -> Vec<String> {
    if is_scenario(p) {
        return scenario::parse(text)
            .0
            .map(|a| {
                a.comments
                    .into_iter()
                    .map(|c| c.text.trim_end().to_string())
                    .collect()
            })
            .unwrap_or_default();
    }
    text.lines()
        .filter_map(|l| l.find('#').map(|i| l[i..].trim_end().to_string()))
        .collect()
}

fn check_properties(p: &Path, text: &str) -> Result<(), String> {
    let Some(once) = format(p, text) else {
        return Err(format!("{}: the input does not parse", rel(p)));
    };
    let Some(twice) = format(p, &once) else {
        return Err(format!(
            "{}: the formatted text does not parse:\n{once}",
            rel(p)
        ));
    };
    if twice != once {
        return Err(format!(
            "{}: not idempotent\n--- once\n{once}--- twice\n{twice}",
            rel(p)
        ));
    }
    if comments(p, &once) != comments(p, text) {
        return Err(format!("{}: comments changed\n{text}\n---\n{once}", rel(p)));
    }
    let (a, b) = (meaning(p, text), meaning(p, &once));
    if a != b {
        return Err(format!(
            "{}: meaning changed at {}\n{text}\n---\n{once}",
            rel(p),
            first_difference(&a, &b, "")
        ));
    }
    Ok(())
}

#[test]
fn bundled_files_are_fixed_points_with_the_same_meaning() {
    let files = bundled();
    // The two reference files, the three fmt fixtures and most diagnostics fixtures parse.
    assert!(
        files.len() >= 20,
        "only {} bundled files parse",
        files.len()
    );
    for (p, text) in &files {
        if let Err(e) = check_properties(p, text) {
            panic!("{e}");
        }
    }
}

#[test]
fn messy_fixtures_format_like_this() {
    insta::glob!("../fixtures/fmt", "*.{limp,scenario}", |path| {
        let text = std::fs::read_to_string(path).unwrap_or_default();
        let out = format(path, &text).unwrap_or_else(|| "<does not parse>".to_string());
        insta::assert_snapshot!(out);
    });
}

#[test]
fn reference_scenario_is_nearly_a_fixed_point() {
    let p = root().join("scenarios/van/pedal_a_open.scenario");
    let text = std::fs::read_to_string(&p).unwrap_or_default();
    let out = format(&p, &text).unwrap_or_default();
    // Only two hand-placed end-of-line comment columns move.
    let changed = text
        .lines()
        .zip(out.lines())
        .filter(|(a, b)| a != b)
        .count();
    assert_eq!(changed, 2, "{out}");
    assert_eq!(text.lines().count(), out.lines().count());
}

const WORDS: [&str; 8] = ["note", "why", "°C", "x -> y", "#", "a,b", "{ }", "ünïcode"];

/// Re-spaces and re-comments a text without changing its tokens: white space between tokens
/// is replaced (a newline stays at least one newline, spaces stay spaces or tabs, so a number
/// and its unit stay on one line), comments are added before line ends, blank lines added,
/// spaces inserted next to punctuation. Comments and (in scenarios) strings are kept whole.
fn respace(text: &str, seed: u64, punct: &[char]) -> String {
    let mut rng = Rng(seed | 1);
    let mut out = String::new();
    let chars: Vec<char> = text.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c == '#' || c == '"' {
            // A comment to the end of the line, or a string to its closing quote.
            let stop = if c == '#' { '\n' } else { '"' };
            out.push(c);
            i += 1;
            while i < chars.len() && chars[i] != stop {
                out.push(chars[i]);
                i += 1;
            }
            if c == '"' && i < chars.len() {
                out.push('"');
                i += 1;
            }
            continue;
        }
        if c.is_whitespace() {
            let start = i;
            while i < chars.len() && chars[i].is_whitespace() {
                i += 1;
            }
            let run: String = chars[start..i].iter().collect();
            let after_comment =
                out.lines().last().is_some_and(|l| l.contains('#')) && !out.ends_with('\n');
            if run.contains('\n') {
                if !after_comment && rng.below(4) == 0 {
                    let w = WORDS[rng.below(WORDS.len() as u64) as usize];
                    out.push_str(&format!(" # {w}"));
                }
                out.push_str(&" ".repeat(rng.below(3) as usize));
                for _ in 0..=rng.below(3) {
                    out.push('\n');
                }
                out.push_str(&" ".repeat(rng.below(7) as usize));
            } else {
                let n = 1 + rng.below(3) as usize;
                for _ in 0..n {
                    out.push(if rng.below(4) == 0 { '\t' } else { ' ' });
                }
            }
            continue;
        }
        if punct.contains(&c) && rng.below(3) == 0 {
            out.push(' ');
        }
        out.push(c);
        if punct.contains(&c) && rng.below(3) == 0 {
            out.push(' ');
        }
        i += 1;
    }
    out
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn respaced_copies_format_to_the_same_meaning(which in any::<usize>(), seed in any::<u64>()) {
        let files = bundled();
        prop_assume!(!files.is_empty());
        let (p, text) = &files[which % files.len()];
        let punct: &[char] = if is_scenario(p) {
            &['{', '}']
        } else {
            &['{', '}', ',', ':', '(', ')', '|']
        };
        let messy = respace(text, seed, punct);
        prop_assert!(format(p, &messy).is_some(), "the re-spaced copy does not parse:\n{}", messy);
        if let Err(e) = check_properties(p, &messy) {
            return Err(TestCaseError::fail(e));
        }
        // Spelling does not matter: the copy formats to what the original formats to, except
        // for the comments and blank lines the copy added.
        let a = format(p, text).unwrap_or_default();
        let b = format(p, &messy).unwrap_or_default();
        let code = |s: &str| -> Vec<String> {
            s.lines()
                .map(|l| l.split('#').next().unwrap_or("").split_whitespace().collect::<Vec<_>>().join(" "))
                .filter(|l| !l.is_empty())
                .collect()
        };
        prop_assert_eq!(code(&a), code(&b));
    }
}
