//! Dictionary files: the words behind the ids of a run file.
//!
//! ```text
//! header   8 B   "QDCT" | version u32
//! body           one zstd frame of records: id u64 | len u32 | bytes
//!                (ids strictly increasing)
//! trailer  32 B  records u64 | raw len u64 | xxh3-64 of raw bytes u64 | 0 u32 | "QDEN"
//! ```

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};

use xxhash_rust::xxh3::Xxh3;

use super::{RUN_VERSION, ZSTD_LEVEL, ZSTD_WINDOW_LOG};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::words::WordId;

const MAGIC: &[u8; 4] = b"QDCT";
const END: &[u8; 4] = b"QDEN";
const TRAILER: u64 = 32;

/// Streams entries, sorted by id, into a new dictionary file.
pub struct DictWriter {
    path: PathBuf,
    tmp: PathBuf,
    enc: zstd::Encoder<'static, BufWriter<File>>,
    hash: Xxh3,
    raw: u64,
    records: u64,
    buf: Vec<u8>,
}

impl DictWriter {
    /// Starts a dictionary file at `path` (written under a temporary name).
    pub fn create(path: &Path) -> Result<Self> {
        let tmp = fsutil::tmp_name(path);
        let f = File::create(&tmp).at(&tmp, "create")?;
        let mut out = BufWriter::new(f);
        out.write_all(MAGIC).at(&tmp, "write")?;
        out.write_all(&RUN_VERSION.to_le_bytes())
            .at(&tmp, "write")?;
        let mut enc = zstd::Encoder::new(out, ZSTD_LEVEL).at(&tmp, "compress")?;
        enc.window_log(ZSTD_WINDOW_LOG).at(&tmp, "compress")?;
        Ok(DictWriter {
            path: path.to_path_buf(),
            tmp,
            enc,
            hash: Xxh3::new(),
            raw: 0,
            records: 0,
            buf: Vec::new(),
        })
    }

    /// Appends one entry; ids must increase.
    pub fn push(&mut self, id: WordId, word: &str) -> Result<()> {
        self.buf.clear();
        self.buf.extend_from_slice(&id.to_le_bytes());
        self.buf
            .extend_from_slice(&(word.len() as u32).to_le_bytes());
        self.buf.extend_from_slice(word.as_bytes());
        self.hash.update(&self.buf);
        self.raw += self.buf.len() as u64;
        self.records += 1;
        self.enc.write_all(&self.buf).at(&self.tmp, "write")
    }

    /// Writes the trailer, syncs and renames into place; returns the size.
    pub fn finish(self) -> Result<u64> {
        let tmp = self.tmp;
        let mut out = self.enc.finish().at(&tmp, "compress")?;
        let mut t = Vec::with_capacity(32);
        t.extend_from_slice(&self.records.to_le_bytes());
        t.extend_from_slice(&self.raw.to_le_bytes());
        t.extend_from_slice(&self.hash.digest().to_le_bytes());
        t.extend_from_slice(&0u32.to_le_bytes());
        t.extend_from_slice(END);
        out.write_all(&t).at(&tmp, "write")?;
        let f = out
            .into_inner()
            .map_err(|e| Error::io(&tmp, "write", e.into_error()))?;
        let bytes = f.metadata().at(&tmp, "stat")?.len();
        f.sync_all().at(&tmp, "fsync")?;
        drop(f);
        fsutil::rename_durable(&tmp, &self.path)?;
        Ok(bytes)
    }

    /// Writes `entries` (sorted by id) to `path` durably and atomically.
    pub fn write(path: &Path, entries: &[(WordId, Box<str>)]) -> Result<u64> {
        let mut w = DictWriter::create(path)?;
        for (id, word) in entries {
            w.push(*id, word)?;
        }
        w.finish()
    }
}

/// Streams the entries of a dictionary file, verifying them.
pub struct DictReader {
    path: PathBuf,
    dec: BufReader<zstd::Decoder<'static, BufReader<std::io::Take<File>>>>,
    records: u64,
    ulen: u64,
    expect_hash: u64,
    seen: u64,
    read: u64,
    hash: Xxh3,
    prev: Option<WordId>,
}

impl DictReader {
    /// Opens and checks the header and trailer of `path`.
    pub fn open(path: &Path) -> Result<Self> {
        let mut f = File::open(path).at(path, "open")?;
        let size = f.metadata().at(path, "stat")?.len();
        if size < 8 + TRAILER {
            return Err(Error::corrupt(
                path,
                format!("{size} bytes is too short for a dictionary"),
            ));
        }
        let mut head = [0u8; 8];
        f.read_exact(&mut head).at(path, "read")?;
        if &head[..4] != MAGIC {
            return Err(Error::corrupt(path, "not a dictionary file (bad magic)"));
        }
        let version = u32::from_le_bytes(head[4..8].try_into().expect("4"));
        if version != RUN_VERSION {
            return Err(Error::Version {
                path: path.into(),
                found: version,
                expected: RUN_VERSION,
            });
        }
        f.seek(SeekFrom::Start(size - TRAILER)).at(path, "seek")?;
        let mut t = [0u8; TRAILER as usize];
        f.read_exact(&mut t).at(path, "read")?;
        if &t[28..32] != END {
            return Err(Error::corrupt(path, "bad trailer (truncated?)"));
        }
        let w = |i: usize| u64::from_le_bytes(t[i * 8..i * 8 + 8].try_into().expect("8"));
        f.seek(SeekFrom::Start(8)).at(path, "seek")?;
        let mut dec = zstd::Decoder::with_buffer(BufReader::new(f.take(size - 8 - TRAILER)))
            .at(path, "decompress")?;
        dec.window_log_max(ZSTD_WINDOW_LOG).at(path, "decompress")?;
        Ok(DictReader {
            path: path.to_path_buf(),
            dec: BufReader::new(dec),
            records: w(0),
            ulen: w(1),
            expect_hash: w(2),
            seen: 0,
            read: 0,
            hash: Xxh3::new(),
            prev: None,
        })
    }

    fn bad(&self, what: &str) -> Error {
        Error::corrupt(&self.path, format!("{what} at entry {}", self.seen))
    }

    /// The next `(id, word)`, or `None` after the last one was verified.
    pub fn next_entry(&mut self) -> Result<Option<(WordId, String)>> {
        if self.seen == self.records {
            let mut extra = [0u8];
            let more = self.dec.read(&mut extra).unwrap_or(1);
            if more != 0 || self.read != self.ulen || self.hash.digest() != self.expect_hash {
                return Err(self.bad("checksum mismatch"));
            }
            return Ok(None);
        }
        let mut head = [0u8; 12];
        self.dec
            .read_exact(&mut head)
            .map_err(|_| self.bad("cut short"))?;
        let id = u64::from_le_bytes(head[..8].try_into().expect("8"));
        let len = u32::from_le_bytes(head[8..].try_into().expect("4")) as u64;
        if self.read + 12 + len > self.ulen || self.prev.is_some_and(|p| p >= id) {
            return Err(self.bad("bad entry"));
        }
        let mut word = Vec::new();
        (&mut self.dec)
            .take(len)
            .read_to_end(&mut word)
            .map_err(|_| self.bad("cut short"))?;
        if word.len() as u64 != len {
            return Err(self.bad("cut short"));
        }
        self.hash.update(&head);
        self.hash.update(&word);
        self.read += 12 + len;
        self.seen += 1;
        self.prev = Some(id);
        let word = String::from_utf8(word).map_err(|_| self.bad("word is not UTF-8"))?;
        Ok(Some((id, word)))
    }
}
