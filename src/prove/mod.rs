//! Exhaustive fault search: the fault space, the search over driver behaviour and injection
//! instants, the reaction matrix, and counterexamples written as scenario scripts that replay.

pub mod cone;
pub mod detect;
pub mod faulty;
pub mod joint;
mod lone;
pub mod report;
pub mod search;
pub mod space;

use crate::faults::{ActuatorFault, Injection};
use crate::model::{FaultScope, Model};
use crate::sim::system::Vehicle;
use crate::time::Time;
use search::FaultResult;

/// What the search covers; the output states it, so a reader knows what "exhaustive" meant.
#[derive(Clone, Debug, PartialEq)]
pub struct Config {
    /// Pedal grid step, percent.
    pub grid: f64,
    /// Quantisation of continuous states in the visited set, percent (volts proportionally).
    pub resolution: f64,
    /// How long after each injection every branch is followed.
    pub horizon: Time,
    /// Bound on stored states per search.
    pub max_states: usize,
    /// Pair each faulty state with its fault-free twin exactly (the twin's whole state at the
    /// resolution) rather than by the twin's plate alone.
    pub exact_twin: bool,
    /// The pedal may jump anywhere on the grid each period, not only one step.
    pub free_pedal: bool,
    pub jobs: usize,
    /// Overrides the policy's `faults single|double`.
    pub scope: Option<FaultScope>,
    /// Only faults whose description contains this text (for focused runs).
    pub only: Option<String>,
    /// Candidate violations screened per requirement and fault beyond the first
    /// [`search::MAX_CONFIRMATIONS`] (see [`search::FaultResult::unconfirmed`]).
    pub screen: usize,
}

impl Default for Config {
    fn default() -> Self {
        Config {
            grid: 5.0,
            resolution: 10.0,
            horizon: Time::from_ms(1200),
            max_states: 100_000,
            exact_twin: false,
            free_pedal: false,
            jobs: 0,
            scope: None,
            only: None,
            screen: 4096,
        }
    }
}

/// The longest horizon a search takes: as long as a scenario may run.
pub const MAX_HORIZON: Time = Time(600 * 1_000_000_000);

impl Config {
    /// Validates the grid, resolution and horizon flags: the grid must fit a pedal index in a
    /// byte, and the horizon must leave something to check after an injection.
    pub fn check_flags(grid: f64, resolution: f64, horizon: Time) -> Result<(), String> {
        if !((search::MIN_GRID..=100.0).contains(&grid) && resolution > 0.0 && resolution <= 50.0) {
            Err(format!(
                "error: --grid must be in {} .. 100 and --resolution in (0, 50] percent\n  = hint: e.g. --grid 5 --resolution 5\n",
                search::MIN_GRID
            ))
        } else if horizon > MAX_HORIZON {
            Err(format!(
                "error: --horizon must be at most {MAX_HORIZON}: each injection's future is searched that far, period by period\n  = hint: a few times the fault-tolerant time interval is enough, e.g. --horizon 1.2s; a longer drive is a scenario for `limpet run`\n"
            ))
        } else if horizon == Time(0) {
            // Nothing after an injection would be checked: every requirement would "hold".
            Err("error: --horizon must be longer than 0: the requirements are checked over the horizon after each injection\n  = hint: e.g. --horizon 1.2s, a few times the fault-tolerant time interval\n".into())
        } else {
            Ok(())
        }
    }
}

/// A requirement in steps, ready for the search.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Requirement {
    Excess {
        limit: f64,
        steps: u32,
    },
    Never {
        above: f64,
        unless_driver: Option<f64>,
    },
    Idle {
        idle: f64,
        steps: u32,
    },
}

impl Requirement {
    pub fn text(&self, model: &Model) -> String {
        let p = |x: f64| crate::time::trim(x);
        let t = |s: u32| Time(model.period.0 * u64::from(s));
        match *self {
            Requirement::Excess { limit, steps } => {
                format!("excess below {} % within {}", p(limit), t(steps))
            }
            Requirement::Never {
                above,
                unless_driver: Some(y),
            } => {
                format!("never above {} % unless driver above {} %", p(above), p(y))
            }
            Requirement::Never {
                above,
                unless_driver: None,
            } => format!("never above {} %", p(above)),
            Requirement::Idle { steps, .. } => format!("idle within {} of release", t(steps)),
        }
    }

    pub fn short(&self) -> &'static str {
        match self {
            Requirement::Excess { .. } => "excess",
            Requirement::Never { .. } => "ceiling",
            Requirement::Idle { .. } => "idle",
        }
    }
}

pub fn requirements(model: &Model) -> Vec<Requirement> {
    let steps = |t: Time| u32::try_from(t.0.div_ceil(model.period.0.max(1))).unwrap_or(u32::MAX);
    model
        .assure
        .iter()
        .flat_map(|a| a.requirements.iter())
        .map(|r| match *r {
            crate::model::Requirement::Excess { limit, within, .. } => Requirement::Excess {
                limit,
                steps: steps(within),
            },
            crate::model::Requirement::Never {
                above,
                unless_driver,
                ..
            } => Requirement::Never {
                above,
                unless_driver,
            },
            crate::model::Requirement::IdleAfterRelease { within, .. } => Requirement::Idle {
                idle: model.actuator.idle,
                steps: steps(within),
            },
        })
        .collect()
}

/// Whether `inj` breaks the driver's own sensor.
fn on_driver(model: &Model, inj: &Injection) -> bool {
    match *inj {
        Injection::Track { track, .. } => Some(track.sensor) == model.driver,
        Injection::Sensor { sensor, .. } => Some(sensor) == model.driver,
        Injection::Actuator { .. } => false,
    }
}

/// Faults no throttle policy can correct: the plate does not move whatever the drive does.
pub fn uncorrectable(inj: &[Injection]) -> bool {
    inj.iter().any(|i| {
        matches!(
            i,
            Injection::Actuator {
                fault: ActuatorFault::Stuck
            }
        )
    })
}

/// One row of the reaction matrix.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    pub faults: Vec<Injection>,
    /// Monitors that can see it at all, from the static pre-pass.
    pub seen_by: Vec<usize>,
    pub uncorrectable: bool,
    pub result: FaultResult,
}

/// What the search says of one requirement for one fault set.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    /// A confirmed violation exists.
    Violated,
    /// No violation found, but the search hit its bound.
    Inconclusive,
    /// No violation confirmed, but the search met candidate violations that no exact replay
    /// confirmed: states merged at the resolution leave the requirement undecided there (a
    /// finer `--resolution` may decide it).
    Unresolved,
    /// No violation, and no candidate of one, within the search's coverage.
    Holds,
}

impl Row {
    /// The fault set in the scenario language's words: `pedal.a open + actuator stuck`.
    pub fn describe(&self, m: &Model) -> String {
        self.faults
            .iter()
            .map(|i| crate::faults::describe(m, i))
            .collect::<Vec<_>>()
            .join(" + ")
    }

    /// Whether some requirement of this row is left without a verdict, by the bound or by
    /// unconfirmed candidates (a search that violated every requirement is decided).
    pub fn undecided(&self, p: &Proof) -> bool {
        (0..p.requirements.len()).any(|ri| {
            matches!(
                self.verdict(ri),
                Verdict::Inconclusive | Verdict::Unresolved
            )
        })
    }

    /// Whether the bound left some requirement of this row without a verdict.
    pub fn bound_hit(&self, p: &Proof) -> bool {
        (0..p.requirements.len()).any(|ri| self.verdict(ri) == Verdict::Inconclusive)
    }

    /// The verdict on requirement `ri`.
    pub fn verdict(&self, ri: usize) -> Verdict {
        if self.result.violations.iter().any(|v| v.requirement == ri) {
            Verdict::Violated
        } else if self.result.truncated {
            Verdict::Inconclusive
        } else if self.result.unconfirmed.get(ri).is_some_and(|&n| n > 0) {
            Verdict::Unresolved
        } else {
            Verdict::Holds
        }
    }
}

/// The whole proof.
#[derive(Clone, Debug)]
pub struct Proof {
    pub config: Config,
    pub scope: FaultScope,
    pub requirements: Vec<Requirement>,
    pub pre_states: usize,
    pub pre_truncated: bool,
    pub rows: Vec<Row>,
    /// States stored over all searches, the pre-fault set included.
    pub states: usize,
}

impl Proof {
    /// A requirement is violated by a correctable fault.
    pub fn violated(&self) -> bool {
        self.rows
            .iter()
            .any(|r| !r.uncorrectable && !r.result.violations.is_empty())
    }

    pub fn inconclusive(&self) -> bool {
        self.pre_truncated || self.rows.iter().any(|r| r.undecided(self))
    }

    /// A search hit `--max-states` before a verdict.
    pub fn bound_hit(&self) -> bool {
        self.pre_truncated || self.rows.iter().any(|r| r.bound_hit(self))
    }

    /// Some cell is unresolved (see [`Verdict::Unresolved`]).
    pub fn unresolved(&self) -> bool {
        self.rows
            .iter()
            .any(|r| (0..self.requirements.len()).any(|ri| r.verdict(ri) == Verdict::Unresolved))
    }
}

/// Runs the proof; `progress` is told after each fault (done, total, states so far).
pub fn prove(
    model: &Model,
    cfg: &Config,
    progress: &(dyn Fn(usize, usize, usize) + Sync),
) -> Result<Proof, crate::plant::PlantError> {
    let vehicle = Vehicle::new(model)?;
    let reqs = requirements(model);
    let scope = cfg
        .scope
        .or(model.assure.as_ref().map(|a| a.faults))
        .unwrap_or(FaultScope::Single);
    let pre = search::pre_fault(&vehicle, cfg);
    let mut space = space::fault_space(model);
    if let Some(only) = &cfg.only {
        space.retain(|i| crate::faults::describe(model, i).contains(only.as_str()));
    }
    let mut sets: Vec<Vec<Injection>> = space.iter().map(|i| vec![*i]).collect();
    if scope == FaultScope::Double {
        // Unordered pairs: the first injected at every fault-free instant, the second at any
        // later step the search chooses (an action beside the pedal moves).
        for i in 0..space.len() {
            for j in i + 1..space.len() {
                sets.push(vec![space[i], space[j]]);
            }
        }
    }
    let done = std::sync::atomic::AtomicUsize::new(0);
    let states = std::sync::atomic::AtomicUsize::new(pre.nodes.len());
    let total = sets.len();
    let run = |set: &Vec<Injection>| {
        let result = search::search_fault(&vehicle, &pre, set, cfg, &reqs);
        let seen_by = if set.len() == 1 {
            space::seen_by(model, &set[0])
        } else {
            Vec::new()
        };
        let s =
            states.fetch_add(result.states, std::sync::atomic::Ordering::Relaxed) + result.states;
        let d = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
        progress(d, total, s);
        Row {
            faults: set.clone(),
            seen_by,
            uncorrectable: uncorrectable(set),
            result,
        }
    };
    let rows: Vec<Row> = if cfg.jobs == 1 {
        sets.iter().map(run).collect()
    } else {
        // The searches one by one from a shared queue, the likely largest first (those on
        // the driver's own sensor, which leave the driver steering the faulty vehicle), so
        // that no long one starts last: each worker takes the next search when it is free
        // (a split of the list between workers would leave one idle at the end while the
        // other finishes its half). Each result goes back to its place, so the output keeps
        // the fault space's order whatever the schedule.
        let mut order: Vec<usize> = (0..sets.len()).collect();
        order.sort_by_key(|&i| !sets[i].iter().any(|j| on_driver(model, j)));
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(cfg.jobs)
            .build();
        match pool {
            Ok(p) => {
                let next = std::sync::atomic::AtomicUsize::new(0);
                let slots: Vec<std::sync::Mutex<Option<Row>>> = (0..sets.len())
                    .map(|_| std::sync::Mutex::new(None))
                    .collect();
                p.scope(|s| {
                    for _ in 0..p.current_num_threads() {
                        s.spawn(|_| {
                            loop {
                                let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                                let Some(&i) = order.get(k) else { break };
                                let row = run(&sets[i]);
                                if let Ok(mut slot) = slots[i].lock() {
                                    *slot = Some(row);
                                }
                            }
                        });
                    }
                });
                slots
                    .into_iter()
                    .filter_map(|m| m.into_inner().ok().flatten())
                    .collect()
            }
            Err(_) => sets.iter().map(run).collect(),
        }
    };
    let states = states.into_inner();
    Ok(Proof {
        config: cfg.clone(),
        scope,
        requirements: reqs,
        pre_states: pre.nodes.len(),
        pre_truncated: pre.truncated,
        rows,
        states,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Common practice, no source: a confirmed violation decides a cell whatever else
    /// happened; a search cut off by its bound decides nothing it did not violate; candidates
    /// that no exact replay confirmed leave a cell unresolved, never held.
    #[test]
    fn a_cell_holds_only_without_bound_or_unconfirmed_candidates() {
        let row = |truncated: bool, unconfirmed: Vec<usize>, violated: Option<usize>| Row {
            faults: Vec::new(),
            seen_by: Vec::new(),
            uncorrectable: false,
            result: FaultResult {
                truncated,
                unconfirmed,
                violations: violated
                    .map(|requirement| search::Violation {
                        requirement,
                        second_step: None,
                        pedal: vec![0.0],
                        inject_step: 0,
                        at: Time(0),
                        opening: 95.0,
                        bound: 90.0,
                    })
                    .into_iter()
                    .collect(),
                ..FaultResult::default()
            },
        };
        let verdicts = |r: &Row| (0..3).map(|ri| r.verdict(ri)).collect::<Vec<_>>();
        use Verdict::*;
        assert_eq!(
            verdicts(&row(false, vec![0, 3, 0], None)),
            [Holds, Unresolved, Holds]
        );
        assert_eq!(
            verdicts(&row(false, vec![0, 3, 0], Some(1))),
            [Holds, Violated, Holds]
        );
        assert_eq!(
            verdicts(&row(true, vec![0, 3, 0], Some(0))),
            [Violated, Inconclusive, Inconclusive]
        );
        assert_eq!(verdicts(&row(false, Vec::new(), None)), [Holds; 3]);
    }

    #[test]
    fn flags_out_of_range_are_bad_input() {
        let ok = Time::from_ms(1200);
        assert!(Config::check_flags(5.0, 10.0, ok).is_ok());
        assert!(Config::check_flags(0.5, 10.0, ok).is_err());
        assert!(Config::check_flags(5.0, 0.0, ok).is_err());
        assert!(Config::check_flags(5.0, 60.0, ok).is_err());
        assert!(Config::check_flags(f64::NAN, 10.0, ok).is_err());
        assert!(Config::check_flags(5.0, 10.0, MAX_HORIZON).is_ok());
        let long = Config::check_flags(5.0, 10.0, Time(MAX_HORIZON.0 + 1)).unwrap_err();
        assert!(
            long.contains("--horizon") && long.contains("hint"),
            "{long}"
        );
        let zero = Config::check_flags(5.0, 10.0, Time(0)).unwrap_err();
        assert!(
            zero.contains("--horizon") && zero.contains("hint"),
            "{zero}"
        );
    }
}
