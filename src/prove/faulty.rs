//! The faulty vehicle's own transition graph, for one fault (or pair), built lazily and
//! memoised. Its nodes are the faulty vehicle's states told apart at the resolution (the
//! controller's memory within its cone of influence, the plate, what the faults captured, an
//! intermittent fault's phase, the pedal, a pair's progress); each stands for the first visitor
//! with that encoding, exactly as the fault-free set's nodes do. A node's successor under a
//! driver action is stepped once, with the controller step and plant the simulator uses, and
//! then looked up: the joint search (faulty beside fault-free) walks the product of this graph
//! and the fault-free set without stepping a controller again.

use super::Config;
use super::cone::{Cone, ConeCache};
use super::joint::{DigestIndex, JointSet, pack, unpack};
use super::search::{
    FaultLists, Timers, Watch, break_into, digest, encode_plate, grid, monitor_words,
    push_monitor_words,
};
use crate::controller::{Outputs, Sample, State};
use crate::faults::{Injection, TrackFault};
use crate::plant::PlantState;
use crate::sim::system::Vehicle;
use crate::time::Time;

/// A successor not stepped yet.
const UNKNOWN: u32 = u32::MAX;
/// A successor that would have been a new node past the bound on states.
pub const DROPPED: u32 = u32::MAX - 1;
/// The place of a released node's state (see [`Faulty::release`]).
const RELEASED: u32 = u32::MAX;

/// A faulty node as the joint search's inner loop reads it.
#[derive(Clone, Copy, Debug)]
pub struct Hot {
    /// The plate's opening.
    pub open: f64,
    /// The first 64 monitors' bits (the rest in `Faulty::mask`).
    pub mask0: u64,
    /// Index into `Faulty::lists`.
    pub faults: u32,
    pub mode: u16,
    flags: u8,
    /// Joint entries held in the node's own record (see [`Rec`]).
    inline: u8,
}

impl Hot {
    const SECOND_IN: u8 = 1;
    const DRIVER_IN: u8 = 2;
    const SAFE: u8 = 4;
    const STUCK: u8 = 8;
    /// The node's joint entries outgrew its record and chain: further ones go to the spill
    /// table.
    const SPILLED: u8 = 16;

    /// A pair's second fault is in (or there is none).
    pub fn second_in(&self) -> bool {
        self.flags & Self::SECOND_IN != 0
    }
    /// The driver's sensor is in the node's cone of influence.
    pub fn driver_in(&self) -> bool {
        self.flags & Self::DRIVER_IN != 0
    }
    /// The node's mode is a safe one.
    pub fn safe(&self) -> bool {
        self.flags & Self::SAFE != 0
    }
    /// Its faults hold the plate stuck.
    pub fn stuck(&self) -> bool {
        self.flags & Self::STUCK != 0
    }
}

/// Joint entries a node's record holds itself.
const INLINE: usize = 4;
/// Overflow buckets a node may chain before its further entries spill to a hash table (a
/// bound on the linear scan of one admission).
const MAX_CHAIN: usize = 8;

/// One faulty node's record, one cache line: what the inner loop reads of it, and the first
/// joint entries (twin part and detection, with the timers) that pair it with a fault-free
/// twin. Most nodes have a handful of twins, so one admission usually touches only the line
/// that reading the node brought in already.
#[derive(Clone, Copy, Debug)]
#[repr(C, align(64))]
struct Rec {
    hot: Hot,
    /// 1 + the first overflow bucket, 0 for none.
    more: u32,
    /// 1 + the node's lone future (the search's), 0 for none.
    lone: u32,
    /// `(part << 32) | packed timers` per entry; the first `hot.inline` are in use.
    seen: [u64; INLINE],
}

/// A node's further joint entries, chained.
#[derive(Clone, Copy, Debug)]
#[repr(C, align(64))]
struct Bucket {
    seen: [u64; 7],
    len: u32,
    /// 1 + the next bucket, 0 for none.
    next: u32,
}

fn pack_entry(part: u32, t: Timers) -> u64 {
    (u64::from(part) << 32) | u64::from(pack(t))
}

/// Merges timers `t` into entry `e` if it is `part`'s: `Some(None)` when `e` covers them
/// (no further on in either timer), `Some(Some(max))` when it did not (the entry now holds
/// the larger of each), `None` when `e` is another twin's.
#[inline]
fn merge(e: &mut u64, part: u32, t: Timers, watch: Watch) -> Option<Option<Timers>> {
    if (*e >> 32) as u32 != part {
        return None;
    }
    let new = unpack(*e as u32).absorb(t, watch);
    if let Some(n) = new {
        *e = pack_entry(part, n);
    }
    Some(new)
}

/// The faulty vehicle's graph. Node `i`'s parts are the `i`-th entries of the vectors.
pub struct Faulty<'a> {
    vehicle: &'a Vehicle,
    inj: &'a [Injection],
    resolution: f64,
    grid: Vec<f64>,
    /// Steps in an intermittent fault's cycle (1 when there is none).
    pub cycle: u32,
    /// Successor slots per node: each pedal action, with and without a pair's second fault.
    stride: usize,
    pair: bool,
    max: usize,
    /// Per node, its controller state's place in `states`, or [`RELEASED`].
    slot: Vec<u32>,
    /// The controller states of the nodes not released yet, with places freed by released
    /// ones (`free`) taken again, buffers and all: memory in proportion to the nodes in
    /// flight, and no allocation for a new node once the slab has grown.
    states: Vec<State>,
    free: Vec<u32>,
    pub plate: Vec<PlantState>,
    /// The absolute step of the node's first visitor (the next step happens at this instant).
    pub step: Vec<u32>,
    /// Steps since the injection, modulo `cycle`.
    phase: Vec<u32>,
    pub pedal: Vec<u8>,
    /// What the joint search reads of each node, and its first joint entries.
    recs: Vec<Rec>,
    buckets: Vec<Bucket>,
    /// Joint entries of nodes whose record and chain are full.
    spill: JointSet,
    /// Monitors set, `words` 64-bit words per node.
    masks: Vec<u64>,
    words: usize,
    succ: Vec<u32>,
    index: DigestIndex,
    pub lists: FaultLists,
    pub cone: Cone,
    pub cache: ConeCache,
    scratch: (Sample, Outputs),
    positions: Vec<f64>,
    /// Controller-state buffers to step successors into, given back by the lookups.
    spares: Vec<State>,
    /// Successors stepped by [`Faulty::expand`] and not looked up yet.
    pending: Vec<Pending>,
    buf: Vec<u8>,
    /// A new node was refused at the bound.
    pub truncated: bool,
}

impl<'a> Faulty<'a> {
    pub fn new(
        vehicle: &'a Vehicle,
        inj: &'a [Injection],
        cfg: &Config,
        sample: Sample,
        max: usize,
    ) -> Faulty<'a> {
        let model = vehicle.ctl.model();
        let period = model.period;
        let g = grid(cfg);
        let pair = inj.len() > 1;
        let actions = if cfg.free_pedal { g.len() } else { 3 };
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
            .fold(1, |a, b| a / gcd(a, b) * b);
        Faulty {
            vehicle,
            inj,
            resolution: cfg.resolution,
            grid: g,
            cycle,
            stride: actions * (1 + usize::from(pair)),
            pair,
            max,
            slot: Vec::new(),
            states: Vec::new(),
            free: Vec::new(),
            plate: Vec::new(),
            step: Vec::new(),
            phase: Vec::new(),
            pedal: Vec::new(),
            recs: Vec::new(),
            buckets: Vec::new(),
            spill: JointSet::default(),
            masks: Vec::new(),
            words: monitor_words(model.faults.len()),
            succ: Vec::new(),
            index: DigestIndex::default(),
            lists: FaultLists::new(cfg.resolution, cycle),
            cone: Cone::new(model),
            cache: ConeCache::default(),
            scratch: (sample, Outputs::default()),
            positions: vec![0.0; model.sensors.len()],
            spares: Vec::new(),
            pending: Vec::new(),
            buf: Vec::with_capacity(256),
            truncated: false,
        }
    }

    pub fn vehicle(&self) -> &'a Vehicle {
        self.vehicle
    }

    /// Drops node `f`'s controller memory once the search has asked for every successor it
    /// will ever ask of `f` (they stay known): its state is never read again. The first
    /// `roots` nodes (the injections) are kept: a node made as a successor has had its lone
    /// future taken at once, if it has one, but a root has not.
    pub fn release(&mut self, f: u32, roots: u32) {
        let fi = f as usize;
        if f >= roots && self.slot[fi] != RELEASED {
            self.free.push(self.slot[fi]);
            self.slot[fi] = RELEASED;
        }
    }

    /// Node `f`'s controller state, unless it has been released.
    pub fn state(&self, f: u32) -> Option<&State> {
        let s = self.slot[f as usize];
        (s != RELEASED).then(|| &self.states[s as usize])
    }

    /// Nodes stored so far.
    pub fn nodes(&self) -> usize {
        self.slot.len()
    }

    /// The monitors set in node `f`, as 64-bit words.
    pub fn mask(&self, f: u32) -> &[u64] {
        let i = f as usize * self.words;
        &self.masks[i..i + self.words]
    }

    /// What the joint search reads of node `f`.
    #[inline]
    pub fn hot(&self, f: u32) -> &Hot {
        &self.recs[f as usize].hot
    }

    /// Asks the processor to fetch node `f`'s record (a hint only).
    #[inline]
    pub fn prefetch(&self, f: u32) {
        crate::hint::prefetch(self.recs.as_ptr().wrapping_add(f as usize));
    }

    /// The place of node `f`'s controller state, if it is kept and some successor of `f` has
    /// not been stepped yet.
    fn to_step(&self, f: u32) -> Option<usize> {
        let s = self.slot[f as usize];
        let row = &self.succ[f as usize * self.stride..(f as usize + 1) * self.stride];
        (s != RELEASED && row.contains(&UNKNOWN)).then_some(s as usize)
    }

    /// Asks the processor to fetch the place of node `f`'s controller state, if it is still
    /// to be stepped (a hint only; see [`Faulty::prefetch_state`]).
    pub fn prefetch_state_place(&self, f: u32) {
        if let Some(s) = self.to_step(f) {
            crate::hint::prefetch(self.states.as_ptr().wrapping_add(s));
        }
    }

    /// Asks the processor to fetch node `f`'s controller state, if it is still to be stepped
    /// (a hint only; its place should have been asked for a little earlier).
    pub fn prefetch_state(&self, f: u32) {
        if let Some(s) = self.to_step(f) {
            self.states[s].prefetch();
        }
    }

    /// The lone future recorded for node `f` (the search's index), if any.
    pub fn lone(&self, f: u32) -> Option<u32> {
        self.recs[f as usize].lone.checked_sub(1)
    }

    /// Records node `f`'s lone future (`i < u32::MAX`).
    pub fn set_lone(&mut self, f: u32, i: u32) {
        self.recs[f as usize].lone = i + 1;
    }

    /// Records that node `f` was reached beside a twin whose part of the joint key is `part`,
    /// with timers `t`: as [`JointSet::admit`] does for the key
    /// `(f, part)`, whose semantics it shares, in the node's own record while it has room.
    pub fn admit(&mut self, f: u32, part: u32, t: Timers, watch: Watch) -> Option<Timers> {
        admit(
            &mut self.recs,
            &mut self.buckets,
            &mut self.spill,
            f,
            part,
            t,
            watch,
        )
    }

    /// Fills the scratch buffer with the faulty vehicle's cell: the controller's memory within
    /// the cone (continuous parts quantised), the plate, what the faults captured and an
    /// intermittent fault's phase. Returns whether the driver's sensor is in the cone.
    fn encode_cell(
        &mut self,
        st: &State,
        plate: PlantState,
        faults: u32,
        phase: u32,
        resolution: f64,
    ) -> bool {
        let model = self.vehicle.ctl.model();
        let (rel, driver_in) = {
            let c = self.cone.cached(&mut self.cache, model, st);
            (&c.0, c.1)
        };
        self.buf.clear();
        st.encode_relevant(model, resolution, rel, &mut self.buf);
        encode_plate(plate, resolution, &mut self.buf);
        for c in &self.lists.captured[faults as usize] {
            self.buf.extend_from_slice(&c.to_le_bytes());
        }
        self.buf.extend_from_slice(&phase.to_le_bytes());
        driver_in
    }

    /// The digest of a faulty vehicle's cell at `resolution` (see [`Faulty::encode_cell`]),
    /// whatever the pedal, and whether the driver's sensor is in its cone.
    pub fn cell(
        &mut self,
        st: &State,
        plate: PlantState,
        faults: u32,
        phase: u32,
        resolution: f64,
    ) -> (u128, bool) {
        let driver_in = self.encode_cell(st, plate, faults, phase, resolution);
        (digest(&self.buf), driver_in)
    }

    /// Node `f`'s phase in an intermittent fault's cycle.
    pub fn phase(&self, f: u32) -> u32 {
        self.phase[f as usize]
    }

    /// The node for a faulty vehicle in this state: an existing one with the same encoding
    /// (the state is given back to be reused), a new one, or [`DROPPED`] at the bound.
    #[allow(clippy::too_many_arguments)]
    pub fn intern(
        &mut self,
        st: State,
        plate: PlantState,
        faults: u32,
        step: u32,
        phase: u32,
        pedal: u8,
        second_in: bool,
    ) -> u32 {
        let p = self.keyed(usize::MAX, st, plate, faults, step, phase, pedal, second_in);
        self.settle(p)
    }

    /// A faulty state with its node's key (the vehicle's cell, the pedal and a pair's
    /// progress) and whether the driver's sensor is in its cone, ready to be looked up as
    /// the successor in `slot` (`usize::MAX` for a root).
    #[allow(clippy::too_many_arguments)]
    fn keyed(
        &mut self,
        slot: usize,
        st: State,
        plate: PlantState,
        faults: u32,
        step: u32,
        phase: u32,
        pedal: u8,
        second_in: bool,
    ) -> Pending {
        let driver_in = self.encode_cell(&st, plate, faults, phase, self.resolution);
        self.buf.push(pedal);
        self.buf.push(u8::from(second_in));
        Pending {
            slot,
            st,
            plate,
            faults,
            step,
            phase,
            pedal,
            second_in,
            key: digest(&self.buf),
            driver_in,
        }
    }

    /// Looks a stepped state up by its key, stores it as a new node if it is none yet, and
    /// records the node as the successor in `p.slot` (unless that is `usize::MAX`).
    fn settle(&mut self, p: Pending) -> u32 {
        let model = self.vehicle.ctl.model();
        let (st, plate, faults) = (p.st, p.plate, p.faults);
        if let Some(i) = self.index.get(p.key) {
            self.spares.push(st);
            return self.record(p.slot, i);
        }
        if self.slot.len() >= self.max {
            self.truncated = true;
            self.spares.push(st);
            return self.record(p.slot, DROPPED);
        }
        let i = self.slot.len() as u32;
        self.index.insert(p.key, i);
        push_monitor_words(model.faults.len(), |f| st.fault_set(f), &mut self.masks);
        let flag = |b: bool, f: u8| if b { f } else { 0 };
        self.recs.push(Rec {
            hot: Hot {
                open: plate.position,
                mask0: self.masks[i as usize * self.words],
                faults,
                mode: st.mode() as u16,
                flags: flag(p.second_in, Hot::SECOND_IN)
                    | flag(p.driver_in, Hot::DRIVER_IN)
                    | flag(model.modes[st.mode()].is_safe(), Hot::SAFE)
                    | flag(self.lists.stuck[faults as usize], Hot::STUCK),
                inline: 0,
            },
            more: 0,
            lone: 0,
            seen: [0; INLINE],
        });
        match self.free.pop() {
            Some(s) => {
                // The released state that held the place becomes a spare buffer.
                let old = std::mem::replace(&mut self.states[s as usize], st);
                self.spares.push(old);
                self.slot.push(s);
            }
            None => {
                self.slot.push(self.states.len() as u32);
                self.states.push(st);
            }
        }
        self.plate.push(plate);
        self.step.push(p.step);
        self.phase.push(p.phase);
        self.pedal.push(p.pedal);
        self.succ.extend(std::iter::repeat_n(UNKNOWN, self.stride));
        self.record(p.slot, i)
    }

    /// Records node `i` in successor slot `slot` (none for `usize::MAX`), and returns it.
    fn record(&mut self, slot: usize, i: u32) -> u32 {
        if slot != usize::MAX {
            self.succ[slot] = i;
        }
        i
    }

    /// The successors of node `f` stepped already without a pair's second fault arriving, by
    /// action index.
    pub fn known(&self, f: u32) -> impl Iterator<Item = (usize, u32)> + '_ {
        let per = 1 + usize::from(self.pair);
        let row = &self.succ[f as usize * self.stride..(f as usize + 1) * self.stride];
        row.iter()
            .step_by(per)
            .enumerate()
            .filter(|&(_, &s)| s != UNKNOWN && s != DROPPED)
            .map(|(ai, &s)| (ai, s))
    }

    /// Pushes node `f`'s known successors, under every action, with a pair's second fault
    /// arriving and without.
    pub fn successors(&self, f: u32, out: &mut Vec<u32>) {
        let row = &self.succ[f as usize * self.stride..(f as usize + 1) * self.stride];
        out.extend(row.iter().filter(|&&s| s != UNKNOWN && s != DROPPED));
    }

    fn slot_of(&self, f: u32, ai: usize, inject_b: bool) -> usize {
        f as usize * self.stride + ai * (1 + usize::from(self.pair)) + usize::from(inject_b)
    }

    /// The successor of node `f` when the driver takes action `ai` (to grid index `a`), with
    /// a pair's second fault arriving at the step's start when `inject_b`.
    pub fn succ(&mut self, f: u32, ai: usize, a: u8, inject_b: bool) -> u32 {
        let slot = self.slot_of(f, ai, inject_b);
        let known = self.succ[slot];
        if known != UNKNOWN {
            return known;
        }
        match self.stepped(f, slot, a, inject_b) {
            Some(p) => self.settle(p),
            None => DROPPED,
        }
    }

    /// Steps every successor of node `f` that the joint search asks for (each action of
    /// `acts`, and with a pair's second fault arriving unless it has) and that is not known
    /// yet, and only then looks them up, so that the index's cache misses overlap. The same
    /// nodes, made in the same order, as asking [`Faulty::succ`] for each in turn.
    pub fn expand(&mut self, f: u32, acts: &[u8]) {
        let with_b = self.pair && !self.recs[f as usize].hot.second_in();
        let mut pending = std::mem::take(&mut self.pending);
        'steps: for (ai, &a) in acts.iter().enumerate() {
            for inject_b in [false, true] {
                if inject_b && !with_b {
                    continue;
                }
                let slot = self.slot_of(f, ai, inject_b);
                if self.succ[slot] != UNKNOWN {
                    continue;
                }
                match self.stepped(f, slot, a, inject_b) {
                    Some(p) => {
                        self.index.prefetch(p.key);
                        pending.push(p);
                    }
                    None => break 'steps,
                }
            }
        }
        for p in pending.drain(..) {
            self.settle(p);
        }
        self.pending = pending;
    }

    /// Node `f` stepped once, the driver taking the pedal to grid index `a`, with a pair's
    /// second fault arriving at the step's start when `inject_b`; `None` if its state is
    /// gone.
    fn stepped(&mut self, f: u32, slot: usize, a: u8, inject_b: bool) -> Option<Pending> {
        let model = self.vehicle.ctl.model();
        let fi = f as usize;
        let from = self.slot[fi];
        if from == RELEASED {
            // Cannot happen (a node is released only once all its successors are known); if it
            // did, the branch is cut as at the bound, on the side of "inconclusive".
            self.truncated = true;
            return None;
        }
        let now = Time(model.period.0 * u64::from(self.step[fi]));
        let here = &self.states[from as usize];
        let mut st = match self.spares.pop() {
            Some(mut s) => {
                s.clone_from(here);
                s
            }
            None => here.clone(),
        };
        let mut plate = self.plate[fi];
        let mut faults = self.recs[fi].hot.faults;
        if inject_b {
            // The second fault arrives at this step's start, before the pedal moves, as a
            // script's `break` line before its `pedal` line does.
            let (list, p) = break_into(
                model,
                self.inj[1],
                now,
                self.grid[usize::from(self.pedal[fi])],
                plate,
                &self.lists.lists[faults as usize],
            );
            plate = p;
            faults = self.lists.add(Some(faults), list);
        }
        if let Some(d) = model.driver {
            self.positions[d] = self.grid[usize::from(a)];
        }
        crate::sim::system::period(
            self.vehicle,
            &mut st,
            &mut plate,
            &mut self.positions,
            &self.lists.lists[faults as usize],
            now,
            model.period,
            &mut self.scratch,
        );
        let step = self.step[fi] + 1;
        let phase = (self.phase[fi] + 1) % self.cycle;
        let second_in = self.recs[fi].hot.second_in() || inject_b;
        Some(self.keyed(slot, st, plate, faults, step, phase, a, second_in))
    }
}

/// A successor stepped and keyed but not looked up yet (see [`Faulty::expand`]).
struct Pending {
    /// Its successor slot, `usize::MAX` for a root.
    slot: usize,
    st: State,
    plate: PlantState,
    faults: u32,
    step: u32,
    phase: u32,
    pedal: u8,
    second_in: bool,
    key: u128,
    driver_in: bool,
}

/// [`Faulty::admit`] over a graph's records, their overflow buckets and the spill table.
fn admit(
    recs: &mut [Rec],
    buckets: &mut Vec<Bucket>,
    spill: &mut JointSet,
    f: u32,
    part: u32,
    t: Timers,
    watch: Watch,
) -> Option<Timers> {
    let rec = &mut recs[f as usize];
    let n = usize::from(rec.hot.inline);
    for e in &mut rec.seen[..n] {
        if let Some(r) = merge(e, part, t, watch) {
            return r;
        }
    }
    if n < INLINE {
        rec.seen[n] = pack_entry(part, t);
        rec.hot.inline += 1;
        return Some(t);
    }
    let mut b = rec.more;
    let mut last = 0;
    let mut chain = 0;
    while b != 0 {
        let bucket = &mut buckets[b as usize - 1];
        for e in &mut bucket.seen[..bucket.len as usize] {
            if let Some(r) = merge(e, part, t, watch) {
                return r;
            }
        }
        last = b;
        b = bucket.next;
        chain += 1;
    }
    if rec.hot.flags & Hot::SPILLED != 0 {
        return spill.admit((u64::from(f) << 32) | u64::from(part), t, watch);
    }
    if last != 0 {
        let bucket = &mut buckets[last as usize - 1];
        if (bucket.len as usize) < bucket.seen.len() {
            bucket.seen[bucket.len as usize] = pack_entry(part, t);
            bucket.len += 1;
            return Some(t);
        }
    }
    if chain < MAX_CHAIN && buckets.len() < u32::MAX as usize - 1 {
        let mut seen = [0; 7];
        seen[0] = pack_entry(part, t);
        buckets.push(Bucket {
            seen,
            len: 1,
            next: 0,
        });
        let new = buckets.len() as u32;
        if last == 0 {
            rec.more = new;
        } else {
            buckets[last as usize - 1].next = new;
        }
        return Some(t);
    }
    rec.hot.flags |= Hot::SPILLED;
    spill.admit((u64::from(f) << 32) | u64::from(part), t, watch)
}

pub fn gcd(a: u32, b: u32) -> u32 {
    if b == 0 { a.max(1) } else { gcd(b, a % b) }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::HashSet;

    /// Breadth-first over the faulty graph of `inj` from a spread of injection instants, to
    /// `levels` levels or `max` nodes, asking each node's successors one by one, or after
    /// [`Faulty::expand`]. Returns every successor in the order asked, and each node's plate.
    fn explore(inj: &[Injection], batched: bool, max: usize) -> (Vec<u32>, Vec<PlantState>) {
        let model = crate::model::lower(include_str!("../../scenarios/van/van_throttle.limp"))
            .expect("the van lowers");
        let vehicle = Vehicle::new(&model).expect("the van's plate");
        let cfg = Config::default();
        let pre = crate::prove::search::pre_fault(&vehicle, &cfg);
        let g = grid(&cfg);
        let mut fg = Faulty::new(&vehicle, inj, &cfg, pre.key_on.sample().clone(), max);
        let mut frontier = Vec::new();
        for node in pre.nodes.iter().step_by(20) {
            let Some(st) = node.state.as_ref() else {
                continue;
            };
            let (list, plate) = break_into(
                &model,
                inj[0],
                Time(model.period.0 * u64::from(node.depth)),
                g[usize::from(node.pedal)],
                node.plate,
                &[],
            );
            let faults = fg.lists.add(None, list);
            let f = fg.intern(
                st.clone(),
                plate,
                faults,
                node.depth,
                0,
                node.pedal,
                inj.len() < 2,
            );
            if f != DROPPED {
                frontier.push(f);
            }
        }
        let (mut asked, mut seen, mut acts) = (Vec::new(), HashSet::new(), Vec::new());
        for _ in 0..8 {
            let mut next = Vec::new();
            for &f in &frontier {
                crate::prove::search::actions(&cfg, fg.pedal[f as usize], g.len(), &mut acts);
                if batched {
                    fg.expand(f, &acts);
                }
                let second_in = fg.hot(f).second_in();
                for (ai, &a) in acts.iter().enumerate() {
                    for inject_b in [false, true] {
                        if inject_b && second_in {
                            continue;
                        }
                        let s = fg.succ(f, ai, a, inject_b);
                        asked.push(s);
                        if s != DROPPED && seen.insert(s) {
                            next.push(s);
                        }
                    }
                }
            }
            frontier = next;
        }
        (asked, fg.plate.clone())
    }

    #[test]
    fn expanding_a_node_at_once_makes_the_same_nodes_in_the_same_order() {
        // The reference is the one-by-one stepping the batch replaces (common practice, no
        // source): for a single fault and a pair, below and at the bound on nodes.
        let model = crate::model::lower(include_str!("../../scenarios/van/van_throttle.limp"))
            .expect("the van lowers");
        let track = |t| crate::model::TrackRef {
            sensor: model.driver.expect("a pedal"),
            track: t,
        };
        let gain = Injection::Track {
            track: track(0),
            fault: TrackFault::Gain { factor: 1.5 },
        };
        let offset = Injection::Track {
            track: track(1),
            fault: TrackFault::Offset { volts: 0.4 },
        };
        for (inj, max) in [
            (vec![gain], 1 << 20),
            (vec![gain], 2_000),
            (vec![gain, offset], 1 << 20),
            (vec![gain, offset], 3_000),
        ] {
            let one = explore(&inj, false, max);
            let batch = explore(&inj, true, max);
            assert!(one.0.len() > 5_000, "{} successors asked", one.0.len());
            let differ = one.0.iter().zip(&batch.0).position(|(a, b)| a != b);
            assert_eq!(differ, None, "{} faults, {max} nodes", inj.len());
            assert_eq!(one.0.len(), batch.0.len());
            assert!(one.1 == batch.1, "plates differ");
            // Both below the bound and at it.
            assert_eq!(one.0.contains(&DROPPED), max < 1 << 20);
        }
    }

    #[test]
    fn admission_agrees_with_a_hash_map_in_record_chain_and_spill() {
        // The standard library's map as the reference, keyed as the joint search keys a state
        // (faulty node, twin part), over timers from a seeded generator. Up to 160 parts per
        // node: some nodes stay within their record, some fill their chain and spill.
        let empty = Rec {
            hot: Hot {
                open: 0.0,
                mask0: 0,
                faults: 0,
                mode: 0,
                flags: 0,
                inline: 0,
            },
            more: 0,
            lone: 0,
            seen: [0; INLINE],
        };
        let nodes = 600u64;
        let mut recs = vec![empty; nodes as usize];
        let (mut buckets, mut spill) = (Vec::new(), JointSet::default());
        let mut m: std::collections::HashMap<(u32, u32), Timers> = Default::default();
        let mut x = 0x2545_f491_4f6c_dd1du64;
        for _ in 0..150_000 {
            crate::testing::xorshift(&mut x);
            let f = (x % nodes) as u32;
            // Node f holds up to 1 + f % 160 twin parts.
            let part = ((x >> 16) % (1 + u64::from(f) % 160)) as u32;
            let t = Timers {
                excess: (x >> 40) as u16 % 50,
                released: (x >> 50) as u16 % 300,
            };
            let watch = Watch {
                excess: !(x >> 8).is_multiple_of(4),
                released: !(x >> 10).is_multiple_of(4),
            };
            let want = super::super::joint::admit_by_map(&mut m, (f, part), t, watch);
            assert_eq!(
                admit(&mut recs, &mut buckets, &mut spill, f, part, t, watch),
                want
            );
        }
        let spilled = recs.iter().filter(|r| r.hot.flags & Hot::SPILLED != 0);
        let inline_only = recs.iter().filter(|r| r.more == 0 && r.hot.inline > 0);
        assert!(spilled.count() > 0 && inline_only.count() > 0);
        assert!(!spill.is_empty() && !buckets.is_empty());
    }
}
