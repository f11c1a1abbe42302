//! What scoring documents gives: the totals of a document ([`Tally`]),
//! its per-prediction scores, and the record `quern score --jsonl`, the
//! service and the Python module write for it.

use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

use crate::predict::Prob;

/// The name of the count of predictions outside V, in every output.
pub const OUTSIDE_VOCABULARY: &str = "outside_vocabulary";
/// The name of the count of predictions of probability 0, in every output.
pub const PROBABILITY_ZERO: &str = "probability_zero";

/// The totals of some predictions under one model.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Tally {
    /// Sentences (lines of text with at least one token).
    pub sentences: u64,
    /// Predictions (tokens and one `</s>` per sentence).
    pub predictions: u64,
    /// Predictions whose word was outside V (scored as `<unk>`). (Serde
    /// needs the name as a literal: it is [`OUTSIDE_VOCABULARY`].)
    #[serde(rename = "outside_vocabulary")]
    pub oov: u64,
    /// Predictions that got probability 0 ([`PROBABILITY_ZERO`]).
    #[serde(rename = "probability_zero")]
    pub zero: u64,
    /// Σ log10 P over the predictions with P > 0.
    #[serde(rename = "log10_sum_nonzero")]
    pub log10_nonzero: f64,
}

impl Tally {
    /// The total log10 probability; `None` (−∞) if some prediction got 0.
    pub fn log10_prob(&self) -> Option<f64> {
        (self.zero == 0).then_some(self.log10_nonzero)
    }

    /// The per-token cross-entropy −L / n (log10); `None` without
    /// predictions, +∞ if some prediction got 0.
    pub fn cross_entropy(&self) -> Option<f64> {
        if self.predictions == 0 {
            None
        } else if self.zero > 0 {
            Some(f64::INFINITY)
        } else {
            Some(-self.log10_nonzero / self.predictions as f64)
        }
    }

    /// 10^(−L / n); `None` without predictions, +∞ if some prediction got 0.
    pub fn perplexity(&self) -> Option<f64> {
        self.cross_entropy().map(|h| 10f64.powf(h))
    }

    /// Adds another tally.
    pub fn add(&mut self, o: &Tally) {
        self.sentences += o.sentences;
        self.predictions += o.predictions;
        self.oov += o.oov;
        self.zero += o.zero;
        self.log10_nonzero += o.log10_nonzero;
    }

    pub(super) fn add_prob(&mut self, p: &Prob) {
        self.predictions += 1;
        self.oov += p.oov as u64;
        if p.p > 0.0 {
            self.log10_nonzero += p.log10;
        } else {
            self.zero += 1;
        }
    }

    /// As JSON: `outside_vocabulary`, `probability_zero`, `log10_sum` and
    /// `perplexity` (`null` where −∞, infinite or undefined, and the
    /// perplexity too when the scores are not probabilities).
    pub fn to_json(&self, probability: bool) -> Value {
        json!({
            OUTSIDE_VOCABULARY: self.oov,
            PROBABILITY_ZERO: self.zero,
            "log10_sum": num(self.log10_prob()),
            "perplexity": if probability { num(self.perplexity()) } else { Value::Null },
        })
    }
}

/// A finite number as JSON, anything else as `null`.
pub fn num(x: Option<f64>) -> Value {
    match x {
        Some(v) if v.is_finite() => json!(v),
        _ => Value::Null,
    }
}

/// One prediction of a document, for [`Options::words`].
#[derive(Clone, Debug, PartialEq)]
pub struct WordScore {
    /// The token as tokenized (`</s>` for a sentence's end, `<unk>` for a
    /// token spelled like a marker).
    pub token: String,
    /// Its log10 probability (−∞ for 0) under each model: the main one,
    /// then the general one.
    pub log10: Vec<f64>,
    /// How many words of the n-gram matched under each model
    /// ([`crate::predict::Prob::matched`]; 0: the word is outside V).
    pub matched: Vec<usize>,
}

/// One prediction of a scored document as JSON, in the order written:
/// `word`, `log10` (`null` for −∞), `matched` (0: outside V), and with a
/// general model `general`, its `log10` and `matched`.
#[derive(Debug, Serialize)]
pub struct PredictionJson<'r> {
    /// The token.
    pub word: &'r str,
    /// Its log10 probability under the main model.
    pub log10: Value,
    /// How many words of the n-gram matched under the main model.
    pub matched: usize,
    /// The same under the general model.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub general: Option<GeneralPredictionJson>,
}

/// A prediction under the general model: `log10` and `matched`.
#[derive(Debug, Serialize)]
pub struct GeneralPredictionJson {
    /// Its log10 probability.
    pub log10: Value,
    /// How many words of the n-gram matched.
    pub matched: usize,
}

/// The score of one document.
#[derive(Clone, Debug, PartialEq)]
pub struct DocScore {
    /// The id (the id field's value, `null` if absent; the line number for
    /// [`Format::Lines`]).
    pub id: Value,
    /// Totals under the main model.
    pub main: Tally,
    /// Totals under the general model, if any.
    pub general: Option<Tally>,
    /// Per prediction, with [`Options::words`].
    pub words: Option<Vec<WordScore>>,
}

impl DocScore {
    /// The score the distribution and the cut use: the perplexity, or with
    /// a general model the cross-entropy difference H_I − H_G. `None` for
    /// an empty document or an infinite score.
    pub fn value(&self) -> Option<f64> {
        let v = match &self.general {
            None => self.main.perplexity()?,
            Some(g) => self.main.cross_entropy()? - g.cross_entropy()?,
        };
        v.is_finite().then_some(v)
    }
}

/// What became of one input line.
#[derive(Clone, Debug, PartialEq)]
pub enum Outcome {
    /// Scored.
    Scored(DocScore),
    /// A bad line: why.
    Bad(String),
}

/// One input line's result, handed to the sink in input order.
#[derive(Clone, Debug, PartialEq)]
pub struct DocResult {
    /// Index of the input file (in the list given).
    pub file: usize,
    /// Line number in that file (1-based).
    pub line: u64,
    /// The score, or why the line is bad.
    pub outcome: Outcome,
}

impl DocResult {
    /// The score for the distribution and the cut ([`DocScore::value`]);
    /// `None` for a bad line.
    pub fn value(&self) -> Option<f64> {
        match &self.outcome {
            Outcome::Scored(d) => d.value(),
            Outcome::Bad(_) => None,
        }
    }

    /// The result as one JSON object, keys in this order: `id`, `line`,
    /// `file` (the input's path, when `file` is given), then `sentences`,
    /// `predictions`, and the main model's `outside_vocabulary`,
    /// `probability_zero`, `log10_sum`, `perplexity`; with a general model
    /// `general` (the same four) and `ce_difference`; with words `words`,
    /// one [`PredictionJson`] per prediction. A bad line has `id` `null`,
    /// `line` and `error`.
    pub fn record<'r>(&'r self, probability: bool, file: Option<&'r str>) -> Record<'r> {
        let mut r = Record {
            id: &NULL,
            line: self.line,
            file,
            sentences: None,
            predictions: None,
            outside_vocabulary: None,
            probability_zero: None,
            log10_sum: None,
            perplexity: None,
            general: None,
            ce_difference: None,
            words: None,
            error: None,
        };
        match &self.outcome {
            Outcome::Bad(e) => r.error = Some(e),
            Outcome::Scored(d) => {
                let m = &d.main;
                r.id = &d.id;
                r.sentences = Some(m.sentences);
                r.predictions = Some(m.predictions);
                r.outside_vocabulary = Some(m.oov);
                r.probability_zero = Some(m.zero);
                r.log10_sum = Some(num(m.log10_prob()));
                r.perplexity = Some(if probability {
                    num(m.perplexity())
                } else {
                    Value::Null
                });
                if let Some(g) = &d.general {
                    r.general = Some(g.to_json(probability));
                    r.ce_difference = Some(num(d.value()));
                }
                if let Some(ws) = &d.words {
                    r.words = Some(
                        ws.iter()
                            .map(|w| PredictionJson {
                                word: &w.token,
                                log10: num(Some(w.log10[0])),
                                matched: w.matched[0],
                                general: (w.log10.len() > 1).then(|| GeneralPredictionJson {
                                    log10: num(Some(w.log10[1])),
                                    matched: w.matched[1],
                                }),
                            })
                            .collect(),
                    );
                }
            }
        }
        r
    }
}

static NULL: Value = Value::Null;

/// One line of output: a [`DocResult`] ready to serialize, its keys in a
/// fixed order (see [`DocResult::record`]).
#[derive(Debug, Serialize)]
pub struct Record<'r> {
    /// The id.
    pub id: &'r Value,
    /// The line number.
    pub line: u64,
    /// The input's path.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub file: Option<&'r str>,
    /// Sentences.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sentences: Option<u64>,
    /// Predictions.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub predictions: Option<u64>,
    /// Predictions outside V.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub outside_vocabulary: Option<u64>,
    /// Predictions with probability 0.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probability_zero: Option<u64>,
    /// Total log10 probability (`null` for −∞).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub log10_sum: Option<Value>,
    /// Perplexity (`null` if infinite, undefined or not a probability).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub perplexity: Option<Value>,
    /// The general model's totals.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub general: Option<Value>,
    /// The cross-entropy difference.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ce_difference: Option<Value>,
    /// Per prediction.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub words: Option<Vec<PredictionJson<'r>>>,
    /// Why the line is bad.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error: Option<&'r str>,
}
