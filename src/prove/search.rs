//! The exhaustive search. A transition system whose states pair the faulty vehicle with the
//! fault-free one under the same driver input: initial states are the fault-free reachable set
//! with the fault injected (every injection instant), actions are pedal moves on the grid, and
//! the `assure` requirements are checked on every state. Breadth-first, so the first violation
//! found for a requirement has the shortest path; a state whose quantised encoding was seen
//! before is not expanded again.

use super::faulty::{DROPPED, Faulty};
use super::lone::{LoneWalks, constant_can_violate};
use super::{Config, Requirement as Req};
use crate::controller::State;
use crate::faults::{ActiveFault, Injection};
use crate::model::Model;
use crate::plant::PlantState;
use crate::sim::system::{System, Vehicle};
use crate::time::Time;
use std::hash::{BuildHasherDefault, Hasher};

/// The visited set stores 128-bit digests of state encodings: two independent 64-bit streams,
/// each folding the encoding in 8-byte words through a bijective multiply-xorshift mix (so
/// encodings of one length that differ in a single word never collide), then a final
/// avalanche. With the tens of millions of states a search can hold, the chance that two
/// different states share a digest is far below 1e-20.
pub fn digest(bytes: &[u8]) -> u128 {
    const K1: u64 = 0x9e37_79b9_7f4a_7c15;
    const K2: u64 = 0xbf58_476d_1ce4_e5b9;
    let len = bytes.len() as u64;
    let mut a: u64 = 0x243f_6a88_85a3_08d3 ^ len;
    let mut b: u64 = 0x1319_8a2e_0370_7344 ^ len.rotate_left(32);
    let mut chunks = bytes.chunks_exact(8);
    let mut fold = |w: u64| {
        a = (a ^ w).wrapping_mul(K1);
        a ^= a >> 29;
        b = (b ^ w.rotate_left(23)).wrapping_mul(K2);
        b ^= b >> 31;
    };
    for c in chunks.by_ref() {
        let mut w = [0u8; 8];
        w.copy_from_slice(c);
        fold(u64::from_le_bytes(w));
    }
    let rest = chunks.remainder();
    if !rest.is_empty() {
        let mut w = [0u8; 8];
        w[..rest.len()].copy_from_slice(rest);
        fold(u64::from_le_bytes(w));
    }
    // splitmix64's finaliser on each stream.
    let fin = |mut z: u64| {
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    };
    (u128::from(fin(a)) << 64) | u128::from(fin(b ^ a.rotate_left(17)))
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
        self.0 ^= (i as u64) ^ ((i >> 64) as u64);
    }
    fn write_usize(&mut self, i: usize) {
        self.0 = (self.0 ^ i as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15);
    }
}

/// Requirement timers carried in the state.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Timers {
    /// Consecutive steps with the excess above its limit.
    pub excess: u16,
    /// Consecutive steps with the driver's pedal at 0 %.
    pub released: u16,
}

/// Which requirement timers still decide a verdict. A timer whose requirements are all found
/// violated (their verdicts final) is still carried, for the figures, but no longer tells
/// states apart: a state reached again further on only in that timer is not expanded again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Watch {
    pub excess: bool,
    pub released: bool,
}

impl Watch {
    /// Both timers watched.
    pub const ALL: Watch = Watch {
        excess: true,
        released: true,
    };

    /// The timers of the requirements not yet `found` violated.
    pub fn open(reqs: &[Req], found: &[bool]) -> Watch {
        let mut w = Watch {
            excess: false,
            released: false,
        };
        for (r, &done) in reqs.iter().zip(found) {
            match r {
                Req::Excess { .. } => w.excess |= !done,
                Req::Idle { .. } => w.released |= !done,
                Req::Never { .. } => {}
            }
        }
        w
    }
}

impl Timers {
    /// Dominance of requirement timers: `None` when `self` (a state's stored timers) covers
    /// `t` (no further on in either watched timer), else the larger of each, which the state
    /// goes on with. See [`super::joint::JointSet::admit`].
    #[inline]
    pub fn absorb(self, t: Timers, watch: Watch) -> Option<Timers> {
        if (!watch.excess || self.excess >= t.excess)
            && (!watch.released || self.released >= t.released)
        {
            return None;
        }
        Some(Timers {
            excess: self.excess.max(t.excess),
            released: self.released.max(t.released),
        })
    }
}

/// A fault-free state: the controller's memory and the plate (the rest of the vehicle is the
/// key-on vehicle's, see [`PreSet::system`]), the pedal grid index it was driven with last,
/// its timers, and how it was reached. Kept this compactly because a fine resolution makes
/// millions of them: a whole vehicle, with its samples and outputs, took about 2 KB.
#[derive(Clone, Debug)]
pub struct PreNode {
    /// `None` at key on, before the first step.
    pub state: Option<State>,
    pub plate: PlantState,
    pub pedal: u8,
    pub released: u16,
    pub parent: u32,
    pub depth: u32,
    /// Successor under each pedal action (index into the pre-fault set).
    pub succ: Vec<u32>,
}

/// The fault-free reachable set, closed under the pedal actions.
pub struct PreSet<'v> {
    /// The vehicle at key on, before its first step: node 0.
    pub key_on: System<'v>,
    pub nodes: Vec<PreNode>,
    /// Whether the bound on states was hit before closure.
    pub truncated: bool,
    /// Per node, what the joint search reads of a twin, packed (see [`PreHot`]).
    pub hot: Vec<PreHot>,
    /// Per node, the successor under each action, `stride` slots each (a node at the grid's
    /// edge has fewer actions: its spare slots hold itself).
    succ: Vec<u32>,
    stride: usize,
    /// Per node, the monitors set, `words` 64-bit words each; `any_mask` when one is set
    /// anywhere (the fault-free van sets none).
    masks: Vec<u64>,
    words: usize,
    any_mask: bool,
}

/// A fault-free node as the joint search's inner loop reads it, in one cache line's quarter.
#[derive(Clone, Copy, Debug)]
pub struct PreHot {
    /// The plate's opening.
    pub opening: f64,
    /// A dense class of its quantised plate (opening and speed): the twin's part of a joint
    /// key when the twin is paired by its plate alone.
    pub class: u32,
    /// The successor when the driver eases off fastest (the first action).
    pub release: u32,
}

impl<'v> PreSet<'v> {
    /// The fault-free vehicle at node `t`, ready to be stepped.
    pub fn system(&self, t: u32) -> System<'v> {
        let n = &self.nodes[t as usize];
        self.key_on.with_state(n.state.as_ref(), n.plate)
    }

    /// The monitors set in node `t`, as 64-bit words, or `None` when the set has none.
    pub fn mask(&self, t: u32) -> Option<&[u64]> {
        let i = t as usize * self.words;
        self.any_mask.then(|| &self.masks[i..i + self.words])
    }

    /// The monitors set in some fault-free node, as 64-bit words.
    pub fn monitors_anywhere(&self) -> Vec<u64> {
        let mut any = vec![0u64; self.words];
        if self.any_mask {
            for node in self.masks.chunks_exact(self.words) {
                for (a, m) in any.iter_mut().zip(node) {
                    *a |= m;
                }
            }
        }
        any
    }

    /// The successor of node `t` under the `ai`-th action.
    pub fn step(&self, t: u32, ai: usize) -> u32 {
        self.succ[t as usize * self.stride + ai]
    }
}

/// The pedal grid: `0, g, 2g, ..., 100` percent.
/// The finest grid the state encoding holds: pedal indices are 7 bits (the eighth marks the
/// second fault of a pair arriving).
pub const MIN_GRID: f64 = 1.0;

/// The most states one set (fault-free, faulty or joint) holds, whatever `--max-states` says:
/// node indices are packed into 31 bits of a joint key.
pub const MAX_NODES: usize = 1 << 31;

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

pub(super) fn quantise(x: f64, q: f64) -> i32 {
    if x.is_finite() {
        crate::controller::round_i64(x / q).clamp(i64::from(i32::MIN), i64::from(i32::MAX)) as i32
    } else {
        i32::MIN
    }
}

/// The plate's cell at resolution `res`: its opening, and its speed (up to a few thousand
/// %/s) at 40 resolutions per second.
pub(super) fn plate_cell(plate: PlantState, res: f64) -> (i32, i32) {
    (
        quantise(plate.position, res),
        quantise(plate.velocity, res * 40.0),
    )
}

/// Appends a plate's cell (see [`plate_cell`]) to an encoding.
pub(super) fn encode_plate(plate: PlantState, res: f64, out: &mut Vec<u8>) {
    let (p, v) = plate_cell(plate, res);
    out.extend_from_slice(&p.to_le_bytes());
    out.extend_from_slice(&v.to_le_bytes());
}

/// How many 64-bit words hold a bit per monitor of `n`.
pub(super) fn monitor_words(n: usize) -> usize {
    n.div_ceil(64).max(1)
}

/// Appends the monitors set in a vehicle (`set(f)` for monitor `f` of `n`) as 64-bit words,
/// bit `f % 64` of word `f / 64`.
pub(super) fn push_monitor_words(n: usize, set: impl Fn(usize) -> bool, out: &mut Vec<u64>) {
    for w in 0..monitor_words(n) {
        let mut m = 0u64;
        for b in 0..64 {
            let f = w * 64 + b;
            if f < n && set(f) {
                m |= 1 << b;
            }
        }
        out.push(m);
    }
}

/// The encoding of one vehicle: controller state (discrete parts exact, continuous parts
/// quantised) and the plate.
pub fn encode_system(sys: &System<'_>, model: &Model, res: f64, out: &mut Vec<u8>) {
    out.push(u8::from(sys.key_on()));
    if let Some(st) = sys.controller_state() {
        st.encode(model, res, out);
    }
    encode_plate(sys.plate(), res, out);
}

/// Explores the fault-free system from key on with the pedal released.
pub fn pre_fault<'v>(vehicle: &'v Vehicle, cfg: &Config) -> PreSet<'v> {
    let model = vehicle.ctl.model();
    let g = grid(cfg);
    let mut index: std::collections::HashMap<u128, u32, BuildHasherDefault<PassThrough>> =
        Default::default();
    let key_on = System::new(vehicle);
    let root = PreNode {
        state: None,
        plate: key_on.plate(),
        pedal: 0,
        released: 0,
        parent: u32::MAX,
        depth: 0,
        succ: Vec::new(),
    };
    let mut nodes = vec![root];
    let mut buf = Vec::with_capacity(256);
    let key = |sys: &System<'_>, pedal: u8, buf: &mut Vec<u8>| {
        buf.clear();
        encode_system(sys, model, cfg.resolution, buf);
        buf.push(pedal);
        digest(buf)
    };
    let k0 = key(&key_on, 0, &mut buf);
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
        let here = key_on.with_state(nodes[i].state.as_ref(), nodes[i].plate);
        for &a in &acts {
            let mut sys = here.clone();
            period_step(&mut sys, model, g[usize::from(a)], now);
            let rel = if a == 0 {
                (released + 1).min(release_cap)
            } else {
                0
            };
            let k = key(&sys, a, &mut buf);
            let child = PreNode {
                state: sys.controller_state().cloned(),
                plate: sys.plate(),
                pedal: a,
                released: rel,
                parent: i as u32,
                depth: depth + 1,
                succ: Vec::new(),
            };
            if let Some(&j) = index.get(&k) {
                if child.released > nodes[j as usize].released && !is_ancestor(&nodes, j, i as u32)
                {
                    let old = &mut nodes[j as usize];
                    old.released = child.released;
                    old.parent = i as u32;
                    old.depth = child.depth;
                    old.state = child.state;
                    old.plate = child.plate;
                    queue.push_back(j as usize);
                }
                succ.push(j);
                continue;
            }
            if nodes.len() >= cfg.max_states.min(MAX_NODES) {
                truncated = true;
                succ.push(i as u32);
                continue;
            }
            let j = nodes.len() as u32;
            index.insert(k, j);
            nodes.push(child);
            queue.push_back(j as usize);
            succ.push(j);
        }
        nodes[i].succ = succ;
    }
    let words = monitor_words(model.faults.len());
    let mut masks = Vec::with_capacity(nodes.len() * words);
    let mut classes: std::collections::HashMap<(i32, i32), u32> = Default::default();
    let mut hot = Vec::with_capacity(nodes.len());
    let stride = if cfg.free_pedal { g.len() } else { 3 };
    let mut flat = Vec::with_capacity(nodes.len() * stride);
    for (i, n) in nodes.iter_mut().enumerate() {
        let set = |f| n.state.as_ref().is_some_and(|s| s.fault_set(f));
        push_monitor_words(model.faults.len(), set, &mut masks);
        let c = plate_cell(n.plate, cfg.resolution);
        let next = classes.len() as u32;
        hot.push(PreHot {
            opening: n.plate.position,
            class: *classes.entry(c).or_insert(next),
            release: n.succ[0],
        });
        flat.extend((0..stride).map(|a| n.succ.get(a).copied().unwrap_or(i as u32)));
        // Read from the flat table from here on.
        n.succ = Vec::new();
    }
    let any_mask = masks.iter().any(|&m| m != 0);
    PreSet {
        key_on,
        nodes,
        truncated,
        hot,
        succ: flat,
        stride,
        masks,
        words,
        any_mask,
    }
}

/// Whether `a` is `b` or one of its ancestors in the pre-fault tree.
fn is_ancestor(nodes: &[PreNode], a: u32, mut b: u32) -> bool {
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
    /// Injection instants searched from: the fault-free states, told apart at the resolution.
    pub roots: usize,
    pub truncated: bool,
    /// Monitors set in some explored faulty state (that are not set in its twin).
    pub monitors: Vec<usize>,
    /// Longest time from injection to the first monitor setting, over the walks of the
    /// explored faulty graph (capped at the horizon; see [`super::detect`]).
    pub worst_detection: Option<Time>,
    /// Some walk of the explored faulty graph stays undetected for the whole horizon: the
    /// fault can stay latent.
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
    /// Per requirement, the candidate violations met in the search that no exact replay
    /// confirmed: a merged state stands for its first visitor, so a state that breaks the
    /// requirement there may not on the path that reached it, and the other way round. Every
    /// candidate is counted; the first [`MAX_CONFIRMATIONS`] are replayed. A requirement
    /// without a confirmed violation but with candidates is unresolved at the resolution
    /// (see [`super::Verdict::Unresolved`]), not held.
    pub unconfirmed: Vec<usize>,
    /// Per requirement, how near the exact replays that did not break it came (the probes'
    /// drives and the candidates' paths): the highest opening where the requirement applies
    /// for a ceiling or idle requirement (in %), the longest excess above the limit for an
    /// excess requirement (in ms), with the drive that came nearest; `None` when no replay
    /// met its condition. It is a fact about the drives replayed, not a bound on the rest:
    /// where a cell is unresolved it tells how close the merged states' candidates really
    /// came.
    pub nearest: Vec<Option<NearMiss>>,
    /// Every requirement was found violated (and confirmed) before the state space was
    /// exhausted, so the search ended there: the verdicts are final, the figures cover the
    /// part explored.
    pub settled_early: bool,
    /// When the search stopped short (the bound, or `settled_early`): the steps after the
    /// injection up to which every drive was searched. A bounded breadth-first search from
    /// every injection instant at once may stop only a few periods in; its figures (detection,
    /// end modes, worst openings) cover only that much.
    pub searched_to: Option<u32>,
    /// Directed drives probed before the search (see [`probe`]).
    pub probes: usize,
    /// Branches ended because the faulty vehicle settled for good at an opening that breaks
    /// nothing (see the search).
    pub settled: usize,
    /// Nodes of the faulty vehicle's own graph (each stepped once per action).
    pub faulty_states: usize,
}

/// How near one replayed drive came to breaking a requirement (see
/// [`FaultResult::nearest`]): the measure, the step (index into the drive) it peaked at, and
/// the opening there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Near {
    pub value: f64,
    pub step: usize,
    pub opening: f64,
}

impl Near {
    /// No step met the requirement's condition.
    pub const NONE: Near = Near {
        value: f64::NEG_INFINITY,
        step: 0,
        opening: 0.0,
    };
}

/// The drive that came nearest to breaking a requirement without breaking it, from key on to
/// the step it came nearest at, ready to be written as a script.
#[derive(Clone, Debug, PartialEq)]
pub struct NearMiss {
    /// The measure (see [`FaultResult::nearest`]).
    pub value: f64,
    pub pedal: Vec<f64>,
    pub inject_step: u32,
    pub second_step: Option<u32>,
    /// The end of the step it came nearest at.
    pub at: Time,
    pub opening: f64,
}

/// Keeps `near` in `slot` if it came nearer than what `slot` holds (the first of equals).
fn keep_nearer(
    slot: &mut Option<NearMiss>,
    near: &Near,
    pedal: &[f64],
    inject_step: u32,
    second_step: Option<u32>,
    period: Time,
) {
    if near.value.is_finite() && slot.as_ref().is_none_or(|s| near.value > s.value) {
        *slot = Some(NearMiss {
            value: near.value,
            pedal: pedal[..=near.step.min(pedal.len().saturating_sub(1))].to_vec(),
            inject_step,
            second_step,
            at: Time(period.0 * (near.step as u64 + 1)),
            opening: near.opening,
        });
    }
}

/// How many candidate violations of one requirement are replayed from key on before the
/// search screens further ones first, up to `--screen` of them (`Config::screen`): each is
/// replayed from the stored fault-free state at its injection (no prefix to drive again), and
/// from key on only if that shows the violation. A screen can miss a violation (see
/// [`Prefix::stored`]); that candidate then stays unconfirmed, so the cell stays unresolved.
pub const MAX_CONFIRMATIONS: usize = 64;

/// Replays a pedal path exactly, with the faults injected at the start of `inject_step`, beside
/// the fault-free vehicle, and returns the first violation of requirement `r` on it, or when
/// the path does not break it, how near it came (see [`FaultResult::nearest`]).
pub fn confirm(
    vehicle: &Vehicle,
    inj: &[Injection],
    pedal: &[f64],
    inject_step: u32,
    second_step: Option<u32>,
    ri: usize,
    r: &Req,
) -> Result<Violation, Near> {
    if inject_step as usize > pedal.len() {
        return Err(Near::NONE);
    }
    let (mut out, near) = Prefix::drive(vehicle, &pedal[..inject_step as usize]).replay_nearest(
        inj,
        pedal,
        second_step,
        std::slice::from_ref(r),
    );
    match out.pop().flatten() {
        Some(mut v) => {
            v.requirement = ri;
            Ok(v)
        }
        None => Err(near[0]),
    }
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
    if inject_step as usize > pedal.len() {
        // The fault would arrive after the path ends: nothing to check.
        return vec![None; reqs.len()];
    }
    Prefix::drive(vehicle, &pedal[..inject_step as usize]).replay(inj, pedal, second_step, reqs)
}

/// The vehicle driven fault-free from key on up to an injection: until then the faulty
/// vehicle and its fault-free twin are one and the same, so it is stepped once for both.
#[derive(Clone)]
pub struct Prefix<'v> {
    vehicle: &'v Vehicle,
    sys: System<'v>,
    /// Steps driven: the step the faults are injected at.
    steps: u32,
    /// Steps at the end of the prefix with the pedal released.
    released: u32,
}

impl<'v> Prefix<'v> {
    /// Steps the vehicle from key on through `pedal`, exactly as [`replay_check`] would.
    pub fn drive(vehicle: &'v Vehicle, pedal: &[f64]) -> Self {
        let model = vehicle.ctl.model();
        let mut sys = System::new(vehicle);
        let mut released = 0u32;
        for (k, &p) in pedal.iter().enumerate() {
            period_step(&mut sys, model, p, Time(model.period.0 * k as u64));
            released = if p == 0.0 { released + 1 } else { 0 };
        }
        Prefix {
            vehicle,
            sys,
            steps: pedal.len() as u32,
            released,
        }
    }

    /// The fault-free vehicle as the pre-fault set stored it at node `i`: the prefix of the
    /// node's path without stepping it again. A node reached again with the pedal released
    /// for longer takes the new path and state, while the nodes stepped from its old state
    /// keep theirs, so the state may not be the one its path gives: use this only to screen
    /// (see the search's confirmations), and [`Prefix::drive`] for anything reported.
    pub fn stored(vehicle: &'v Vehicle, pre: &PreSet<'v>, i: u32) -> Self {
        let n = &pre.nodes[i as usize];
        Prefix {
            vehicle,
            sys: pre.system(i),
            steps: n.depth,
            released: u32::from(n.released),
        }
    }

    /// Replays the rest of `pedal` (the prefix is its start) with the faults injected at the
    /// prefix's end (a pair's second at `second_step`), beside the fault-free vehicle, and
    /// returns, per requirement, its first violation on the path.
    pub fn replay(
        &self,
        inj: &[Injection],
        pedal: &[f64],
        second_step: Option<u32>,
        reqs: &[Req],
    ) -> Vec<Option<Violation>> {
        self.replay_nearest(inj, pedal, second_step, reqs).0
    }

    /// [`Prefix::replay`], and per requirement how near the path came to breaking it before
    /// it did (or at all, when it did not), in the requirement's own measure (see
    /// [`FaultResult::nearest`]); [`Near::NONE`] when the path never met its condition.
    pub fn replay_nearest(
        &self,
        inj: &[Injection],
        pedal: &[f64],
        second_step: Option<u32>,
        reqs: &[Req],
    ) -> (Vec<Option<Violation>>, Vec<Near>) {
        let model = self.vehicle.ctl.model();
        let inject_step = self.steps;
        let period = model.period;
        let mut faulty = self.sys.clone();
        let mut nominal = self.sys.clone();
        let mut excess = vec![0u32; reqs.len()];
        let mut released = self.released;
        let mut out: Vec<Option<Violation>> = vec![None; reqs.len()];
        let mut near = vec![Near::NONE; reqs.len()];
        let ms = period.as_ms_f64();
        for (k, &p) in pedal.iter().enumerate().skip(inject_step as usize) {
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
            let (open, open_n) = (faulty.opening(), nominal.opening());
            let at = Time(period.0 * (k as u64 + 1));
            for (ri, r) in reqs.iter().enumerate() {
                if out[ri].is_some() {
                    continue;
                }
                let (hit, measure, bound) = match *r {
                    Req::Excess { limit, steps } => {
                        let base = open_n.max(model.actuator.default);
                        excess[ri] = if open - base > limit {
                            excess[ri] + 1
                        } else {
                            0
                        };
                        let m = (excess[ri] > 0).then(|| f64::from(excess[ri]) * ms);
                        ((excess[ri] > steps), m, base + limit)
                    }
                    Req::Never {
                        above,
                        unless_driver,
                    } => {
                        let m = (unless_driver.is_none_or(|y| p <= y) && open_n <= above)
                            .then_some(open);
                        (m.is_some_and(|o| o > above), m, above)
                    }
                    Req::Idle { idle, steps } => {
                        let m = (released >= steps && open_n <= idle).then_some(open);
                        (m.is_some_and(|o| o > idle), m, idle)
                    }
                };
                let hit = hit.then_some(bound);
                if hit.is_none()
                    && let Some(m) = measure
                    && m > near[ri].value
                {
                    near[ri] = Near {
                        value: m,
                        step: k,
                        opening: open,
                    };
                }
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
        (out, near)
    }
}

/// Directed probes beside the breadth-first search: from chosen injection instants, the driver
/// holds the pedal, or releases it at once, for the whole horizon. Deep, cheap, and exactly
/// the drives a reviewer asks about first; every violation found is exact by construction, and
/// finding every requirement's violation early ends the search of the fault early. The
/// periods they step in all stay within `--max-states` (a long horizon probes fewer roots), so
/// the bound bounds their work too. Returns the drives probed.
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
) -> usize {
    let model = vehicle.ctl.model();
    let g = grid(cfg);
    let horizon = usize::try_from(cfg.horizon.0.div_ceil(model.period.0.max(1))).unwrap_or(0);
    let mut budget = cfg.max_states;
    let mut drives = 0;
    for &o in roots {
        if found.iter().all(|&f| f) {
            break;
        }
        let depth = pre.nodes[o as usize].depth as usize;
        let Some(left) = budget.checked_sub(depth.saturating_add(2 * horizon)) else {
            break;
        };
        budget = left;
        drives += 2;
        let prefix = pedal_path(pre, o, &g);
        let start = Prefix::drive(vehicle, &prefix);
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
            let (out, near) = start.replay_nearest(inj, &path, None, reqs);
            for (ri, v) in out.into_iter().enumerate() {
                if let Some(v) = v
                    && !found[ri]
                {
                    found[ri] = true;
                    res.violations.push(v);
                }
                let inject = prefix.len() as u32;
                keep_nearer(
                    &mut res.nearest[ri],
                    &near[ri],
                    &path,
                    inject,
                    None,
                    model.period,
                );
            }
        }
    }
    drives
}

/// The instants probed: per pedal grid value, the first fault-free state reached with it (the
/// pedal just arrived, the plate still moving) and the last one (the longest drive towards
/// it), so that every pedal value is probed while moving and when settled.
fn probe_roots(pre: &PreSet<'_>, grid_len: usize) -> Vec<u32> {
    let mut first = vec![u32::MAX; grid_len];
    let mut last = vec![u32::MAX; grid_len];
    for (i, n) in pre.nodes.iter().enumerate().skip(1) {
        let p = usize::from(n.pedal).min(grid_len - 1);
        if first[p] == u32::MAX {
            first[p] = i as u32;
        }
        last[p] = i as u32;
    }
    let mut v: Vec<u32> = first
        .into_iter()
        .chain(last)
        .filter(|&i| i != u32::MAX)
        .collect();
    v.dedup();
    v
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

/// Breaks `inj` into a vehicle whose plate and driver are as given, with `active` already
/// broken: the active faults after it (the new one last, with what it captured), and the plate
/// (a stuck actuator stops it).
pub(super) fn break_into(
    model: &Model,
    inj: Injection,
    now: Time,
    pedal: f64,
    plate: PlantState,
    active: &[ActiveFault],
) -> (Vec<ActiveFault>, PlantState) {
    let mut positions = vec![0.0; model.sensors.len()];
    if let Some(d) = model.driver {
        positions[d] = pedal;
    }
    positions[model.feedback] = plate.position;
    let af = ActiveFault::capture(model, inj, now, &positions, plate.position, active);
    let mut plate = plate;
    let mut list = active.to_vec();
    list.push(af);
    if crate::faults::actuator_condition(&list).stuck_at.is_some() {
        plate.velocity = 0.0;
    }
    (list, plate)
}

/// The active fault lists one search uses, each stored once, with what its faults captured
/// (quantised for the visited key: volts for a stuck track, percent for a stuck plate) and
/// whether it holds the plate stuck.
pub struct FaultLists {
    pub lists: Vec<Vec<ActiveFault>>,
    pub captured: Vec<Vec<i32>>,
    pub stuck: Vec<bool>,
    quantum: f64,
    /// Steps in an intermittent fault's cycle (1 when there is none).
    cycle: u32,
    /// (list broken into, captured bits, phase origin) -> list; see [`FaultLists::add`].
    index: std::collections::HashMap<(u32, u64, u64), u32>,
}

impl FaultLists {
    pub fn new(resolution: f64, cycle: u32) -> FaultLists {
        FaultLists {
            lists: Vec::new(),
            captured: Vec::new(),
            stuck: Vec::new(),
            quantum: resolution / 25.0,
            cycle,
            index: Default::default(),
        }
    }

    /// The index of `list`, made by breaking one more fault into list `before` (`None`: into
    /// the fault-free vehicle, which has none active), stored if new. What the new fault
    /// captured, and for an intermittent one its phase's origin, is all that tells two such
    /// lists apart.
    pub fn add(&mut self, before: Option<u32>, list: Vec<ActiveFault>) -> u32 {
        let af = list[list.len() - 1];
        let origin = if self.cycle > 1 { af.since.0 } else { 0 };
        let key = (before.unwrap_or(u32::MAX), af.captured.to_bits(), origin);
        if let Some(&l) = self.index.get(&key) {
            return l;
        }
        let l = self.push(list);
        self.index.insert(key, l);
        l
    }

    fn push(&mut self, list: Vec<ActiveFault>) -> u32 {
        let q = self.quantum;
        self.captured
            .push(list.iter().map(|a| quantise(a.captured, q)).collect());
        self.stuck
            .push(crate::faults::actuator_condition(&list).stuck_at.is_some());
        self.lists.push(list);
        (self.lists.len() - 1) as u32
    }
}

/// How many states ahead the search announces its visited-set lookups.
const LOOKAHEAD: usize = 4;

/// A joint state of the search: a node of the faulty vehicle's graph, its fault-free twin in
/// the pre-fault set, the requirement timers, whether a monitor has set since injection, and
/// its index in the arena of stored states (for the path).
#[derive(Clone, Copy, Debug)]
struct Joint {
    f: u32,
    t: u32,
    timers: Timers,
    id: u32,
}

/// Sorts joint states by faulty node, keeping the order of those beside one node: a stable
/// least-significant-digit radix sort, 11 bits a pass, passes over digits that do not vary
/// skipped, with `scratch` as the buffer it reuses from level to level. A short frontier
/// (pushed in order of `id`) is sorted by node and `id` in place instead.
fn sort_by_node(v: &mut Vec<Joint>, scratch: &mut Vec<Joint>) {
    const BITS: u32 = 11;
    if v.len() < 256 {
        v.sort_unstable_by_key(|j| (j.f, j.id));
        return;
    }
    let (mut lo, mut hi) = (u32::MAX, 0);
    for j in v.iter() {
        lo = lo.min(j.f);
        hi = hi.max(j.f);
    }
    let mut count = [0usize; 1 << BITS];
    for shift in (0..32).step_by(BITS as usize) {
        if (lo >> shift) == (hi >> shift) {
            continue;
        }
        let digit = |j: &Joint| ((j.f >> shift) & ((1 << BITS) - 1)) as usize;
        count.fill(0);
        for j in v.iter() {
            count[digit(j)] += 1;
        }
        let mut at = 0;
        for c in &mut count {
            let n = *c;
            *c = at;
            at += n;
        }
        scratch.clear();
        scratch.resize(v.len(), v[0]);
        for j in v.iter() {
            let d = digit(j);
            scratch[count[d]] = *j;
            count[d] += 1;
        }
        std::mem::swap(v, scratch);
    }
}

/// Searches one fault, or a pair: the first of a pair is injected into every fault-free
/// state, the second arrives at a later step the search chooses.
///
/// The search walks the product of two graphs closed at the resolution: the faulty vehicle's
/// (see [`Faulty`], stepped lazily, each successor once) and the fault-free set, both moved by
/// the same pedal action. A joint state pairs a faulty node with its twin (by the twin's index
/// with `exact_twin`, else by its plate) and is expanded once per timer dominance (see
/// [`Faulty::admit`]).
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
    let mut fg = Faulty::new(
        vehicle,
        inj,
        cfg,
        pre.key_on.sample().clone(),
        cfg.max_states.min(MAX_NODES),
    );

    let mut res = FaultResult {
        worst_opening_below_ceiling: f64::NEG_INFINITY,
        unconfirmed: vec![0; reqs.len()],
        nearest: vec![None; reqs.len()],
        ..FaultResult::default()
    };
    // The lone futures of vehicles the driver no longer steers (see `LoneWalks`), each
    // recorded in its faulty node.
    let mut walks = LoneWalks::new(
        model,
        pre.key_on.sample().clone(),
        cfg.max_states.min(MAX_NODES),
        cfg.resolution,
    );
    let mut arena: Vec<(u32, u8, u32)> = Vec::new(); // (parent, pedal, origin) per stored state
    let mut frontier: Vec<Joint> = Vec::new();
    let mut monitor_seen = vec![0u64; monitor_words(model.faults.len())];
    let mut end_modes = vec![false; model.modes.len()];
    let mut found = vec![false; reqs.len()];
    let mut tries = vec![0usize; reqs.len()];
    // The twin's part of a joint key, beside the faulty node (which holds it, see
    // [`Faulty::admit`]): its index, or the class of its quantised plate.
    let part = |t: u32| -> u32 {
        if cfg.exact_twin {
            t
        } else {
            pre.hot[t as usize].class
        }
    };

    // Roots: the fault injected into every fault-free state, i.e. at every injection instant
    // the fault-free set tells apart at the resolution.
    for (oi, o) in pre.nodes.iter().enumerate() {
        let Some(st) = o.state.as_ref() else {
            // The key-on state before the first step: its first step is explored from the
            // fault-free set's first successors instead.
            continue;
        };
        let now = Time(period.0 * u64::from(o.depth));
        // A pair's second fault arrives later, at a step the search chooses.
        let (list, plate) = break_into(
            model,
            inj[0],
            now,
            g[usize::from(o.pedal)],
            o.plate,
            // The fault-free vehicle has none.
            &[],
        );
        let faults = fg.lists.add(None, list);
        let f = fg.intern(
            st.clone(),
            plate,
            faults,
            o.depth,
            0,
            o.pedal,
            inj.len() < 2,
        );
        if f == DROPPED {
            res.truncated = true;
            res.searched_to.get_or_insert(0);
            continue;
        }
        let timers = Timers {
            excess: 0,
            released: o.released,
        };
        if fg.admit(f, part(oi as u32), timers, Watch::ALL).is_some() {
            frontier.push(Joint {
                f,
                t: oi as u32,
                timers,
                id: arena.len() as u32,
            });
            arena.push((u32::MAX, o.pedal, oi as u32));
        }
    }
    res.roots = frontier.len();
    let root_nodes = fg.nodes() as u32;
    res.probes = probe(
        vehicle,
        pre,
        &probe_roots(pre, g.len()),
        inj,
        cfg,
        reqs,
        &mut found,
        &mut res,
    );
    // The timers that still take part in dominance.
    let mut watch = Watch::open(reqs, &found);
    let mut acts = Vec::new();
    let mut next_frontier = Vec::new();
    let mut sort_scratch = Vec::new();
    // Every requirement violated and confirmed: the verdicts are final, the search ends.
    let all_found = |found: &[bool]| !found.is_empty() && found.iter().all(|&f| f);
    // All roots are at the injection, so the breadth-first level is the time since it.
    let mut since = 0u32;
    'search: while !frontier.is_empty() {
        next_frontier.clear();
        for (k, node) in frontier.iter().enumerate() {
            if all_found(&found) {
                res.settled_early = true;
                res.searched_to.get_or_insert(since);
                break 'search;
            }
            // The records of a state a few places ahead's successors, where they are known
            // already: their cache misses overlap with this state's work.
            if let Some(ahead) = frontier.get(k + LOOKAHEAD)
                && ahead.f != node.f
            {
                for (_, f2) in fg.known(ahead.f) {
                    fg.prefetch(f2);
                }
                fg.prefetch_state(ahead.f);
            }
            // Further ahead, where a state yet to be stepped keeps its buffers.
            if let Some(ahead) = frontier.get(k + 2 * LOOKAHEAD)
                && ahead.f != node.f
            {
                fg.prefetch_state_place(ahead.f);
            }
            let fi = node.f as usize;
            if since >= horizon {
                end_modes[usize::from(fg.hot(node.f).mode)] = true;
                continue;
            }
            let here = *fg.hot(node.f);
            actions(cfg, fg.pedal[fi], g.len(), &mut acts);
            fg.expand(node.f, &acts);
            let mut any_new = false;
            for (ai, &a) in acts.iter().enumerate() {
                for inject_b in [false, true] {
                    if inject_b && here.second_in() {
                        continue;
                    }
                    let f2 = fg.succ(node.f, ai, a, inject_b);
                    if f2 == DROPPED {
                        res.truncated = true;
                        res.searched_to.get_or_insert(since);
                        continue;
                    }
                    let there = *fg.hot(f2);
                    let t2 = pre.step(node.t, ai);
                    let driver = g[usize::from(a)];
                    let (open, open_n) = (there.open, pre.hot[t2 as usize].opening);
                    let mut timers = node.timers;
                    timers.released = if a == 0 {
                        (timers.released + 1).min(release_cap)
                    } else {
                        0
                    };
                    let mut excess_now = false;
                    let since_next = since + 1;
                    // Monitors set in the faulty vehicle, not in its twin (the detection time is
                    // taken from the faulty graph after the search).
                    let tw_mask = pre.mask(t2);
                    for (w, seen) in monitor_seen.iter_mut().enumerate() {
                        let m = if w == 0 { there.mask0 } else { fg.mask(f2)[w] };
                        *seen |= m & !tw_mask.map_or(0, |n| n[w]);
                    }
                    if there.safe() && !here.safe() {
                        let t = Time(period.0 * u64::from(since_next));
                        res.to_safe = Some(res.to_safe.map_or(t, |w| w.max(t)));
                    }
                    // Requirements.
                    for (ri, r) in reqs.iter().enumerate() {
                        let violated = match *r {
                            Req::Excess { limit, steps } => {
                                // The springs' default position is the designed limp-home
                                // opening: resting there is not an excess, whatever the twin
                                // does.
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
                                    && open_n <= idle
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
                        if !violated || found[ri] {
                            continue;
                        }
                        if tries[ri] >= MAX_CONFIRMATIONS.saturating_add(cfg.screen) {
                            // Replays given up for this requirement: still a candidate.
                            res.unconfirmed[ri] += 1;
                        } else {
                            tries[ri] += 1;
                            let (pedal, inject_step, second_step, origin) =
                                joint_path(pre, &arena, &g, node.id, driver, inject_b);
                            // Merged states stand for their first visitor: replay the path
                            // exactly, faulty and fault-free, and keep the violation only if
                            // it is real. Past the first few, screen it first.
                            let screened = tries[ri] <= MAX_CONFIRMATIONS
                                || Prefix::stored(vehicle, pre, origin)
                                    .replay(inj, &pedal, second_step, std::slice::from_ref(r))
                                    .pop()
                                    .flatten()
                                    .is_some();
                            let replayed = screened.then(|| {
                                confirm(vehicle, inj, &pedal, inject_step, second_step, ri, r)
                            });
                            match replayed {
                                Some(Ok(v)) => {
                                    found[ri] = true;
                                    watch = Watch::open(reqs, &found);
                                    res.violations.push(v);
                                }
                                Some(Err(near)) => {
                                    keep_nearer(
                                        &mut res.nearest[ri],
                                        &near,
                                        &pedal,
                                        inject_step,
                                        second_step,
                                        period,
                                    );
                                    res.unconfirmed[ri] += 1;
                                }
                                None => res.unconfirmed[ri] += 1,
                            }
                        }
                    }
                    timers.excess = if excess_now {
                        (timers.excess + 1).min(excess_cap)
                    } else {
                        0
                    };
                    // A faulty vehicle that the driver can no longer steer (no pedal track in
                    // its cone of influence) has one future, whatever the driver does: follow
                    // it alone and, if no open requirement can be broken by it against the
                    // worst twin (closed, the driver released), the branch is done. A stuck
                    // plate is constant.
                    if there.second_in() {
                        let done = if there.stuck() {
                            let held = !constant_can_violate(model, reqs, &found, open);
                            if held {
                                end_modes[usize::from(there.mode)] = true;
                            }
                            held
                        } else if there.driver_in() {
                            false
                        } else {
                            let li = match fg.lone(f2) {
                                Some(li) => li,
                                None => {
                                    let li = walks.future(&mut fg, model, reqs, f2, horizon);
                                    fg.set_lone(f2, li);
                                    li
                                }
                            };
                            let lone = &walks.futures[li as usize];
                            let harmless = lone.harmless(model, reqs, &found, timers);
                            if harmless {
                                end_modes[lone.last_mode] = true;
                                walks.fold_figures(
                                    li, &mut res, model, pre, reqs, t2, timers, since_next,
                                );
                            }
                            harmless
                        };
                        if done {
                            res.settled += 1;
                            continue;
                        }
                    }
                    let Some(t) = fg.admit(f2, part(t2), timers, watch) else {
                        continue;
                    };
                    if arena.len() >= cfg.max_states.min(MAX_NODES) {
                        res.truncated = true;
                        res.searched_to.get_or_insert(since);
                        continue;
                    }
                    any_new = true;
                    next_frontier.push(Joint {
                        f: f2,
                        t: t2,
                        timers: t,
                        id: arena.len() as u32,
                    });
                    arena.push((node.id, a | if inject_b { 0x80 } else { 0 }, u32::MAX));
                }
            }
            if !any_new {
                end_modes[usize::from(here.mode)] = true;
            }
            // Every successor this node will ever be asked for is known now.
            fg.release(node.f, root_nodes);
        }
        std::mem::swap(&mut frontier, &mut next_frontier);
        // Nodes beside the same faulty node one after the other: they share the faulty
        // graph's rows.
        sort_by_node(&mut frontier, &mut sort_scratch);
        since += 1;
    }
    // Detection: the longest undetected walks of the faulty graph (see `detect`). A monitor
    // that some fault-free state sets does not count as detecting the fault.
    let fault_free = pre.monitors_anywhere();
    let det = super::detect::longest_undetected(
        fg.nodes(),
        0..root_nodes,
        |u, out| fg.successors(u, out),
        |u| fg.mask(u).iter().zip(&fault_free).all(|(m, f)| m & !f == 0),
        horizon,
    );
    res.worst_detection = det.worst.map(|s| Time(period.0 * u64::from(s)));
    res.undetected_branch = det.latent;
    res.states = arena.len();
    res.faulty_states = fg.nodes();
    res.truncated |= fg.truncated;
    if res.truncated {
        res.searched_to.get_or_insert(since);
    }
    res.monitors = (0..model.faults.len())
        .filter(|&f| monitor_seen[f / 64] & (1 << (f % 64)) != 0)
        .collect();
    res.end_modes = (0..model.modes.len()).filter(|&m| end_modes[m]).collect();
    // The confirmed violations are states too (a probe's, or one the search stopped short
    // of storing): their openings count in the figures.
    for v in &res.violations {
        match reqs[v.requirement] {
            Req::Excess { limit, steps } => {
                res.worst_excess = res.worst_excess.max(v.opening - (v.bound - limit));
                let d = Time(period.0 * (u64::from(steps) + 1));
                res.worst_excess_duration = res.worst_excess_duration.max(d);
            }
            Req::Never { .. } => {
                res.worst_opening_below_ceiling = res.worst_opening_below_ceiling.max(v.opening);
            }
            Req::Idle { steps, .. } => {
                let d = Time(period.0 * u64::from(steps));
                res.worst_idle_after_release = res.worst_idle_after_release.max(d);
            }
        }
    }
    if res.worst_opening_below_ceiling == f64::NEG_INFINITY {
        res.worst_opening_below_ceiling = 0.0;
    }
    res.violations.sort_by_key(|v| v.requirement);
    res
}

/// The pedal path from key on to the successor of stored state `id` under pedal `driver`:
/// the fault-free prefix to the injection, then the joint path. Returns the path, the step the
/// fault is injected at, a pair's second fault's step, and the fault-free node the fault was
/// injected into.
fn joint_path(
    pre: &PreSet<'_>,
    arena: &[(u32, u8, u32)],
    g: &[f64],
    id: u32,
    driver: f64,
    inject_b: bool,
) -> (Vec<f64>, u32, Option<u32>, u32) {
    let mut tail = vec![(driver, inject_b)];
    let mut id = id;
    let mut origin = 0;
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
    let mut pedal = pedal_path(pre, origin, g);
    let inject_step = pedal.len() as u32;
    let second_step = tail
        .iter()
        .position(|&(_, b)| b)
        .map(|i| inject_step + i as u32);
    pedal.extend(tail.iter().map(|&(p, _)| p));
    (pedal, inject_step, second_step, origin)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sorting_by_node_is_stable_and_agrees_with_the_standard_sort() {
        // The standard library's stable sort as the reference, on frontiers whose nodes span
        // one digit, two digits, and a single value.
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        let mut scratch = Vec::new();
        for (n, span) in [
            (0usize, 1u64),
            (1, 1),
            (200, 50),
            (5_000, 300),
            (70_000, 1 << 20),
            (40_000, 1 << 31),
            (3_000, 1),
        ] {
            let mut v: Vec<Joint> = (0..n)
                .map(|i| {
                    crate::testing::xorshift(&mut x);
                    Joint {
                        f: (x % span) as u32 + 7,
                        t: 0,
                        timers: Timers::default(),
                        id: i as u32,
                    }
                })
                .collect();
            let mut want = v.clone();
            want.sort_by_key(|j| j.f);
            sort_by_node(&mut v, &mut scratch);
            let key = |v: &[Joint]| v.iter().map(|j| (j.f, j.id)).collect::<Vec<_>>();
            assert_eq!(key(&v), key(&want), "{n} states over {span} nodes");
        }
    }

    #[test]
    fn a_timer_is_watched_while_one_of_its_requirements_is_open() {
        // The van's excess, ceiling and idle requirements, and a second excess requirement.
        let model = crate::model::lower(include_str!("../../scenarios/van/van_throttle.limp"))
            .expect("the van lowers");
        let mut reqs = crate::prove::requirements(&model);
        reqs.push(Req::Excess {
            limit: 20.0,
            steps: 10,
        });
        let w = |found: [bool; 4]| {
            let w = Watch::open(&reqs, &found);
            (w.excess, w.released)
        };
        assert_eq!(w([false; 4]), (true, true));
        // One excess requirement still open keeps the excess timer.
        assert_eq!(w([true, false, false, false]), (true, true));
        assert_eq!(w([true, false, false, true]), (false, true));
        assert_eq!(w([true, false, true, true]), (false, false));
        // The ceiling has no timer.
        assert_eq!(w([false, true, true, false]), (true, false));
    }

    #[test]
    fn digests_tell_encodings_apart() {
        // Every single-byte change, every truncation and every zero padding of a
        // state-sized buffer gives a digest of its own (common practice, no source: a
        // visited-set hash must not merge near-identical keys).
        let base: Vec<u8> = (0..61u32).map(|i| (i * 37 % 251) as u8).collect();
        let mut seen = std::collections::HashSet::new();
        assert!(seen.insert(digest(&base)));
        for i in 0..base.len() {
            for bit in 0..8 {
                let mut v = base.clone();
                v[i] ^= 1 << bit;
                assert!(seen.insert(digest(&v)), "byte {i} bit {bit}");
            }
        }
        for n in 0..base.len() {
            assert!(seen.insert(digest(&base[..n])), "prefix {n}");
        }
        for pad in 1..9 {
            let mut v = base.clone();
            v.extend(std::iter::repeat_n(0, pad));
            assert!(seen.insert(digest(&v)), "padding {pad}");
        }
        // Both halves change with a one-bit change (the set hashes their xor).
        let (x, y) = (
            digest(&base),
            digest(&[&base[..60], &[base[60] ^ 1]].concat()),
        );
        assert_ne!(x >> 64, y >> 64);
        assert_ne!(x as u64, y as u64);
    }
}
