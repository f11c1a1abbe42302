//! The bytes of a model file in memory: the memory map (an `unsafe` call,
//! argued below) or a private copy, and little-endian reads from them.

use std::fs::File;
use std::path::Path;

use memmap2::Mmap;

use crate::error::{Error, IoContext, Result};

/// Maps `file` (opened read-only) into memory.
///
/// # Safety
///
/// This function is safe to call, but it rests on one assumption that the
/// compiler cannot check: nobody changes or truncates the file while the
/// map lives. quern never writes a model file (or a freeze's temporary
/// array file) in place once it is mapped: files are written whole under a
/// temporary name and renamed into place, so a later freeze to the same
/// name replaces the directory entry and leaves the mapped inode intact.
/// Another program that truncates a mapped file makes reads past the new
/// end fault (SIGBUS); one that rewrites it in place changes what the map
/// reads. Both are outside what quern supports, as for any read-only data
/// file.
#[allow(unsafe_code)]
pub(crate) fn map_read_only(file: &File, path: &Path) -> Result<Mmap> {
    // SAFETY: `Mmap::map` is unsafe because the mapped file could be
    // modified or truncated by another process while the map is alive,
    // which Rust's aliasing rules cannot see. The file is opened read-only,
    // the map is read-only, and quern only ever replaces model and
    // temporary array files by renaming a new file over them (see the
    // `# Safety` section above), so the mapped bytes do not change under
    // us in any supported use.
    let m = unsafe { Mmap::map(file) }.at(path, "memory-map")?;
    // Advice only: pages read through this map come into the page cache
    // in 2 MiB folios where the file system allows, and are then mapped
    // as 2 MiB pages (see `ChunkWriter` for pages already cached).
    #[cfg(target_os = "linux")]
    let _ = m.advise(memmap2::Advice::HugePage);
    Ok(m)
}

/// Reads `file` whole into anonymous memory that the kernel is asked to
/// back with huge pages (`MADV_HUGEPAGE`, where transparent huge pages are
/// enabled for it), then makes it read-only. No `unsafe`: the memory
/// belongs to this process alone, so nothing can change it behind us.
///
/// A model much larger than the CPU caches spends a large part of each
/// lookup walking page tables for 4 KiB pages of a mapped file; with 2 MiB
/// pages the page table entries of the whole model fit in the caches.
pub(crate) fn load_read_only(file: &mut File, path: &Path, size: u64) -> Result<Mmap> {
    use std::io::Read;
    let len = usize::try_from(size)
        .map_err(|_| Error::corrupt(path, format!("{size} bytes do not fit in memory")))?;
    let mut m = memmap2::MmapMut::map_anon(len.max(1)).at(path, "allocate memory for")?;
    #[cfg(target_os = "linux")]
    {
        // Advice only: a kernel without transparent huge pages keeps 4 KiB
        // pages, which is still correct.
        let _ = m.advise(memmap2::Advice::HugePage);
    }
    file.read_exact(&mut m[..len]).at(path, "read")?;
    let m = m.make_read_only().at(path, "protect")?;
    Ok(m)
}

/// How a model's bytes are reached.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Residence {
    /// Memory-mapped: opened without reading the large arrays (about
    /// 0.1 s for a 4 GB model, see [`super::Model::open`]); pages are read
    /// on first use and shared with other processes that map it.
    #[default]
    Mapped,
    /// Read whole into this process's memory, on huge pages where the
    /// system allows: opening reads the whole file (seconds a gigabyte),
    /// and lookups in a model far larger than the CPU cache are faster.
    Loaded,
}

/// Reads the u32 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes(b[4 * i..4 * i + 4].try_into().expect("4 bytes"))
}

/// Reads the f32 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn f32_at(b: &[u8], i: usize) -> f32 {
    f32::from_le_bytes(b[4 * i..4 * i + 4].try_into().expect("4 bytes"))
}

/// Reads the f64 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn f64_at(b: &[u8], i: usize) -> f64 {
    f64::from_le_bytes(b[8 * i..8 * i + 8].try_into().expect("8 bytes"))
}

/// Reads the u64 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn u64_at(b: &[u8], i: usize) -> u64 {
    u64::from_le_bytes(b[8 * i..8 * i + 8].try_into().expect("8 bytes"))
}

/// Asks the CPU to bring the cache line of `b[at]` in, without waiting
/// for it (nothing at all where there is no such instruction). A lookup
/// that knows the addresses of several independent reads ahead of time
/// issues them together this way, so their cache misses overlap instead of
/// following one another. `at` is clamped to `b`.
#[inline(always)]
pub(crate) fn prefetch(b: &[u8], at: usize) {
    if let Some(x) = b.get(at.min(b.len().saturating_sub(1))) {
        crate::hint::prefetch(x);
    }
}
