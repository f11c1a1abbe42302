//! `quern prob`: the probability of the last word given the words before
//! it; with no words, one query a line from standard input. Also the
//! helpers the other query commands share.

use std::io::{BufRead, BufWriter, Write};

use anyhow::{bail, Context};
use quern::blend::{Blend, Opened};
use quern::model::{Model, Residence};
use quern::query::{query_ids, Estimator, Method, Params, ParamsFile, Predictor, Prob};
use quern::store::Store;
use quern::words::WordId;

use crate::cli::args::{ParamArgs, ProbArgs, QuerySourceArgs, QueryStoreArgs};

/// Opens the store with a block cache of three quarters of `--memory`.
pub fn open_store(a: &QueryStoreArgs) -> anyhow::Result<Store> {
    Ok(Store::open_with_cache(&a.store, a.memory.block_cache())?)
}

/// What `prob`, `next` and `score` read: a store or a frozen model.
pub enum Source {
    /// `--store`.
    Store(Store),
    /// `--model`.
    Model(Model),
    /// `--blend`: the blend file with its parts open.
    Blend(Opened),
}

/// Opens `--store` (with a block cache of three quarters of `--memory`),
/// `--model` or `--blend` (its stores sharing that cache).
pub fn open_source(a: &QuerySourceArgs) -> anyhow::Result<Source> {
    if a.load_model && a.model.is_none() && a.blend.is_none() {
        bail!("--load-model reads a model file into memory: it goes with --model or --blend, not --store");
    }
    let residence = if a.load_model {
        Residence::Loaded
    } else {
        Residence::Mapped
    };
    if let Some(m) = &a.model {
        return Ok(Source::Model(Model::open_as(m, residence)?));
    }
    if let Some(b) = &a.blend {
        return Ok(Source::Blend(Opened::open(
            b,
            a.memory.block_cache(),
            residence,
        )?));
    }
    let dir = a.store.as_ref().expect("clap requires --store or --model");
    Ok(Source::Store(Store::open_with_cache(
        dir,
        a.memory.block_cache(),
    )?))
}

/// The predictor of a query command: the method over the store, or the
/// model itself.
pub enum Pred<'s> {
    /// A method over a store.
    Est(Box<Estimator<'s>>),
    /// A frozen model.
    Model(&'s Model),
    /// A blend of stores and models.
    Blend(Box<Blend<'s>>),
}

impl Pred<'_> {
    /// As a [`Predictor`].
    pub fn get(&self) -> &dyn Predictor {
        match self {
            Pred::Est(e) => e.as_ref(),
            Pred::Model(m) => *m,
            Pred::Blend(b) => b.as_ref(),
        }
    }
}

/// The method (and parameters) over a store, or the frozen model (whose
/// method, if `--method` names one, must be that). Prints the notes.
pub fn predictor<'s>(
    src: &'s Source,
    method: Option<Method>,
    a: &ParamArgs,
) -> anyhow::Result<Pred<'s>> {
    match src {
        Source::Store(store) => Ok(Pred::Est(Box::new(estimator(
            store,
            method.unwrap_or(Method::Mkn),
            a,
        )?))),
        Source::Model(m) => {
            if let Some(want) = method {
                if want != m.method() {
                    bail!(
                        "{}: the model was frozen with {}, not {want}",
                        m.path().display(),
                        m.method()
                    );
                }
            }
            for n in m.notes() {
                eprintln!("quern: note: {n}");
            }
            if !m.meta().probabilities {
                eprintln!(
                    "quern: note: stupid back-off gives scores, not probabilities: they do not sum to 1"
                );
            }
            Ok(Pred::Model(m))
        }
        Source::Blend(o) => {
            if let Some(want) = method.filter(|&m| m != Method::Blend) {
                bail!(
                    "{}: a blend mixes its parts with their own methods; leave out --method {want}",
                    o.file.display()
                );
            }
            let b = o.blend()?;
            for n in b.notes() {
                eprintln!("quern: note: {n}");
            }
            Ok(Pred::Blend(Box::new(b)))
        }
    }
}

/// `--tuned FILE` (if given), then the flags on top.
pub fn params(method: Method, a: &ParamArgs) -> anyhow::Result<Params> {
    let mut p = Params::default();
    if let Some(f) = &a.tuned {
        let pf = ParamsFile::load(f)?;
        if pf.method != method {
            bail!(
                "{}: the parameters were fitted for {}, not {method}",
                f.display(),
                pf.method
            );
        }
        p = pf.params;
    }
    if let Some(k) = a.k {
        p.k = k;
    }
    if let Some(x) = a.alpha {
        p.alpha = x;
    }
    if let Some(l) = &a.lambdas {
        p.lambdas = Some(l.clone());
        p.bucket_lambdas = None;
    }
    if let Some(k) = a.katz_k {
        p.katz_k = k;
    }
    if let Some(d) = &a.discounts {
        p.discounts = d.clone();
    }
    Ok(p)
}

/// Builds the estimator and prints its notes (discounts replaced, Katz's
/// K lowered) to standard error.
pub fn estimator<'s>(store: &'s Store, m: Method, a: &ParamArgs) -> anyhow::Result<Estimator<'s>> {
    let est = Estimator::new(store, m, params(m, a)?)?;
    for n in est.notes() {
        eprintln!("quern: note: {n}");
    }
    if m == Method::Stupid {
        eprintln!(
            "quern: note: stupid back-off gives scores, not probabilities: they do not sum to 1"
        );
    }
    Ok(est)
}

/// The words of `ids` in a store, space-separated.
pub fn store_words(store: &Store, ids: &[WordId]) -> anyhow::Result<String> {
    join_words(|id| store.word(id), ids)
}

/// The words of `ids`, space-separated.
pub fn words(p: &dyn Predictor, ids: &[WordId]) -> anyhow::Result<String> {
    join_words(|id| p.word(id), ids)
}

fn join_words(
    word: impl Fn(WordId) -> quern::Result<Option<String>>,
    ids: &[WordId],
) -> anyhow::Result<String> {
    let mut out = String::new();
    for (i, &id) in ids.iter().enumerate() {
        if i > 0 {
            out.push(' ');
        }
        match word(id)? {
            Some(w) => out.push_str(&w),
            None => out.push_str(&format!("#{id:016x}")),
        }
    }
    Ok(out)
}

/// A number for TSV and tables: `-inf` for −∞.
pub fn num(x: f64) -> String {
    if x == f64::NEG_INFINITY {
        "-inf".into()
    } else {
        format!("{x:.6e}")
    }
}

/// A log10 for TSV and tables.
pub fn log(x: f64) -> String {
    if x == f64::NEG_INFINITY {
        "-inf".into()
    } else {
        format!("{x:.6}")
    }
}

/// The JSON shapes shared with the service (defined in the library).
pub use quern::query::{jnum, ProbJson};

fn write_one(
    out: &mut impl Write,
    json_out: bool,
    method: Method,
    text: &str,
    p: &Prob,
) -> anyhow::Result<()> {
    if json_out {
        let v = ProbJson::new(text, method, p.p, Some(p.matched()));
        serde_json::to_writer(&mut *out, &v)?;
        writeln!(out)?;
    } else {
        writeln!(out, "{text}\t{}\t{}", num(p.p), log(p.log10))?;
    }
    Ok(())
}

const BATCH: usize = 4096;

pub fn run(a: ProbArgs) -> anyhow::Result<()> {
    let src = open_source(&a.store)?;
    let pred = predictor(&src, a.method.method, &a.params)?;
    let est = pred.get();
    let prep = est.preparation();
    let mut out = BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    if !a.words.is_empty() {
        let line = a.words.join(" ");
        let ids = query_ids(&line, &prep);
        if ids.is_empty() {
            bail!("no words in the query");
        }
        let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1])?;
        let text = line.split_whitespace().collect::<Vec<_>>().join(" ");
        write_one(&mut out, a.json, est.method(), &text, &p)?;
        out.flush()?;
        return Ok(());
    }
    let stdin = std::io::stdin();
    let mut reader = stdin.lock();
    let mut lines: Vec<String> = Vec::with_capacity(BATCH);
    let mut buf = Vec::new();
    loop {
        buf.clear();
        let n = reader
            .read_until(b'\n', &mut buf)
            .context("reading standard input")?;
        if n > 0 {
            let mut l = &buf[..];
            l = l.strip_suffix(b"\n").unwrap_or(l);
            l = l.strip_suffix(b"\r").unwrap_or(l);
            lines.push(String::from_utf8_lossy(l).into_owned());
        }
        if lines.len() == BATCH || (n == 0 && !lines.is_empty()) {
            batch(est, &prep, &lines, a.json, &mut out)?;
            lines.clear();
        }
        if n == 0 {
            break;
        }
    }
    out.flush()?;
    Ok(())
}

fn batch(
    est: &dyn Predictor,
    prep: &quern::tokenize::Preparation,
    lines: &[String],
    json_out: bool,
    out: &mut impl Write,
) -> anyhow::Result<()> {
    let ids: Vec<Vec<WordId>> = lines.iter().map(|l| query_ids(l, prep)).collect();
    let queries: Vec<&[WordId]> = ids
        .iter()
        .filter(|q| !q.is_empty())
        .map(|q| &q[..])
        .collect();
    let probs = est.prob_batch(&queries)?;
    let mut it = probs.iter();
    let mut text = String::new();
    for (line, q) in lines.iter().zip(&ids) {
        if q.is_empty() {
            // An empty query keeps its place: an empty line (TSV) or an
            // error record (JSON).
            if json_out {
                writeln!(out, r#"{{"words":"","error":"empty query"}}"#)?;
            } else {
                writeln!(out)?;
            }
            continue;
        }
        text.clear();
        for (i, t) in line.split_whitespace().enumerate() {
            if i > 0 {
                text.push(' ');
            }
            text.push_str(t);
        }
        let p = it.next().expect("one result per query");
        write_one(out, json_out, est.method(), &text, p)?;
    }
    Ok(())
}
