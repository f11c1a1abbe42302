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

/// A probability (or, for `stupid`, a score) as JSON, in the order written:
/// `words` (the query), `probability` (or `score`), `log10`, `matched`.
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
    /// How many words of the n-gram matched ([`super::Prob::matched`]):
    /// 0 for a word outside V.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub matched: Option<usize>,
}

impl<'a> ProbJson<'a> {
    /// `p` under `method`, with the matched length if given.
    pub fn new(words: &'a str, method: Method, p: f64, matched: Option<usize>) -> Self {
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
            matched,
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
        let j = ProbJson::new(word, method, p, None);
        WordJson {
            word,
            probability: j.probability,
            score: j.score,
            log10: j.log10,
        }
    }
}
