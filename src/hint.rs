//! Hints that change no result: asking the processor for a cache line
//! before it is needed, and asking the kernel for large pages under a big
//! table.

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

/// A transparent huge page on x86-64 (2 MiB, aligned to its size).
const HUGE_PAGE: usize = 2 << 20;

/// Asks the kernel to back the whole capacity of `v` with transparent huge
/// pages, where they are enabled only on request (`madvise`, the default
/// of many Linux distributions); call it before the memory is first
/// written. A hash table probed at random addresses pays a TLB miss on
/// nearly every probe with 4 KiB pages (a few MiB of them fit the TLB),
/// and one page fault per 4 KiB when it is first written. Nothing happens
/// for a capacity under two huge pages (only that is sure to hold a whole
/// aligned one), off Linux, or if the kernel refuses.
pub fn huge_pages<T>(v: &Vec<T>) {
    let bytes = v.capacity() * std::mem::size_of::<T>();
    if bytes < 2 * HUGE_PAGE {
        return;
    }
    #[cfg(target_os = "linux")]
    advise_huge(v.as_ptr() as usize, bytes);
}

#[cfg(target_os = "linux")]
#[allow(unsafe_code)]
fn advise_huge(start: usize, bytes: usize) {
    const PAGE: usize = 4096;
    let from = start.next_multiple_of(PAGE);
    let to = (start + bytes) / PAGE * PAGE;
    if to <= from {
        return;
    }
    // SAFETY: `madvise` with MADV_HUGEPAGE changes no memory contents and
    // no access rights; it only marks how the kernel may back the pages.
    // The range lies inside the allocation of `v`, which the caller owns
    // (whole pages only, so no neighbouring allocation is touched). An
    // error only means no huge pages, so it is ignored.
    unsafe {
        libc::madvise(from as *mut libc::c_void, to - from, libc::MADV_HUGEPAGE);
    }
}
