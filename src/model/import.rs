//! A back-off model read from ARPA text ([`crate::arpa`]) written as a
//! model file, so that a model made elsewhere is queried, completed,
//! pruned, quantized and served like a frozen one.
//!
//! The ARPA n-grams are the kept n-grams; q and β are the file's values
//! (7 decimals of log10 in the text quern writes, rounded again to 32-bit
//! floats). The words are renumbered by their ids and every order sorted
//! into key order (by its context's new entry, then by word), which the
//! reader's prefix and suffix checks make possible: every context is an
//! entry of the order below. `<s>` and `<unk>` are added with q = 0 and
//! β = 1 where the file has none (a note says so): an ARPA model without
//! `<unk>` gives every word outside its vocabulary probability 0.
//!
//! Memory: the file's n-grams as [`crate::arpa::ArpaModel`] holds them,
//! plus a sort permutation (4 bytes an n-gram) per order.

use std::path::{Path, PathBuf};

use crate::arpa::ArpaModel;
use crate::error::{Error, IoContext, Result};
use crate::predict::{Method, Params};
use crate::words::{bos_id, unk_id, word_id};

use super::format::{ModelMeta, SectionKind};
use super::freeze::{reduce_model, FreezeOptions, FreezeReport};
use super::packed::{ef_encode, width_for};
use super::writer::ModelWriter;

/// Writes `arpa` (read from `source`) as the model file `out`, reduced by
/// `opts` (relative-entropy pruning, quantization; count thresholds and
/// threads do not apply). `lowercase`: queries are lowercased, as for a
/// store built with `--lowercase`.
pub fn freeze_arpa(
    arpa: &ArpaModel,
    source: &Path,
    out: &Path,
    opts: &FreezeOptions,
    lowercase: bool,
) -> Result<FreezeReport> {
    let origin = Origin {
        method: Method::Arpa,
        preparation: crate::tokenize::Preparation::lowercasing(lowercase),
        notes: vec![format!(
            "read from ARPA text {} ({} n-grams of orders 1..{})",
            source.display(),
            arpa.orders.iter().map(|o| o.len() as u64).sum::<u64>(),
            arpa.order()
        )],
    };
    write_backoff(arpa, out, opts, origin)
}

/// What made a back-off model given as [`ArpaModel`]: recorded in the
/// model file's metadata.
#[derive(Clone, Debug)]
pub struct Origin {
    /// The method the model file names (`arpa`, `blend`).
    pub method: Method,
    /// How query text is prepared.
    pub preparation: crate::tokenize::Preparation,
    /// Notes (the first says where the model came from).
    pub notes: Vec<String>,
}

/// Writes the back-off model `arpa` (q and β as probabilities, n-grams
/// closed under prefixes and suffixes) as the model file `out`, reduced by
/// `opts` as [`freeze_arpa`] does.
pub fn write_backoff(
    arpa: &ArpaModel,
    out: &Path,
    opts: &FreezeOptions,
    origin: Origin,
) -> Result<FreezeReport> {
    if opts.min_counts.iter().any(|&c| c > 1) {
        return Err(Error::Config(format!(
            "a model made by {} has no counts: count thresholds do not apply",
            origin.method
        )));
    }
    let n = arpa.order();
    if n == 0 {
        return Err(Error::Config("the model has no n-grams".into()));
    }
    let mut notes = origin.notes;
    // ---- the vocabulary: the file's words, <s> and <unk> added ----------
    let mut words: Vec<&str> = arpa.words.iter().map(|w| w.as_str()).collect();
    let mut unk_seen = true;
    for (marker, id) in [("<s>", bos_id()), ("<unk>", unk_id())] {
        if !words.iter().any(|w| word_id(w.as_bytes()) == id) {
            words.push(marker);
            notes.push(format!(
                "the ARPA file lists no {marker}: added with probability 0{}",
                if marker == "<unk>" {
                    " (a word outside the file's vocabulary gets probability 0)"
                } else {
                    ""
                }
            ));
            unk_seen &= marker != "<unk>";
        }
    }
    let nw = words.len();
    if nw as u64 > u64::from(u32::MAX) {
        return Err(Error::Config("more than 2^32 − 1 words".into()));
    }
    let ids: Vec<u64> = words.iter().map(|w| word_id(w.as_bytes())).collect();
    let mut by_id: Vec<u32> = (0..nw as u32).collect();
    by_id.sort_unstable_by_key(|&x| ids[x as usize]);
    for p in by_id.windows(2) {
        if ids[p[0] as usize] == ids[p[1] as usize] {
            return Err(Error::HashCollision {
                first: words[p[0] as usize].to_string(),
                second: words[p[1] as usize].to_string(),
                id: ids[p[0] as usize],
            });
        }
    }
    // new_of[old word] = its word index in the model.
    let mut new_of = vec![0u32; nw];
    for (new, &old) in by_id.iter().enumerate() {
        new_of[old as usize] = new as u32;
    }
    let bos_x = new_of[words
        .iter()
        .position(|w| word_id(w.as_bytes()) == bos_id())
        .expect("added")];

    // ---- every order in key order ----------------------------------------
    // order[k - 1][i] = the file's entry at position i of order k;
    // pos[k - 1][e] = the position of the file's entry e.
    let u = &arpa.orders[0];
    let value = |v: &Vec<f64>, e: usize, missing: f64| v.get(e).copied().unwrap_or(missing);
    let q1: Vec<f64> = by_id
        .iter()
        .map(|&old| value(&u.q, old as usize, 0.0))
        .collect();
    let b1: Vec<f64> = by_id
        .iter()
        .map(|&old| value(&u.beta, old as usize, 1.0))
        .collect();
    let mut pos_prev: Vec<u32> = new_of.clone();
    let mut orders: Vec<Vec<u32>> = Vec::with_capacity(n);
    let mut children: Vec<Vec<u64>> = Vec::with_capacity(n);
    for k in 2..=n {
        let o = &arpa.orders[k - 1];
        let key = |e: u32| {
            (
                pos_prev[o.context[e as usize] as usize],
                new_of[o.word[e as usize] as usize],
            )
        };
        let mut order: Vec<u32> = (0..o.len() as u32).collect();
        order.sort_unstable_by_key(|&e| key(e));
        let prev_len = if k == 2 { nw } else { arpa.orders[k - 2].len() };
        let mut starts = vec![0u64; prev_len + 1];
        for &e in &order {
            starts[key(e).0 as usize + 1] += 1;
        }
        for i in 1..starts.len() {
            starts[i] += starts[i - 1];
        }
        children.push(starts);
        let mut pos = vec![0u32; o.len()];
        for (i, &e) in order.iter().enumerate() {
            pos[e as usize] = i as u32;
        }
        pos_prev = pos;
        orders.push(order);
    }

    // ---- the file -----------------------------------------------------------
    let mut ngrams = vec![nw as u64];
    ngrams.extend(arpa.orders[1..].iter().map(|o| o.len() as u64));
    let meta = ModelMeta {
        method: origin.method,
        params: Params::default(),
        constants: serde_json::Value::Null,
        notes: notes.clone(),
        probabilities: true,
        default_backoff: 1.0,
        order: n,
        preparation: origin.preparation,
        vocabulary: nw as u64 - 1,
        unk_seen,
        ngrams: ngrams.clone(),
        store_ngrams: ngrams.clone(),
        value_bits: 32,
        weight_bits: 32,
        min_counts: vec![1; n],
        relative_entropy: None,
        never_suggest: opts.never_suggest.clone(),
    };
    let reduces = opts.reduces();
    let parent_dir = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let tmp = tempfile::Builder::new()
        .prefix(".from-arpa-")
        .tempdir_in(&parent_dir)
        .at(&parent_dir, "create a temporary folder in")?;
    let full = tmp.path().join("full.model");
    let mut w = ModelWriter::create(if reduces { &full } else { out })?;
    w.section(
        SectionKind::Meta,
        0,
        &serde_json::to_vec_pretty(&meta).expect("metadata serialises"),
    )?;
    let id_bytes: Vec<u8> = by_id
        .iter()
        .flat_map(|&x| ids[x as usize].to_le_bytes())
        .collect();
    w.section(SectionKind::Ids, 0, &id_bytes)?;
    let mut offsets: Vec<u8> = Vec::with_capacity((nw + 1) * 8);
    let mut text: Vec<u8> = Vec::new();
    offsets.extend_from_slice(&0u64.to_le_bytes());
    for &x in &by_id {
        text.extend_from_slice(words[x as usize].as_bytes());
        offsets.extend_from_slice(&(text.len() as u64).to_le_bytes());
    }
    w.section(SectionKind::WordOffsets, 0, &offsets)?;
    w.section(SectionKind::WordText, 0, &text)?;
    let mut ranking: Vec<u32> = (0..nw as u32).filter(|&x| x != bos_x).collect();
    ranking.sort_by(|&a, &b| q1[b as usize].total_cmp(&q1[a as usize]).then(a.cmp(&b)));
    let rk: Vec<u8> = ranking.iter().flat_map(|x| x.to_le_bytes()).collect();
    w.section(SectionKind::Ranking, 0, &rk)?;
    let width = width_for(nw as u64 - 1);
    for k in 1..=n {
        if k == 1 {
            w.floats(SectionKind::Probs, 1, q1.iter().map(|&q| q as f32))?;
            if n > 1 {
                w.floats(SectionKind::Weights, 1, b1.iter().map(|&b| b as f32))?;
            }
        } else {
            let o = &arpa.orders[k - 1];
            let order = &orders[k - 2];
            w.packed(
                SectionKind::Words,
                k,
                width,
                order
                    .iter()
                    .map(|&e| new_of[o.word[e as usize] as usize] as u64),
            )?;
            w.floats(
                SectionKind::Probs,
                k,
                order.iter().map(|&e| o.q[e as usize] as f32),
            )?;
            if k < n {
                w.floats(
                    SectionKind::Weights,
                    k,
                    order.iter().map(|&e| o.beta[e as usize] as f32),
                )?;
            }
        }
        if k < n {
            w.section(
                SectionKind::Children,
                k,
                &ef_encode(children[k - 1].iter().copied()),
            )?;
        }
    }
    let file_bytes = w.finish()?;
    let report = FreezeReport {
        ngrams: ngrams.clone(),
        store_ngrams: ngrams.clone(),
        file_bytes,
        notes,
        threshold: None,
        ngrams_unpruned: ngrams,
        value_bits: 32,
        weight_bits: 32,
        weight_error: 0.0,
    };
    if let Some(max) = opts.max_bytes {
        return super::freeze::fit_bytes(&full, out, opts, report, max);
    }
    if reduces {
        return reduce_model(&full, out, opts, report);
    }
    Ok(report)
}
