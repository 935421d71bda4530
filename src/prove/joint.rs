//! The joint search's visited set: packed 64-bit keys (faulty node, twin, detection) with the
//! requirement timers each was reached with, in one open-addressed table.
//!
//! A general hash map keeps its tags apart from its entries, so a lookup in a table far larger
//! than the caches misses twice; here a slot holds key and timers in 12 bytes and a lookup
//! usually misses once. The search also announces its next lookups (`prefetch`) so that the
//! misses of one state's successors overlap.

use super::search::Timers;

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

fn pack(t: Timers) -> u32 {
    (u32::from(t.excess) << 16) | u32::from(t.released)
}

fn unpack(v: u32) -> Timers {
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

    /// Asks the processor to fetch the slot `key` starts its probe at (a hint only).
    #[inline]
    pub fn prefetch(&self, key: u64) {
        #[cfg(target_arch = "x86_64")]
        {
            let i = slot_of(key, self.slots.len() - 1);
            let p = self.slots.as_ptr().wrapping_add(i).cast::<i8>();
            // SAFETY: a prefetch is a hint that never faults, whatever the address; `i` is in
            // bounds anyway.
            unsafe {
                std::arch::x86_64::_mm_prefetch(p, std::arch::x86_64::_MM_HINT_T0);
            }
        }
        #[cfg(not(target_arch = "x86_64"))]
        let _ = key;
    }

    /// Records a state reached with timers `t`. Its timers take part by dominance rather than
    /// in the key: a state reached again no further on in either timer is not expanded again;
    /// otherwise its timers become the larger of the two in each, and the state goes on with
    /// them (returned): an over-approximation, on the side of finding violations (each is
    /// confirmed by an exact replay before it is reported). `key`'s high half must be below
    /// `u32::MAX`.
    pub fn admit(&mut self, key: u64, t: Timers) -> Option<Timers> {
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
                let old = unpack(s[2]);
                if old.excess >= t.excess && old.released >= t.released {
                    return None;
                }
                let new = Timers {
                    excess: old.excess.max(t.excess),
                    released: old.released.max(t.released),
                };
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn timers_take_part_by_dominance() {
        let mut v = JointSet::default();
        let t = |excess, released| Timers { excess, released };
        assert_eq!(v.admit(7, t(3, 10)), Some(t(3, 10)));
        // Covered: no further on in either timer.
        assert_eq!(v.admit(7, t(3, 10)), None);
        assert_eq!(v.admit(7, t(0, 4)), None);
        // Further on in one: goes on with the larger of each.
        assert_eq!(v.admit(7, t(5, 2)), Some(t(5, 10)));
        assert_eq!(v.admit(7, t(4, 9)), None);
        // Another key is another state.
        assert_eq!(v.admit(8, t(0, 0)), Some(t(0, 0)));
        assert_eq!(v.len(), 2);
    }

    #[test]
    fn agrees_with_a_hash_map_through_growth() {
        // The standard library's map as the reference, over keys that share halves (both
        // halves are packed indices in use) and timers from a seeded generator.
        let mut v = JointSet::default();
        let mut m: std::collections::HashMap<u64, Timers> = Default::default();
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        for _ in 0..200_000 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let key = ((x % 5_000) << 32) | ((x >> 20) % 300);
            let t = Timers {
                excess: (x >> 40) as u16 % 50,
                released: (x >> 50) as u16 % 300,
            };
            let want = match m.get_mut(&key) {
                Some(o) if o.excess >= t.excess && o.released >= t.released => None,
                Some(o) => {
                    o.excess = o.excess.max(t.excess);
                    o.released = o.released.max(t.released);
                    Some(*o)
                }
                None => {
                    m.insert(key, t);
                    Some(t)
                }
            };
            assert_eq!(v.admit(key, t), want);
        }
        assert_eq!(v.len(), m.len());
        assert!(v.slots.len() >= 2 * v.len());
    }
}
