//! The binary's allocator: the system's, with large blocks mapped directly and kept for reuse.
//!
//! The prover's searches each build visited sets and node tables of tens to hundreds of
//! megabytes, one search after another on each thread. Fresh pages are costly: the kernel
//! clears each on first touch, and on a virtual machine that hands freed memory back to its
//! host (free page reporting), the host must back it again too. On the 2-core machine the
//! figures are measured on, touching 512 MiB of fresh memory took 0.3-0.4 s in 4 KiB pages but
//! 1.6-8 s in 2 MiB pages once the host had taken them back, against 0.05 s for pages still
//! mapped; a complete proof of the van spent a sixth of its time there. So on Linux, blocks of
//! 4 MiB and more are their own anonymous mappings (ordinary pages: the huge-page hint cost
//! more than it saved there), they grow by `mremap` (which moves pages instead of copying
//! them into fresh ones), and a freed one is kept, up to [`KEEP`] bytes in all, for the next
//! large block to take: its pages are already mapped. Everything else, and every other
//! system, goes to the system allocator unchanged.

use std::alloc::{GlobalAlloc, Layout, System};

/// The system allocator, with large blocks mapped directly and reused.
pub struct LargeBlocks;

/// Blocks from this size on are mapped directly.
const LARGE: usize = 4 << 20;
/// The granule large blocks are aligned and sized to (a huge page on x86-64 and most arm64
/// kernels, so the kernel may still back them with one if it chooses).
const HUGE: usize = 2 << 20;
/// The most bytes of freed blocks kept for reuse (what a search at the default bounds, or
/// the largest van search, holds at its peak, with room to spare).
pub const KEEP: usize = 1 << 30;
/// The most freed blocks kept.
const SLOTS: usize = 32;

/// Whether a block with this layout is mapped directly.
fn is_large(layout: Layout) -> bool {
    cfg!(target_os = "linux") && layout.size() >= LARGE && layout.align() <= HUGE
}

#[cfg(target_os = "linux")]
mod map {
    //! Large blocks as their own anonymous mappings, `HUGE`-aligned, whole granules long, and
    //! the store of freed ones.

    use super::{HUGE, KEEP, SLOTS};
    use std::ptr::null_mut;
    use std::sync::Mutex;

    /// Freed mappings kept for reuse: `(address, length)`, the first `len` in use. A fixed
    /// array, so that the store never allocates while the allocator holds its lock.
    struct Store {
        blocks: [(usize, usize); SLOTS],
        len: usize,
        bytes: usize,
    }

    static STORE: Mutex<Store> = Mutex::new(Store {
        blocks: [(0, 0); SLOTS],
        len: 0,
        bytes: 0,
    });

    impl Store {
        /// Adds a mapping (there is a free slot).
        fn push(&mut self, p: usize, l: usize) {
            self.blocks[self.len] = (p, l);
            self.len += 1;
            self.bytes += l;
        }

        /// Removes the `i`-th mapping and gives it back.
        fn remove(&mut self, i: usize) -> (usize, usize) {
            let b = self.blocks[i];
            self.len -= 1;
            self.blocks[i] = self.blocks[self.len];
            self.bytes -= b.1;
            b
        }

        /// Takes the smallest kept mapping of at least `want` bytes, its surplus kept back
        /// (a mapping's whole granules are mappings in their own right).
        fn take(&mut self, want: usize) -> Option<usize> {
            let i = (0..self.len)
                .filter(|&i| self.blocks[i].1 >= want)
                .min_by_key(|&i| self.blocks[i].1)?;
            let (p, l) = self.remove(i);
            if l > want {
                self.push(p + want, l - want);
            }
            Some(p)
        }

        /// Keeps a freed mapping, making room by unmapping smaller kept ones; returns it
        /// back when it is the one not worth keeping (the smallest, with the store full).
        fn keep(&mut self, p: usize, l: usize) -> Option<(usize, usize)> {
            if l > KEEP {
                return Some((p, l));
            }
            while self.len == SLOTS || self.bytes + l > KEEP {
                // Not empty: an empty store has room for `l <= KEEP` bytes.
                let i = (0..self.len).min_by_key(|&i| self.blocks[i].1)?;
                if self.blocks[i].1 >= l {
                    return Some((p, l));
                }
                let (q, m) = self.remove(i);
                // SAFETY: a kept mapping is owned by the store alone.
                unsafe {
                    libc::munmap(q as *mut libc::c_void, m);
                }
            }
            self.push(p, l);
            None
        }
    }

    fn store() -> std::sync::MutexGuard<'static, Store> {
        STORE.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// A block's mapped length: its size rounded up to whole granules.
    fn span(size: usize) -> Option<usize> {
        size.checked_next_multiple_of(HUGE)
    }

    /// Maps `len` bytes (whole granules) at a `HUGE`-aligned address, with protection
    /// `prot`; null when the system refuses.
    ///
    /// # Safety
    /// `len` is a non-zero multiple of `HUGE`.
    unsafe fn reserve(len: usize, prot: libc::c_int) -> *mut u8 {
        let Some(wide) = len.checked_add(HUGE) else {
            return null_mut();
        };
        // SAFETY: a fresh anonymous private mapping touches no existing memory.
        let p = unsafe {
            libc::mmap(
                null_mut(),
                wide,
                prot,
                libc::MAP_PRIVATE | libc::MAP_ANONYMOUS,
                -1,
                0,
            )
        };
        if p == libc::MAP_FAILED {
            return null_mut();
        }
        let start = p as usize;
        let aligned = start.next_multiple_of(HUGE);
        // SAFETY: the head and tail trimmed are parts of the mapping just made, outside the
        // `len` bytes kept.
        unsafe {
            if aligned > start {
                libc::munmap(p, aligned - start);
            }
            let (end, wide_end) = (aligned + len, start + wide);
            if wide_end > end {
                libc::munmap(end as *mut libc::c_void, wide_end - end);
            }
        }
        aligned as *mut u8
    }

    /// Gives back `len` bytes at `p` (whole granules of a block's mapping): kept for reuse,
    /// or unmapped.
    ///
    /// # Safety
    /// `p..p + len` is mapped, owned by the caller, and not used again by it.
    unsafe fn give_back(p: *mut u8, len: usize) {
        let unmap = store().keep(p as usize, len);
        if let Some((q, l)) = unmap {
            // SAFETY: the store handed back a mapping it does not keep.
            unsafe {
                libc::munmap(q as *mut libc::c_void, l);
            }
        }
    }

    /// A new block of `size` bytes, zeroed when `zeroed`; null when refused. A kept mapping
    /// is taken when one is large enough, else a fresh one (zeroed by the kernel) is made.
    pub fn alloc(size: usize, zeroed: bool) -> *mut u8 {
        let Some(len) = span(size) else {
            return null_mut();
        };
        let kept = store().take(len);
        if let Some(p) = kept {
            let p = p as *mut u8;
            if zeroed {
                // SAFETY: the taken mapping is at least `len >= size` bytes and ours alone.
                unsafe { std::ptr::write_bytes(p, 0, size) };
            }
            return p;
        }
        // SAFETY: `len` is a non-zero multiple of `HUGE` (`size` is at least `LARGE`).
        unsafe { reserve(len, libc::PROT_READ | libc::PROT_WRITE) }
    }

    /// Frees a block from [`alloc`] or [`realloc`] of `size` bytes.
    ///
    /// # Safety
    /// `p` is such a block, live, and `size` the size it was last given.
    pub unsafe fn dealloc(p: *mut u8, size: usize) {
        if let Some(len) = span(size) {
            // SAFETY: as the caller guarantees, `p..p + len` is the block's whole mapping.
            unsafe { give_back(p, len) }
        }
    }

    /// The block `p` of `old` bytes resized to `new` (both large): shrunk in place; grown
    /// into a kept mapping when one is large enough (its pages are mapped already, so copying
    /// the old bytes costs less than touching fresh ones), else in place where the mapping
    /// can grow there, else with its pages moved to a new aligned place. Null (with the block
    /// untouched) when refused.
    ///
    /// # Safety
    /// `p` is a live block of this module's of `old` bytes.
    pub unsafe fn realloc(p: *mut u8, old: usize, new: usize) -> *mut u8 {
        let (Some(ol), Some(nl)) = (span(old), span(new)) else {
            return null_mut();
        };
        // SAFETY: every range below is within the block's own mapping (`p..p + ol`), within
        // a mapping taken from the store or reserved here, or handed to mremap, which checks
        // it.
        unsafe {
            if nl <= ol {
                if nl < ol {
                    give_back(p.add(nl), ol - nl);
                }
                return p;
            }
            let kept = store().take(nl);
            if let Some(q) = kept {
                let q = q as *mut u8;
                std::ptr::copy_nonoverlapping(p, q, old);
                give_back(p, ol);
                return q;
            }
            if libc::mremap(p.cast(), ol, nl, 0) != libc::MAP_FAILED {
                return p;
            }
            let dst = reserve(nl, libc::PROT_NONE);
            if dst.is_null() {
                return null_mut();
            }
            let q = libc::mremap(
                p.cast(),
                ol,
                nl,
                libc::MREMAP_MAYMOVE | libc::MREMAP_FIXED,
                dst.cast::<libc::c_void>(),
            );
            if q == libc::MAP_FAILED {
                libc::munmap(dst.cast(), nl);
                return null_mut();
            }
            dst
        }
    }

    #[cfg(test)]
    mod tests {
        use super::*;

        /// A real mapping of `granules` granules for a store to hold.
        fn mapping(granules: usize) -> usize {
            // SAFETY: a non-zero multiple of `HUGE`.
            let p = unsafe { reserve(granules * HUGE, libc::PROT_READ | libc::PROT_WRITE) };
            assert!(!p.is_null());
            p as usize
        }

        fn empty() -> Store {
            Store {
                blocks: [(0, 0); SLOTS],
                len: 0,
                bytes: 0,
            }
        }

        fn release(st: &mut Store) {
            for &(p, l) in &st.blocks[..st.len] {
                // SAFETY: the test's own mappings, no longer used.
                unsafe { libc::munmap(p as *mut libc::c_void, l) };
            }
            st.len = 0;
            st.bytes = 0;
        }

        #[test]
        fn the_store_takes_the_smallest_fit_and_keeps_the_surplus() {
            let mut st = empty();
            let (a, b, c) = (mapping(4), mapping(8), mapping(16));
            for (p, g) in [(a, 4), (b, 8), (c, 16)] {
                assert_eq!(st.keep(p, g * HUGE), None);
            }
            assert_eq!(st.bytes, 28 * HUGE);
            // Six granules: the eight-granule mapping, its last two kept back.
            assert_eq!(st.take(6 * HUGE), Some(b));
            assert_eq!((st.len, st.bytes), (3, 22 * HUGE));
            assert!(st.blocks[..st.len].contains(&(b + 6 * HUGE, 2 * HUGE)));
            // Nothing kept is large enough.
            assert_eq!(st.take(17 * HUGE), None);
            assert_eq!(st.take(16 * HUGE), Some(c));
            // SAFETY: taken from the store: the test's own.
            unsafe {
                libc::munmap(b as *mut libc::c_void, 6 * HUGE);
                libc::munmap(c as *mut libc::c_void, 16 * HUGE);
            }
            release(&mut st);
        }

        #[test]
        fn a_full_store_gives_up_its_smallest_mappings_first() {
            let mut st = empty();
            for _ in 0..SLOTS {
                assert_eq!(st.keep(mapping(1), HUGE), None);
            }
            // Full by count: a one-granule newcomer is not worth keeping, a larger one takes
            // a smallest one's place.
            let small = mapping(1);
            assert_eq!(st.keep(small, HUGE), Some((small, HUGE)));
            // SAFETY: handed back to the caller, unused.
            unsafe { libc::munmap(small as *mut libc::c_void, HUGE) };
            let big = mapping(3);
            assert_eq!(st.keep(big, 3 * HUGE), None);
            assert_eq!((st.len, st.bytes), (SLOTS, (SLOTS + 2) * HUGE));
            // Beyond the byte bound: the newcomer pushes out the smaller ones it needs room
            // from; a mapping larger than the whole bound is never kept.
            assert_eq!(st.keep(0, KEEP + HUGE), Some((0, KEEP + HUGE)));
            let g = KEEP / HUGE;
            let half = mapping(g / 2 + 1);
            assert_eq!(st.keep(half, (g / 2 + 1) * HUGE), None);
            assert_eq!(
                (st.len, st.bytes),
                (SLOTS, (SLOTS - 2 + 3 + g / 2 + 1) * HUGE)
            );
            // Room for `g / 2 - 6` granules more: all but two of the one-granule ones go.
            let other = mapping(g / 2 - 6);
            assert_eq!(st.keep(other, (g / 2 - 6) * HUGE), None);
            assert_eq!((st.len, st.bytes), (5, (2 + 3 + g + 1 - 6) * HUGE));
            for kept in [
                (big, 3 * HUGE),
                (half, (g / 2 + 1) * HUGE),
                (other, (g / 2 - 6) * HUGE),
            ] {
                assert!(st.blocks[..st.len].contains(&kept));
            }
            release(&mut st);
        }
    }
}

#[cfg(not(target_os = "linux"))]
mod map {
    //! Never used: no block is large off Linux.
    pub fn alloc(_: usize, _: bool) -> *mut u8 {
        std::ptr::null_mut()
    }
    pub unsafe fn dealloc(_: *mut u8, _: usize) {}
    pub unsafe fn realloc(_: *mut u8, _: usize, _: usize) -> *mut u8 {
        std::ptr::null_mut()
    }
}

// SAFETY: a block is mapped directly exactly when `is_large` holds for its layout, and is
// freed the same way; `realloc` between a small and a large layout moves the bytes between
// the two kinds. Mapped blocks are aligned to `HUGE`, which is at least their layout's
// alignment, and `alloc_zeroed` zeroes a reused mapping (fresh ones are).
unsafe impl GlobalAlloc for LargeBlocks {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if is_large(layout) {
            return map::alloc(layout.size(), false);
        }
        // SAFETY: as the caller guarantees for `layout`.
        unsafe { System.alloc(layout) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        if is_large(layout) {
            return map::alloc(layout.size(), true);
        }
        // SAFETY: as the caller guarantees for `layout`.
        unsafe { System.alloc_zeroed(layout) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` came from this allocator with this `layout`, hence from the same
        // kind of block.
        unsafe {
            if is_large(layout) {
                map::dealloc(ptr, layout.size());
            } else {
                System.dealloc(ptr, layout);
            }
        }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        // SAFETY: the caller guarantees `new_size` with `layout.align()` is a valid layout.
        let new = unsafe { Layout::from_size_align_unchecked(new_size, layout.align()) };
        // SAFETY: `ptr` is live with `layout`; in the mixed case the copy stays inside both
        // blocks and the old one is freed once.
        unsafe {
            match (is_large(layout), is_large(new)) {
                (false, false) => System.realloc(ptr, layout, new_size),
                (true, true) => map::realloc(ptr, layout.size(), new_size),
                _ => {
                    let p = self.alloc(new);
                    if !p.is_null() {
                        std::ptr::copy_nonoverlapping(ptr, p, layout.size().min(new_size));
                        self.dealloc(ptr, layout);
                    }
                    p
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Fills `n` bytes at `p` with a pattern that tells positions apart.
    unsafe fn fill(p: *mut u8, n: usize) {
        for i in (0..n).step_by(4093) {
            unsafe { *p.add(i) = (i % 251) as u8 };
        }
    }

    unsafe fn holds(p: *const u8, n: usize) -> bool {
        (0..n)
            .step_by(4093)
            .all(|i| unsafe { *p.add(i) } == (i % 251) as u8)
    }

    #[test]
    fn blocks_keep_their_bytes_through_growth_shrinking_and_kind_changes() {
        let a = LargeBlocks;
        unsafe {
            let l = Layout::from_size_align(1 << 20, 8).unwrap();
            let mut p = a.alloc(l);
            assert!(!p.is_null());
            fill(p, 1 << 20);
            // Small to large, large growing (in place or moved), large shrinking, large to
            // small: the bytes kept every time.
            let mut size = 1 << 20;
            for next in [5 << 20, 9 << 20, 64 << 20, 6 << 20, 3 << 20] {
                let q = a.realloc(p, Layout::from_size_align(size, 8).unwrap(), next);
                assert!(!q.is_null());
                assert!(holds(q, size.min(next)), "{size} -> {next}");
                if next >= LARGE {
                    assert_eq!(q as usize % HUGE, 0);
                }
                fill(q, next);
                p = q;
                size = next;
            }
            a.dealloc(p, Layout::from_size_align(size, 8).unwrap());
        }
    }

    #[test]
    fn a_freed_large_block_comes_back_zeroed_when_asked() {
        // A size no other test uses, so that the block freed is likely the one taken again.
        let a = LargeBlocks;
        let l = Layout::from_size_align(LARGE + 7 * HUGE + 123, 8).unwrap();
        unsafe {
            let p = a.alloc(l);
            assert!(!p.is_null());
            std::ptr::write_bytes(p, 0xab, l.size());
            a.dealloc(p, l);
            let q = a.alloc_zeroed(l);
            assert!(!q.is_null());
            assert!((0..l.size()).step_by(4096).all(|i| *q.add(i) == 0));
            assert_eq!(*q.add(l.size() - 1), 0);
            a.dealloc(q, l);
        }
    }

    #[test]
    fn large_blocks_come_zeroed_and_aligned() {
        let a = LargeBlocks;
        unsafe {
            for size in [LARGE, LARGE + 1, 3 * HUGE + 17] {
                let l = Layout::from_size_align(size, 64).unwrap();
                let p = a.alloc_zeroed(l);
                assert!(!p.is_null());
                assert_eq!(p as usize % HUGE, 0);
                assert!((0..size).step_by(4096).all(|i| *p.add(i) == 0));
                assert_eq!(*p.add(size - 1), 0);
                a.dealloc(p, l);
            }
        }
    }
}
