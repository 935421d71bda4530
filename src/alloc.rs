//! The binary's allocator: the system's, with large blocks asked to sit on huge pages.
//!
//! The prover's visited sets and node tables run to hundreds of megabytes read at random, so
//! with 4 KiB pages nearly every probe also misses the address translation cache. On Linux,
//! where transparent huge pages are commonly enabled on request only (`madvise`), blocks of
//! 4 MiB and more are aligned to 2 MiB and marked with `MADV_HUGEPAGE`. Everything else, and
//! every other system, goes to the system allocator unchanged. A refused hint changes nothing
//! but speed.

use std::alloc::{GlobalAlloc, Layout, System};

/// The system allocator with the huge-page hint on large blocks.
pub struct HugeHint;

/// Blocks from this size on get the hint.
const LARGE: usize = 4 << 20;
/// The huge page size the hint aligns to (x86-64 and most arm64 kernels).
const HUGE: usize = 2 << 20;

/// The layout a large block is really allocated with.
fn large(layout: Layout) -> Option<Layout> {
    if cfg!(target_os = "linux") && layout.size() >= LARGE {
        Layout::from_size_align(layout.size(), layout.align().max(HUGE)).ok()
    } else {
        None
    }
}

#[cfg(target_os = "linux")]
fn hint(ptr: *mut u8, size: usize) {
    if !ptr.is_null() {
        // SAFETY: `ptr` starts a live block of `size` bytes just allocated, aligned to a page;
        // madvise only attaches advice to the mapping and reports failure by its return value,
        // which is ignored (the hint is optional).
        unsafe {
            libc::madvise(ptr.cast(), size, libc::MADV_HUGEPAGE);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn hint(_: *mut u8, _: usize) {}

/// Allocates with `from` (the system's `alloc` or `alloc_zeroed`), a large block with the
/// layout [`large`] gives and the hint.
///
/// # Safety
/// `layout` has a non-zero size, as `GlobalAlloc::alloc` requires.
unsafe fn hinted(layout: Layout, from: unsafe fn(&System, Layout) -> *mut u8) -> *mut u8 {
    match large(layout) {
        // SAFETY: a valid non-zero layout: `layout`'s size with a larger power-of-two align.
        Some(l) => unsafe {
            let p = from(&System, l);
            hint(p, l.size());
            p
        },
        // SAFETY: as the caller guarantees.
        None => unsafe { from(&System, layout) },
    }
}

// SAFETY: every block is allocated and freed by `System` with the same layout: `large` maps a
// layout to the same aligned layout in `alloc`, `alloc_zeroed` and `dealloc`, and `realloc`
// of a large block (before or after) moves it through those three.
unsafe impl GlobalAlloc for HugeHint {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        // SAFETY: as the caller guarantees for `layout`.
        unsafe { hinted(layout, System::alloc) }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        // SAFETY: as the caller guarantees for `layout`.
        unsafe { hinted(layout, System::alloc_zeroed) }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        // SAFETY: `ptr` came from `alloc` or `alloc_zeroed` with this `layout`, hence from
        // `System` with the layout `large` gives again here.
        unsafe { System.dealloc(ptr, large(layout).unwrap_or(layout)) }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        // SAFETY: the caller guarantees `new_size` with `layout.align()` is a valid layout.
        let new = unsafe { Layout::from_size_align_unchecked(new_size, layout.align()) };
        if large(layout).is_none() && large(new).is_none() {
            // SAFETY: as the caller guarantees; both layouts are the system's own.
            return unsafe { System.realloc(ptr, layout, new_size) };
        }
        // SAFETY: `new` is valid; the old block is live for `layout.size()` bytes and the new
        // one for `new_size`, so the copy stays inside both; the old one is freed once.
        unsafe {
            let p = self.alloc(new);
            if !p.is_null() {
                std::ptr::copy_nonoverlapping(ptr, p, layout.size().min(new_size));
                self.dealloc(ptr, layout);
            }
            p
        }
    }
}
