//! `quern ngrams`: the stored n-grams that begin with given words, paged.

use std::io::Write;

use anyhow::bail;
use quern::query::{cursor, parse_cursor, prefix_page, query_ids};
use quern::words::WordId;

use super::prob::{estimator, log, num, open_store, store_words, ProbJson};
use crate::cli::args::NgramsArgs;

/// One n-gram of a page as JSON, in the order written.
#[derive(serde::Serialize)]
struct NgramJson {
    words: String,
    count: u64,
    continuation: Option<u64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    probability: Option<serde_json::Value>,
    #[serde(skip_serializing_if = "Option::is_none")]
    score: Option<serde_json::Value>,
    #[serde(skip_serializing_if = "Option::is_none")]
    log10: Option<serde_json::Value>,
}

/// A page as JSON.
#[derive(serde::Serialize)]
struct PageJson {
    order: usize,
    ngrams: Vec<NgramJson>,
    next: Option<String>,
}

/// `--pattern`: the n-grams that fit, by descending count (see
/// `quern::linguistics::pattern` for the cost of each kind of pattern).
fn run_pattern(store: &quern::store::Store, p: &str, a: &NgramsArgs) -> anyhow::Result<()> {
    use quern::linguistics::{freq::FreqOptions, pattern, Markers, Vocabulary};
    let pat = pattern::Pattern::parse(p, &store.meta().settings.preparation)?;
    let opts = FreqOptions {
        order: pat.len(),
        min_count: 1,
        min_documents: a.min_documents,
        limit: a.limit,
        markers: Markers::With,
    };
    let items = pattern::best_matches(store, &Vocabulary::of(store)?, &pat, &opts)?;
    let (header, rows) = super::list::freq_rows(items, store.has_documents());
    let header: &[&str] = if a.no_header { &[] } else { &header };
    let format = crate::cli::args::ListFormatArgs {
        json: a.json,
        csv: false,
    };
    super::list::write_list(&mut std::io::stdout().lock(), format, header, rows)
}

fn parse_after(s: &str) -> anyhow::Result<Vec<WordId>> {
    match parse_cursor(s) {
        Some(ids) => Ok(ids),
        None => bail!("--after {s:?}: not a cursor printed by quern ngrams"),
    }
}

pub fn run(a: NgramsArgs) -> anyhow::Result<()> {
    let store = open_store(&a.store)?;
    if let Some(p) = &a.pattern {
        return run_pattern(&store, p, &a);
    }
    let prefix = query_ids(&a.words.join(" "), &store.meta().settings.preparation);
    let order = a.order.unwrap_or(prefix.len() + 1);
    let after = a.after.as_deref().map(parse_after).transpose()?;
    if a.limit == 0 {
        bail!("--limit must be at least 1");
    }
    let page = prefix_page(&store, &prefix, order, a.limit, after.as_deref())?;
    let est = match &a.method {
        Some(m) => Some(estimator(&store, *m, &a.params)?),
        None => None,
    };
    let probs = match &est {
        Some(e) => {
            let qs: Vec<&[WordId]> = page.items.iter().map(|x| x.0.ids()).collect();
            Some(e.prob_batch(&qs)?)
        }
        None => None,
    };
    let mut out = std::io::stdout().lock();
    let next = page.next.map(|k| cursor(k.ids()));
    if a.json {
        let mut items = Vec::new();
        for (i, (k, c, cont)) in page.items.iter().enumerate() {
            let (probability, score, log10) = match (&probs, &est) {
                (Some(ps), Some(e)) => {
                    let j = ProbJson::new("", e.method(), ps[i].p, None);
                    (j.probability, j.score, Some(j.log10))
                }
                _ => (None, None, None),
            };
            items.push(NgramJson {
                words: store_words(&store, k.ids())?,
                count: *c,
                continuation: *cont,
                probability,
                score,
                log10,
            });
        }
        let v = PageJson {
            order,
            ngrams: items,
            next,
        };
        return super::print_json(&mut out, &v);
    }
    if !a.no_header {
        write!(out, "ngram\tcount\tcontinuation")?;
        if let Some(e) = &est {
            let what = if e.method().is_probability() {
                "probability"
            } else {
                "score"
            };
            write!(out, "\t{what}\tlog10")?;
        }
        writeln!(out)?;
    }
    for (i, (k, c, cont)) in page.items.iter().enumerate() {
        let cont = cont.map_or("-".to_string(), |x| x.to_string());
        write!(out, "{}\t{c}\t{cont}", store_words(&store, k.ids())?)?;
        if let Some(ps) = &probs {
            write!(out, "\t{}\t{}", num(ps[i].p), log(ps[i].log10))?;
        }
        writeln!(out)?;
    }
    match next {
        Some(c) => eprintln!("more: --after {c}"),
        None => eprintln!("(end)"),
    }
    Ok(())
}
