//! The JSON shapes of query answers that more than one front end writes
//! (`quern prob --json` and the service's `/prob`, `quern next --json` and
//! `/next`), defined once so that they stay the same.

use serde::Serialize;
use serde_json::{json, Value};

use super::Method;

/// A finite number as JSON, anything else as `null`.
pub fn jnum(x: f64) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

/// A probability (or, for `stupid`, a score) as JSON, in the order written.
#[derive(Serialize)]
pub struct ProbJson<'a> {
    /// The words of the query.
    pub words: &'a str,
    /// The probability.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probability: Option<Value>,
    /// The score of `stupid`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub score: Option<Value>,
    /// log10 of it (`null` for −∞).
    pub log10: Value,
    /// The order of the longest stored n-gram ending in the word.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub order: Option<usize>,
    /// The word is outside V.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub oov: Option<bool>,
}

impl<'a> ProbJson<'a> {
    /// `p` under `method`, with the order and OOV flag if given.
    pub fn new(
        words: &'a str,
        method: Method,
        p: f64,
        order: Option<usize>,
        oov: Option<bool>,
    ) -> Self {
        let (probability, score) = if method.is_probability() {
            (Some(jnum(p)), None)
        } else {
            (None, Some(jnum(p)))
        };
        ProbJson {
            words,
            probability,
            score,
            log10: jnum(p.log10()),
            order,
            oov,
        }
    }
}

/// One word of a list of next words: `word`, then `probability` (or
/// `score` for `stupid`) and `log10`.
#[derive(Serialize)]
pub struct WordJson<'a> {
    /// The word.
    pub word: &'a str,
    /// Its probability.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub probability: Option<Value>,
    /// Its score under `stupid`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub score: Option<Value>,
    /// log10 of it (`null` for −∞).
    pub log10: Value,
}

impl<'a> WordJson<'a> {
    /// `word` with `p` under `method`.
    pub fn new(word: &'a str, method: Method, p: f64) -> Self {
        let j = ProbJson::new(word, method, p, None, None);
        WordJson {
            word,
            probability: j.probability,
            score: j.score,
            log10: j.log10,
        }
    }
}
