//! The ARPA back-off text format, the interchange standard that speech and
//! translation decoders read, written from a frozen model.
//!
//! ```text
//! (free text: what the model is)
//! \data\
//! ngram 1=<count>
//! …
//!
//! \1-grams:
//! <log10 q>\t<w1>\t<log10 β>
//! …
//! \N-grams:
//! <log10 q>\t<w1> … <wN>
//!
//! \end\
//! ```
//!
//! Every kept n-gram is listed with log10 q(h·w) (7 decimals) and, below
//! the top order, log10 β of itself as a context. A probability or weight
//! of 0 (the unigram `<s>`, which is never predicted, or a Katz context
//! with nothing left for unseen words) is written `-99`, which readers take
//! as 10^−99. Words are separated by single spaces; they never hold
//! whitespace (the tokenizer splits on it). For `stupid` the text before
//! `\data\` says that the values are scores, and that a context that is not
//! listed backs off with α too.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, IoContext, Result};

use super::file::Model;

fn log10(x: f64) -> String {
    if x > 0.0 {
        format!("{:.7}", x.log10())
    } else {
        "-99".into()
    }
}

/// Writes `model` as ARPA text to `path`, gzip-compressed if the name ends
/// in `.gz` (written under a temporary name, then renamed into place).
pub fn write_arpa_file(model: &Model, path: &Path) -> Result<u64> {
    let mut tmp = path.as_os_str().to_owned();
    tmp.push(".tmp");
    let tmp = PathBuf::from(tmp);
    let f = std::fs::File::create(&tmp).at(&tmp, "create")?;
    let buf = std::io::BufWriter::with_capacity(1 << 20, f);
    let gz = path.extension().is_some_and(|e| e == "gz");
    let f = if gz {
        // The encoder takes its input in large pieces: each write to it
        // clears its whole output buffer, so a line at a time costs far
        // more than the compression.
        let enc = flate2::write::GzEncoder::new(buf, flate2::Compression::default());
        let mut lines = std::io::BufWriter::with_capacity(1 << 16, enc);
        write_arpa(model, &mut lines).map_err(|e| Error::io(&tmp, "write", e))?;
        let enc = lines
            .into_inner()
            .map_err(|e| Error::io(&tmp, "write", e.into_error()))?;
        enc.finish().at(&tmp, "write")?
    } else {
        let mut buf = buf;
        write_arpa(model, &mut buf).map_err(|e| Error::io(&tmp, "write", e))?;
        buf
    };
    let f = f
        .into_inner()
        .map_err(|e| Error::io(&tmp, "write", e.into_error()))?;
    f.sync_all().at(&tmp, "sync")?;
    let size = f.metadata().at(&tmp, "stat")?.len();
    drop(f);
    std::fs::rename(&tmp, path).at(path, "rename into place")?;
    Ok(size)
}

/// Writes `model` as ARPA text.
pub fn write_arpa(model: &Model, out: &mut impl Write) -> std::io::Result<()> {
    let m = model.meta();
    let n = model.order();
    writeln!(
        out,
        "quern frozen model: method {}, order {}, {} words in V, from a store{}",
        m.method,
        n,
        m.vocabulary,
        if m.preparation == crate::tokenize::Preparation::default() {
            String::new()
        } else if m.preparation == crate::tokenize::Preparation::lowercasing(true) {
            " built with --lowercase".to_string()
        } else {
            format!(" whose text was prepared: {}", m.preparation.describe())
        }
    )?;
    if !m.probabilities {
        writeln!(
            out,
            "The values are stupid back-off scores, not probabilities: they do not sum to 1. A context that is not listed backs off with alpha = {} too.",
            m.default_backoff
        )?;
    }
    writeln!(out)?;
    writeln!(out, "\\data\\")?;
    for k in 1..=n {
        writeln!(out, "ngram {k}={}", model.kept(k))?;
    }
    for k in 1..=n {
        writeln!(out)?;
        writeln!(out, "\\{k}-grams:")?;
        for_each_ngram(model, k, |e, words| {
            write!(out, "{}\t", log10(model.q(k, e as u32)))?;
            for (i, w) in words.iter().enumerate() {
                if i > 0 {
                    out.write_all(b" ")?;
                }
                out.write_all(w)?;
            }
            if k < n {
                write!(out, "\t{}", log10(model.beta(k, e as u32)))?;
            }
            writeln!(out)
        })?;
    }
    writeln!(out)?;
    writeln!(out, "\\end\\")?;
    Ok(())
}

/// Calls `f(entry, words)` for every kept n-gram of order `k`, in entry
/// order, with its words' bytes.
fn for_each_ngram(
    model: &Model,
    k: usize,
    mut f: impl FnMut(usize, &[&[u8]]) -> std::io::Result<()>,
) -> std::io::Result<()> {
    let word = |x: u32| model.word_bytes(x);
    // anc[t]: the entry of order t that is the current n-gram's prefix of
    // length t (t < k); all move forward only.
    let mut anc = vec![0usize; k];
    let mut words: Vec<&[u8]> = Vec::with_capacity(k);
    for e in 0..model.kept(k) {
        let mut child = e;
        for t in (1..k).rev() {
            while anc[t] < model.kept(t) && model.children(t, anc[t] as u32).end <= child {
                anc[t] += 1;
            }
            child = anc[t];
        }
        words.clear();
        for (t, &a) in anc.iter().enumerate().skip(1) {
            words.push(word(model.word_of(t, a)));
        }
        words.push(word(model.word_of(k, e)));
        f(e, &words)?;
    }
    Ok(())
}

/// The contexts (words, space-separated) that back off past their next
/// shorter context (`katz`): where ARPA text is not the method.
pub fn skipping_contexts(model: &Model) -> Vec<String> {
    let mut out = Vec::new();
    for k in 1..model.order() {
        let _ = for_each_ngram(model, k, |e, words| {
            if model.skip(k, e as u32) > 1 {
                let w: Vec<String> = words
                    .iter()
                    .map(|b| String::from_utf8_lossy(b).into_owned())
                    .collect();
                out.push(w.join(" "));
            }
            Ok(())
        });
    }
    out
}

/// The word ids of every kept n-gram of order `k`, in entry order, `k`
/// ids an n-gram one after the other.
pub fn ngram_ids(model: &Model, k: usize) -> Vec<crate::words::WordId> {
    let mut out = Vec::with_capacity(model.kept(k) * k);
    let mut anc = vec![0usize; k];
    for e in 0..model.kept(k) {
        let mut child = e;
        for t in (1..k).rev() {
            while anc[t] < model.kept(t) && model.children(t, anc[t] as u32).end <= child {
                anc[t] += 1;
            }
            child = anc[t];
        }
        for (t, &a) in anc.iter().enumerate().skip(1) {
            out.push(model.id_at(model.word_of(t, a)));
        }
        out.push(model.id_at(model.word_of(k, e)));
    }
    out
}
