//! Scoring documents: one result per input line, in input order, on many
//! threads, with the distribution of the scores and a split into kept and
//! dropped documents. The job of filtering a web crawl by language-model
//! score.
//!
//! # Input
//!
//! Each input line is one document: a JSON object whose text field holds
//! the text ([`Format::JsonLines`]), or the line itself ([`Format::Lines`]).
//! Inputs are plain, `.gz` or `.zst` files, or `-` (standard input), read
//! as [`crate::corpus`] reads them (the document reader is
//! [`crate::corpus::read_document`], the ingest's too). A document's text
//! is prepared as the model's store was at ingest
//! ([`crate::tokenize::Preparation`]: by default its sentences are its
//! lines, split at `\n`, one trailing `\r` dropped); a sentence without
//! tokens is none.
//!
//! A line that is not a JSON object, lacks the text field, or whose field
//! is not a string, or a line longer than the limit, is a *bad line*: its
//! result carries its line number and the error, and scoring goes on.
//!
//! # Scores
//!
//! A sentence `w1 … wm` is the m + 1 predictions of [`crate::predict::score`].
//! A document's perplexity is 10^(−L / n) over its n predictions, L being
//! their total log10 probability: the perplexity of the concatenation of
//! its sentences. It is infinite if some prediction got probability 0, and
//! undefined for a document without tokens (an *empty* document).
//!
//! With a second, general model ([`Models::general`]) the score of a
//! document is the cross-entropy difference of Moore & Lewis (2010),
//! "Intelligent selection of language model training data": H_I − H_G,
//! where H = −L / n is the per-token cross-entropy (log10) under the
//! in-domain model I and the general model G. Lower means more like the
//! in-domain text; it equals the general model's per-token log10
//! probability minus the in-domain one's.
//!
//! # Parallel, ordered, bounded
//!
//! [`score_inputs`] reads lines on the calling thread and hands batches of
//! them to worker threads ([`crate::pool::with_workers`]), each with its
//! own model (a store's estimator is not shared between threads); results
//! come back to the calling thread and are handed to the caller's sink in
//! input order. At most a fixed number of batches is in flight, so memory
//! is bounded whatever the input size. The batches do not depend on the
//! number of threads, so neither do the results.
//!
//! [`score_texts`] does the same for documents held in memory (a
//! program's strings, as the Python module's `score_many` passes them), in
//! the same batches; [`score_text`] scores one on the calling thread.

pub mod dist;
#[cfg(feature = "plot")]
pub mod plot;
mod read;
mod record;
mod run;
pub mod split;
mod texts;

use std::path::PathBuf;

use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

use crate::error::Result;
use crate::predict::{Predictor, Prob};
use crate::tokenize::Preparation;
use crate::words::WordId;

pub use crate::corpus::docs::Format;
pub use dist::Distribution;
pub use read::{RawLine, Worker};
pub use record::{
    num, DocResult, DocScore, GeneralPredictionJson, Outcome, PredictionJson, Record, Tally,
    WordScore, OUTSIDE_VOCABULARY, PROBABILITY_ZERO,
};
pub use run::score_inputs;
pub use texts::{score_text, score_texts};

/// What scores a sentence: any [`Predictor`] (the store's estimator, a
/// frozen model, or a reference to one shared by the worker threads).
pub trait DocModel {
    /// Highest order N.
    fn order(&self) -> usize;
    /// How text is prepared (as the store's was at ingest).
    fn preparation(&self) -> Preparation;
    /// Whether its scores are probabilities (false for `stupid`).
    fn is_probability(&self) -> bool;
    /// The probabilities of many predictions, each query the context
    /// followed by the word; consecutive queries are running text (a frozen
    /// model carries the matched context from one to the next).
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>>;
}

impl<P: Predictor + ?Sized> DocModel for P {
    fn order(&self) -> usize {
        Predictor::order(self)
    }
    fn preparation(&self) -> Preparation {
        Predictor::preparation(self)
    }
    fn is_probability(&self) -> bool {
        Predictor::method(self).is_probability()
    }
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        Predictor::prob_batch(self, queries)
    }
}

/// A boxed model, as a worker thread gets it.
pub type BoxedModel<'a> = Box<dyn DocModel + 'a>;

/// Makes one model for the calling thread.
pub type MakeModel<'a> = dyn Fn() -> Result<BoxedModel<'a>> + Sync + 'a;

/// The model(s) to score with: each worker thread calls the makers once.
pub struct Models<'a> {
    /// The model (the in-domain one with `general`).
    pub main: &'a MakeModel<'a>,
    /// The general model of the cross-entropy difference, if any.
    pub general: Option<&'a MakeModel<'a>>,
}

impl<'a> Models<'a> {
    /// One worker's models: the main one and the general one, if any,
    /// refused when the two tokenize differently.
    pub fn make(&self) -> Result<(BoxedModel<'a>, Option<BoxedModel<'a>>)> {
        let main = (self.main)()?;
        let general = self.general.map(|g| g()).transpose()?;
        if let Some(g) = &general {
            if g.preparation() != main.preparation() {
                return Err(crate::error::Error::Config(format!(
                    "the two models prepare text differently ({}; {})",
                    main.preparation().describe(),
                    g.preparation().describe()
                )));
            }
        }
        Ok((main, general))
    }
}

/// Options of a scoring run.
#[derive(Clone, Debug)]
pub struct Options {
    /// How lines hold documents.
    pub format: Format,
    /// Worker threads (at least 1).
    pub threads: usize,
    /// Keep each prediction's word, log10 probability and matched length
    /// ([`DocScore::words`]).
    pub words: bool,
    /// A longer input line is a bad line (read past, never held).
    pub max_line_bytes: usize,
}

impl Options {
    /// JSON lines with fields `text` and `id`, every core, no words, lines
    /// up to 64 MiB.
    pub fn new(format: Format) -> Options {
        Options {
            format,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            words: false,
            max_line_bytes: 64 << 20,
        }
    }
}

/// The totals of a run.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct Summary {
    /// The inputs, as given.
    pub inputs: Vec<PathBuf>,
    /// Input lines read.
    pub lines: u64,
    /// Documents scored (lines that were not bad).
    pub documents: u64,
    /// Bad lines.
    pub bad: u64,
    /// Documents without a token (no score).
    pub empty: u64,
    /// Documents with an infinite score (some prediction got probability
    /// 0; with two models, under either).
    pub infinite: u64,
    /// Totals of every document under the main model.
    pub main: Tally,
    /// The same under the general model.
    pub general: Option<Tally>,
    /// The distribution of the documents' finite scores.
    pub distribution: Distribution,
}

impl Summary {
    fn new(inputs: &[PathBuf], two_models: bool) -> Summary {
        Summary {
            inputs: inputs.to_vec(),
            lines: 0,
            documents: 0,
            bad: 0,
            empty: 0,
            infinite: 0,
            main: Tally::default(),
            general: two_models.then(Tally::default),
            distribution: Distribution::new(if two_models {
                dist::Scale::Linear
            } else {
                dist::Scale::Log10
            }),
        }
    }

    /// Counts one result.
    pub fn add(&mut self, r: &DocResult) {
        self.lines += 1;
        match &r.outcome {
            Outcome::Bad(_) => self.bad += 1,
            Outcome::Scored(d) => {
                self.documents += 1;
                self.main.add(&d.main);
                if let (Some(t), Some(g)) = (&mut self.general, &d.general) {
                    t.add(g);
                }
                if d.main.predictions == 0 {
                    self.empty += 1;
                } else {
                    match d.value() {
                        Some(v) => self.distribution.add(v),
                        None => self.infinite += 1,
                    }
                }
            }
        }
    }
}

impl Summary {
    /// The summary as one JSON object: counts, the main model's (and the
    /// general model's) totals over every document, and the distribution
    /// (`score` names what it is of: `perplexity` or `ce_difference`) with
    /// its percentiles keyed `"p1"` … `"p99"`, whether they are exact, and
    /// the histogram (`bin_width`, `bins` as `[index, count]` pairs, bin i
    /// holding x in [i·w, (i+1)·w), x = log10 of a perplexity or the
    /// difference itself) from which summaries of several runs merge, as
    /// do `totals` (and `general_totals`): the [`Tally`] fields.
    pub fn to_json(&self, probability: bool) -> Value {
        let d = &self.distribution;
        let ps = d.percentiles(&dist::PERCENTILES);
        let mut pj = serde_json::Map::new();
        for (p, v) in dist::PERCENTILES.iter().zip(&ps) {
            pj.insert(format!("p{p}"), num(Some(*v)));
        }
        let mut v = json!({
            "inputs": self.inputs,
            "lines": self.lines,
            "documents": self.documents,
            "bad_lines": self.bad,
            "empty_documents": self.empty,
            "infinite_scores": self.infinite,
            "sentences": self.main.sentences,
            "predictions": self.main.predictions,
            "model": self.main.to_json(probability),
            "totals": self.main,
            "score": if self.general.is_some() { "ce_difference" } else { "perplexity" },
            "distribution": {
                "count": d.count,
                "mean": num(d.mean()),
                "min": num(Some(d.min)),
                "max": num(Some(d.max)),
                "percentiles": pj,
                "exact": d.is_exact(),
                "scale": d.scale,
                "bin_width": dist::BIN_WIDTH,
                "bins": d.bins.iter().map(|(k, c)| json!([k, c])).collect::<Vec<_>>(),
            },
        });
        if let Some(g) = &self.general {
            v["general"] = g.to_json(probability);
            v["general_totals"] = json!(g);
        }
        v
    }
}
