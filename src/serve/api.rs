//! The answers of the service, as JSON, computed on a query thread from a
//! parsed and checked request ([`super::request`]). No HTTP here: [`super`] parses the body, hands the
//! request to a query thread and writes what comes back.
//!
//! The shapes are the command line's: `/prob` answers what `quern prob
//! --json` writes ([`ProbJson`]), `/next` lists its words as `quern next
//! --json` does ([`WordJson`]), and `/score` gives each text the record of
//! a scored document ([`crate::scoring::DocResult::record`]).

use serde::Serialize;
use serde_json::Value;

use super::pool::{Local, Source};
pub use super::request::{
    Fail, NextRequest, NgramsRequest, ProbRequest, ScoreRequest, MAX_NGRAMS, MAX_TOP,
};
use crate::error::Error;
use crate::query::{
    cursor, jnum, parse_cursor, prefix_page, query_ids, Method, Predictor, ProbJson, WordJson,
};
use crate::scoring::{Format, Options, RawLine, Record, Worker};
use crate::words::WordId;

impl From<Error> for Fail {
    /// A configuration error (an unknown method, a parameter the data do
    /// not allow, an order out of range) is the request's fault (400);
    /// anything else, reading the store or the model, is the server's (500).
    fn from(e: Error) -> Fail {
        Fail {
            status: if matches!(e, Error::Config(_)) {
                400
            } else {
                500
            },
            message: e.to_string(),
        }
    }
}

/// What a query thread computes: JSON text (its keys in the order the
/// shapes declare them), or why not.
pub type Answer = std::result::Result<String, Fail>;

fn to_text(v: &impl Serialize) -> Answer {
    serde_json::to_string(v).map_err(|e| Fail {
        status: 500,
        message: e.to_string(),
    })
}

/// The answer of `/next`, in the order written.
#[derive(Serialize)]
struct NextAnswer<'a> {
    context: String,
    prefix: &'a str,
    method: &'static str,
    words: Vec<WordJson<'a>>,
    rest: Value,
    words_scored: usize,
}

/// The answer of `/score`.
#[derive(Serialize)]
struct ScoreAnswer<'a> {
    method: &'static str,
    results: Vec<Record<'a>>,
}

/// One n-gram of `/ngrams`.
#[derive(Serialize)]
struct NgramAnswer {
    words: String,
    count: u64,
    continuation: Option<u64>,
}

/// The answer of `/ngrams`.
#[derive(Serialize)]
struct NgramsAnswer {
    order: usize,
    ngrams: Vec<NgramAnswer>,
    more: bool,
    next: Option<String>,
}

fn method(src: Source<'_>, name: &Option<String>) -> Result<Method, Fail> {
    match name {
        None => Ok(src.default_method()),
        Some(n) => Ok(n.parse::<Method>()?),
    }
}

/// The words of `ids`, space-separated (`#` and the hex id for a word
/// the store does not name).
fn words(p: &dyn Predictor, ids: &[WordId]) -> Result<String, Fail> {
    let mut out = Vec::with_capacity(ids.len());
    for &id in ids {
        out.push(match p.word(id)? {
            Some(w) => w,
            None => format!("#{id:016x}"),
        });
    }
    Ok(out.join(" "))
}

/// `/prob`: P(word | context), as `quern prob --json CONTEXT WORD` writes it.
pub fn prob(l: &mut dyn Local, q: ProbRequest) -> Answer {
    let m = method(l.source(), &q.method)?;
    let lent = l.get(m)?;
    let p = lent.pred();
    let line = format!("{} {}", q.context, q.word);
    let ids = query_ids(&line, &p.preparation());
    let (&w, ctx) = ids.split_last().expect("the word is one token");
    let r = p.prob(ctx, w)?;
    let text = line.split_whitespace().collect::<Vec<_>>().join(" ");
    to_text(&ProbJson::new(&text, p.method(), r.p, Some(r.matched())))
}

/// `/next`: the top words after the context that begin with the prefix.
pub fn next(l: &mut dyn Local, q: NextRequest) -> Answer {
    let m = method(l.source(), &q.method)?;
    let matching: crate::topk::PrefixMatch = match &q.matching {
        Some(h) => h.parse().map_err(|e| Fail::bad(format!("match: {e}")))?,
        None => Default::default(),
    };
    let lent = l.get(m)?;
    let p = lent.pred();
    let ids = query_ids(&q.context, &p.preparation());
    // As `quern next`: always through completion (an empty prefix is all
    // of V), which never suggests `<s>` or `<unk>`.
    let next = p.complete_matching(&ids, &q.prefix, matching, q.top)?;
    let names = next
        .items
        .iter()
        .map(|(w, _)| words(p, &[*w]))
        .collect::<Result<Vec<_>, _>>()?;
    let list: Vec<WordJson> = names
        .iter()
        .zip(&next.items)
        .map(|(w, (_, pr))| WordJson::new(w, p.method(), *pr))
        .collect();
    to_text(&NextAnswer {
        context: words(p, &next.context)?,
        prefix: &q.prefix,
        method: p.method().name(),
        words: list,
        rest: if p.method().is_probability() {
            jnum(next.rest)
        } else {
            Value::Null
        },
        words_scored: next.scored,
    })
}

/// `/score`: one scored-document record per text, in order.
pub fn score(l: &mut dyn Local, q: ScoreRequest) -> Answer {
    let m = method(l.source(), &q.method)?;
    let lent = l.get(m)?;
    let p = lent.pred();
    let batch: Vec<RawLine> = q
        .texts
        .into_iter()
        .enumerate()
        .map(|(i, t)| RawLine {
            file: 0,
            line: i as u64 + 1,
            bytes: t.into_bytes(),
            too_long: false,
        })
        .collect();
    let mut opts = Options::new(Format::Lines);
    opts.threads = 1;
    let results = Worker::new(p.preparation()).score(&opts, lent.doc(), None, &batch)?;
    let probability = p.method().is_probability();
    to_text(&ScoreAnswer {
        method: p.method().name(),
        results: results
            .iter()
            .map(|r| r.record(probability, None))
            .collect(),
    })
}

/// `/ngrams`: the stored n-grams that begin with some words, with their
/// counts (a store only: a frozen model keeps probabilities, not counts).
pub fn ngrams(l: &mut dyn Local, q: NgramsRequest) -> Answer {
    let Source::Store(store) = l.source() else {
        return Err(Fail::bad(
            "a frozen model keeps probabilities and back-off weights, not counts: \
             serve a store (--store) to list n-grams with their counts",
        ));
    };
    let after = match q.after.as_deref().map(parse_cursor) {
        None => None,
        Some(Some(ids)) => Some(ids),
        Some(None) => {
            return Err(Fail::bad(format!(
                "after: {:?} is not a cursor (the `next` of an answer of /ngrams)",
                q.after.unwrap_or_default()
            )))
        }
    };
    let prefix = query_ids(&q.words, &store.meta().settings.preparation);
    let order = q.order.unwrap_or(prefix.len() + 1);
    let page = prefix_page(store, &prefix, order, q.limit, after.as_deref())?;
    let mut list = Vec::with_capacity(page.items.len());
    for (k, c, cont) in &page.items {
        let mut ws = Vec::new();
        for &id in k.ids() {
            ws.push(store.word(id)?.unwrap_or_else(|| format!("#{id:016x}")));
        }
        list.push(NgramAnswer {
            words: ws.join(" "),
            count: *c,
            continuation: *cont,
        });
    }
    to_text(&NgramsAnswer {
        order,
        ngrams: list,
        more: page.next.is_some(),
        next: page.next.map(|k| cursor(k.ids())),
    })
}
