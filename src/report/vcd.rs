//! A trace as an IEEE 1364 value change dump (clause 18 of IEEE 1364-2001): real variables for
//! the positions and the duty, one-bit wires per fault (set) and per monitor (pending), and the
//! mode as an integer whose codes a `$comment` maps to names.

use crate::sim::trace::{EventKind, Trace};
use crate::time::Time;
use std::fmt::Write;

/// The timescales IEEE 1364 allows, largest first, in nanoseconds (1 ns is the finest we need).
const SCALES: [(u64, &str); 10] = [
    (1_000_000_000, "1 s"),
    (100_000_000, "100 ms"),
    (10_000_000, "10 ms"),
    (1_000_000, "1 ms"),
    (100_000, "100 us"),
    (10_000, "10 us"),
    (1_000, "1 us"),
    (100, "100 ns"),
    (10, "10 ns"),
    (1, "1 ns"),
];

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 { a } else { gcd(b, a % b) }
}

/// The coarsest timescale that represents every instant of the trace exactly.
fn timescale(trace: &Trace) -> (u64, &'static str) {
    let g = trace
        .samples
        .iter()
        .map(|s| s.at.0)
        .chain(trace.events.iter().map(|e| e.at.0))
        .fold(0, gcd);
    SCALES
        .iter()
        .copied()
        .find(|(ns, _)| g % ns == 0)
        .unwrap_or((1, "1 ns"))
}

/// Identifier codes: printable ASCII from `!` to `~`, base 94.
fn ident(mut n: usize) -> String {
    let mut s = String::new();
    loop {
        s.push((b'!' + (n % 94) as u8) as char);
        n /= 94;
        if n == 0 {
            break;
        }
        n -= 1;
    }
    s
}

/// VCD names may not contain white space.
fn vcd_name(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_whitespace() { '_' } else { c })
        .collect()
}

enum Change {
    Real(usize, f64),
    Bit(usize, bool),
    Int(usize, usize),
}

pub fn write(trace: &Trace) -> String {
    let (scale, scale_text) = timescale(trace);
    let mut o = String::new();
    let _ = writeln!(o, "$date\n  simulated time, no wall clock\n$end");
    let _ = writeln!(o, "$version\n  limpet {}\n$end", env!("CARGO_PKG_VERSION"));
    let modes: Vec<String> = trace
        .modes
        .iter()
        .enumerate()
        .map(|(i, m)| format!("{i}={m}"))
        .collect();
    let _ = writeln!(
        o,
        "$comment\n  scenario {} policy {}; mode codes: {}\n$end",
        trace.scenario,
        trace.policy,
        modes.join(" ")
    );
    let _ = writeln!(o, "$timescale {scale_text} $end");
    let _ = writeln!(o, "$scope module {} $end", vcd_name(&trace.scenario));
    let reals = ["driver", "pedal", "target", "opening", "duty"];
    for (i, r) in reals.iter().enumerate() {
        let _ = writeln!(o, "$var real 64 {} {} $end", ident(i), r);
    }
    let mode_id = reals.len();
    let _ = writeln!(o, "$var integer 32 {} mode $end", ident(mode_id));
    let key_id = mode_id + 1;
    let _ = writeln!(o, "$var wire 1 {} key_on $end", ident(key_id));
    let set_base = key_id + 1;
    let pending_base = set_base + trace.faults.len();
    let _ = writeln!(o, "$scope module faults $end");
    for (i, f) in trace.faults.iter().enumerate() {
        let _ = writeln!(
            o,
            "$var wire 1 {} {} $end",
            ident(set_base + i),
            vcd_name(f)
        );
    }
    let _ = writeln!(o, "$upscope $end");
    let _ = writeln!(o, "$scope module pending $end");
    for (i, f) in trace.faults.iter().enumerate() {
        let _ = writeln!(
            o,
            "$var wire 1 {} {} $end",
            ident(pending_base + i),
            vcd_name(f)
        );
    }
    let _ = writeln!(o, "$upscope $end");
    let _ = writeln!(o, "$upscope $end");
    let _ = writeln!(o, "$enddefinitions $end");

    // Changes in time order: samples and events merged, events first at one instant.
    let mut changes: Vec<(Time, u8, usize, Change)> = Vec::new();
    for (k, e) in trace.events.iter().enumerate() {
        match e.kind {
            EventKind::FaultPending { fault } => {
                changes.push((e.at, 0, k, Change::Bit(pending_base + fault, true)));
            }
            EventKind::FaultLapsed { fault } => {
                changes.push((e.at, 0, k, Change::Bit(pending_base + fault, false)));
            }
            EventKind::FaultSet { fault } => {
                changes.push((e.at, 0, k, Change::Bit(pending_base + fault, false)));
                changes.push((e.at, 0, k, Change::Bit(set_base + fault, true)));
            }
            EventKind::FaultCleared { fault } => {
                changes.push((e.at, 0, k, Change::Bit(pending_base + fault, false)));
                changes.push((e.at, 0, k, Change::Bit(set_base + fault, false)));
            }
            _ => {}
        }
    }
    for (k, s) in trace.samples.iter().enumerate() {
        for (i, v) in [s.driver, s.pedal, s.target, s.opening, s.duty]
            .into_iter()
            .enumerate()
        {
            changes.push((s.at, 1, k, Change::Real(i, v)));
        }
        changes.push((s.at, 1, k, Change::Int(mode_id, s.mode)));
        changes.push((s.at, 1, k, Change::Bit(key_id, s.key_on)));
    }
    changes.sort_by_key(|&(t, class, k, _)| (t, class, k));

    // Initial values, then only real changes.
    let mut reals_now: Vec<Option<f64>> = vec![None; reals.len()];
    let mut bits_now: Vec<Option<bool>> = vec![None; pending_base + trace.faults.len()];
    let mut int_now: Option<usize> = None;
    let _ = writeln!(o, "#0\n$dumpvars");
    for (i, _) in reals.iter().enumerate() {
        let first = trace
            .samples
            .first()
            .map_or(0.0, |s| [s.driver, s.pedal, s.target, s.opening, s.duty][i]);
        let _ = writeln!(o, "r{} {}", fmt_real(first), ident(i));
        reals_now[i] = Some(first);
    }
    let first_mode = trace.samples.first().map_or(0, |s| s.mode);
    let _ = writeln!(o, "b{:b} {}", first_mode, ident(mode_id));
    int_now = int_now.or(Some(first_mode));
    let first_key = trace.samples.first().is_none_or(|s| s.key_on);
    let _ = writeln!(o, "{}{}", u8::from(first_key), ident(key_id));
    bits_now[key_id] = Some(first_key);
    for (i, bit) in bits_now.iter_mut().enumerate().skip(set_base) {
        let _ = writeln!(o, "0{}", ident(i));
        *bit = Some(false);
    }
    let _ = writeln!(o, "$end");
    let mut last_t: Option<Time> = Some(Time::ZERO);
    for (t, _, _, c) in changes {
        let line = match c {
            Change::Real(i, v) => {
                if reals_now[i].is_some_and(|x| fmt_real(x) == fmt_real(v)) {
                    continue;
                }
                reals_now[i] = Some(v);
                format!("r{} {}", fmt_real(v), ident(i))
            }
            Change::Bit(i, b) => {
                if bits_now[i] == Some(b) {
                    continue;
                }
                bits_now[i] = Some(b);
                format!("{}{}", u8::from(b), ident(i))
            }
            Change::Int(i, v) => {
                if int_now == Some(v) {
                    continue;
                }
                int_now = Some(v);
                format!("b{:b} {}", v, ident(i))
            }
        };
        if last_t != Some(t) {
            let _ = writeln!(o, "#{}", t.0 / scale);
            last_t = Some(t);
        }
        o.push_str(&line);
        o.push('\n');
    }
    let end = trace.length.0 / scale;
    if last_t.is_none_or(|t| t.0 / scale < end) {
        let _ = writeln!(o, "#{end}");
    }
    o
}

/// Reals with six decimals, trailing zeros dropped, so the dump is stable across platforms.
fn fmt_real(x: f64) -> String {
    crate::time::trim(crate::sim::trace::round6(x))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_are_printable_and_distinct() {
        let ids: Vec<String> = (0..300).map(ident).collect();
        assert!(
            ids.iter()
                .all(|s| s.bytes().all(|b| (b'!'..=b'~').contains(&b)))
        );
        let mut sorted = ids.clone();
        sorted.sort();
        sorted.dedup();
        assert_eq!(sorted.len(), ids.len());
        assert_eq!(ident(0), "!");
        assert_eq!(ident(93), "~");
    }

    #[test]
    fn gcd_picks_the_timescale() {
        assert_eq!(gcd(10_000_000, 5_000_000), 5_000_000);
        let g: u64 = 5_000_000;
        assert_eq!(
            SCALES
                .iter()
                .find(|(ns, _)| g.is_multiple_of(*ns))
                .map(|s| s.1),
            Some("1 ms")
        );
    }
}
