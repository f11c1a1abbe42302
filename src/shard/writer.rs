//! Writing run files: sections in partition order, keys sorted within each.

use std::fs::File;
use std::io::{BufWriter, Seek, Write};
use std::path::{Path, PathBuf};

use xxhash_rust::xxh3::Xxh3;

use super::{header_bytes, Entry, END, ENTRY_LEN, ZSTD_LEVEL, ZSTD_WINDOW_LOG};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::key::Key;

/// What a finished run file holds.
#[derive(Clone, Copy, Debug, Default)]
pub struct RunSummary {
    /// Records over all sections.
    pub records: u64,
    /// Size of the file in bytes.
    pub bytes: u64,
}

struct Section {
    part: u32,
    enc: zstd::Encoder<'static, BufWriter<File>>,
    start: u64,
    raw: Vec<u8>,
    ulen: u64,
    records: u64,
    hash: Xxh3,
    prev: Option<Key>,
}

/// Streams sorted records into a new run file.
///
/// The file is written under a temporary name and renamed into place by
/// [`RunWriter::finish`] after an fsync, so a run file that exists under its
/// final name is complete.
pub struct RunWriter {
    path: PathBuf,
    tmp: PathBuf,
    out: Option<BufWriter<File>>,
    section: Option<Section>,
    entries: Vec<Entry>,
    parts: u32,
    width: usize,
    header: [u8; 16],
    records: u64,
}

impl RunWriter {
    /// Starts a run file at `path` with `parts` partitions and records of
    /// `value_width` values.
    pub fn create(path: &Path, parts: u32, value_width: usize) -> Result<Self> {
        assert!(value_width <= super::MAX_VALUES && parts > 0);
        let tmp = fsutil::tmp_name(path);
        crate::fault::full(crate::fault::Full::Run).at(&tmp, "create")?;
        let file = File::create(&tmp).at(&tmp, "create")?;
        let mut out = BufWriter::with_capacity(256 << 10, file);
        let header = header_bytes(value_width as u8, parts);
        out.write_all(&header).at(&tmp, "write")?;
        Ok(RunWriter {
            path: path.to_path_buf(),
            tmp,
            out: Some(out),
            section: None,
            entries: vec![Entry::default(); parts as usize],
            parts,
            width: value_width,
            header,
            records: 0,
        })
    }

    /// Appends a record to partition `part`. Partitions must come in
    /// non-decreasing order and keys in increasing order within one.
    pub fn push(&mut self, part: u32, key: &Key, values: &[u64]) -> Result<()> {
        debug_assert!(part < self.parts);
        if self.section.as_ref().is_none_or(|s| s.part != part) {
            self.close_section()?;
            let mut out = self.out.take().expect("writer open");
            let start = out.stream_position().at(&self.tmp, "seek")?;
            let mut enc = zstd::Encoder::new(out, ZSTD_LEVEL).at(&self.tmp, "compress")?;
            enc.window_log(ZSTD_WINDOW_LOG).at(&self.tmp, "compress")?;
            self.section = Some(Section {
                part,
                enc,
                start,
                raw: Vec::with_capacity(64 << 10),
                ulen: 0,
                records: 0,
                hash: Xxh3::new(),
                prev: None,
            });
        }
        let s = self.section.as_mut().expect("section open");
        let ids = key.ids();
        let shared = match &s.prev {
            Some(p) => {
                debug_assert!(p < key, "keys out of order");
                p.ids().iter().zip(ids).take_while(|(a, b)| a == b).count()
            }
            None => 0,
        };
        s.raw.push(ids.len() as u8);
        s.raw.push(shared as u8);
        for id in &ids[shared..] {
            s.raw.extend_from_slice(&id.to_le_bytes());
        }
        for &v in &values[..self.width] {
            crate::varint::put(&mut s.raw, v);
        }
        s.records += 1;
        s.prev = Some(*key);
        self.records += 1;
        if s.raw.len() >= 60 << 10 {
            flush_raw(s, &self.tmp)?;
        }
        Ok(())
    }

    fn close_section(&mut self) -> Result<()> {
        if let Some(mut s) = self.section.take() {
            flush_raw(&mut s, &self.tmp)?;
            let mut out = s.enc.finish().at(&self.tmp, "compress")?;
            let end = out.stream_position().at(&self.tmp, "seek")?;
            self.entries[s.part as usize] = Entry {
                offset: s.start,
                clen: end - s.start,
                ulen: s.ulen,
                records: s.records,
                hash: s.hash.digest(),
            };
            self.out = Some(out);
        }
        Ok(())
    }

    /// Writes the footer, syncs and renames the file into place.
    pub fn finish(mut self) -> Result<RunSummary> {
        self.close_section()?;
        let mut out = self.out.take().expect("writer open");
        let mut tail = Vec::with_capacity(self.entries.len() * ENTRY_LEN as usize + 16);
        for e in &self.entries {
            for v in [e.offset, e.clen, e.ulen, e.records, e.hash] {
                tail.extend_from_slice(&v.to_le_bytes());
            }
        }
        let mut h = Xxh3::new();
        h.update(&self.header);
        h.update(&tail);
        tail.extend_from_slice(&h.digest().to_le_bytes());
        tail.extend_from_slice(&self.parts.to_le_bytes());
        tail.extend_from_slice(END);
        out.write_all(&tail).at(&self.tmp, "write")?;
        let file = out
            .into_inner()
            .map_err(|e| Error::io(&self.tmp, "write", e.into_error()))?;
        let bytes = file.metadata().at(&self.tmp, "stat")?.len();
        file.sync_all().at(&self.tmp, "fsync")?;
        drop(file);
        fsutil::rename_durable(&self.tmp, &self.path)?;
        Ok(RunSummary {
            records: self.records,
            bytes,
        })
    }
}

fn flush_raw(s: &mut Section, path: &Path) -> Result<()> {
    s.hash.update(&s.raw);
    s.ulen += s.raw.len() as u64;
    s.enc.write_all(&s.raw).at(path, "write")?;
    s.raw.clear();
    Ok(())
}

impl Drop for RunWriter {
    fn drop(&mut self) {
        if self.out.is_some() || self.section.is_some() {
            // Abandoned before finish: leave no temporary file behind.
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}
