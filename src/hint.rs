//! Hints to the processor's caches. They never fault and change nothing observable: a hint
//! on a dangling or stale address is harmless.

/// Asks for the cache line holding `p` to be fetched ahead of its use.
#[inline(always)]
pub fn prefetch<T>(p: *const T) {
    #[cfg(target_arch = "x86_64")]
    // SAFETY: a prefetch is a hint that never faults, whatever the address.
    unsafe {
        std::arch::x86_64::_mm_prefetch(p.cast::<i8>(), std::arch::x86_64::_MM_HINT_T0);
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = p;
}

/// Asks for every cache line of `s` to be fetched ahead of its use.
#[inline(always)]
pub fn prefetch_slice<T>(s: &[T]) {
    let bytes = std::mem::size_of_val(s);
    let p = s.as_ptr().cast::<u8>();
    for off in (0..bytes).step_by(64) {
        prefetch(p.wrapping_add(off));
    }
}
