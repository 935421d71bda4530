//! The exhaustive search. A transition system whose states pair the faulty vehicle with the
//! fault-free one under the same driver input: initial states are the fault-free reachable set
//! with the fault injected (every injection instant), actions are pedal moves on the grid, and
//! the `assure` requirements are checked on every state. Breadth-first, so the first violation
//! found for a requirement has the shortest path; a state whose quantised encoding was seen
//! before is not expanded again.

use super::{Config, Requirement as Req};
use crate::faults::{Injection, TrackFault};
use crate::model::Model;
use crate::sim::system::{System, Vehicle};
use crate::time::Time;
use std::collections::HashSet;
use std::hash::{BuildHasherDefault, Hasher};

/// The visited set stores 128-bit digests of state encodings (two FNV-1a streams). With the
/// tens of millions of states a search can hold, the chance that two different states share a
/// digest is far below 1e-20.
pub fn digest(bytes: &[u8]) -> u128 {
    let mut a: u64 = 0xcbf2_9ce4_8422_2325;
    let mut b: u64 = 0x6c62_272e_07bb_0142;
    for &x in bytes {
        a = (a ^ u64::from(x)).wrapping_mul(0x0000_0100_0000_01b3);
        b = (b ^ u64::from(x))
            .wrapping_mul(0x0000_0100_0000_01b3)
            .rotate_left(5);
    }
    (u128::from(a) << 64) | u128::from(b)
}

/// The digests are already well mixed: the set's hasher passes them through.
#[derive(Default)]
pub struct PassThrough(u64);

impl Hasher for PassThrough {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 = self.0.rotate_left(8) ^ u64::from(b);
        }
    }
    fn write_u128(&mut self, i: u128) {
        self.0 = (i as u64) ^ ((i >> 64) as u64);
    }
}

pub type Visited = HashSet<u128, BuildHasherDefault<PassThrough>>;

/// Requirement timers carried in the state.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Timers {
    /// Consecutive steps with the excess above its limit.
    pub excess: u16,
    /// Consecutive steps with the driver's pedal at 0 %.
    pub released: u16,
}

/// A fault-free state: the vehicle, the pedal grid index it was driven with last, its timers,
/// and how it was reached.
#[derive(Clone, Debug)]
pub struct PreNode<'v> {
    pub sys: System<'v>,
    pub pedal: u8,
    pub released: u16,
    pub parent: u32,
    pub depth: u32,
    /// Successor under each pedal action (index into the pre-fault set).
    pub succ: Vec<u32>,
}

/// The fault-free reachable set, closed under the pedal actions.
pub struct PreSet<'v> {
    pub nodes: Vec<PreNode<'v>>,
    /// Whether the bound on states was hit before closure.
    pub truncated: bool,
}

/// The pedal grid: `0, g, 2g, ..., 100` percent.
/// The finest grid the state encoding holds: pedal indices are 7 bits (the eighth marks the
/// second fault of a pair arriving).
pub const MIN_GRID: f64 = 1.0;

pub fn grid(cfg: &Config) -> Vec<f64> {
    let step = if cfg.grid.is_finite() {
        cfg.grid.clamp(MIN_GRID, 100.0)
    } else {
        10.0
    };
    let n = (100.0 / step).round().max(1.0) as usize;
    (0..=n)
        .map(|i| (i as f64 * 100.0 / n as f64).min(100.0))
        .collect()
}

/// The grid indices the driver may move to from `p`.
pub fn actions(cfg: &Config, p: u8, n: usize, out: &mut Vec<u8>) {
    out.clear();
    if cfg.free_pedal {
        out.extend(0..n as u8);
    } else {
        let p = usize::from(p);
        for q in p.saturating_sub(1)..=(p + 1).min(n - 1) {
            out.push(q as u8);
        }
    }
}

/// One controller period of one vehicle: the driver's pedal for this period, the controller
/// step at instant `now`, then the plate over the period.
pub fn period_step(sys: &mut System<'_>, model: &Model, pedal: f64, now: Time) {
    if let Some(d) = model.driver {
        sys.set_position(d, pedal);
    }
    let mut events = Vec::new();
    sys.controller_tick(now, &mut events);
    sys.advance_plant(now, model.period);
}

fn quantise(x: f64, q: f64) -> i32 {
    if x.is_finite() {
        (x / q).round() as i32
    } else {
        i32::MIN
    }
}

/// The encoding of one vehicle: controller state (discrete parts exact, continuous parts
/// quantised) and the plate.
pub fn encode_system(sys: &System<'_>, model: &Model, res: f64, out: &mut Vec<u8>) {
    out.push(u8::from(sys.key_on()));
    if let Some(st) = sys.controller_state() {
        st.encode(model, res, out);
    }
    let plate = sys.plate();
    out.extend_from_slice(&quantise(plate.position, res).to_le_bytes());
    // Velocities up to a few thousand %/s: quantised at 40 resolutions per second.
    out.extend_from_slice(&quantise(plate.velocity, res * 40.0).to_le_bytes());
}

/// Explores the fault-free system from key on with the pedal released.
pub fn pre_fault<'v>(vehicle: &'v Vehicle, cfg: &Config) -> PreSet<'v> {
    let model = vehicle.ctl.model();
    let g = grid(cfg);
    let mut visited = Visited::default();
    let mut index: std::collections::HashMap<u128, u32, BuildHasherDefault<PassThrough>> =
        Default::default();
    let root = PreNode {
        sys: System::new(vehicle),
        pedal: 0,
        released: 0,
        parent: u32::MAX,
        depth: 0,
        succ: Vec::new(),
    };
    let mut nodes = vec![root];
    let mut buf = Vec::with_capacity(256);
    let key = |n: &PreNode<'_>, buf: &mut Vec<u8>| {
        buf.clear();
        encode_system(&n.sys, model, cfg.resolution, buf);
        buf.push(n.pedal);
        digest(buf)
    };
    let k0 = key(&nodes[0], &mut buf);
    visited.insert(k0);
    index.insert(k0, 0);
    let release_cap = release_cap(model, cfg);
    let mut acts = Vec::new();
    // A state reached again with the pedal released for longer is more dangerous for the
    // release-to-idle requirement (it reaches the limit sooner): it replaces the stored one
    // and is expanded again, so the release timer need not be part of the visited key.
    let mut queue: std::collections::VecDeque<usize> = std::collections::VecDeque::from([0]);
    let mut truncated = false;
    while let Some(i) = queue.pop_front() {
        let (pedal, depth, released) = (nodes[i].pedal, nodes[i].depth, nodes[i].released);
        let now = Time(model.period.0 * u64::from(depth));
        actions(cfg, pedal, g.len(), &mut acts);
        let mut succ = Vec::with_capacity(acts.len());
        for &a in &acts {
            let mut sys = nodes[i].sys.clone();
            period_step(&mut sys, model, g[usize::from(a)], now);
            let rel = if a == 0 {
                (released + 1).min(release_cap)
            } else {
                0
            };
            let child = PreNode {
                sys,
                pedal: a,
                released: rel,
                parent: i as u32,
                depth: depth + 1,
                succ: Vec::new(),
            };
            let k = key(&child, &mut buf);
            if let Some(&j) = index.get(&k) {
                if child.released > nodes[j as usize].released && !is_ancestor(&nodes, j, i as u32)
                {
                    let old = &mut nodes[j as usize];
                    old.released = child.released;
                    old.parent = i as u32;
                    old.depth = child.depth;
                    old.sys = child.sys;
                    queue.push_back(j as usize);
                }
                succ.push(j);
                continue;
            }
            if nodes.len() >= cfg.max_states {
                truncated = true;
                succ.push(i as u32);
                continue;
            }
            visited.insert(k);
            let j = nodes.len() as u32;
            index.insert(k, j);
            nodes.push(child);
            queue.push_back(j as usize);
            succ.push(j);
        }
        nodes[i].succ = succ;
    }
    PreSet { nodes, truncated }
}

/// Whether `a` is `b` or one of its ancestors in the pre-fault tree.
fn is_ancestor(nodes: &[PreNode<'_>], a: u32, mut b: u32) -> bool {
    while b != u32::MAX {
        if a == b {
            return true;
        }
        b = nodes[b as usize].parent;
    }
    false
}

pub fn release_cap(model: &Model, cfg: &Config) -> u16 {
    let _ = cfg;
    let within = model
        .assure
        .as_ref()
        .into_iter()
        .flat_map(|a| a.requirements.iter())
        .filter_map(|r| match r {
            crate::model::Requirement::IdleAfterRelease { within, .. } => Some(*within),
            _ => None,
        })
        .max()
        .unwrap_or(Time::ZERO);
    u16::try_from(within.0.div_ceil(model.period.0.max(1)) + 1).unwrap_or(u16::MAX)
}

/// A joint state: the faulty vehicle, the index of its fault-free twin in the pre-fault set,
/// the pedal, the requirement timers, and the steps since injection.
#[derive(Clone, Debug)]
struct Node {
    /// The faulty controller's memory and plate; its active faults are its origin's.
    st: crate::controller::State,
    plate: crate::plant::PlantState,
    twin: u32,
    pedal: u8,
    timers: Timers,
    since: u32,
    /// Absolute step index (for intermittent phases and the script).
    step: u32,
    /// The pre-fault state the fault was injected into (for the root of a path).
    origin: u32,
    /// Whether any monitor has set since injection.
    detected: bool,
    /// Index of this node's active faults in the search's fault lists.
    faults: u32,
    /// For a pair: whether the second fault is in yet (it arrives at a step of its own).
    second_in: bool,
}

/// A violated requirement with the shortest path that shows it.
#[derive(Clone, Debug, PartialEq)]
pub struct Violation {
    pub requirement: usize,
    /// For a pair injected at independent instants: the step at whose start the second fault
    /// arrives (`None`: with the first).
    pub second_step: Option<u32>,
    /// Pedal grid values, one per controller period from key on, up to the violating state.
    pub pedal: Vec<f64>,
    /// The step at whose start the fault is injected.
    pub inject_step: u32,
    /// The instant of the violating state (end of its period).
    pub at: Time,
    /// The faulty opening there, and the bound it broke.
    pub opening: f64,
    pub bound: f64,
}

/// What the search of one fault found.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FaultResult {
    pub states: usize,
    /// Injection instants searched from (fault-free states merged at the injection resolution).
    pub roots: usize,
    pub truncated: bool,
    /// Monitors set in some explored faulty state (that are not set in its twin).
    pub monitors: Vec<usize>,
    /// Longest time from injection to the first monitor setting, over the explored branches.
    pub worst_detection: Option<Time>,
    /// Whether some explored branch was never detected within the horizon.
    pub undetected_branch: bool,
    /// Modes the faulty vehicle ends in (at the horizon or at a repeated state).
    pub end_modes: Vec<usize>,
    /// Latest time from injection to reaching a safe mode, over the branches that reach one.
    pub to_safe: Option<Time>,
    pub worst_excess: f64,
    pub worst_excess_duration: Time,
    /// Highest faulty opening while the driver is at or below the ceiling's driver threshold.
    pub worst_opening_below_ceiling: f64,
    /// Longest time from release to idle (the horizon when it never idles).
    pub worst_idle_after_release: Time,
    /// The first (shortest) violation per requirement, each confirmed by an exact replay.
    pub violations: Vec<Violation>,
    /// Candidate violations that the exact replay of their path did not confirm (an effect of
    /// merging states at the resolution).
    pub unconfirmed: usize,
}

/// How many candidate violations of one requirement are replayed before the search gives up
/// confirming that requirement for this fault.
pub const MAX_CONFIRMATIONS: usize = 64;

/// Replays a pedal path exactly, with the faults injected at the start of `inject_step`, beside
/// the fault-free vehicle, and returns the first violation of requirement `r` on it.
pub fn confirm(
    vehicle: &Vehicle,
    inj: &[Injection],
    pedal: &[f64],
    inject_step: u32,
    second_step: Option<u32>,
    ri: usize,
    r: &Req,
) -> Option<Violation> {
    let mut v = replay_check(
        vehicle,
        inj,
        pedal,
        inject_step,
        second_step,
        std::slice::from_ref(r),
    )
    .pop()??;
    v.requirement = ri;
    Some(v)
}

/// Replays a pedal path exactly beside the fault-free vehicle and returns, per requirement,
/// its first violation on the path.
pub fn replay_check(
    vehicle: &Vehicle,
    inj: &[Injection],
    pedal: &[f64],
    inject_step: u32,
    second_step: Option<u32>,
    reqs: &[Req],
) -> Vec<Option<Violation>> {
    let model = vehicle.ctl.model();
    let period = model.period;
    let mut faulty = System::new(vehicle);
    let mut nominal = System::new(vehicle);
    let mut excess = vec![0u32; reqs.len()];
    let mut released = 0u32;
    let mut out: Vec<Option<Violation>> = vec![None; reqs.len()];
    for (k, &p) in pedal.iter().enumerate() {
        let now = Time(period.0 * k as u64);
        for (n, i) in inj.iter().enumerate() {
            let at = match (n, second_step) {
                (0, _) | (_, None) => inject_step,
                (_, Some(s)) => s,
            };
            if k == at as usize {
                faulty.inject(*i, now);
            }
        }
        period_step(&mut faulty, model, p, now);
        period_step(&mut nominal, model, p, now);
        released = if p == 0.0 { released + 1 } else { 0 };
        if (k as u32) < inject_step {
            continue;
        }
        let (open, open_n) = (faulty.opening(), nominal.opening());
        let at = Time(period.0 * (k as u64 + 1));
        for (ri, r) in reqs.iter().enumerate() {
            if out[ri].is_some() {
                continue;
            }
            let hit = match *r {
                Req::Excess { limit, steps } => {
                    let base = open_n.max(model.actuator.default);
                    excess[ri] = if open - base > limit {
                        excess[ri] + 1
                    } else {
                        0
                    };
                    (excess[ri] > steps).then_some(base + limit)
                }
                Req::Never {
                    above,
                    unless_driver,
                } => (unless_driver.is_none_or(|y| p <= y) && open > above && open_n <= above)
                    .then_some(above),
                Req::Idle { idle, steps } => {
                    (released >= steps && open > idle && open_n <= idle).then_some(idle)
                }
            };
            if let Some(bound) = hit {
                out[ri] = Some(Violation {
                    requirement: ri,
                    second_step,
                    pedal: pedal[..=k].to_vec(),
                    inject_step,
                    at,
                    opening: open,
                    bound,
                });
            }
        }
        if out.iter().all(Option::is_some) {
            break;
        }
    }
    out
}

/// Directed probes beside the breadth-first search: from every injection instant, the driver
/// holds the pedal, or releases it at once, for the whole horizon. Deep, cheap, and exactly
/// the drives a reviewer asks about first; every violation found is exact by construction.
#[allow(clippy::too_many_arguments)]
fn probe(
    vehicle: &Vehicle,
    pre: &PreSet<'_>,
    roots: &[u32],
    inj: &[Injection],
    cfg: &Config,
    reqs: &[Req],
    found: &mut [bool],
    res: &mut FaultResult,
) {
    let model = vehicle.ctl.model();
    let g = grid(cfg);
    let horizon = usize::try_from(cfg.horizon.0.div_ceil(model.period.0.max(1))).unwrap_or(0);
    for &o in roots {
        if found.iter().all(|&f| f) {
            return;
        }
        let prefix = pedal_path(pre, o, &g);
        let here = g[usize::from(pre.nodes[o as usize].pedal)];
        for release in [false, true] {
            let mut path = prefix.clone();
            // Releasing moves the pedal down one grid step per period, as the search would.
            let mut p = here;
            for _ in 0..horizon {
                if release {
                    p = (p - cfg.grid).max(0.0);
                }
                path.push(p);
            }
            let inject_step = prefix.len() as u32;
            for (ri, v) in replay_check(vehicle, inj, &path, inject_step, None, reqs)
                .into_iter()
                .enumerate()
            {
                if let Some(v) = v
                    && !found[ri]
                {
                    found[ri] = true;
                    res.violations.push(v);
                }
            }
        }
    }
}

fn pedal_path(pre: &PreSet<'_>, mut i: u32, g: &[f64]) -> Vec<f64> {
    let mut v = Vec::new();
    while i != u32::MAX && i != 0 {
        let n = &pre.nodes[i as usize];
        v.push(g[usize::from(n.pedal)]);
        i = n.parent;
    }
    v.reverse();
    v
}

/// Searches one fault (or a pair: the second injected on top of the first at the same
/// instant is not what `double` means; pairs are handled by the caller).
pub fn search_fault<'v>(
    vehicle: &'v Vehicle,
    pre: &PreSet<'v>,
    inj: &[Injection],
    cfg: &Config,
    reqs: &[Req],
) -> FaultResult {
    let model = vehicle.ctl.model();
    let g = grid(cfg);
    let period = model.period;
    let horizon = u32::try_from(cfg.horizon.0.div_ceil(period.0.max(1))).unwrap_or(u32::MAX);
    let release_cap = release_cap(model, cfg);
    let excess_cap = reqs
        .iter()
        .filter_map(|r| match r {
            Req::Excess { steps, .. } => Some(*steps),
            _ => None,
        })
        .max()
        .unwrap_or(0)
        .saturating_add(1)
        .min(u32::from(u16::MAX)) as u16;
    // Intermittent faults add their phase to the state.
    let cycle: u32 = inj
        .iter()
        .filter_map(|i| match i {
            Injection::Track {
                fault: TrackFault::Intermittent { every, .. },
                ..
            } => Some(
                u32::try_from(every.0.div_ceil(period.0.max(1)))
                    .unwrap_or(1)
                    .max(1),
            ),
            _ => None,
        })
        .fold(1, |a, b| a * b / gcd(a, b));

    let mut res = FaultResult {
        worst_opening_below_ceiling: f64::NEG_INFINITY,
        ..FaultResult::default()
    };
    // Visited states with the longest release time each was reached with (see `pre_fault`).
    let mut visited: std::collections::HashMap<u128, u16, BuildHasherDefault<PassThrough>> =
        Default::default();
    let mut arena: Vec<(u32, u8, u32)> = Vec::new(); // (parent, pedal, origin) per stored node
    let mut frontier: Vec<Node> = Vec::new();
    // The active faults of each root, captured at its injection instant.
    let mut root_faults: Vec<Vec<crate::faults::ActiveFault>> = Vec::new();
    let mut buf = Vec::with_capacity(512);
    let mut monitor_seen = vec![false; model.faults.len()];
    let mut end_modes = vec![false; model.modes.len()];
    let mut found = vec![false; reqs.len()];
    let mut tries = vec![0usize; reqs.len()];

    let key = |n: &Node, buf: &mut Vec<u8>| {
        buf.clear();
        buf.push(1);
        n.st.encode(model, cfg.resolution, buf);
        buf.extend_from_slice(&quantise(n.plate.position, cfg.resolution).to_le_bytes());
        buf.extend_from_slice(&quantise(n.plate.velocity, cfg.resolution * 40.0).to_le_bytes());
        // The twin enters the key through its plate only (opening and speed, quantised): pairing
        // it exactly multiplies the state space by the fault-free set. Violations found with a
        // merged twin are confirmed by an exact replay before they are reported.
        let twin = pre.nodes[n.twin as usize].sys.plate();
        buf.extend_from_slice(&quantise(twin.position, cfg.resolution).to_le_bytes());
        buf.extend_from_slice(&quantise(twin.velocity, cfg.resolution * 40.0).to_le_bytes());
        buf.push(n.pedal);
        buf.extend_from_slice(&n.timers.excess.to_le_bytes());
        buf.push(u8::from(n.detected) | (u8::from(n.second_in) << 1));
        buf.extend_from_slice(&((n.since) % cycle).to_le_bytes());
        digest(buf)
    };

    // Roots: the fault injected into fault-free states. Fault-free states that agree at the
    // injection resolution (coarser than the search's) share one root: the search then goes
    // deep from a few hundred instants rather than shallow from tens of thousands.
    let mut roots_seen = Visited::default();
    for (oi, o) in pre.nodes.iter().enumerate() {
        // What distinguishes an injection instant physically: the pedal, the mode, the faults
        // set, the plate's position and direction of travel.
        buf.clear();
        buf.push(o.pedal);
        buf.extend_from_slice(&(o.sys.mode() as u32).to_le_bytes());
        for f in 0..model.faults.len() {
            buf.push(u8::from(o.sys.fault_set(f)));
        }
        let plate = o.sys.plate();
        let r = cfg.injection_resolution.max(cfg.resolution);
        buf.extend_from_slice(&quantise(plate.position, r).to_le_bytes());
        buf.push((plate.velocity.signum() as i8) as u8);
        if !roots_seen.insert(digest(&buf)) {
            continue;
        }
        let mut sys = o.sys.clone();
        let now = Time(period.0 * u64::from(o.depth));
        // A pair's second fault arrives later, at a step the search chooses.
        for i in &inj[..inj.len().min(1)] {
            sys.inject(*i, now);
        }
        let Some(st) = sys.controller_state().cloned() else {
            // The key-on state before the first step: its first step is explored from the
            // fault-free set's first successors instead.
            continue;
        };
        let n = Node {
            st,
            plate: sys.plate(),
            twin: oi as u32,
            pedal: o.pedal,
            timers: Timers {
                excess: 0,
                released: o.released,
            },
            since: 0,
            step: o.depth,
            origin: root_faults.len() as u32,
            detected: false,
            faults: root_faults.len() as u32,
            second_in: inj.len() < 2,
        };
        let k = key(&n, &mut buf);
        if visited.insert(k, n.timers.released).is_none() {
            arena.push((u32::MAX, n.pedal, oi as u32));
            root_faults.push(sys.active_faults().to_vec());
            frontier.push(n);
        }
    }
    let root_ids: Vec<u32> = arena.iter().map(|&(_, _, o)| o).collect();
    probe(
        vehicle, pre, &root_ids, inj, cfg, reqs, &mut found, &mut res,
    );
    let mut acts = Vec::new();
    let mut choices: Vec<(usize, u8, bool)> = Vec::new();
    let mut positions = vec![0.0; model.sensors.len()];
    let mut scratch = (
        pre.nodes[0].sys.sample().clone(),
        crate::controller::Outputs::default(),
    );
    let mut next_frontier = Vec::new();
    // Arena index of each frontier node.
    let mut frontier_ids: Vec<u32> = (0..frontier.len() as u32).collect();
    let mut next_ids = Vec::new();
    while !frontier.is_empty() {
        next_frontier.clear();
        next_ids.clear();
        for (fi, node) in frontier.iter().enumerate() {
            let my_id = frontier_ids[fi];
            if node.since >= horizon {
                end_modes[node.st.mode()] = true;
                if !node.detected {
                    res.undetected_branch = true;
                }
                continue;
            }
            let now = Time(period.0 * u64::from(node.step));
            actions(cfg, node.pedal, g.len(), &mut acts);
            let twin = &pre.nodes[node.twin as usize];
            let mut any_new = false;
            choices.clear();
            for (ai, &a) in acts.iter().enumerate() {
                choices.push((ai, a, false));
                if !node.second_in {
                    choices.push((ai, a, true));
                }
            }
            for &(ai, a, inject_b) in &choices {
                let mut st = node.st.clone();
                let mut plate = node.plate;
                let mut faults_now = node.faults;
                if inject_b {
                    // The second fault arrives at this step's start, before the pedal moves,
                    // as a script's `break` line before its `pedal` line does.
                    if let Some(d) = model.driver {
                        positions[d] = g[usize::from(node.pedal)];
                    }
                    positions[model.feedback] = plate.position;
                    let mut list = root_faults[node.faults as usize].clone();
                    let b = crate::faults::ActiveFault::capture(
                        model,
                        inj[1],
                        now,
                        &positions,
                        plate.position,
                        &list,
                    );
                    list.push(b);
                    faults_now = root_faults.len() as u32;
                    root_faults.push(list);
                }
                if let Some(d) = model.driver {
                    positions[d] = g[usize::from(a)];
                }
                crate::sim::system::period(
                    vehicle,
                    &mut st,
                    &mut plate,
                    &mut positions,
                    &root_faults[faults_now as usize],
                    now,
                    period,
                    &mut scratch,
                );
                let twin_next = twin.succ.get(ai).copied().unwrap_or(node.twin);
                let tw = &pre.nodes[twin_next as usize].sys;
                let driver = g[usize::from(a)];
                let (open, open_n) = (plate.position, tw.opening());
                let mut timers = node.timers;
                timers.released = if a == 0 {
                    (timers.released + 1).min(release_cap)
                } else {
                    0
                };
                let mut excess_now = false;
                let since = node.since + 1;
                let step = node.step + 1;
                // Monitors and detection.
                let mut detected = node.detected;
                for (f, seen) in monitor_seen.iter_mut().enumerate() {
                    if st.fault_set(f) && !tw.fault_set(f) {
                        *seen = true;
                        if !detected {
                            detected = true;
                            let t = Time(period.0 * u64::from(since));
                            res.worst_detection = Some(res.worst_detection.map_or(t, |w| w.max(t)));
                        }
                    }
                }
                if model.modes[st.mode()].is_safe() && !model.modes[node.st.mode()].is_safe() {
                    let t = Time(period.0 * u64::from(since));
                    res.to_safe = Some(res.to_safe.map_or(t, |w| w.max(t)));
                }
                // Requirements.
                for (ri, r) in reqs.iter().enumerate() {
                    let violated = match *r {
                        Req::Excess { limit, steps } => {
                            // The springs' default position is the designed limp-home opening:
                            // resting there is not an excess, whatever the twin does.
                            let ex = open - open_n.max(model.actuator.default);
                            if ex > res.worst_excess {
                                res.worst_excess = ex;
                            }
                            if ex > limit {
                                excess_now = true;
                                let n = timers.excess + 1;
                                let d = Time(period.0 * u64::from(n));
                                if d > res.worst_excess_duration {
                                    res.worst_excess_duration = d;
                                }
                                u32::from(n) > steps
                            } else {
                                false
                            }
                        }
                        Req::Never {
                            above,
                            unless_driver,
                        } => {
                            let below = unless_driver.is_none_or(|y| driver <= y);
                            if below && open > res.worst_opening_below_ceiling {
                                res.worst_opening_below_ceiling = open;
                            }
                            below && open > above && open_n <= above
                        }
                        Req::Idle { idle, steps } => {
                            if u32::from(timers.released) >= steps
                                && open > idle
                                && tw.opening() <= idle
                            {
                                true
                            } else {
                                if timers.released > 0 && open > idle {
                                    let d = Time(period.0 * u64::from(timers.released));
                                    if d > res.worst_idle_after_release {
                                        res.worst_idle_after_release = d;
                                    }
                                }
                                false
                            }
                        }
                    };
                    if violated && !found[ri] && tries[ri] < MAX_CONFIRMATIONS {
                        tries[ri] += 1;
                        // Rebuild the pedal path: pre-fault prefix, then the joint path.
                        let mut tail = vec![(driver, inject_b)];
                        let mut id = my_id;
                        let mut origin = node.origin;
                        while id != u32::MAX {
                            let (parent, pedal, o) = arena[id as usize];
                            if parent == u32::MAX {
                                origin = o;
                                break;
                            }
                            tail.push((g[usize::from(pedal & 0x7f)], pedal & 0x80 != 0));
                            id = parent;
                        }
                        tail.reverse();
                        let mut pedal = pedal_path(pre, origin, &g);
                        let inject_step = pedal.len() as u32;
                        let second_step = tail
                            .iter()
                            .position(|&(_, b)| b)
                            .map(|i| inject_step + i as u32);
                        pedal.extend(tail.iter().map(|&(p, _)| p));
                        // Merged states stand for their first visitor: replay the path exactly,
                        // faulty and fault-free, and keep the violation only if it is real.
                        if let Some(v) =
                            confirm(vehicle, inj, &pedal, inject_step, second_step, ri, r)
                        {
                            found[ri] = true;
                            res.violations.push(v);
                        } else {
                            res.unconfirmed += 1;
                        }
                    }
                }
                timers.excess = if excess_now {
                    (timers.excess + 1).min(excess_cap)
                } else {
                    0
                };
                let child = Node {
                    st,
                    plate,
                    twin: twin_next,
                    pedal: a,
                    timers,
                    since,
                    step,
                    origin: node.origin,
                    detected,
                    faults: faults_now,
                    second_in: node.second_in || inject_b,
                };
                let k = key(&child, &mut buf);
                match visited.get_mut(&k) {
                    Some(r) if *r >= child.timers.released => continue,
                    Some(r) => *r = child.timers.released,
                    None => {
                        visited.insert(k, child.timers.released);
                    }
                }
                if arena.len() >= cfg.max_states {
                    res.truncated = true;
                    continue;
                }
                any_new = true;
                arena.push((my_id, a | if inject_b { 0x80 } else { 0 }, node.origin));
                next_ids.push((arena.len() - 1) as u32);
                next_frontier.push(child);
            }
            if !any_new {
                end_modes[node.st.mode()] = true;
            }
        }
        std::mem::swap(&mut frontier, &mut next_frontier);
        std::mem::swap(&mut frontier_ids, &mut next_ids);
    }
    res.states = arena.len();
    res.roots = root_faults.len();
    res.monitors = (0..model.faults.len())
        .filter(|&f| monitor_seen[f])
        .collect();
    res.end_modes = (0..model.modes.len()).filter(|&m| end_modes[m]).collect();
    if res.worst_opening_below_ceiling == f64::NEG_INFINITY {
        res.worst_opening_below_ceiling = 0.0;
    }
    res.violations.sort_by_key(|v| v.requirement);
    res
}

fn gcd(a: u32, b: u32) -> u32 {
    if b == 0 { a.max(1) } else { gcd(b, a % b) }
}
