//! Scratch arrays in files: the per-n-gram arrays a reduction builds
//! (suffix links, quantized codes, sums per context) are as long as the
//! model's orders, hundreds of millions of entries on a large model. A
//! [`Spill`] keeps one in an unnamed temporary file, memory-mapped: its
//! pages are file pages that the kernel writes out and drops under memory
//! pressure, so the reduction's own memory stays small whatever the
//! model's size, while the code indexes it like a slice.

use std::fs::File;
use std::marker::PhantomData;
use std::path::Path;

use bytemuck::Pod;
use memmap2::MmapMut;

use crate::error::{IoContext, Result};

/// A zero-filled array of `T` in an unnamed temporary file, mapped.
pub(crate) struct Spill<T: Pod> {
    map: Option<MmapMut>,
    _t: PhantomData<T>,
}

impl<T: Pod> Spill<T> {
    /// `len` zeros of `T`, in a file in `dir` that has no name (removed
    /// when the array is dropped, or when the process ends).
    pub fn zeroed(dir: &Path, len: usize) -> Result<Spill<T>> {
        let bytes = len * std::mem::size_of::<T>();
        if bytes == 0 {
            return Ok(Spill {
                map: None,
                _t: PhantomData,
            });
        }
        let file = tempfile::tempfile_in(dir).at(dir, "create a scratch file in")?;
        file.set_len(bytes as u64)
            .at(dir, "size a scratch file in")?;
        let map = map_scratch(&file, dir)?;
        Ok(Spill {
            map: Some(map),
            _t: PhantomData,
        })
    }

    /// `len` copies of `x`.
    pub fn filled(dir: &Path, len: usize, x: T) -> Result<Spill<T>> {
        let mut s = Spill::zeroed(dir, len)?;
        s.fill(x);
        Ok(s)
    }
}

/// Maps a scratch file read-write.
///
/// # Safety
///
/// Safe to call: the file was created by [`tempfile::tempfile_in`], which
/// unlinks it at once, so no other program can open it by name, and this
/// process maps it once and never writes it through the file handle.
#[allow(unsafe_code)]
fn map_scratch(file: &File, dir: &Path) -> Result<MmapMut> {
    // SAFETY: `MmapMut::map_mut` is unsafe because another handle could
    // change or truncate the file behind the map. The file has no name and
    // its one handle is only used here (see `# Safety` above).
    unsafe { MmapMut::map_mut(file) }.at(dir, "memory-map a scratch file in")
}

impl<T: Pod> std::ops::Deref for Spill<T> {
    type Target = [T];
    fn deref(&self) -> &[T] {
        match &self.map {
            // The map is page-aligned and exactly len × size_of::<T>() long.
            Some(m) => bytemuck::cast_slice(&m[..]),
            None => &[],
        }
    }
}

impl<T: Pod> std::ops::DerefMut for Spill<T> {
    fn deref_mut(&mut self) -> &mut [T] {
        match &mut self.map {
            Some(m) => bytemuck::cast_slice_mut(&mut m[..]),
            None => &mut [],
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A spilled array reads back what was written, starts zeroed, and an
    /// empty one is an empty slice.
    #[test]
    fn spill_reads_back() {
        let dir = tempfile::tempdir().unwrap();
        let mut s: Spill<u32> = Spill::zeroed(dir.path(), 100_000).unwrap();
        assert!(s.iter().all(|&x| x == 0));
        for (i, x) in s.iter_mut().enumerate() {
            *x = (i as u32).wrapping_mul(2_654_435_761);
        }
        assert!(s
            .iter()
            .enumerate()
            .all(|(i, &x)| x == (i as u32).wrapping_mul(2_654_435_761)));
        let f: Spill<f64> = Spill::filled(dir.path(), 3, 1.5).unwrap();
        assert_eq!(&f[..], &[1.5, 1.5, 1.5]);
        let e: Spill<f32> = Spill::zeroed(dir.path(), 0).unwrap();
        assert!(e.is_empty());
        // Nothing is left in the folder: the files have no names.
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
    }
}
