//! Writing a model file: header, sections one after another (each hashed
//! as it is written), then the directory and the trailer. The file is
//! written under a temporary name beside the target, synced, and renamed
//! into place, so a model file is either complete or absent.

use std::fs::File;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

use xxhash_rust::xxh3::Xxh3;

use crate::error::{IoContext, Result};

use super::format::{Entry, SectionKind, ALIGN, END_MAGIC, MAGIC, MODEL_VERSION};
use super::packed::BitPacker;

/// Writes one model file.
pub struct ModelWriter {
    path: PathBuf,
    tmp: PathBuf,
    /// `None` once finished.
    out: Option<ChunkWriter>,
    pos: u64,
    entries: Vec<Entry>,
}

impl ModelWriter {
    /// Starts `path` (written as `path.tmp` until [`ModelWriter::finish`]).
    pub fn create(path: &Path) -> Result<ModelWriter> {
        let mut tmp = path.as_os_str().to_owned();
        tmp.push(".tmp");
        let tmp = PathBuf::from(tmp);
        let f = File::create(&tmp).at(&tmp, "create")?;
        let mut w = ModelWriter {
            path: path.to_path_buf(),
            tmp,
            out: Some(ChunkWriter::new(f)),
            pos: 0,
            entries: Vec::new(),
        };
        let mut h = Vec::with_capacity(16);
        h.extend_from_slice(&MAGIC);
        h.extend_from_slice(&MODEL_VERSION.to_le_bytes());
        h.extend_from_slice(&0u32.to_le_bytes());
        w.raw(&h)?;
        Ok(w)
    }

    fn raw(&mut self, b: &[u8]) -> Result<()> {
        self.out
            .as_mut()
            .expect("not finished")
            .write_all(b)
            .at(&self.tmp, "write")?;
        self.pos += b.len() as u64;
        Ok(())
    }

    fn pad(&mut self) -> Result<()> {
        let r = (ALIGN - self.pos % ALIGN) % ALIGN;
        self.raw(&[0u8; 8][..r as usize])
    }

    /// Adds a section from bytes in memory.
    pub fn section(&mut self, kind: SectionKind, order: usize, bytes: &[u8]) -> Result<()> {
        self.section_from(kind, order, &mut &bytes[..], &self.tmp.clone())
    }

    /// Adds a section copied from a reader (`what` names it in errors).
    pub fn section_from(
        &mut self,
        kind: SectionKind,
        order: usize,
        r: &mut impl Read,
        what: &Path,
    ) -> Result<()> {
        let mut s = self.begin(kind, order)?;
        let mut buf = vec![0u8; 1 << 20];
        loop {
            let n = r.read(&mut buf).at(what, "read")?;
            if n == 0 {
                break;
            }
            self.put(&mut s, &buf[..n])?;
        }
        self.end(s);
        Ok(())
    }

    /// Adds a section of f32 values, little-endian.
    pub fn floats(
        &mut self,
        kind: SectionKind,
        order: usize,
        values: impl Iterator<Item = f32>,
    ) -> Result<()> {
        let mut s = self.begin(kind, order)?;
        let mut buf: Vec<u8> = Vec::with_capacity(1 << 16);
        for v in values {
            buf.extend_from_slice(&v.to_le_bytes());
            if buf.len() >= 1 << 16 {
                self.put(&mut s, &buf)?;
                buf.clear();
            }
        }
        self.put(&mut s, &buf)?;
        self.end(s);
        Ok(())
    }

    /// Adds a section of `width`-bit values packed into u64 words (see
    /// [`super::packed`]).
    pub fn packed(
        &mut self,
        kind: SectionKind,
        order: usize,
        width: u32,
        values: impl Iterator<Item = u64>,
    ) -> Result<()> {
        let mut s = self.begin(kind, order)?;
        let mut p = BitPacker::new(width);
        let mut buf: Vec<u8> = Vec::with_capacity(1 << 16);
        let mut out = |w: u64| -> Result<()> {
            buf.extend_from_slice(&w.to_le_bytes());
            if buf.len() >= 1 << 16 {
                self.put(&mut s, &buf)?;
                buf.clear();
            }
            Ok(())
        };
        for x in values {
            p.push(x, &mut out)?;
        }
        p.finish(&mut out)?;
        self.put(&mut s, &buf)?;
        self.end(s);
        Ok(())
    }

    fn begin(&mut self, kind: SectionKind, order: usize) -> Result<Open> {
        self.pad()?;
        Ok(Open {
            kind,
            order,
            offset: self.pos,
            hash: Xxh3::new(),
        })
    }

    fn put(&mut self, s: &mut Open, b: &[u8]) -> Result<()> {
        s.hash.update(b);
        self.raw(b)
    }

    fn end(&mut self, s: Open) {
        self.entries.push(Entry {
            kind: s.kind as u32,
            order: s.order as u32,
            offset: s.offset,
            len: self.pos - s.offset,
            hash: s.hash.digest(),
        });
    }

    /// Writes the directory and the trailer, syncs and renames the file
    /// into place. Returns its size.
    pub fn finish(mut self) -> Result<u64> {
        self.pad()?;
        let dir_off = self.pos;
        let mut d = Vec::with_capacity(self.entries.len() * 32);
        for e in &self.entries {
            e.encode(&mut d);
        }
        self.raw(&d)?;
        let mut t = Vec::with_capacity(32);
        t.extend_from_slice(&dir_off.to_le_bytes());
        t.extend_from_slice(&(self.entries.len() as u64).to_le_bytes());
        t.extend_from_slice(&xxhash_rust::xxh3::xxh3_64(&d).to_le_bytes());
        t.extend_from_slice(&END_MAGIC);
        self.raw(&t)?;
        let size = self.pos;
        let f = self
            .out
            .take()
            .expect("not finished")
            .finish()
            .at(&self.tmp, "write")?;
        f.sync_all().at(&self.tmp, "sync")?;
        drop(f);
        std::fs::rename(&self.tmp, &self.path).at(&self.path, "rename into place")?;
        Ok(size)
    }
}

/// A writer dropped before [`ModelWriter::finish`] (an error on the way)
/// removes its temporary file: no half-written `.tmp` is left beside the
/// output.
impl Drop for ModelWriter {
    fn drop(&mut self) {
        if self.out.take().is_some() {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// A section being written.
struct Open {
    kind: SectionKind,
    order: usize,
    offset: u64,
    hash: Xxh3,
}

/// The size of the writes of a [`ChunkWriter`]: one huge page of x86-64.
const CHUNK: usize = 2 << 20;

/// A buffered file writer whose writes are whole chunks of 2 MiB at
/// offsets that are multiples of 2 MiB (only the last one shorter).
///
/// Where the page cache holds files in large folios (ext4 on Linux 6.x),
/// each such write fills one 2 MiB folio, and every map of the file is
/// then made of 2 MiB pages: a search over a mapped array of gigabytes
/// (a model's queries, a freeze's lookups) waits for far fewer page-table
/// walks than over 4 KiB pages. Elsewhere it is an ordinary buffer.
pub(crate) struct ChunkWriter {
    file: File,
    buf: Vec<u8>,
}

impl ChunkWriter {
    pub fn new(file: File) -> ChunkWriter {
        ChunkWriter {
            file,
            buf: Vec::with_capacity(CHUNK),
        }
    }

    /// Appends `b`, writing every chunk it completes.
    #[inline]
    pub fn write_all(&mut self, mut b: &[u8]) -> std::io::Result<()> {
        while !b.is_empty() {
            let n = (CHUNK - self.buf.len()).min(b.len());
            self.buf.extend_from_slice(&b[..n]);
            b = &b[n..];
            if self.buf.len() == CHUNK {
                self.file.write_all(&self.buf)?;
                self.buf.clear();
            }
        }
        Ok(())
    }

    /// Writes what is left and returns the file.
    pub fn finish(mut self) -> std::io::Result<File> {
        self.file.write_all(&self.buf)?;
        Ok(self.file)
    }
}

/// Little-endian arrays written to a temporary file one value at a time.
pub(crate) struct ArrayFile {
    pub path: PathBuf,
    out: ChunkWriter,
    /// Values written.
    pub len: u64,
}

impl ArrayFile {
    /// Creates (truncates) `path`.
    pub fn create(path: PathBuf) -> Result<ArrayFile> {
        let f = File::create(&path).at(&path, "create")?;
        Ok(ArrayFile {
            path,
            out: ChunkWriter::new(f),
            len: 0,
        })
    }

    /// Appends raw bytes of one value.
    #[inline]
    pub fn put(&mut self, b: &[u8]) -> Result<()> {
        self.len += 1;
        self.out.write_all(b).at(&self.path, "write")
    }

    /// Appends a u32.
    #[inline]
    pub fn u32(&mut self, x: u32) -> Result<()> {
        self.put(&x.to_le_bytes())
    }

    /// Appends an f32.
    #[inline]
    pub fn f32(&mut self, x: f32) -> Result<()> {
        self.put(&x.to_le_bytes())
    }

    /// Appends an f64.
    #[inline]
    pub fn f64(&mut self, x: f64) -> Result<()> {
        self.put(&x.to_le_bytes())
    }

    /// Flushes and closes; returns the path.
    pub fn close(self) -> Result<PathBuf> {
        self.out.finish().at(&self.path, "write")?;
        Ok(self.path)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A writer given up before `finish` leaves neither the model nor its
    /// temporary file; a finished one leaves the model only.
    #[test]
    fn unfinished_writer_leaves_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("m.qm");
        let tmp = dir.path().join("m.qm.tmp");
        {
            let mut w = ModelWriter::create(&out).unwrap();
            w.section(SectionKind::Ids, 0, &[1, 2, 3]).unwrap();
            assert!(tmp.exists());
        }
        assert!(!tmp.exists() && !out.exists());
        let mut w = ModelWriter::create(&out).unwrap();
        w.section(SectionKind::Ids, 0, &[1, 2, 3]).unwrap();
        w.finish().unwrap();
        assert!(out.exists() && !tmp.exists());
    }
}
