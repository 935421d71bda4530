//! Traces of a run: an event log (faults pending, set and cleared; transitions with the guard
//! that fired; injected and mended faults; script actions; verdicts), samples at a fixed
//! interval, and the expectations' verdicts. Writers for text (diff-stable, fixed decimals,
//! aligned columns), JSON and CSV live here; VCD and SVG in `report`.

use crate::time::Time;
use serde::Serialize;
use std::fmt::Write;

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Trace {
    pub scenario: String,
    pub policy: String,
    pub length: Time,
    pub sample_every: Time,
    pub events: Vec<TraceEvent>,
    pub samples: Vec<TraceSample>,
    pub expectations: Vec<Verdict>,
    /// Mode names, indexed by mode id, for the writers.
    pub modes: Vec<String>,
    /// Fault names, indexed by fault id, for the writers.
    pub faults: Vec<String>,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TraceEvent {
    pub at: Time,
    pub kind: EventKind,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum EventKind {
    /// A script action other than a fault: `pedal 35 % over 300 ms`, `key off`, `brake on`.
    Script {
        text: String,
    },
    Break {
        text: String,
    },
    Mend {
        text: String,
    },
    FaultPending {
        fault: usize,
    },
    /// A pending debounce ran out without setting.
    FaultLapsed {
        fault: usize,
    },
    FaultSet {
        fault: usize,
    },
    FaultCleared {
        fault: usize,
    },
    Transition {
        from: usize,
        to: usize,
        guard: String,
    },
}

#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct TraceSample {
    pub at: Time,
    /// The driver's true pedal position, %.
    pub driver: f64,
    /// The controller's merged pedal, %.
    pub pedal: f64,
    /// The commanded position, %.
    pub target: f64,
    /// The true plate position, %.
    pub opening: f64,
    /// H-bridge duty, -100..100 %.
    pub duty: f64,
    pub mode: usize,
    /// Whether the controller is powered (key on).
    pub key_on: bool,
}

#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Verdict {
    /// The expectation as written, canonical.
    pub text: String,
    pub passed: bool,
    /// The instant that decided the verdict.
    pub decided_at: Time,
    /// What happened, in a sentence (why it failed, or what confirmed it).
    pub explanation: String,
}

impl Trace {
    pub fn passed(&self) -> bool {
        self.expectations.iter().all(|v| v.passed)
    }

    pub fn event_text(&self, k: &EventKind) -> String {
        let fault = |f: usize| self.faults.get(f).map_or("?", |s| s.as_str()).to_string();
        let mode = |m: usize| self.modes.get(m).map_or("?", |s| s.as_str()).to_string();
        match k {
            EventKind::Script { text } => text.clone(),
            EventKind::Break { text } => format!("break {text}"),
            EventKind::Mend { text } => format!("mend {text}"),
            EventKind::FaultPending { fault: f } => format!("fault {} pending", fault(*f)),
            EventKind::FaultLapsed { fault: f } => format!("fault {} lapsed", fault(*f)),
            EventKind::FaultSet { fault: f } => format!("fault {} set", fault(*f)),
            EventKind::FaultCleared { fault: f } => format!("fault {} cleared", fault(*f)),
            EventKind::Transition { from, to, guard } => {
                format!("mode {} -> {} when {guard}", mode(*from), mode(*to))
            }
        }
    }

    /// Seconds with millisecond-and-microsecond decimals: `   1.005000`.
    fn t(t: Time) -> String {
        format!("{:>10.4}", t.as_secs_f64())
    }

    /// The diff-stable text form: fixed decimals, aligned columns.
    pub fn to_text(&self, verdicts_only: bool) -> String {
        let mut o = String::new();
        let _ = writeln!(
            o,
            "scenario {}  policy {}  length {}  sample {}",
            self.scenario, self.policy, self.length, self.sample_every
        );
        if !verdicts_only {
            o.push_str("\nevents\n");
            let _ = writeln!(o, "{:>10}  event", "t [s]");
            for e in &self.events {
                let _ = writeln!(o, "{}  {}", Self::t(e.at), self.event_text(&e.kind));
            }
            o.push_str("\nsamples\n");
            let _ = writeln!(
                o,
                "{:>10} {:>8} {:>8} {:>8} {:>8} {:>8}  mode",
                "t [s]", "driver%", "pedal%", "target%", "open%", "duty%"
            );
            for s in &self.samples {
                let mode = if s.key_on {
                    self.modes.get(s.mode).map_or("?", |m| m.as_str())
                } else {
                    "(key off)"
                };
                let _ = writeln!(
                    o,
                    "{} {:>8.2} {:>8.2} {:>8.2} {:>8.2} {:>8.2}  {}",
                    Self::t(s.at),
                    s.driver,
                    s.pedal,
                    s.target,
                    s.opening,
                    s.duty,
                    mode
                );
            }
        }
        o.push_str("\nexpectations\n");
        for v in &self.expectations {
            let _ = writeln!(
                o,
                "  {}  {}  (decided at {} s: {})",
                if v.passed { "pass" } else { "FAIL" },
                v.text,
                crate::time::trim(v.decided_at.as_secs_f64()),
                v.explanation
            );
        }
        let failed = self.expectations.iter().filter(|v| !v.passed).count();
        let _ = writeln!(
            o,
            "{}: {} of {} expectations hold",
            self.scenario,
            self.expectations.len() - failed,
            self.expectations.len()
        );
        o
    }

    /// JSON with `events`, `samples` and `expectations` arrays; times in seconds.
    pub fn to_json(&self) -> String {
        let events: Vec<serde_json::Value> = self
            .events
            .iter()
            .map(|e| {
                let mut v = serde_json::to_value(&e.kind).unwrap_or_default();
                if let Some(obj) = v.as_object_mut() {
                    obj.insert("t".into(), serde_json::json!(e.at.as_secs_f64()));
                    obj.insert("text".into(), serde_json::json!(self.event_text(&e.kind)));
                }
                v
            })
            .collect();
        let samples: Vec<serde_json::Value> = self
            .samples
            .iter()
            .map(|s| {
                serde_json::json!({
                    "t": s.at.as_secs_f64(),
                    "driver": round6(s.driver),
                    "pedal": round6(s.pedal),
                    "target": round6(s.target),
                    "opening": round6(s.opening),
                    "duty": round6(s.duty),
                    "mode": self.modes.get(s.mode),
                    "key_on": s.key_on,
                })
            })
            .collect();
        let expectations: Vec<serde_json::Value> = self
            .expectations
            .iter()
            .map(|v| {
                serde_json::json!({
                    "text": v.text,
                    "passed": v.passed,
                    "decided_at": v.decided_at.as_secs_f64(),
                    "explanation": v.explanation,
                })
            })
            .collect();
        let v = serde_json::json!({
            "scenario": self.scenario,
            "policy": self.policy,
            "length": self.length.as_secs_f64(),
            "sample_every": self.sample_every.as_secs_f64(),
            "events": events,
            "samples": samples,
            "expectations": expectations,
            "passed": self.passed(),
        });
        format!("{}\n", serde_json::to_string_pretty(&v).unwrap_or_default())
    }

    /// CSV: a header row with units, one row per sample.
    pub fn to_csv(&self) -> String {
        let mut o =
            String::from("t_s,driver_pct,pedal_pct,target_pct,opening_pct,duty_pct,mode,key_on\n");
        for s in &self.samples {
            let mode = self.modes.get(s.mode).map_or("", |m| m.as_str());
            let _ = writeln!(
                o,
                "{:.6},{:.4},{:.4},{:.4},{:.4},{:.4},{},{}",
                s.at.as_secs_f64(),
                s.driver,
                s.pedal,
                s.target,
                s.opening,
                s.duty,
                mode,
                u8::from(s.key_on)
            );
        }
        o
    }
}

/// Rounds for JSON so that the bytes do not depend on the last bits of a float.
pub fn round6(x: f64) -> f64 {
    (x * 1e6).round() / 1e6
}
