//! The search's two large tables, each open-addressed with linear probing: a joint visited
//! set (packed 64-bit keys of faulty node and twin, with the requirement timers each
//! was reached with), which holds the joint entries a faulty node's own record has no room
//! for (see `faulty::Faulty::admit`), and the faulty graph's index (128-bit state digests to
//! node numbers).
//!
//! A general hash map keeps its tags apart from its entries, so a lookup in a table far larger
//! than the caches misses twice; here a slot holds key and value together and a lookup usually
//! misses once.

use super::search::{Timers, Watch};

/// An empty slot's first word: a slot stores the key's high half plus one, so that a table
/// of zeros is empty and comes from the allocator already cleared.
const EMPTY: u32 = 0;

/// Visited joint states and their timers.
pub struct JointSet {
    /// `[key high + 1, key low, timers]` per slot; the length is a power of two.
    slots: Vec<[u32; 3]>,
    len: usize,
}

impl Default for JointSet {
    fn default() -> JointSet {
        JointSet::with_slots(1 << 10)
    }
}

fn slot_of(key: u64, mask: usize) -> usize {
    // A 64-bit finaliser (common practice, no source: a multiply-xorshift mix).
    let mut z = key;
    z = (z ^ (z >> 32)).wrapping_mul(0xd6e8_feb8_6659_fd93);
    z = (z ^ (z >> 32)).wrapping_mul(0xd6e8_feb8_6659_fd93);
    (z ^ (z >> 32)) as usize & mask
}

/// Timers in one word: the excess timer in the high half, the release timer in the low.
pub(super) fn pack(t: Timers) -> u32 {
    (u32::from(t.excess) << 16) | u32::from(t.released)
}

pub(super) fn unpack(v: u32) -> Timers {
    Timers {
        excess: (v >> 16) as u16,
        released: v as u16,
    }
}

impl JointSet {
    fn with_slots(n: usize) -> JointSet {
        JointSet {
            slots: vec![[EMPTY; 3]; n],
            len: 0,
        }
    }

    /// States stored.
    pub fn len(&self) -> usize {
        self.len
    }

    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Records a state reached with timers `t`. Its timers take part by dominance rather than
    /// in the key: a state reached again no further on in either timer is not expanded again;
    /// otherwise its timers become the larger of the two in each, and the state goes on with
    /// them (returned): an over-approximation, on the side of finding violations (each is
    /// confirmed by an exact replay before it is reported). `key`'s high half must be below
    /// `u32::MAX`.
    pub fn admit(&mut self, key: u64, t: Timers, watch: Watch) -> Option<Timers> {
        debug_assert!(key >> 32 < u64::from(u32::MAX));
        if (self.len + 1) * 2 > self.slots.len() {
            self.grow();
        }
        let mask = self.slots.len() - 1;
        let (hi, lo) = ((key >> 32) as u32 + 1, key as u32);
        let mut i = slot_of(key, mask);
        loop {
            let s = &mut self.slots[i];
            if s[0] == EMPTY {
                *s = [hi, lo, pack(t)];
                self.len += 1;
                return Some(t);
            }
            if s[0] == hi && s[1] == lo {
                let new = unpack(s[2]).absorb(t, watch)?;
                s[2] = pack(new);
                return Some(new);
            }
            i = (i + 1) & mask;
        }
    }

    fn grow(&mut self) {
        let old = std::mem::take(&mut self.slots);
        let mut bigger = JointSet::with_slots(old.len() * 2);
        let mask = bigger.slots.len() - 1;
        for s in old.into_iter().filter(|s| s[0] != EMPTY) {
            let mut i = slot_of((u64::from(s[0] - 1) << 32) | u64::from(s[1]), mask);
            while bigger.slots[i][0] != EMPTY {
                i = (i + 1) & mask;
            }
            bigger.slots[i] = s;
        }
        bigger.len = self.len;
        *self = bigger;
    }
}

/// Where digest `d`'s probe starts: both halves, so that either one alone may repeat.
fn start(d: u128, mask: usize) -> usize {
    ((d as u64) ^ ((d >> 64) as u64)) as usize & mask
}

/// 128-bit digests (already well mixed) to node numbers below `u32::MAX`.
pub struct DigestIndex {
    /// `(digest halves, node + 1)` per slot (24 bytes: a `u128` would align it to 32), 0
    /// for an empty one; the length is a power of two.
    slots: Vec<([u64; 2], u32)>,
    len: usize,
}

impl Default for DigestIndex {
    fn default() -> DigestIndex {
        DigestIndex {
            slots: vec![([0; 2], 0); 1 << 10],
            len: 0,
        }
    }
}

fn halves(d: u128) -> [u64; 2] {
    [d as u64, (d >> 64) as u64]
}

impl DigestIndex {
    /// The node of digest `d`, if any.
    pub fn get(&self, d: u128) -> Option<u32> {
        let mask = self.slots.len() - 1;
        let key = halves(d);
        let mut i = start(d, mask);
        loop {
            let (k, v) = self.slots[i];
            if v == 0 {
                return None;
            }
            if k == key {
                return Some(v - 1);
            }
            i = (i + 1) & mask;
        }
    }

    /// Asks the processor to fetch the slot where digest `d`'s probe starts (a hint: it
    /// never faults and changes nothing).
    pub fn prefetch(&self, d: u128) {
        let i = start(d, self.slots.len() - 1);
        crate::hint::prefetch(self.slots.as_ptr().wrapping_add(i));
    }

    /// Records digest `d` as node `n` (`d` not recorded yet, `n < u32::MAX`).
    pub fn insert(&mut self, d: u128, n: u32) {
        if (self.len + 1) * 2 > self.slots.len() {
            let size = self.slots.len() * 2;
            let old = std::mem::replace(&mut self.slots, vec![([0; 2], 0); size]);
            self.len = 0;
            for (k, v) in old.into_iter().filter(|s| s.1 != 0) {
                self.insert(u128::from(k[0]) | (u128::from(k[1]) << 64), v - 1);
            }
        }
        let mask = self.slots.len() - 1;
        let mut i = start(d, mask);
        while self.slots[i].1 != 0 {
            i = (i + 1) & mask;
        }
        self.slots[i] = (halves(d), n + 1);
        self.len += 1;
    }
}

/// The reference the admission tests compare with: timer dominance over the standard
/// library's map, written out on its own.
#[cfg(test)]
pub(crate) fn admit_by_map<K: std::hash::Hash + Eq>(
    m: &mut std::collections::HashMap<K, Timers>,
    key: K,
    t: Timers,
    watch: Watch,
) -> Option<Timers> {
    match m.get_mut(&key) {
        Some(o)
            if (o.excess >= t.excess || !watch.excess)
                && (o.released >= t.released || !watch.released) =>
        {
            None
        }
        Some(o) => {
            o.excess = o.excess.max(t.excess);
            o.released = o.released.max(t.released);
            Some(*o)
        }
        None => {
            m.insert(key, t);
            Some(t)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn digests_find_their_nodes_through_growth() {
        // The standard library's map as the reference, over digests that share their low
        // halves (the probe start) in runs.
        let mut ix = DigestIndex::default();
        let mut m = std::collections::HashMap::new();
        for n in 0..50_000u32 {
            let d = (u128::from(n) << 64) | u128::from(n / 7);
            assert_eq!(ix.get(d), None);
            ix.insert(d, n);
            m.insert(d, n);
        }
        for (&d, &n) in &m {
            assert_eq!(ix.get(d), Some(n));
        }
        assert_eq!(ix.get(u128::MAX), None);
    }

    #[test]
    fn timers_take_part_by_dominance() {
        let mut v = JointSet::default();
        let t = |excess, released| Timers { excess, released };
        let all = Watch::ALL;
        assert_eq!(v.admit(7, t(3, 10), all), Some(t(3, 10)));
        // Covered: no further on in either timer.
        assert_eq!(v.admit(7, t(3, 10), all), None);
        assert_eq!(v.admit(7, t(0, 4), all), None);
        // Further on in one: goes on with the larger of each.
        assert_eq!(v.admit(7, t(5, 2), all), Some(t(5, 10)));
        assert_eq!(v.admit(7, t(4, 9), all), None);
        // Another key is another state.
        assert_eq!(v.admit(8, t(0, 0), all), Some(t(0, 0)));
        assert_eq!(v.len(), 2);
        // A timer no longer watched (its requirements all violated) does not tell states
        // apart; the other still does, and the state goes on with the larger of each.
        let released_only = Watch {
            excess: false,
            released: true,
        };
        assert_eq!(v.admit(7, t(9, 10), released_only), None);
        assert_eq!(v.admit(7, t(9, 11), released_only), Some(t(9, 11)));
        let none = Watch {
            excess: false,
            released: false,
        };
        assert_eq!(v.admit(7, t(40, 200), none), None);
        assert_eq!(v.admit(9, t(1, 1), none), Some(t(1, 1)));
    }

    #[test]
    fn agrees_with_a_hash_map_through_growth() {
        // The standard library's map as the reference, over keys that share halves (both
        // halves are packed indices in use) and timers from a seeded generator.
        let mut v = JointSet::default();
        let mut m: std::collections::HashMap<u64, Timers> = Default::default();
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        for _ in 0..200_000 {
            crate::testing::xorshift(&mut x);
            let key = ((x % 5_000) << 32) | ((x >> 20) % 300);
            let t = Timers {
                excess: (x >> 40) as u16 % 50,
                released: (x >> 50) as u16 % 300,
            };
            // Mostly both timers watched, now and then one or none (as requirements fall).
            let watch = Watch {
                excess: !(x >> 8).is_multiple_of(4),
                released: !(x >> 10).is_multiple_of(4),
            };
            assert_eq!(v.admit(key, t, watch), admit_by_map(&mut m, key, t, watch));
        }
        assert_eq!(v.len(), m.len());
        assert!(v.slots.len() >= 2 * v.len());
    }
}
