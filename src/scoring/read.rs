//! Input lines in batches, and a batch's documents scored by one worker.

use std::path::{Path, PathBuf};

use serde_json::Value;

use super::{DocModel, DocResult, DocScore, Options, Outcome, Tally, WordScore};
use crate::corpus::{self, read_document, Line, LineReader};
use crate::error::{Error, Result};
use crate::predict::{prediction, Prob};
use crate::tokenize::{Preparation, Tokenizer};
use crate::words::{eos_id, unk_id, Dictionary, WordId, EOS, UNK};

/// A batch closes at this many bytes of lines …
pub const BATCH_BYTES: usize = 256 << 10;
/// … or at this many lines.
pub const BATCH_LINES: usize = 2048;

/// One input line as read: its text, or that it was too long.
pub struct RawLine {
    /// Index of the input file.
    pub file: usize,
    /// Line number (1-based).
    pub line: u64,
    /// The line without its `\n` (and one trailing `\r`); empty if too long.
    pub bytes: Vec<u8>,
    /// The line was longer than the limit.
    pub too_long: bool,
}

/// Reads the lines of the inputs in order, in batches.
pub struct Batches {
    files: Vec<PathBuf>,
    at: usize,
    reader: Option<LineReader>,
    line_no: u64,
    max_line: usize,
}

impl Batches {
    /// Lines of `files` (each opened when reached).
    pub fn new(files: &[PathBuf], max_line: usize) -> Batches {
        Batches {
            files: files.to_vec(),
            at: 0,
            reader: None,
            line_no: 0,
            max_line,
        }
    }

    /// The next batch; empty at the end.
    pub fn next_batch(&mut self) -> Result<Vec<RawLine>> {
        let mut out = Vec::new();
        let mut bytes = 0;
        while out.len() < BATCH_LINES && bytes < BATCH_BYTES {
            match self.next_line()? {
                Some(l) => {
                    bytes += l.bytes.len() + 64;
                    out.push(l);
                }
                None => break,
            }
        }
        Ok(out)
    }

    /// The next line of any input.
    pub fn next_line(&mut self) -> Result<Option<RawLine>> {
        loop {
            if self.reader.is_none() {
                let Some(path) = self.files.get(self.at) else {
                    return Ok(None);
                };
                self.reader = Some(open(path, self.max_line)?);
                self.line_no = 0;
            }
            let r = self.reader.as_mut().expect("opened");
            let mut buf = Vec::new();
            let kind = r.next_line(&mut buf)?;
            if kind == Line::End {
                self.reader = None;
                self.at += 1;
                continue;
            }
            self.line_no += 1;
            return Ok(Some(RawLine {
                file: self.at,
                line: self.line_no,
                bytes: buf,
                too_long: kind == Line::TooLong,
            }));
        }
    }
}

/// A line reader over one input (plain, `.gz`, `.zst` or `-`).
fn open(path: &Path, max_line: usize) -> Result<LineReader> {
    let found = corpus::discover(std::slice::from_ref(&path.to_path_buf()))?;
    let [f] = found.as_slice() else {
        return Err(Error::Input {
            path: path.to_path_buf(),
            detail: "a document input must be a file or -, not a directory".into(),
        });
    };
    Ok(LineReader::new(
        corpus::open_at(f, 0)?,
        f.path.clone(),
        0,
        u64::MAX,
        max_line,
    ))
}

/// One worker's tokenizer state.
pub struct Worker {
    tok: Tokenizer<'static>,
    dict: Dictionary,
}

enum Parsed {
    Bad(String),
    Doc {
        id: Value,
        sentences: Vec<Vec<WordId>>,
    },
}

impl Worker {
    /// A worker preparing text as a model built with `prep` expects.
    pub fn new(prep: Preparation) -> Worker {
        Worker {
            tok: Tokenizer::new(prep),
            dict: Dictionary::new(),
        }
    }

    /// Scores a batch with `main` (and `general`).
    pub fn score(
        &mut self,
        opts: &Options,
        main: &dyn DocModel,
        general: Option<&dyn DocModel>,
        batch: &[RawLine],
    ) -> Result<Vec<DocResult>> {
        if self.dict.heap_bytes() > 64 << 20 {
            self.dict = Dictionary::new();
        }
        let parsed: Vec<Parsed> = batch.iter().map(|l| self.parse(opts, l)).collect();
        let mut per_model: Vec<Vec<Prob>> = Vec::new();
        for m in std::iter::once(main).chain(general) {
            let n = m.order();
            let mut queries: Vec<&[WordId]> = Vec::new();
            for p in &parsed {
                if let Parsed::Doc { sentences, .. } = p {
                    for s in sentences {
                        for i in 1..s.len() {
                            queries.push(prediction(s, i, n));
                        }
                    }
                }
            }
            per_model.push(if queries.is_empty() {
                Vec::new()
            } else {
                m.prob_batch(&queries)?
            });
        }
        let mut at = 0;
        let mut out = Vec::with_capacity(batch.len());
        for (l, p) in batch.iter().zip(parsed) {
            let outcome = match p {
                Parsed::Bad(e) => Outcome::Bad(e),
                Parsed::Doc { id, sentences } => {
                    let k: usize = sentences.iter().map(|s| s.len() - 1).sum();
                    let tallies: Vec<Tally> = per_model
                        .iter()
                        .map(|probs| {
                            let mut t = Tally {
                                sentences: sentences.len() as u64,
                                ..Tally::default()
                            };
                            for p in &probs[at..at + k] {
                                t.add_prob(p);
                            }
                            t
                        })
                        .collect();
                    let words = opts.words.then(|| {
                        let toks = sentences.iter().flat_map(|s| s[1..].iter());
                        toks.enumerate()
                            .map(|(j, &id)| WordScore {
                                token: self.token(id),
                                log10: per_model.iter().map(|ps| ps[at + j].log10).collect(),
                                matched: per_model.iter().map(|ps| ps[at + j].matched()).collect(),
                            })
                            .collect()
                    });
                    at += k;
                    Outcome::Scored(DocScore {
                        id,
                        main: tallies[0],
                        general: tallies.get(1).copied(),
                        words,
                    })
                }
            };
            out.push(DocResult {
                file: l.file,
                line: l.line,
                outcome,
            });
        }
        Ok(out)
    }

    fn token(&self, id: WordId) -> String {
        if id == eos_id() {
            EOS.into()
        } else if id == unk_id() {
            UNK.into()
        } else {
            self.dict.get(id).unwrap_or(UNK).to_string()
        }
    }

    fn parse(&mut self, opts: &Options, l: &RawLine) -> Parsed {
        if l.too_long {
            return Parsed::Bad(format!(
                "the line is longer than {} bytes",
                opts.max_line_bytes
            ));
        }
        let doc = match read_document(&opts.format, &l.bytes) {
            Ok(d) => d,
            Err(e) => return Parsed::Bad(e.to_string()),
        };
        let id = doc.id.unwrap_or_else(|| Value::from(l.line));
        let text = doc.text;
        let (mut ids, mut ends) = (Vec::new(), Vec::new());
        if let Err(e) = self
            .tok
            .document(&text, &mut self.dict, &mut ids, &mut ends)
        {
            return Parsed::Bad(e.to_string());
        }
        let mut found = Vec::with_capacity(ends.len());
        let mut start = 0;
        for end in ends {
            found.push(ids[start..end].to_vec());
            start = end;
        }
        Parsed::Doc {
            id,
            sentences: found,
        }
    }
}
