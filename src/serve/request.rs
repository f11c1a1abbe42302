//! The requests of the service: their JSON shapes, parsed from a body and
//! checked against the per-request limits before any query runs. No HTTP
//! and no store here, so that the fuzz target can feed bodies straight in
//! (the `serve-requests` feature builds this module alone).

use serde::de::DeserializeOwned;
use serde::Deserialize;

/// Most words `/next` lists.
pub const MAX_TOP: usize = 1000;
/// Most n-grams `/ngrams` lists.
pub const MAX_NGRAMS: usize = 1000;

/// A request refused, or a query that failed: the HTTP status and the
/// message of `{"error": ...}`.
#[derive(Debug)]
pub struct Fail {
    /// HTTP status (4xx for the client's mistakes, 5xx for ours).
    pub status: u16,
    /// What went wrong.
    pub message: String,
}

impl Fail {
    /// A bad request (400).
    pub fn bad(message: impl Into<String>) -> Fail {
        Fail {
            status: 400,
            message: message.into(),
        }
    }
}

/// The work one request may ask for.
#[derive(Clone, Copy, Debug)]
pub struct Limits {
    /// Texts in one `/score` request at most (more: 413).
    pub max_texts: usize,
}

impl Default for Limits {
    /// 1,000 texts a `/score` request.
    fn default() -> Limits {
        Limits { max_texts: 1000 }
    }
}

/// A request body's shape, with the checks that need no source.
pub trait Checked: DeserializeOwned {
    /// `Ok` if the request is within `limits` and well formed.
    fn check(&self, limits: &Limits) -> Result<(), Fail>;
}

/// Parses a JSON body into `Q` and checks it: 400 for a body that is not
/// the shape (with serde's message), 400 or 413 for a request over a limit.
pub fn parse<Q: Checked>(body: &[u8], limits: &Limits) -> Result<Q, Fail> {
    let q: Q =
        serde_json::from_slice(body).map_err(|e| Fail::bad(format!("bad request body: {e}")))?;
    q.check(limits)?;
    Ok(q)
}

/// A parsed request of any endpoint that takes a body.
pub enum Parsed {
    /// `POST /prob`.
    Prob(ProbRequest),
    /// `POST /next`.
    Next(NextRequest),
    /// `POST /score`.
    Score(ScoreRequest),
    /// `POST /ngrams`.
    Ngrams(NgramsRequest),
}

/// Parses the body of `POST path` (`/prob`, `/next`, `/score`, `/ngrams`);
/// 404 for another path.
pub fn parse_for(path: &str, body: &[u8], limits: &Limits) -> Result<Parsed, Fail> {
    Ok(match path {
        "/prob" => Parsed::Prob(parse(body, limits)?),
        "/next" => Parsed::Next(parse(body, limits)?),
        "/score" => Parsed::Score(parse(body, limits)?),
        "/ngrams" => Parsed::Ngrams(parse(body, limits)?),
        _ => {
            return Err(Fail {
                status: 404,
                message: format!("no such endpoint: POST {path}"),
            })
        }
    })
}

/// `POST /prob`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProbRequest {
    /// The words before (may be empty).
    #[serde(default)]
    pub context: String,
    /// The word.
    pub word: String,
    /// The method (a store only; default `mkn`).
    #[serde(default)]
    pub method: Option<String>,
}

impl Checked for ProbRequest {
    fn check(&self, _: &Limits) -> Result<(), Fail> {
        if self.word.split_whitespace().count() != 1 {
            return Err(Fail::bad(format!(
                "word: {:?} is not one word (the words before it go in context)",
                self.word
            )));
        }
        Ok(())
    }
}

/// `POST /next`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NextRequest {
    /// The words before (may be empty).
    #[serde(default)]
    pub context: String,
    /// The start of the word being typed (may be empty).
    #[serde(default)]
    pub prefix: String,
    /// How many words (default 10, at most [`MAX_TOP`]).
    #[serde(default = "ten")]
    pub top: usize,
    /// The method (a store only; default `mkn`).
    #[serde(default)]
    pub method: Option<String>,
    /// How the prefix matches: `exact` (default) or `folded` (regardless
    /// of case and accents).
    #[serde(default, rename = "match")]
    pub matching: Option<String>,
}

fn ten() -> usize {
    10
}

impl Checked for NextRequest {
    fn check(&self, _: &Limits) -> Result<(), Fail> {
        if self.top == 0 || self.top > MAX_TOP {
            return Err(Fail::bad(format!(
                "top: {} is not from 1 to {MAX_TOP}",
                self.top
            )));
        }
        if self.prefix.chars().any(char::is_whitespace) {
            return Err(Fail::bad(format!(
                "prefix: {:?} is not the start of one word (no spaces)",
                self.prefix
            )));
        }
        Ok(())
    }
}

/// `POST /score`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScoreRequest {
    /// The texts: each a document, its lines the sentences.
    pub texts: Vec<String>,
    /// The method (a store only; default `mkn`).
    #[serde(default)]
    pub method: Option<String>,
}

impl Checked for ScoreRequest {
    fn check(&self, limits: &Limits) -> Result<(), Fail> {
        if self.texts.len() > limits.max_texts {
            return Err(Fail {
                status: 413,
                message: format!(
                    "texts: {} texts, more than the {} a request may hold (--max-texts); \
                     send them in several requests",
                    self.texts.len(),
                    limits.max_texts
                ),
            });
        }
        Ok(())
    }
}

/// `POST /ngrams` (a store only).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NgramsRequest {
    /// The words the n-grams begin with (may be empty).
    #[serde(default)]
    pub words: String,
    /// The order (default: one more than the words given).
    #[serde(default)]
    pub order: Option<usize>,
    /// How many (default 20, at most [`MAX_NGRAMS`]).
    #[serde(default = "twenty")]
    pub limit: usize,
    /// The cursor of the page before (its answer's `next`, as `quern
    /// ngrams --after` takes it): this page starts after that n-gram.
    #[serde(default)]
    pub after: Option<String>,
}

fn twenty() -> usize {
    20
}

impl Checked for NgramsRequest {
    fn check(&self, _: &Limits) -> Result<(), Fail> {
        if self.limit == 0 || self.limit > MAX_NGRAMS {
            return Err(Fail::bad(format!(
                "limit: {} is not from 1 to {MAX_NGRAMS}",
                self.limit
            )));
        }
        Ok(())
    }
}

/// `a == b` in a time that depends on their lengths only, not on where
/// they first differ.
pub fn same_secret(a: &[u8], b: &[u8]) -> bool {
    let mut diff = (a.len() ^ b.len()) as u64;
    for i in 0..a.len().max(b.len()) {
        let x = a.get(i).copied().unwrap_or(0);
        let y = b.get(i).copied().unwrap_or(0);
        diff |= u64::from(std::hint::black_box(x ^ y));
    }
    std::hint::black_box(diff) == 0
}
