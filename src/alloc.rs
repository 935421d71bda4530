//! The binary's allocator: the system's, with large blocks mapped on huge pages.
//!
//! The prover's visited sets and node tables run to hundreds of megabytes read at random, so
//! with 4 KiB pages nearly every probe also misses the address translation cache. On Linux,
//! where transparent huge pages are commonly enabled on request only (`madvise`), blocks of
//! 4 MiB and more are mapped directly, 2 MiB-aligned, and marked with `MADV_HUGEPAGE`; such a
//! block grows by `mremap`, which moves its pages instead of copying them into fresh ones that
//! the kernel must clear first (a vector doubling to hundreds of megabytes did both, about a
//! tenth of the prover's time). Everything else, and every other system, goes to the system
//! allocator unchanged. A refused hint changes nothing but speed.

use std::alloc::{GlobalAlloc, Layout, System};

/// The system allocator, with large blocks mapped on huge pages.
pub struct HugeHint;

/// Blocks from this size on are mapped directly.
const LARGE: usize = 4 << 20;
/// The huge page size large blocks are aligned and sized to (x86-64 and most arm64 kernels).
const HUGE: usize = 2 << 20;

/// Whether a block with this layout is mapped directly.
fn is_large(layout: Layout) -> bool {
    cfg!(target_os = "linux") && layout.size() >= LARGE && layout.align() <= HUGE
}

#[cfg(target_os = "linux")]
mod map {
    //! Large blocks as their own anonymous mappings, `HUGE`-aligned, whole huge pages long.

    use super::HUGE;
    use std::ptr::null_mut;

    /// A block's mapped length: its size rounded up to whole huge pages.
    fn span(size: usize) -> Option<usize> {
        size.checked_next_multiple_of(HUGE)
    }

    /// Maps `len` bytes (whole huge pages) at a `HUGE`-aligned address, with protection
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

    /// Attaches the huge-page advice to `len` bytes at `p` (ignored when refused).
    ///
    /// # Safety
    /// `p..p + len` is one of this module's mappings.
    unsafe fn advise(p: *mut u8, len: usize) {
        // SAFETY: madvise only attaches advice to the mapping; failure changes only speed.
        unsafe {
            libc::madvise(p.cast(), len, libc::MADV_HUGEPAGE);
        }
    }

    /// A new block of `size` bytes, zeroed (fresh anonymous pages are); null when refused.
    pub fn alloc(size: usize) -> *mut u8 {
        let Some(len) = span(size) else {
            return null_mut();
        };
        // SAFETY: `len` is a non-zero multiple of `HUGE` (`size` is at least `LARGE`); the
        // mapping it returns is this module's.
        unsafe {
            let p = reserve(len, libc::PROT_READ | libc::PROT_WRITE);
            if !p.is_null() {
                advise(p, len);
            }
            p
        }
    }

    /// Frees a block from [`alloc`] or [`realloc`] of `size` bytes.
    ///
    /// # Safety
    /// `p` is such a block, live, and `size` the size it was last given.
    pub unsafe fn dealloc(p: *mut u8, size: usize) {
        if let Some(len) = span(size) {
            // SAFETY: as the caller guarantees, `p..p + len` is the block's whole mapping.
            unsafe {
                libc::munmap(p.cast(), len);
            }
        }
    }

    /// The block `p` of `old` bytes resized to `new` (both large): in place where the
    /// mapping can shrink or grow there, else its pages moved to a new aligned place. Null
    /// (with the block untouched) when refused.
    ///
    /// # Safety
    /// `p` is a live block of this module's of `old` bytes.
    pub unsafe fn realloc(p: *mut u8, old: usize, new: usize) -> *mut u8 {
        let (Some(ol), Some(nl)) = (span(old), span(new)) else {
            return null_mut();
        };
        // SAFETY: every range below is within the block's own mapping (`p..p + ol`), within
        // a reservation made here, or handed to mremap, which checks it.
        unsafe {
            if nl <= ol {
                if nl < ol {
                    libc::munmap(p.add(nl).cast(), ol - nl);
                }
                return p;
            }
            if libc::mremap(p.cast(), ol, nl, 0) != libc::MAP_FAILED {
                advise(p, nl);
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
            advise(dst, nl);
            dst
        }
    }
}

#[cfg(not(target_os = "linux"))]
mod map {
    //! Never used: no block is large off Linux.
    pub fn alloc(_: usize) -> *mut u8 {
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
// alignment, and fresh mappings are zeroed.
unsafe impl GlobalAlloc for HugeHint {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if is_large(layout) {
            return map::alloc(layout.size());
        }
        // SAFETY: as the caller guarantees for `layout`.
        unsafe { System.alloc(layout) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        if is_large(layout) {
            return map::alloc(layout.size());
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
        let a = HugeHint;
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
    fn large_blocks_come_zeroed_and_aligned() {
        let a = HugeHint;
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
