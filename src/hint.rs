//! Hints to the processor that change no result: asking for a cache line
//! before it is needed.

/// Asks the CPU to bring the cache line of `x` in, without waiting for it
/// (nothing at all where there is no such instruction). Code that knows the
/// address of a later read (a hash table's slot, the next node of a lookup)
/// issues it early this way, so that the cache miss overlaps other work;
/// several issued together overlap each other.
#[inline(always)]
pub fn prefetch<T>(x: &T) {
    #[cfg(target_arch = "x86_64")]
    prefetch_x86(x);
    #[cfg(not(target_arch = "x86_64"))]
    let _ = x;
}

#[cfg(target_arch = "x86_64")]
#[allow(unsafe_code)]
#[inline(always)]
fn prefetch_x86<T>(x: &T) {
    // SAFETY: `_mm_prefetch` is unsafe only as an intrinsic with a target
    // feature (SSE, part of every x86-64 CPU). A prefetch is a hint: it
    // never faults and changes no memory, and the address is that of a
    // live reference.
    unsafe {
        std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(
            x as *const T as *const i8,
        )
    }
}
