//! Reading run files: validate the footer on open, stream one section.

use std::fs::File;
use std::io::{BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use xxhash_rust::xxh3::Xxh3;

use super::{
    header_bytes, Entry, Values, END, ENTRY_LEN, HEADER_LEN, MAGIC, MAX_VALUES, RUN_VERSION,
    TRAILER_LEN, ZSTD_WINDOW_LOG,
};
use crate::error::{Error, IoContext, Result};
use crate::key::{Key, MAX_ORDER};

/// An opened run file whose footer passed its checks.
#[derive(Clone, Debug)]
pub struct RunFile {
    path: PathBuf,
    parts: u32,
    width: usize,
    entries: Vec<Entry>,
}

impl RunFile {
    /// Opens `path`, checking magic, version, trailer and entry checksum.
    pub fn open(path: &Path) -> Result<RunFile> {
        let mut f = File::open(path).at(path, "open")?;
        let size = f.metadata().at(path, "stat")?.len();
        if size < HEADER_LEN + TRAILER_LEN {
            return Err(Error::corrupt(
                path,
                format!("{size} bytes is too short for a run file"),
            ));
        }
        let mut header = [0u8; 16];
        f.read_exact(&mut header).at(path, "read")?;
        if &header[..4] != MAGIC {
            return Err(Error::corrupt(path, "not a run file (bad magic)"));
        }
        let version = u32::from_le_bytes(header[4..8].try_into().expect("4 bytes"));
        if version != RUN_VERSION {
            return Err(Error::Version {
                path: path.into(),
                found: version,
                expected: RUN_VERSION,
            });
        }
        let width = header[8] as usize;
        let parts = u32::from_le_bytes(header[12..16].try_into().expect("4 bytes"));
        if width > MAX_VALUES || parts == 0 || header != header_bytes(width as u8, parts) {
            return Err(Error::corrupt(path, "bad header"));
        }
        let table = parts as u64 * ENTRY_LEN;
        if HEADER_LEN + table + TRAILER_LEN > size {
            return Err(Error::corrupt(
                path,
                format!("{parts} partitions do not fit in {size} bytes (truncated?)"),
            ));
        }
        f.seek(SeekFrom::Start(size - TRAILER_LEN - table))
            .at(path, "seek")?;
        let mut tail = vec![0u8; (table + TRAILER_LEN) as usize];
        f.read_exact(&mut tail).at(path, "read")?;
        let (ents, trailer) = tail.split_at(table as usize);
        let word =
            |b: &[u8], i: usize| u64::from_le_bytes(b[i * 8..i * 8 + 8].try_into().expect("8"));
        if &trailer[12..16] != END
            || u32::from_le_bytes(trailer[8..12].try_into().expect("4")) != parts
        {
            return Err(Error::corrupt(
                path,
                "bad trailer (truncated or overwritten)",
            ));
        }
        let mut h = Xxh3::new();
        h.update(&header);
        h.update(ents);
        if h.digest() != word(trailer, 0) {
            return Err(Error::corrupt(path, "footer checksum mismatch"));
        }
        let data_end = size - TRAILER_LEN - table;
        let mut entries = Vec::with_capacity(parts as usize);
        for e in ents.chunks_exact(ENTRY_LEN as usize) {
            let entry = Entry {
                offset: word(e, 0),
                clen: word(e, 1),
                ulen: word(e, 2),
                records: word(e, 3),
                hash: word(e, 4),
            };
            if entry.clen > 0
                && (entry.offset < HEADER_LEN || entry.offset.saturating_add(entry.clen) > data_end)
            {
                return Err(Error::corrupt(path, "section outside the file"));
            }
            entries.push(entry);
        }
        Ok(RunFile {
            path: path.to_path_buf(),
            parts,
            width,
            entries,
        })
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Number of partitions.
    pub fn partitions(&self) -> u32 {
        self.parts
    }

    /// Values per record.
    pub fn value_width(&self) -> usize {
        self.width
    }

    /// Records in partition `p`.
    pub fn records(&self, p: u32) -> u64 {
        self.entries[p as usize].records
    }

    /// Records over all partitions.
    pub fn total_records(&self) -> u64 {
        self.entries.iter().map(|e| e.records).sum()
    }

    /// A reader of partition `p`'s records.
    pub fn section(&self, p: u32) -> Result<SectionReader> {
        let e = self.entries[p as usize];
        let inner = if e.clen == 0 {
            None
        } else {
            let mut f = File::open(&self.path).at(&self.path, "open")?;
            f.seek(SeekFrom::Start(e.offset)).at(&self.path, "seek")?;
            let mut dec =
                zstd::Decoder::with_buffer(BufReader::with_capacity(32 << 10, f.take(e.clen)))
                    .at(&self.path, "decompress")?;
            dec.window_log_max(ZSTD_WINDOW_LOG)
                .at(&self.path, "decompress")?;
            Some(dec)
        };
        Ok(SectionReader {
            path: self.path.clone(),
            inner,
            buf: Vec::new(),
            pos: 0,
            end: 0,
            entry: e,
            width: self.width,
            seen: 0,
            read: 0,
            hash: Xxh3::new(),
            prev: Key::default(),
        })
    }
}

type Decoder = zstd::Decoder<'static, BufReader<std::io::Take<File>>>;

/// Bytes of raw records decompressed at a time.
const BLOCK: usize = 32 << 10;
/// Longest raw record: order, shared, [`MAX_ORDER`] ids, [`MAX_VALUES`]
/// varints of at most ten bytes.
const MAX_RECORD: usize = 2 + 8 * MAX_ORDER + 10 * MAX_VALUES;

/// Streams the records of one section, checking them as it goes.
///
/// Raw bytes are decompressed a block at a time into `buf` and hashed once
/// per block; records are parsed from the buffer, which always holds a
/// whole record (or the end of the section) before one is parsed.
pub struct SectionReader {
    path: PathBuf,
    inner: Option<Decoder>,
    buf: Vec<u8>,
    pos: usize,
    end: usize,
    entry: Entry,
    width: usize,
    seen: u64,
    read: u64,
    hash: Xxh3,
    prev: Key,
}

impl SectionReader {
    /// Makes sure at least [`MAX_RECORD`] bytes are buffered, or all that
    /// is left of the section; `false` if nothing at all is left.
    fn fill(&mut self) -> Result<bool> {
        if self.end - self.pos >= MAX_RECORD {
            return Ok(true);
        }
        if self.buf.is_empty() {
            self.buf = vec![0; BLOCK];
        }
        self.buf.copy_within(self.pos..self.end, 0);
        let have = self.end - self.pos;
        let (mut end, r) = (have, self.inner.as_mut().expect("open section"));
        while end < MAX_RECORD {
            let n = match r.read(&mut self.buf[end..]) {
                Ok(n) => n,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    return Err(Error::corrupt(
                        &self.path,
                        format!(
                            "section cut short after {} of {} raw bytes: {e}",
                            self.read, self.entry.ulen
                        ),
                    ))
                }
            };
            if n == 0 {
                break;
            }
            end += n;
        }
        self.hash.update(&self.buf[have..end]);
        self.read += (end - have) as u64;
        self.pos = 0;
        self.end = end;
        Ok(end > 0)
    }

    fn cut_short(&self) -> Error {
        Error::corrupt(
            &self.path,
            format!(
                "section cut short after {} of {} raw bytes",
                self.read, self.entry.ulen
            ),
        )
    }

    /// The next record, or `None` at the end of the section (after its
    /// length, record count and checksum were verified).
    pub fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
        if self.seen == self.entry.records {
            if self.inner.is_some() {
                let mut extra = [0u8];
                let more = self
                    .inner
                    .as_mut()
                    .expect("open")
                    .read(&mut extra)
                    .unwrap_or(1);
                if more != 0
                    || self.pos != self.end
                    || self.read != self.entry.ulen
                    || self.hash.digest() != self.entry.hash
                {
                    return Err(Error::corrupt(&self.path, "section checksum mismatch"));
                }
                self.inner = None;
                self.buf = Vec::new();
                (self.pos, self.end) = (0, 0);
            }
            return Ok(None);
        }
        if self.inner.is_none() {
            return Err(Error::corrupt(
                &self.path,
                "records claimed in an empty section",
            ));
        }
        if !self.fill()? {
            return Err(self.cut_short());
        }
        let b = &self.buf[self.pos..self.end];
        if b.len() < 2 {
            return Err(self.cut_short());
        }
        let (order, shared) = (b[0] as usize, b[1] as usize);
        if order == 0 || order > MAX_ORDER || shared > order || shared > self.prev.order() {
            return Err(Error::corrupt(
                &self.path,
                format!("bad record header {order}/{shared}"),
            ));
        }
        let fresh = order - shared;
        let mut at = 2 + 8 * fresh;
        if b.len() < at {
            return Err(self.cut_short());
        }
        // The previous key's slots, copied whole (a fixed-size copy, not a
        // call to memcpy for `shared` words), then the fresh words over them
        // and zeros after the last.
        let mut ids = *self.prev.padded();
        for (id, c) in ids[shared..order].iter_mut().zip(b[2..at].chunks_exact(8)) {
            *id = u64::from_le_bytes(c.try_into().expect("8 bytes"));
        }
        for id in &mut ids[order..] {
            *id = 0;
        }
        let key = Key::from_padded(ids, order);
        if self.seen > 0 && key <= self.prev {
            return Err(Error::corrupt(&self.path, "keys out of order"));
        }
        let mut vals = [0u64; MAX_VALUES];
        for v in vals.iter_mut().take(self.width) {
            let mut rest = &b[at..];
            match crate::varint::get(&mut rest) {
                Some(x) => {
                    *v = x;
                    at = b.len() - rest.len();
                }
                None if b.len() - at >= 10 => {
                    return Err(Error::corrupt(&self.path, "overlong varint"))
                }
                None => return Err(self.cut_short()),
            }
        }
        self.pos += at;
        self.seen += 1;
        self.prev = key;
        Ok(Some((key, vals)))
    }
}
