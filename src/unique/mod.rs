//! Exact duplicate removal (`ingest --unique lines|documents`).
//!
//! A *unit* is a sentence (`lines`) or a document (`documents`: a JSON
//! line's text, or one input line), judged on its prepared id sequence:
//! the padded word ids the counting would add (after normalization,
//! sentences, tokens, case, digits and the word list), a document's
//! sentences one after the other with their `<s>`/`</s>`. A unit without
//! tokens adds nothing to the counts and is no unit.
//!
//! 1. **Hashing** ([`hash_span`]): each unit becomes a [`Sighting`]: the
//!    xxh3-128 of its ids' little-endian bytes, and its [`Position`] in
//!    input order (input index, offset of its line in the input's
//!    decompressed stream, index of the sentence among the line's
//!    non-empty sentences). Sightings are sorted by (hash, position) and
//!    spilled as runs ([`runs`]).
//! 2. **Marking** ([`runs::mark`]): a k-way merge of the runs and of the
//!    store's own sorted hash set (the units of earlier ingests into the
//!    store). For each hash, the first sighting in input order is kept
//!    unless the store's set holds the hash; every other sighting is a
//!    duplicate, written to the [`DupWriter`] of its chunk. The union of
//!    the old set and the new hashes is written as the store's next set.
//! 3. **Counting** skips the positions marked ([`Skips`]).
//!
//! Two distinct units with one hash would be taken for one: with n units
//! the chance of any such collision is at most n²/2¹²⁹ (the birthday
//! bound), about 3·10⁻¹⁷ for 10¹¹ units.

pub mod runs;

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::corpus::{open_at, read_document, Format, InputFile, Line, LineReader, Span};
use crate::error::{IoContext, Result};
use crate::records::Unique;
use crate::tokenize::Tokenizer;
use crate::words::{Dictionary, WordId};

/// Where a unit sits in input order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Position {
    /// Index of the input.
    pub file: u32,
    /// Offset of the unit's line in the input's (decompressed) stream.
    pub offset: u64,
    /// Index of the sentence among the line's non-empty sentences (0 for a
    /// document).
    pub sub: u32,
}

/// One unit's hash and position; ordered by hash, then position.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Sighting {
    /// xxh3-128 of the unit's ids.
    pub hash: u128,
    /// Where it is.
    pub at: Position,
}

/// The hash of a unit's ids (little-endian bytes); `buf` is scratch.
pub fn unit_hash(ids: &[WordId], buf: &mut Vec<u8>) -> u128 {
    buf.clear();
    for id in ids {
        buf.extend_from_slice(&id.to_le_bytes());
    }
    xxhash_rust::xxh3::xxh3_128(buf)
}

/// What [`hash_span`] reads and how.
pub struct HashConfig<'a> {
    /// The inputs.
    pub inputs: &'a [InputFile],
    /// The unit.
    pub unique: Unique,
    /// The tokenizer of the counting.
    pub tokenizer: &'a Tokenizer<'a>,
    /// Longest line kept, in bytes (longer lines are skipped, as counting
    /// skips them).
    pub max_line_bytes: usize,
    /// How input lines hold documents.
    pub format: &'a Format,
    /// Bytes read so far (for progress).
    pub progress: &'a AtomicU64,
    /// Bytes the tokenizer's dictionary may hold (it only serves the
    /// tokenizer's collision check here, and starts again when full).
    pub dict_bytes: usize,
}

/// Reads `span` exactly as counting reads it and gives the sighting of
/// every unit, in input order, to `out`. Lines counting skips (too long,
/// no document) hold no unit.
pub fn hash_span(
    cfg: &HashConfig,
    span: Span,
    out: &mut dyn FnMut(Sighting) -> Result<()>,
) -> Result<()> {
    let input = &cfg.inputs[span.file as usize];
    let stream = open_at(input, span.start)?;
    let mut lines = LineReader::new(
        stream,
        input.path.clone(),
        span.start,
        span.end,
        cfg.max_line_bytes,
    );
    let mut line = Vec::new();
    let mut dict = Dictionary::new();
    let (mut doc, mut ends, mut buf) = (Vec::new(), Vec::new(), Vec::new());
    loop {
        let before = lines.position();
        let kind = lines.next_line(&mut line)?;
        cfg.progress
            .fetch_add(lines.position() - before, Ordering::Relaxed);
        let tok = cfg.tokenizer;
        match kind {
            Line::End => return Ok(()),
            Line::TooLong => continue,
            Line::Text if cfg.format.is_lines() => {
                tok.document(&line, &mut dict, &mut doc, &mut ends)?;
            }
            Line::Text => match read_document(cfg.format, &line) {
                Err(_) => continue,
                Ok(d) => {
                    tok.document(&d.text, &mut dict, &mut doc, &mut ends)?;
                }
            },
        }
        if dict.heap_bytes() > cfg.dict_bytes {
            dict = Dictionary::new();
        }
        let at = |sub: u32| Position {
            file: span.file,
            offset: before,
            sub,
        };
        match cfg.unique {
            Unique::Documents if !ends.is_empty() => out(Sighting {
                hash: unit_hash(&doc, &mut buf),
                at: at(0),
            })?,
            Unique::Documents => {}
            Unique::Lines => {
                let mut start = 0;
                for (k, &end) in ends.iter().enumerate() {
                    out(Sighting {
                        hash: unit_hash(&doc[start..end], &mut buf),
                        at: at(k as u32),
                    })?;
                    start = end;
                }
            }
        }
    }
}

/// The duplicate positions of one chunk, in order, for the counting to
/// skip.
#[derive(Debug, Default)]
pub struct Skips {
    at: Vec<(u64, u32)>,
    next: usize,
}

impl Skips {
    /// No position skipped.
    pub fn none() -> Skips {
        Skips::default()
    }

    /// The positions in a chunk's duplicate file (written by
    /// [`DupWriter`], in any order), sorted.
    pub fn load(path: &Path) -> Result<Skips> {
        let bytes = std::fs::read(path).at(path, "read")?;
        if bytes.len() % 12 != 0 {
            return Err(crate::error::Error::corrupt(
                path,
                format!(
                    "{} bytes is not a whole number of 12-byte positions",
                    bytes.len()
                ),
            ));
        }
        let mut at: Vec<(u64, u32)> = bytes
            .chunks_exact(12)
            .map(|c| {
                (
                    u64::from_le_bytes(c[..8].try_into().expect("8 bytes")),
                    u32::from_le_bytes(c[8..].try_into().expect("4 bytes")),
                )
            })
            .collect();
        at.sort_unstable();
        Ok(Skips { at, next: 0 })
    }

    /// The positions in several duplicate files of one chunk, sorted.
    pub fn load_all(paths: &[PathBuf]) -> Result<Skips> {
        let mut at = Vec::new();
        for p in paths {
            at.append(&mut Skips::load(p)?.at);
        }
        at.sort_unstable();
        Ok(Skips { at, next: 0 })
    }

    /// Moves to the first position at or after line offset `offset`.
    pub fn seek(&mut self, offset: u64) {
        self.next = self.at.partition_point(|p| p.0 < offset);
    }

    /// Whether sentence `sub` of the line at `offset` is a duplicate; asked
    /// in input order.
    pub fn is_dup(&mut self, offset: u64, sub: u32) -> bool {
        while self.next < self.at.len() && self.at[self.next] < (offset, sub) {
            self.next += 1;
        }
        self.at.get(self.next) == Some(&(offset, sub))
    }
}

/// Collects duplicate positions by chunk, within a byte budget: buffers
/// are appended to one file a chunk when they outgrow it.
pub struct DupWriter<'a> {
    chunks: &'a [Span],
    dir: PathBuf,
    buffers: Vec<Vec<u8>>,
    buffered: usize,
    limit: usize,
    written: Vec<bool>,
}

impl<'a> DupWriter<'a> {
    /// A writer of `dups-<chunk>.pos` files in `dir`, buffering at most
    /// about `limit` bytes.
    pub fn new(chunks: &'a [Span], dir: &Path, limit: usize) -> Self {
        DupWriter {
            chunks,
            dir: dir.to_path_buf(),
            buffers: vec![Vec::new(); chunks.len()],
            buffered: 0,
            limit: limit.max(1 << 16),
            written: vec![false; chunks.len()],
        }
    }

    /// The file name of chunk `c`'s duplicates.
    pub fn name(c: usize) -> String {
        format!("dups-{c:06}.pos")
    }

    /// The index of the chunk holding `at`.
    pub fn chunk_of(chunks: &[Span], at: Position) -> usize {
        chunks
            .partition_point(|s| (s.file, s.start) <= (at.file, at.offset))
            .saturating_sub(1)
    }

    /// Records a duplicate.
    pub fn push(&mut self, at: Position) -> Result<()> {
        let c = Self::chunk_of(self.chunks, at);
        self.buffers[c].extend_from_slice(&at.offset.to_le_bytes());
        self.buffers[c].extend_from_slice(&at.sub.to_le_bytes());
        self.buffered += 12;
        if self.buffered > self.limit {
            self.flush()?;
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<()> {
        use std::io::Write;
        for (c, b) in self.buffers.iter_mut().enumerate() {
            if b.is_empty() {
                continue;
            }
            let path = self.dir.join(Self::name(c));
            let mut f = std::fs::OpenOptions::new()
                .create(true)
                .append(true)
                .open(&path)
                .at(&path, "open")?;
            f.write_all(b).at(&path, "write")?;
            self.written[c] = true;
            *b = Vec::new();
        }
        self.buffered = 0;
        Ok(())
    }

    /// Writes what is buffered, fsyncs every file, and gives each chunk's
    /// file name (`None`: no duplicates there).
    pub fn finish(mut self) -> Result<Vec<Option<String>>> {
        self.flush()?;
        let mut names = Vec::new();
        for (c, w) in self.written.iter().enumerate() {
            if *w {
                let path = self.dir.join(Self::name(c));
                std::fs::File::open(&path)
                    .at(&path, "open")?
                    .sync_all()
                    .at(&path, "fsync")?;
                names.push(Some(Self::name(c)));
            } else {
                names.push(None);
            }
        }
        crate::fsutil::sync_dir(&self.dir)?;
        Ok(names)
    }
}
