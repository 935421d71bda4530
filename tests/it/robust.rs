//! No input makes the front end or the checker panic: mutated copies of the reference policy
//! and arbitrary bytes.

use proptest::prelude::*;

const REFERENCE: &str = include_str!("../../scenarios/van/van_throttle.limp");

fn check_text(text: &str) {
    let (m, _diags) = limpet::model::load(text);
    if let Some(m) = m {
        let _ = limpet::analysis::findings(&m);
        let _ = limpet::report::graph::dot(&m);
    }
}

/// Edits a copy of the reference: delete, duplicate or replace a byte range.
fn mutate(edits: &[(usize, usize, u8, u8)]) -> String {
    let mut b = REFERENCE.as_bytes().to_vec();
    for &(at, len, kind, byte) in edits {
        if b.is_empty() {
            break;
        }
        let at = at % b.len();
        let end = (at + len % 16).min(b.len());
        match kind % 4 {
            0 => {
                b.drain(at..end);
            }
            1 => {
                let piece = b[at..end].to_vec();
                b.splice(at..at, piece);
            }
            2 => b.insert(at, byte),
            _ => {
                // A token from the language, to reach deeper than syntax errors.
                let toks: [&[u8]; 8] = [
                    b" 0 ", b" ms", b" %", b"-", b" and ", b" not ", b"(", b" 1e400 ",
                ];
                b.splice(at..at, toks[byte as usize % 8].iter().copied());
            }
        }
    }
    String::from_utf8_lossy(&b).into_owned()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]

    #[test]
    fn mutated_reference_never_panics(edits in prop::collection::vec((any::<usize>(), any::<usize>(), any::<u8>(), any::<u8>()), 1..6)) {
        check_text(&mutate(&edits));
    }

    #[test]
    fn arbitrary_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        check_text(&String::from_utf8_lossy(&bytes));
    }

    #[test]
    fn numbers_anywhere_never_panic(x in prop::num::f64::ANY, line in 0usize..70) {
        let mut lines: Vec<String> = REFERENCE.lines().map(str::to_string).collect();
        if let Some(l) = lines.get_mut(line) {
            *l = l.replacen(|c: char| c.is_ascii_digit(), &format!("{x}"), 1);
        }
        check_text(&lines.join("\n"));
    }
}
