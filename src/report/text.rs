//! Model fragments printed back in the policy language's own words: guards, conditions,
//! demands. Used by graph labels, traces and diffs, so one spelling serves them all.

use crate::model::{Compare, Demand, Expr, Mode, Model, Signal, Term};
use crate::time::trim;

/// Operator strength, for minimal parentheses.
fn strength(e: &Expr) -> u8 {
    match e {
        Expr::Or { es } if es.len() > 1 => 1,
        Expr::And { es } if es.len() > 1 => 2,
        Expr::Not { .. } => 3,
        _ => 4,
    }
}

/// A guard or condition as the policy language writes it.
pub fn expr(m: &Model, e: &Expr) -> String {
    match e {
        Expr::True => "true".into(),
        Expr::Fault { fault, .. } => m.faults[*fault].name.clone(),
        Expr::Suspect { track, .. } => format!("suspect({})", m.track_name(*track)),
        Expr::Switch { switch, .. } => m.switches[*switch].name.clone(),
        Expr::Compare { term, cmp, .. } => {
            format!("{} {}", term_text(m, term), cmp_text(cmp, term_unit(term)))
        }
        Expr::Not { e: inner } => {
            let s = expr(m, inner);
            if strength(inner) < 3 {
                format!("not ({s})")
            } else {
                format!("not {s}")
            }
        }
        Expr::And { es } | Expr::Or { es } => {
            let me = strength(e);
            let sep = if matches!(e, Expr::And { .. }) {
                " and "
            } else {
                " or "
            };
            es.iter()
                .map(|x| {
                    let s = expr(m, x);
                    // An `and` inside an `or` is bracketed too: correct without, clearer with.
                    let inner = strength(x);
                    if inner < me || (me == 1 && inner == 2) {
                        format!("({s})")
                    } else {
                        s
                    }
                })
                .collect::<Vec<_>>()
                .join(sep)
        }
    }
}

pub fn signal(m: &Model, s: &Signal) -> String {
    match *s {
        Signal::Track { track } => m.track_name(track),
        Signal::TrackVolts { track } => format!("{}.volts", m.track_name(track)),
        Signal::Merged { sensor } => m.sensors[sensor].name.clone(),
        Signal::Input { input } => m.inputs[input].name.clone(),
        Signal::Target => "target".into(),
    }
}

fn term_text(m: &Model, t: &Term) -> String {
    match t {
        Term::Signal { signal: s } => signal(m, s),
        Term::Diff { a, b } => format!("{} - {}", signal(m, a), signal(m, b)),
        Term::AbsDiff { a, b } => format!("|{} - {}|", signal(m, a), signal(m, b)),
    }
}

/// `V` for terms in volts, `%` otherwise.
pub fn term_unit(t: &Term) -> &'static str {
    let volts = |s: &Signal| matches!(s, Signal::TrackVolts { .. });
    match t {
        Term::Signal { signal } => {
            if volts(signal) {
                "V"
            } else {
                "%"
            }
        }
        Term::Diff { a, .. } | Term::AbsDiff { a, .. } => {
            if volts(a) {
                "V"
            } else {
                "%"
            }
        }
    }
}

fn cmp_text(c: &Compare, unit: &str) -> String {
    let q = |x: f64| format!("{} {unit}", fixed(x, unit));
    match *c {
        Compare::Above { x } => format!("above {}", q(x)),
        Compare::Below { x } => format!("below {}", q(x)),
        Compare::Outside { lo, hi } => format!("outside {} .. {}", q(lo), q(hi)),
        Compare::Inside { lo, hi } => format!("inside {} .. {}", q(lo), q(hi)),
    }
}

/// Volts keep two decimals, as characteristics are usually written; other units the shortest.
fn fixed(x: f64, unit: &str) -> String {
    if unit == "V" {
        format!("{x:.2}")
    } else {
        trim(x)
    }
}

/// What a mode demands, in the policy's words.
pub fn demand(m: &Model, mode: &Mode) -> String {
    let base = match mode.demand {
        Demand::Sensor { sensor } => format!("demand {}", m.sensors[sensor].name),
        Demand::Input { input } => format!("demand {}", m.inputs[input].name),
        Demand::Fixed { percent } => format!("demand {} %", trim(percent)),
        Demand::DriveOff => return "drive off".into(),
    };
    let mut s = base;
    if mode.limit < 100.0 {
        s.push_str(&format!("  limit {} %", trim(mode.limit)));
    }
    if let Some(r) = mode.rate {
        s.push_str(&format!("  rate {} %/s", trim(r)));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn guards_print_back_as_written() {
        let m = crate::model::lower(include_str!("../../scenarios/van/van_throttle.limp")).unwrap();
        let g: Vec<String> = m.transitions.iter().map(|t| expr(&m, &t.guard)).collect();
        assert_eq!(
            g[3],
            "pedal_disagree or (suspect(pedal.a) and suspect(pedal.b))"
        );
        assert_eq!(
            g[4],
            "not suspect(pedal.a) and not suspect(pedal.b) and pedal below 3 %"
        );
        let f = &m.faults[m.fault_id("throttle_a_range").unwrap()];
        assert_eq!(
            expr(&m, &f.condition),
            "throttle.a.volts outside 0.20 V .. 4.80 V"
        );
        assert_eq!(
            demand(&m, &m.modes[1]),
            "demand pedal  limit 35 %  rate 25 %/s"
        );
    }
}
