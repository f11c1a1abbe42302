//! The counting workers.

use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Mutex;

use super::prefixes::each_with_prefixes;
use super::Table;
use crate::corpus::count_table::{self as tsv, BadCountLine};
use crate::corpus::Span;
use crate::corpus::{open_at, read_document, CoverDigest, Format, InputFile, Line, LineReader};
use crate::error::{Error, Result};
use crate::growth::{self, FirstSeen};
use crate::key::{partition_of, MAX_ORDER};
use crate::records::{BadLineAt, ReadTotals, Unique};
use crate::shard::{DictWriter, RunWriter};
use crate::tokenize::{Preparation, Tokenizer};
use crate::unique::{DupWriter, Position, Skips};
use crate::words::{bos_id, word_id, Dictionary, BOS, EOS, UNK};

/// What the counting workers need to know.
pub struct CountConfig<'a> {
    /// The inputs (span file indices point into it).
    pub inputs: &'a [InputFile],
    /// Highest order N.
    pub order: usize,
    /// How the text is prepared.
    pub preparation: Preparation,
    /// Count every token outside this list as `<unk>`.
    pub word_list: Option<&'a crate::tokenize::WordSet>,
    /// Longest line kept, in bytes.
    pub max_line_bytes: usize,
    /// How input lines hold documents.
    pub format: &'a Format,
    /// Number of partitions.
    pub partitions: u32,
    /// Worker threads.
    pub threads: usize,
    /// Bytes each worker may use for its table and dictionary.
    pub worker_bytes: usize,
    /// Folder for run and dictionary files.
    pub dir: &'a Path,
    /// Source of unique file ids.
    pub next_id: &'a AtomicU64,
    /// Bytes of input read so far (for progress).
    pub progress: &'a AtomicU64,
    /// The inputs are count tables ([`crate::corpus::count_table`]), not text: each line
    /// adds its count to its n-gram, and no growth curve is kept.
    pub counts: bool,
    /// `--unique`: which units to skip.
    pub unique: Option<&'a UniqueSkips>,
    /// Also count, for each n-gram, the documents it occurs in: the runs
    /// then hold two sums a key, the count and the documents (see
    /// [`Worker::add_document`]).
    pub documents: bool,
}

/// The units `--unique` skips: the chunks of the ingest and, for each,
/// its file of duplicate positions (see [`crate::unique`]).
pub struct UniqueSkips {
    /// The unit.
    pub unit: Unique,
    /// The ingest's chunks (every span lies in one).
    pub chunks: Vec<Span>,
    /// Per chunk, its files of duplicates (none, one, or one per hash
    /// range of a staged ingest).
    pub files: Vec<Vec<std::path::PathBuf>>,
}

impl UniqueSkips {
    /// The duplicates of the chunk holding `span`, from its start on.
    fn of(&self, span: &Span) -> Result<Skips> {
        let c = DupWriter::chunk_of(
            &self.chunks,
            Position {
                file: span.file,
                offset: span.start,
                sub: 0,
            },
        );
        let mut s = match self.files.get(c) {
            Some(f) => Skips::load_all(f)?,
            None => Skips::none(),
        };
        s.seek(span.start);
        Ok(s)
    }
}

/// One finished spill, to be recorded in the manifest.
pub struct Spill {
    /// File id.
    pub id: u64,
    /// Run file names (more than one when a sentence overflowed the table).
    pub runs: Vec<String>,
    /// Dictionary file name.
    pub dict: String,
    /// First-sighting file name ([`crate::growth`]); none for count
    /// tables.
    pub firsts: Option<String>,
    /// Input ranges covered.
    pub covers: Vec<Span>,
    /// The [`CoverDigest`] of each range.
    pub hashes: Vec<u64>,
    /// What was read in them.
    pub totals: ReadTotals,
    /// The first [`BAD_LINES_KEPT`] bad lines of them.
    pub bad: Vec<BadLineAt>,
    /// Bytes written.
    pub bytes: u64,
}

/// Bad lines named per spill (the rest are counted only).
pub const BAD_LINES_KEPT: usize = 10;

/// Counts `spans` with `cfg.threads` workers. `commit` is called (from the
/// worker, serialised by a lock) after each spill's files are durable; the
/// worker continues only once it returns. On an error, every worker spills
/// what it has counted up to its last complete line and commits it, so no
/// counted input is lost, and the first error is returned.
pub fn count_spans(
    cfg: &CountConfig,
    spans: Vec<Span>,
    commit: &(dyn Fn(Spill) -> Result<()> + Sync),
) -> Result<()> {
    let (tx, rx) = crossbeam::channel::unbounded();
    for s in spans {
        tx.send(s).expect("receiver alive");
    }
    drop(tx);
    let stop = AtomicBool::new(false);
    let commit_lock = Mutex::new(());
    let guarded = |s: Spill| {
        let _g = commit_lock.lock().map_err(|_| Error::Poisoned {
            what: "the order of the spills' commits",
        })?;
        commit(s)
    };
    crate::pool::on_each_thread(cfg.threads, || {
        Worker::new(cfg).run(&rx, &stop, &guarded).inspect_err(|_| {
            // The other workers spill what they have and stop.
            stop.store(true, Ordering::SeqCst);
        })
    })
}

struct Worker<'a> {
    cfg: &'a CountConfig<'a>,
    table: Table,
    dict: Dictionary,
    first: FirstSeen,
    dict_limit: usize,
    covers: Vec<Span>,
    hashes: Vec<u64>,
    totals: ReadTotals,
    bad: Vec<BadLineAt>,
    pending: Vec<(String, u64)>,
    /// A document's ids and where each of its sentences ends.
    doc: Vec<crate::words::WordId>,
    ends: Vec<usize>,
    /// `--unique`: the duplicates of the span being counted.
    skips: Skips,
    /// `--document-counts`: the document's longest k-grams, as (start in
    /// `doc`, length).
    grams: Vec<(u32, u32)>,
}

impl<'a> Worker<'a> {
    fn new(cfg: &'a CountConfig<'a>) -> Self {
        let table_bytes = cfg.worker_bytes / 100 * 85;
        Worker {
            cfg,
            table: Table::growable(cfg.order, 1 + usize::from(cfg.documents), table_bytes),
            dict: Dictionary::new(),
            first: FirstSeen::new(),
            dict_limit: cfg.worker_bytes - table_bytes,
            covers: Vec::new(),
            hashes: Vec::new(),
            totals: ReadTotals::default(),
            bad: Vec::new(),
            pending: Vec::new(),
            doc: Vec::new(),
            ends: Vec::new(),
            skips: Skips::none(),
            grams: Vec::new(),
        }
    }

    fn run(
        &mut self,
        rx: &crossbeam::channel::Receiver<Span>,
        stop: &AtomicBool,
        commit: &dyn Fn(Spill) -> Result<()>,
    ) -> Result<()> {
        let result = (|| {
            while let Ok(span) = rx.recv() {
                if stop.load(Ordering::SeqCst) {
                    break;
                }
                self.count_span(span, commit)?;
            }
            Ok(())
        })();
        // Whatever happened, make what was counted durable.
        let flushed = if self.covers.is_empty() {
            Ok(())
        } else {
            self.spill(commit)
        };
        result.and(flushed)
    }

    fn count_span(&mut self, span: Span, commit: &dyn Fn(Spill) -> Result<()>) -> Result<()> {
        let input = &self.cfg.inputs[span.file as usize];
        let stream = open_at(input, span.start)?;
        let mut lines = LineReader::new(
            stream,
            input.path.clone(),
            span.start,
            span.end,
            self.cfg.max_line_bytes,
        );
        let tok = Tokenizer::new(self.cfg.preparation).with_word_list(self.cfg.word_list);
        if let Some(u) = self.cfg.unique {
            self.skips = u.of(&span)?;
        }
        let mut line = Vec::new();
        let mut from = span.start;
        let mut digest = CoverDigest::default();
        // Lines read in this span before the current one.
        let mut index = 0u64;
        loop {
            let before = lines.position();
            let step = (|| -> Result<Line> {
                let kind = lines.next_line(&mut line)?;
                let read = lines.position() - before;
                self.totals.bytes += read;
                self.cfg.progress.fetch_add(read, Ordering::Relaxed);
                let at = (span, before, index);
                index += 1;
                match kind {
                    Line::End => {}
                    Line::TooLong if self.cfg.counts => {
                        return Err(self.bad_line(
                            at,
                            BadCountLine {
                                expected: format!(
                                    "a line of at most {} bytes (--max-line-bytes)",
                                    self.cfg.max_line_bytes
                                ),
                                found: "a longer line".into(),
                            },
                        ))
                    }
                    Line::TooLong => self.totals.skipped_lines += 1,
                    Line::Text if self.cfg.counts => self.count_line(&line, at)?,
                    Line::Text if self.cfg.format.is_lines() => {
                        self.count_document(&tok, &line, before)?
                    }
                    Line::Text => match read_document(self.cfg.format, &line) {
                        Err(why) => {
                            self.totals.bad_lines += 1;
                            if self.bad.len() < BAD_LINES_KEPT {
                                self.bad.push(BadLineAt {
                                    file: span.file,
                                    offset: before,
                                    detail: why.to_string(),
                                });
                            }
                        }
                        Ok(doc) => self.count_document(&tok, &doc.text, before)?,
                    },
                }
                Ok(kind)
            })();
            match step {
                Err(e) => {
                    // The line that failed added nothing; keep every complete
                    // line before it (the caller spills them).
                    self.covers.push(Span {
                        file: span.file,
                        start: from,
                        end: before,
                    });
                    self.hashes.push(digest.take());
                    self.first.end_cover();
                    return Err(e);
                }
                Ok(Line::End) => break,
                Ok(kind) => digest.add(kind, &line, lines.position()),
            }
            if self.table.is_full()
                || self.dict.heap_bytes() + self.first.heap_bytes() > self.dict_limit
            {
                let end = lines.position();
                self.covers.push(Span {
                    file: span.file,
                    start: from,
                    end,
                });
                self.hashes.push(digest.take());
                self.first.end_cover();
                self.spill(commit)?;
                from = end;
            }
        }
        self.covers.push(Span {
            file: span.file,
            start: from,
            end: span.end,
        });
        self.hashes.push(digest.take());
        self.first.end_cover();
        Ok(())
    }

    /// Counts the sentences of one document's text (a plain input line,
    /// or a JSON line's text). Every sentence is tokenized before any is
    /// counted, so a document that fails adds nothing. `offset` is where
    /// its line starts (the position `--unique` knows it by).
    fn count_document(&mut self, tok: &Tokenizer, text: &[u8], offset: u64) -> Result<()> {
        let words = self.dict.len();
        let r = tok.document(text, &mut self.dict, &mut self.doc, &mut self.ends)?;
        // Only a document that added a word to the dictionary (or holds a
        // marker) can hold a first sighting; `</s>` is looked for until
        // seen.
        let scan = self.dict.len() != words
            || r.marker_tokens > 0
            || !self.first.contains(crate::words::eos_id());
        self.totals.invalid_utf8_lines += r.invalid_utf8 as u64;
        self.totals.marker_tokens += r.marker_tokens;
        self.totals.mapped_tokens += r.mapped_tokens;
        // Reader totals (above) count what was read, duplicates too.
        let unit = self.cfg.unique.map(|u| u.unit);
        if unit == Some(Unique::Documents) && !self.ends.is_empty() && self.skips.is_dup(offset, 0)
        {
            self.totals.duplicate_units += 1;
            // Each sentence's `<s>` is not a token of T.
            self.totals.duplicate_tokens += (self.doc.len() - self.ends.len()) as u64;
            return Ok(());
        }
        let n = self.cfg.order;
        let doc = std::mem::take(&mut self.doc);
        let ends = std::mem::take(&mut self.ends);
        let mut start = 0;
        let mut counted = false;
        for (k, &end) in ends.iter().enumerate() {
            let ids = &doc[start..end];
            start = end;
            if unit == Some(Unique::Lines) && self.skips.is_dup(offset, k as u32) {
                self.totals.duplicate_units += 1;
                self.totals.duplicate_tokens += ids.len() as u64 - 1;
                continue;
            }
            self.first.sentence(ids, scan);
            self.totals.sentences += 1;
            counted = true;
            if self.cfg.documents {
                let from = end - ids.len();
                self.grams.extend(
                    (0..ids.len()).map(|i| ((from + i) as u32, n.min(ids.len() - i) as u32)),
                );
                continue;
            }
            // Only the longest k-gram of each position: the shorter ones
            // are its prefixes, counted when the table is written
            // (`prefixes`).
            for i in 0..ids.len() {
                // Ask for the next position's slot now: a likely cache
                // miss, which loads while this position's is updated.
                if i + 1 < ids.len() {
                    let end = (i + 1 + n).min(ids.len());
                    self.table.prefetch(&ids[i + 1..end]);
                }
                self.table.add(&ids[i..(i + n).min(ids.len())], &[1]);
                if self.table.is_critical() {
                    // A huge sentence: write the table out now, record it
                    // at the next line end.
                    let run = self.write_run()?;
                    self.pending.push(run);
                }
            }
        }
        if self.cfg.documents && counted {
            self.totals.documents += 1;
            self.add_document(&doc)?;
        }
        self.doc = doc;
        self.ends = ends;
        Ok(())
    }

    /// Adds one document's longest k-grams (`self.grams`, positions in
    /// `doc`) with their counts and with 1 for each distinct k-gram of the
    /// document in the documents sum, every prefix included.
    ///
    /// The table keeps each position's longest k-gram only; a prefix's
    /// sums are those of the keys it is a prefix of
    /// ([`super::prefixes`]). A count adds up that way, but a document
    /// count does not: a prefix shared by two k-grams of one document
    /// occurs in it once. So the document's distinct longest k-grams
    /// g₁ < … < gₘ (key order) each add 1 document, and each gⱼ whose
    /// longest common prefix with gⱼ₋₁ has l ≥ 1 words adds −1 (as
    /// 2⁶⁴ − 1, the table's sums wrapping) at that prefix. A prefix p of
    /// the document is a prefix of one contiguous run gₐ … g_b; those add
    /// b − a + 1, and the −1s at prefixes p is a prefix of are those of
    /// gₐ₊₁ … g_b: p's sum is 1. A table written out in the middle of a
    /// document (a huge one) splits the run, but each −1 goes into the
    /// table of its own +1, so every sum a run holds is 1 or 0 for the
    /// document, never below 0: the runs add up as counts do.
    fn add_document(&mut self, doc: &[crate::words::WordId]) -> Result<()> {
        let mut grams = std::mem::take(&mut self.grams);
        let at = |g: (u32, u32)| &doc[g.0 as usize..(g.0 + g.1) as usize];
        grams.sort_unstable_by(|&a, &b| at(a).cmp(at(b)));
        let mut prev: &[u64] = &[];
        let mut i = 0;
        while i < grams.len() {
            let g = at(grams[i]);
            let mut j = i + 1;
            while j < grams.len() && at(grams[j]) == g {
                j += 1;
            }
            self.table.add(g, &[(j - i) as u64, 1]);
            let shared = g.iter().zip(prev).take_while(|(a, b)| a == b).count();
            if shared > 0 {
                self.table.add(&g[..shared], &[0, u64::MAX]);
            }
            if self.table.is_critical() {
                let run = self.write_run()?;
                self.pending.push(run);
            }
            prev = g;
            i = j;
        }
        grams.clear();
        self.grams = grams;
        Ok(())
    }

    /// Adds one count-table line's count to its n-gram (the header, on a
    /// file's first line, is passed over). `at`: the span, the line's
    /// offset and its index in the span.
    fn count_line(&mut self, line: &[u8], at: (Span, u64, u64)) -> Result<()> {
        if at.1 == 0 && tsv::is_header(line) {
            return Ok(());
        }
        let l = tsv::read_line(line, self.cfg.order).map_err(|b| self.bad_line(at, b))?;
        let mut ids = [0u64; MAX_ORDER];
        for (id, w) in ids.iter_mut().zip(l.words()) {
            // The markers have the ids of their spellings; the
            // dictionaries hold words only.
            *id = word_id(w.as_bytes());
            if ![BOS, EOS, UNK].contains(&w) {
                self.dict.insert(*id, w)?;
            }
        }
        // Every sum of counts a table, a merge or a join makes is at most
        // the sum of all counts, which is kept within 64 bits.
        self.totals.counts_sum = self.totals.counts_sum.checked_add(l.count).ok_or_else(|| {
            self.bad_line(
                at,
                BadCountLine {
                    expected: "counts that add up to at most 18446744073709551615".into(),
                    found: format!("{} after the counts before it", l.count),
                },
            )
        })?;
        if l.order == 1 && ids[0] == bos_id() {
            // A sentence start for each sentence, as text counts them.
            self.totals.sentences += l.count;
        }
        self.table.add(&ids[..l.order], &[l.count]);
        Ok(())
    }

    /// The error for a bad count-table line at `at` (see
    /// [`Worker::count_line`]), named by its line number: counted in the
    /// span when it starts the input, else by reading the input up to it.
    fn bad_line(&self, (span, offset, index): (Span, u64, u64), b: BadCountLine) -> Error {
        let input = &self.cfg.inputs[span.file as usize];
        let line = if span.start == 0 {
            index + 1
        } else {
            match crate::corpus::line_numbers(input, &[offset]) {
                Ok(v) => v[0],
                Err(e) => return e,
            }
        };
        Error::BadLine {
            path: input.path.clone(),
            line,
            expected: b.expected,
            found: b.found,
        }
    }

    /// Writes the table as a run file and empties it.
    fn write_run(&mut self) -> Result<(String, u64)> {
        let id = self.cfg.next_id.fetch_add(1, Ordering::SeqCst);
        let run = format!("count-{id:06}.run");
        let parts = self.cfg.partitions;
        let width = 1 + usize::from(self.cfg.documents);
        let mut w = RunWriter::create(&self.cfg.dir.join(&run), parts, width)?;
        // Dropping the sorted view empties the table.
        let sorted = self.table.sorted();
        if self.cfg.counts {
            // A count table names every n-gram it counts.
            for (key, vals) in sorted.iter() {
                w.push(partition_of(key.ids()[0], parts), &key, &vals)?;
            }
        } else {
            each_with_prefixes(sorted.records(), |key, vals| {
                w.push(partition_of(key.ids()[0], parts), &key, vals)
            })?;
        }
        drop(sorted);
        let summary = w.finish()?;
        Ok((run, summary.bytes))
    }

    fn spill(&mut self, commit: &dyn Fn(Spill) -> Result<()>) -> Result<()> {
        if !self.table.is_empty() || self.pending.is_empty() {
            let run = self.write_run()?;
            self.pending.push(run);
        }
        let id = self.cfg.next_id.fetch_add(1, Ordering::SeqCst);
        let dict = format!("count-{id:06}.dict");
        let dict_bytes = DictWriter::write(&self.cfg.dir.join(&dict), &self.dict.drain_sorted())?;
        let (firsts, first_bytes) = if self.cfg.counts {
            (None, 0)
        } else {
            let firsts = format!("count-{id:06}.first");
            let (covers, entries) = self.first.drain();
            let bytes = growth::file::write(&self.cfg.dir.join(&firsts), &covers, &entries)?;
            (Some(firsts), bytes)
        };
        crate::fault::point(crate::fault::Point::Spill);
        let pending = std::mem::take(&mut self.pending);
        let spill = Spill {
            id,
            runs: pending.iter().map(|p| p.0.clone()).collect(),
            dict,
            firsts,
            covers: std::mem::take(&mut self.covers),
            hashes: std::mem::take(&mut self.hashes),
            totals: std::mem::take(&mut self.totals),
            bad: std::mem::take(&mut self.bad),
            bytes: pending.iter().map(|p| p.1).sum::<u64>() + dict_bytes + first_bytes,
        };
        commit(spill)?;
        crate::fault::point(crate::fault::Point::Committed);
        Ok(())
    }
}
