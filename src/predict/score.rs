//! Scoring held-out text: the report of sentences, predictions, OOV
//! tokens, zero-probability predictions, log10 probability and perplexity.
//!
//! A sentence `w1 … wm` (tokenized exactly as at ingest) is scored as the
//! m + 1 predictions `w1 | <s>`, `w2 | <s> w1`, …, `</s> | … wm`, contexts
//! cut to N − 1 words, words outside V scored as `<unk>`. The perplexity is
//! 10^(−Σ log10 P / n) over all n predictions, and again over those whose
//! word is in V; it is infinite (`None`) where some prediction got 0.

use serde::Serialize;

use crate::error::Result;
use crate::tokenize::Tokenizer;
use crate::words::{Dictionary, WordId};

use super::{prediction, Predictor};

/// Totals of a scoring run.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct ScoreReport {
    /// Sentences scored.
    pub sentences: u64,
    /// Predictions (m + 1 per sentence).
    pub predictions: u64,
    /// Predictions whose word was outside V (scored as `<unk>`).
    pub oov: u64,
    /// Predictions that got probability 0.
    pub zero: u64,
    /// Predictions with probability 0 among those whose word is in V.
    pub zero_in_vocab: u64,
    /// Σ log10 P over the predictions with P > 0.
    pub log10_nonzero: f64,
    /// Σ log10 P over the in-vocabulary predictions with P > 0.
    pub log10_nonzero_in_vocab: f64,
}

impl ScoreReport {
    /// The total log10 probability; `None` (−∞) if some prediction got 0.
    pub fn log10_prob(&self) -> Option<f64> {
        (self.zero == 0).then_some(self.log10_nonzero)
    }

    /// 10^(−Σ log10 P / n) over every prediction; `None` if infinite.
    pub fn perplexity(&self) -> Option<f64> {
        perplexity(self.log10_nonzero, self.predictions, self.zero)
    }

    /// The same over the predictions whose word is in V.
    pub fn perplexity_in_vocab(&self) -> Option<f64> {
        perplexity(
            self.log10_nonzero_in_vocab,
            self.predictions - self.oov,
            self.zero_in_vocab,
        )
    }

    /// Adds another report.
    pub fn add(&mut self, o: &ScoreReport) {
        self.sentences += o.sentences;
        self.predictions += o.predictions;
        self.oov += o.oov;
        self.zero += o.zero;
        self.zero_in_vocab += o.zero_in_vocab;
        self.log10_nonzero += o.log10_nonzero;
        self.log10_nonzero_in_vocab += o.log10_nonzero_in_vocab;
    }
}

fn perplexity(log10: f64, n: u64, zero: u64) -> Option<f64> {
    if zero > 0 {
        None
    } else if n == 0 {
        Some(1.0)
    } else {
        Some(10f64.powf(-log10 / n as f64))
    }
}

/// The score of one sentence.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SentenceScore {
    /// The line number in its input (1-based).
    pub line: u64,
    /// The sentence's own totals.
    pub report: ScoreReport,
}

/// Scores text a line at a time, in batches through
/// [`Predictor::prob_batch`] (a store's estimator or a frozen model).
pub struct Scorer<'a> {
    est: &'a dyn Predictor,
    tok: Tokenizer<'static>,
    dict: Dictionary,
    batch: Vec<(u64, Vec<WordId>)>,
    batch_predictions: usize,
    report: ScoreReport,
    keep: bool,
    done: Vec<SentenceScore>,
}

const BATCH_PREDICTIONS: usize = 8192;

impl<'a> Scorer<'a> {
    /// A scorer; `per_sentence` keeps a [`SentenceScore`] for every sentence
    /// (collect them with [`Scorer::take_sentences`]).
    pub fn new(est: &'a dyn Predictor, per_sentence: bool) -> Self {
        Scorer {
            est,
            tok: Tokenizer::new(est.preparation()),
            dict: Dictionary::new(),
            batch: Vec::new(),
            batch_predictions: 0,
            report: ScoreReport::default(),
            keep: per_sentence,
            done: Vec::new(),
        }
    }

    /// Adds one line (without its line end; a trailing `\r` is dropped):
    /// its sentences as the store's preparation cuts them (the line itself
    /// by default); a sentence without tokens is none.
    pub fn add_line(&mut self, line_no: u64, line: &[u8]) -> Result<()> {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let (mut ids, mut ends) = (Vec::new(), Vec::new());
        self.tok
            .document(line, &mut self.dict, &mut ids, &mut ends)?;
        if self.dict.heap_bytes() > 64 << 20 {
            self.dict = Dictionary::new();
        }
        let mut start = 0;
        for end in ends {
            self.add_padded(line_no, ids[start..end].to_vec())?;
            start = end;
        }
        Ok(())
    }

    /// Adds one padded sentence (`<s> w1 … wm </s>`, as the tokenizer makes
    /// it); an empty one is ignored.
    pub fn add_padded(&mut self, line_no: u64, padded: Vec<WordId>) -> Result<()> {
        if padded.len() < 2 {
            return Ok(());
        }
        self.batch_predictions += padded.len() - 1;
        self.batch.push((line_no, padded));
        if self.batch_predictions >= BATCH_PREDICTIONS {
            self.flush()?;
        }
        Ok(())
    }

    /// Scores what is buffered.
    pub fn flush(&mut self) -> Result<()> {
        if self.batch.is_empty() {
            return Ok(());
        }
        let n = self.est.order();
        let mut queries: Vec<&[WordId]> = Vec::with_capacity(self.batch_predictions);
        for (_, s) in &self.batch {
            for i in 1..s.len() {
                queries.push(prediction(s, i, n));
            }
        }
        let probs = self.est.prob_batch(&queries)?;
        let mut at = 0;
        for (line, s) in &self.batch {
            let mut r = ScoreReport {
                sentences: 1,
                ..Default::default()
            };
            for p in &probs[at..at + s.len() - 1] {
                r.predictions += 1;
                if p.oov {
                    r.oov += 1;
                }
                if p.p > 0.0 {
                    r.log10_nonzero += p.log10;
                    if !p.oov {
                        r.log10_nonzero_in_vocab += p.log10;
                    }
                } else {
                    r.zero += 1;
                    if !p.oov {
                        r.zero_in_vocab += 1;
                    }
                }
            }
            at += s.len() - 1;
            self.report.add(&r);
            if self.keep {
                self.done.push(SentenceScore {
                    line: *line,
                    report: r,
                });
            }
        }
        self.batch.clear();
        self.batch_predictions = 0;
        Ok(())
    }

    /// The per-sentence scores collected so far (after a [`Scorer::flush`]).
    pub fn take_sentences(&mut self) -> Vec<SentenceScore> {
        std::mem::take(&mut self.done)
    }

    /// Flushes and returns the totals.
    pub fn finish(mut self) -> Result<ScoreReport> {
        self.flush()?;
        Ok(self.report)
    }

    /// The totals so far (of what has been flushed).
    pub fn report(&self) -> &ScoreReport {
        &self.report
    }
}

/// Scores padded sentences with `est` and returns the totals.
pub fn score_padded(est: &dyn Predictor, sentences: &[Vec<WordId>]) -> Result<ScoreReport> {
    let mut s = Scorer::new(est, false);
    for (i, p) in sentences.iter().enumerate() {
        s.add_padded(i as u64 + 1, p.clone())?;
    }
    s.finish()
}

/// Reads text files (one sentence a line, `-` for standard input) into
/// padded sentences, prepared as at ingest.
pub fn read_sentences(
    paths: &[std::path::PathBuf],
    prep: crate::tokenize::Preparation,
) -> Result<Vec<Vec<WordId>>> {
    use std::io::BufRead;
    let tok = Tokenizer::new(prep);
    let mut dict = Dictionary::new();
    let mut out = Vec::new();
    for p in paths {
        let reader: Box<dyn BufRead> = if p.as_os_str() == "-" {
            Box::new(std::io::BufReader::new(std::io::stdin()))
        } else {
            Box::new(std::io::BufReader::new(
                std::fs::File::open(p).map_err(|e| crate::Error::io(p, "open", e))?,
            ))
        };
        for line in reader.split(b'\n') {
            let line = line.map_err(|e| crate::Error::io(p, "read", e))?;
            let line = line.strip_suffix(b"\r").unwrap_or(&line);
            let (mut ids, mut ends) = (Vec::new(), Vec::new());
            tok.document(line, &mut dict, &mut ids, &mut ends)?;
            let mut start = 0;
            for end in ends {
                out.push(ids[start..end].to_vec());
                start = end;
            }
            if dict.heap_bytes() > 64 << 20 {
                dict = Dictionary::new();
            }
        }
    }
    Ok(out)
}
