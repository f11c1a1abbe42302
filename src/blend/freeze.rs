//! A blend written as one back-off model (`quern freeze --blend`): the
//! union of the parts' n-grams, each with the blend's probability, and
//! back-off weights recomputed so that every context sums to 1.
//!
//! With U the union of the parts' n-grams (closed under prefixes and
//! suffixes, as every part's are), for an n-gram h·w of U of order 2 or
//! more q(h·w) = Σᵢ λᵢ Pᵢ(w | h), the exact mixture. For a context h of
//! U below the top order,
//!
//! ```text
//! β(h) = (1 − Σ_{w: h·w ∈ U} q(h·w)) / (1 − Σ_{w: h·w ∈ U} q(h'·w))
//! ```
//!
//! (h' is h without its first word; every h'·w is in U by suffix closure,
//! and is what the model gives w after h'), so P(· | h) sums to 1 over the
//! vocabulary. The unigrams are the mixture divided by Z, the mixture's
//! sum over the union's words but `<s>`: each part gives its `<unk>`
//! probability to every word outside its own vocabulary, so over the
//! union the mixture sums to Z ≥ 1 (Z = 1 when the vocabularies are the
//! same). Where a context's n-grams would take more than all its mass
//! (their mixture sums to 1 or more, or the shorter context's values of
//! its words do), they are scaled so the context sums to 1 with β = 1,
//! and counted. Outside U the model backs off where the query-time blend
//! mixes the parts' own back-off: the two differ there.
//!
//! Memory: the union in memory (per n-gram its ids in a box of their own,
//! its q and hash-table entries for the order's index): a few hundred
//! bytes an n-gram (the 785,560 n-grams of two Gutenberg stores at order 3
//! peaked at 507 MB with the stores' default block cache).

use std::collections::HashMap;

use crate::arpa::{ArpaModel, ArpaOrder};
use crate::error::{Error, Result};
use crate::predict::Predictor;
use crate::words::{bos_id, WordId};

use super::mixture::Blend;

/// A blend in back-off form, ready to be written as a model.
pub struct Backoff {
    /// The model: words, and per order the n-grams with q and β.
    pub model: ArpaModel,
    /// Z: the mixture's sum over the union's words but `<s>`.
    pub unigram_sum: f64,
    /// Contexts whose n-grams were scaled (see the module doc).
    pub scaled: u64,
}

const BATCH: usize = 8192;

/// The blend's back-off form over `union` (`union[k − 1]`: the n-grams of
/// order k, each k ids, sorted and without repeats; closed under prefixes
/// and suffixes).
pub fn backoff(blend: &Blend<'_>, union: &[Vec<Box<[WordId]>>]) -> Result<Backoff> {
    let n = union.len();
    if n == 0 || union[0].is_empty() {
        return Err(Error::Config("the blend's parts hold no n-grams".into()));
    }
    // ---- the words and the unigrams --------------------------------------
    let ids: Vec<WordId> = union[0].iter().map(|g| g[0]).collect();
    let mut words = Vec::with_capacity(ids.len());
    for &w in &ids {
        words.push(
            blend.word(w)?.ok_or_else(|| {
                Error::Config(format!("no part names the word with id {w:#018x}"))
            })?,
        );
    }
    let word_index: HashMap<WordId, u32> = ids
        .iter()
        .enumerate()
        .map(|(i, &w)| (w, i as u32))
        .collect();
    let mut q1 = probabilities(blend, &union[0])?;
    for (x, &w) in q1.iter_mut().zip(&ids) {
        if w == bos_id() {
            *x = 0.0;
        }
    }
    let z: f64 = q1.iter().sum();
    for x in q1.iter_mut() {
        *x /= z;
    }
    let mut orders = vec![ArpaOrder {
        context: vec![0; ids.len()],
        word: (0..ids.len() as u32).collect(),
        q: q1,
        beta: Vec::new(),
    }];
    // ---- orders 2..N: q exact; β of the order below ----------------------
    let mut scaled = 0u64;
    let mut below: HashMap<&[WordId], u32> = union[0]
        .iter()
        .enumerate()
        .map(|(i, g)| (&g[..], i as u32))
        .collect();
    for k in 2..=n {
        let grams = &union[k - 1];
        let mut q = probabilities(blend, grams)?;
        let prev = &orders[k - 2];
        let contexts = prev.q.len();
        let (mut num, mut den) = (vec![0.0f64; contexts], vec![0.0f64; contexts]);
        let mut context = Vec::with_capacity(grams.len());
        let mut word = Vec::with_capacity(grams.len());
        for (g, &p) in grams.iter().zip(&q) {
            let c = *below
                .get(&g[..k - 1])
                .ok_or_else(|| not_closed(g, "prefix"))?;
            let s = *below.get(&g[1..]).ok_or_else(|| not_closed(g, "suffix"))?;
            num[c as usize] += p;
            den[c as usize] += prev.q[s as usize];
            context.push(c);
            word.push(word_index[&g[k - 1]]);
        }
        let mut beta = vec![1.0f64; contexts];
        let mut scale = vec![1.0f64; contexts];
        for c in 0..contexts {
            if num[c] == 0.0 {
                continue;
            }
            let (room, lower) = (1.0 - num[c], 1.0 - den[c]);
            if room > 1e-12 && lower > 1e-12 {
                beta[c] = room / lower;
            } else {
                // The children's share is what the shorter context gives
                // their words (all of it when that leaves nothing).
                let target = if lower > 1e-12 { den[c] } else { 1.0 };
                scale[c] = target / num[c];
                scaled += 1;
            }
        }
        for (p, &c) in q.iter_mut().zip(&context) {
            *p *= scale[c as usize];
        }
        orders[k - 2].beta = beta;
        orders.push(ArpaOrder {
            context,
            word,
            q,
            beta: Vec::new(),
        });
        below = grams
            .iter()
            .enumerate()
            .map(|(i, g)| (&g[..], i as u32))
            .collect();
    }
    if n == 1 {
        orders[0].beta = Vec::new();
    }
    Ok(Backoff {
        model: ArpaModel {
            preamble: String::new(),
            words,
            orders,
        },
        unigram_sum: z,
        scaled,
    })
}

fn not_closed(g: &[WordId], what: &str) -> Error {
    Error::Config(format!(
        "the union of the parts' n-grams is not closed: the {what} of an n-gram of order {} is missing",
        g.len()
    ))
}

/// The blend's probability of every n-gram's last word after the words
/// before it.
fn probabilities(blend: &Blend<'_>, grams: &[Box<[WordId]>]) -> Result<Vec<f64>> {
    let mut out = Vec::with_capacity(grams.len());
    for chunk in grams.chunks(BATCH) {
        let qs: Vec<&[WordId]> = chunk.iter().map(|g| &g[..]).collect();
        out.extend(blend.prob_batch(&qs)?.into_iter().map(|p| p.p));
    }
    Ok(out)
}
