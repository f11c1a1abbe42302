//! Concordance lines: every occurrence of a pattern in the corpus files,
//! with its context, streamed from the text, on every core.
//!
//! # The text as the store saw it
//!
//! Files are read as an ingest reads them ([`crate::corpus`]: plain,
//! `.gz` or `.zst`; lines end at `\n`, one `\r` before it dropped; a line
//! longer than the store's limit is skipped, yet numbered). Each line is a
//! document ([`read_document`]: the line itself, or the text field of a
//! JSON line; a JSON line that holds no document is skipped, as the ingest
//! skips it) and is tokenized by the ingest's own [`Tokenizer::document`]
//! with the store's whole text preparation (normalization, case, tokens,
//! digits, sentences), so an occurrence is an occurrence of an n-gram the
//! store counted: over the same files, the number of occurrences of an
//! n-gram is its count. Patterns match each padded sentence, so `<s>` and
//! `</s>` may appear in them; contexts are the sentence's tokens only, as
//! the store has them (prepared).
//!
//! # Speed
//!
//! The files are read in blocks of [`BLOCK`] bytes (cut at a line end),
//! a batch of blocks at a time, each block searched on a thread of the
//! rayon pool. A block is not tokenized whole: the pattern's rarest fixed
//! word (by its count in the store) is first looked for as bytes, and only
//! the lines that hold it are tokenized. That filter never loses a line:
//!
//! - without normalization (which may map other characters to the
//!   word's: `--normalize` turns the filter off) and without lowercasing,
//!   a token equal to the word holds its bytes (splitting at word
//!   boundaries keeps a token's bytes; with `--digits zero` a word
//!   without `0` came from a token without digits);
//! - with lowercasing and a word of ASCII only, the token is made of
//!   characters whose lowercase is ASCII: ASCII letters, whose ASCII
//!   lowercase the filter searches, and U+212A KELVIN SIGN (the only other
//!   one, by Python's `unicodedata`: a test checks it), whose lines are
//!   always tokenized.
//!
//! - in JSON lines, a text's characters appear as they are unless
//!   escaped: a word with `"`, `\\`, `/` or a control character is not
//!   looked for, and a line holding a `\u` escape is always read.
//!
//! Without such a word (only `*` and markers, or a word with non-ASCII
//! letters in a lowercased store, or U+FFFD, or a normalizing store) every
//! line is tokenized.
//! Memory: a batch of blocks (threads × 2 × [`BLOCK`]) and the matches of
//! one batch.

use std::io::Read;

use memchr::memmem;
use rayon::prelude::*;

use super::pattern::Pattern;
use crate::corpus::{open_at, read_document, Format, InputFile};
use crate::error::{Error, Result};
use crate::store::Store;
use crate::tokenize::{Digits, Normalize, Preparation, Tokenizer};
use crate::words::{bos_id, eos_id, unk_id, Dictionary, WordId, BOS, EOS, UNK};

/// Bytes of text a block holds (more when a line is longer); the test
/// setting [`crate::corpus::CHUNK_BYTES_VAR`] overrides it, as it does the
/// ingest's chunks.
pub const BLOCK: usize = 8 << 20;

/// The bytes of U+212A KELVIN SIGN.
const KELVIN: &[u8] = "\u{212A}".as_bytes();

/// One occurrence of the pattern.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Occurrence {
    /// Index of its file among those searched.
    pub file: usize,
    /// Line number in the file, from 1.
    pub line: u64,
    /// Up to `context` words before it (nearest last).
    pub left: Vec<String>,
    /// The words that matched.
    pub matched: Vec<String>,
    /// Up to `context` words after it.
    pub right: Vec<String>,
}

/// What a search read.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Searched {
    /// Bytes of text (decompressed).
    pub bytes: u64,
    /// Lines (counted or skipped as too long).
    pub lines: u64,
    /// Lines tokenized (those the byte filter let through).
    pub tokenized: u64,
}

/// A pattern ready to be searched for in text prepared as `store`'s.
pub struct Concordancer {
    pattern: Pattern,
    prep: Preparation,
    format: Format,
    max_line: usize,
    context: usize,
    /// The bytes every matching line holds (after ASCII lowercasing when
    /// `lowercase`), if a filter is possible.
    needle: Option<Vec<u8>>,
}

impl Concordancer {
    /// The search for `pattern` (as written by the user) with `context`
    /// words of context a side, in text prepared as `store`'s, read as
    /// `format` (plain lines or JSON lines).
    pub fn new(
        store: &Store,
        pattern: &str,
        context: usize,
        format: Format,
    ) -> Result<Concordancer> {
        let settings = &store.meta().settings;
        if settings.word_list.is_some() {
            return Err(Error::Config(format!(
                "{} was counted with a word list; concordance lines follow stores counted \
                 without one",
                store.dir().display()
            )));
        }
        let prep = settings.preparation;
        let lowercase = prep.lowercase;
        let json = !format.is_lines();
        let parsed = Pattern::parse(pattern, &prep)?;
        // The rarest fixed word that can be looked for as bytes.
        let mut best: Option<(u64, Vec<u8>)> = None;
        for (raw, slot) in pattern.split_whitespace().zip(parsed.slots()) {
            let Some(id) = slot else { continue };
            if [bos_id(), eos_id(), unk_id()].contains(id) {
                continue;
            }
            let word = if raw == r"\*" { "*" } else { raw };
            let word = crate::tokenize::normalise(word, lowercase);
            let usable = !word.contains('\u{FFFD}')
                && (!lowercase || word.is_ascii())
                && prep.normalize == Normalize::None
                && (prep.digits == Digits::Keep || !word.contains('0'))
                && !(json
                    && word
                        .chars()
                        .any(|c| matches!(c, '"' | '\\' | '/') || c < ' '));
            if !usable {
                continue;
            }
            let count = store.get(&[*id])?.map_or(0, |c| c.0);
            if best.as_ref().is_none_or(|(c, _)| count < *c) {
                best = Some((count, word.as_bytes().to_vec()));
            }
        }
        Ok(Concordancer {
            pattern: parsed,
            prep,
            format,
            max_line: settings.max_line_bytes,
            context,
            needle: best.map(|b| b.1),
        })
    }

    /// Searches `files` in order, handing each occurrence (in file, line
    /// and position order) to `sink`, which returns `false` to stop.
    pub fn search(
        &self,
        files: &[InputFile],
        mut sink: impl FnMut(Occurrence) -> Result<bool>,
    ) -> Result<Searched> {
        let mut seen = Searched::default();
        let batch = rayon::current_num_threads() * 2;
        let block = crate::corpus::chunk_bytes_setting(BLOCK as u64)? as usize;
        for (fi, f) in files.iter().enumerate() {
            let mut blocks = Blocks::new(f, self.max_line.max(1), block)?;
            let mut next_line = 1u64;
            loop {
                let mut todo = Vec::with_capacity(batch);
                while todo.len() < batch {
                    match blocks.next()? {
                        Some(b) => todo.push(b),
                        None => break,
                    }
                }
                if todo.is_empty() {
                    break;
                }
                let found: Vec<Result<BlockResult>> =
                    todo.par_iter().map(|b| self.search_block(fi, b)).collect();
                for (b, r) in todo.iter().zip(found) {
                    let r = r?;
                    next_line += b.skipped_before;
                    seen.tokenized += r.tokenized;
                    for mut o in r.found {
                        o.line += next_line;
                        if !sink(o)? {
                            seen.lines += next_line - 1;
                            seen.bytes += blocks.pos;
                            return Ok(seen);
                        }
                    }
                    next_line += r.lines;
                }
            }
            next_line += blocks.skipped;
            seen.lines += next_line - 1;
            seen.bytes += blocks.pos;
        }
        Ok(seen)
    }

    /// The occurrences in one block, their line numbers from 0.
    fn search_block(&self, file: usize, b: &Block) -> Result<BlockResult> {
        let text = &b.data;
        let ends = text.iter().filter(|&&c| c == b'\n').count() as u64;
        let unended = !text.is_empty() && !text.ends_with(b"\n");
        let mut out = BlockResult {
            lines: ends + unended as u64,
            ..Default::default()
        };
        let tok = Tokenizer::new(self.prep);
        let lowercase = self.prep.lowercase;
        let json = !self.format.is_lines();
        let mut dict = Dictionary::new();
        let (mut ids, mut ends) = (Vec::new(), Vec::new());
        let mut line_no = 0u64;
        let mut counted_to = 0usize;
        let mut each_line = |start: usize, out: &mut BlockResult| -> Result<usize> {
            let end = memchr::memchr(b'\n', &text[start..]).map_or(text.len(), |i| start + i);
            line_no += text[counted_to..start]
                .iter()
                .filter(|&&c| c == b'\n')
                .count() as u64;
            counted_to = start;
            let line = &text[start..end];
            if line.len() <= self.max_line {
                let line = line.strip_suffix(b"\r").unwrap_or(line);
                out.tokenized += 1;
                // A JSON line without a document is skipped, as counted.
                if let Ok(doc) = read_document(&self.format, line) {
                    tok.document(&doc.text, &mut dict, &mut ids, &mut ends)?;
                    let mut start = 0;
                    for &end in &ends {
                        self.matches_in(file, line_no, &ids[start..end], &dict, &mut out.found);
                        start = end;
                    }
                }
            }
            Ok(end + 1)
        };
        match &self.needle {
            None => {
                let mut at = 0;
                while at < text.len() {
                    at = each_line(at, &mut out)?;
                }
            }
            Some(needle) => {
                let lowered;
                let hay: &[u8] = if lowercase {
                    lowered = text.to_ascii_lowercase();
                    &lowered
                } else {
                    text
                };
                let finder = memmem::Finder::new(needle);
                // Lines always read: with lowercasing, those holding a
                // Kelvin sign; in JSON lines, those holding a \u escape.
                // next[i]: where marker i is next found at or after `at`.
                let mut markers: Vec<memmem::Finder> = Vec::new();
                if lowercase {
                    markers.push(memmem::Finder::new(KELVIN));
                }
                if json {
                    markers.push(memmem::Finder::new(b"\\u"));
                }
                let mut next: Vec<Option<usize>> = markers.iter().map(|m| m.find(text)).collect();
                let mut at = 0;
                while at < text.len() {
                    let mut hit = finder.find(&hay[at..]).map(|h| at + h);
                    for (m, n) in markers.iter().zip(next.iter_mut()) {
                        if n.is_some_and(|k| k < at) {
                            *n = m.find(&text[at..]).map(|h| at + h);
                        }
                        if let Some(k) = *n {
                            if hit.is_none_or(|h| k < h) {
                                hit = Some(k);
                            }
                        }
                    }
                    let Some(h) = hit else { break };
                    let start = memchr::memrchr(b'\n', &text[..h]).map_or(0, |i| i + 1);
                    at = each_line(start.max(at), &mut out)?;
                }
            }
        }
        Ok(out)
    }

    /// The occurrences of the pattern in one padded sentence.
    fn matches_in(
        &self,
        file: usize,
        line: u64,
        ids: &[WordId],
        dict: &Dictionary,
        out: &mut Vec<Occurrence>,
    ) {
        let k = self.pattern.len();
        if ids.len() < k {
            return;
        }
        let word = |id: WordId| -> String {
            if id == bos_id() {
                BOS.into()
            } else if id == eos_id() {
                EOS.into()
            } else if id == unk_id() {
                UNK.into()
            } else {
                dict.get(id).unwrap_or("?").to_string()
            }
        };
        let last = ids.len() - 1; // the </s>
        for i in 0..=ids.len() - k {
            if !self.pattern.matches(&ids[i..i + k]) {
                continue;
            }
            let lo = i.saturating_sub(self.context).max(1);
            let hi = (i + k + self.context).min(last);
            out.push(Occurrence {
                file,
                line,
                left: ids[lo..i.max(lo)].iter().map(|&w| word(w)).collect(),
                matched: ids[i..i + k].iter().map(|&w| word(w)).collect(),
                right: ids[(i + k).min(hi)..hi].iter().map(|&w| word(w)).collect(),
            });
        }
    }
}

#[derive(Default)]
struct BlockResult {
    /// Line ends in the block.
    lines: u64,
    tokenized: u64,
    found: Vec<Occurrence>,
}

/// A run of whole lines of one file.
struct Block {
    data: Vec<u8>,
    /// Lines too long to hold, skipped just before it.
    skipped_before: u64,
}

/// The blocks of one file, in order.
struct Blocks {
    path: std::path::PathBuf,
    reader: Box<dyn std::io::BufRead + Send>,
    carry: Vec<u8>,
    max_line: usize,
    done: bool,
    /// Too-long lines skipped since the last block.
    skipped: u64,
    /// Decompressed bytes read.
    pos: u64,
    /// Bytes read for a block.
    block: usize,
}

impl Blocks {
    fn new(f: &InputFile, max_line: usize, block: usize) -> Result<Blocks> {
        Ok(Blocks {
            path: f.path.clone(),
            reader: open_at(f, 0)?,
            carry: Vec::new(),
            max_line,
            done: false,
            skipped: 0,
            pos: 0,
            block,
        })
    }

    fn read_some(&mut self, buf: &mut Vec<u8>, want: usize) -> Result<usize> {
        let start = buf.len();
        buf.resize(start + want, 0);
        let mut got = 0;
        while got < want {
            match self.reader.read(&mut buf[start + got..]) {
                Ok(0) => break,
                Ok(n) => got += n,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => {
                    return Err(Error::BadInput {
                        path: self.path.clone(),
                        offset: self.pos + got as u64,
                        detail: e.to_string(),
                    })
                }
            }
        }
        buf.truncate(start + got);
        self.pos += got as u64;
        Ok(got)
    }

    fn block(&mut self, data: Vec<u8>) -> Option<Block> {
        Some(Block {
            data,
            skipped_before: std::mem::take(&mut self.skipped),
        })
    }

    /// The next block, or `None` at the end of the file (then `skipped`
    /// holds the too-long lines at its very end).
    fn next(&mut self) -> Result<Option<Block>> {
        loop {
            if self.done {
                if self.carry.is_empty() {
                    return Ok(None);
                }
                let data = std::mem::take(&mut self.carry);
                return Ok(self.block(data));
            }
            let mut buf = std::mem::take(&mut self.carry);
            if self.read_some(&mut buf, self.block)? == 0 {
                self.done = true;
                self.carry = buf;
                continue;
            }
            match memchr::memrchr(b'\n', &buf) {
                Some(last) => {
                    let tail = buf.split_off(last + 1);
                    if tail.len() > self.max_line {
                        // Skipped after this block's lines: counted
                        // before the next block's.
                        let b = self.block(buf);
                        self.skip_line()?;
                        return Ok(b);
                    }
                    self.carry = tail;
                    return Ok(self.block(buf));
                }
                None if buf.len() > self.max_line => self.skip_line()?,
                None => self.carry = buf,
            }
        }
    }

    /// Reads past the rest of a line too long to count, and counts it.
    fn skip_line(&mut self) -> Result<()> {
        self.skipped += 1;
        let mut buf = Vec::new();
        loop {
            buf.clear();
            if self.read_some(&mut buf, 1 << 20)? == 0 {
                self.done = true;
                return Ok(());
            }
            if let Some(i) = memchr::memchr(b'\n', &buf) {
                self.carry = buf.split_off(i + 1);
                return Ok(());
            }
        }
    }
}
