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
            Some(BufReader::with_capacity(32 << 10, dec))
        };
        Ok(SectionReader {
            path: self.path.clone(),
            inner,
            entry: e,
            width: self.width,
            seen: 0,
            read: 0,
            hash: Xxh3::new(),
            prev: Key::default(),
        })
    }
}

type Decoder = BufReader<zstd::Decoder<'static, BufReader<std::io::Take<File>>>>;

/// Streams the records of one section, checking them as it goes.
pub struct SectionReader {
    path: PathBuf,
    inner: Option<Decoder>,
    entry: Entry,
    width: usize,
    seen: u64,
    read: u64,
    hash: Xxh3,
    prev: Key,
}

impl SectionReader {
    fn bytes(&mut self, buf: &mut [u8]) -> Result<()> {
        let r = self.inner.as_mut().expect("open section");
        r.read_exact(buf).map_err(|e| {
            Error::corrupt(
                &self.path,
                format!(
                    "section cut short after {} of {} raw bytes: {e}",
                    self.read, self.entry.ulen
                ),
            )
        })?;
        self.read += buf.len() as u64;
        self.hash.update(buf);
        Ok(())
    }

    fn varint(&mut self) -> Result<u64> {
        let mut v = 0u64;
        for shift in (0..64).step_by(7) {
            let mut b = [0u8];
            self.bytes(&mut b)?;
            v |= ((b[0] & 0x7f) as u64) << shift;
            if b[0] < 0x80 {
                return Ok(v);
            }
        }
        Err(Error::corrupt(&self.path, "overlong varint"))
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
                    || self.read != self.entry.ulen
                    || self.hash.digest() != self.entry.hash
                {
                    return Err(Error::corrupt(&self.path, "section checksum mismatch"));
                }
                self.inner = None;
            }
            return Ok(None);
        }
        if self.inner.is_none() {
            return Err(Error::corrupt(
                &self.path,
                "records claimed in an empty section",
            ));
        }
        let mut head = [0u8; 2];
        self.bytes(&mut head)?;
        let (order, shared) = (head[0] as usize, head[1] as usize);
        if order == 0 || order > MAX_ORDER || shared > order || shared > self.prev.order() {
            return Err(Error::corrupt(
                &self.path,
                format!("bad record header {order}/{shared}"),
            ));
        }
        let mut ids = [0u64; MAX_ORDER];
        ids[..shared].copy_from_slice(&self.prev.ids()[..shared]);
        for id in ids.iter_mut().take(order).skip(shared) {
            let mut b = [0u8; 8];
            self.bytes(&mut b)?;
            *id = u64::from_le_bytes(b);
        }
        let key = Key::new(&ids[..order]);
        if self.seen > 0 && key <= self.prev {
            return Err(Error::corrupt(&self.path, "keys out of order"));
        }
        let mut vals = [0u64; MAX_VALUES];
        for v in vals.iter_mut().take(self.width) {
            *v = self.varint()?;
        }
        self.seen += 1;
        self.prev = key;
        Ok(Some((key, vals)))
    }
}
