//! Freezing: a store streamed, order by order, into a model file.
//!
//! The vocabulary and the unigrams come first. Order k ≥ 2 is then one
//! pass over the store's n-grams of order k beside its n-grams of order
//! k − 1 ([`super::pass`]), cut into parts by the n-grams' first word and
//! run on threads side by side: the parts' arrays are joined in key order,
//! each children start shifted by the children of the parts before, so
//! the model is the same byte for byte whatever the number of threads.
//! Every array goes to its own temporary file next to the output
//! (memory-mapped when a later order searches it); at the end the arrays
//! are copied into the model file behind the metadata and the vocabulary.
//!
//! Memory: the store's block cache (the caller's), the vocabulary (its ids,
//! words and unigram values: about 40 bytes a word), one bit per n-gram of
//! the previous order (which were kept), and buffers per thread. The
//! mapped arrays are file pages the kernel can drop at any time.

use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, IoContext, Result};
use crate::query::backoff::BackoffKind;
use crate::query::Estimator;
use crate::store::NgramRecord;
use crate::words::{bos_id, unk_id, WordId};

use super::bytes::u32_at;
use super::file::Model;
use super::format::{ModelMeta, SectionKind};
use super::packed::{ef_encode, width_for};
use super::pass::{
    adjusted, map, run_part, too_many, Built, Bytes, KatzTally, Order, Part, PartOut,
};
use super::prune;
use super::quantize::quantize;
use super::reduce::{suffix_links, write_reduced, Reduction};
use super::writer::{ArrayFile, ModelWriter};
use crate::search::find_in;

/// What to freeze.
#[derive(Clone, Debug, Default)]
pub struct FreezeOptions {
    /// Count thresholds per order (index k − 1; missing orders and 0 mean
    /// 1, keep everything). The unigrams are always all kept.
    pub min_counts: Vec<u64>,
    /// Relative-entropy pruning (Stolcke 1998): drop the n-grams whose
    /// removal changes the model's relative entropy by less than this (in
    /// nats); see [`crate::model`]'s pruning notes.
    pub relative_entropy: Option<f64>,
    /// A size target: the smallest relative-entropy threshold that keeps
    /// at most this many n-grams (unigrams included).
    pub max_ngrams: Option<u64>,
    /// Quantize q of orders 2..N to this many bits (2..=16) per value.
    pub bits: Option<u32>,
    /// Quantize the back-off weights to this many bits (2..=16) per
    /// value. Their contexts then sum to 1 only within the rounding of β
    /// (reported in [`FreezeReport::weight_error`]).
    pub weight_bits: Option<u32>,
    /// Threads that freeze parts of each order side by side (0: one per
    /// core). The model is the same, byte for byte, whatever the number.
    pub threads: usize,
}

impl FreezeOptions {
    /// Whether the model is reduced after freezing (pruned by relative
    /// entropy or quantized).
    fn reduces(&self) -> bool {
        self.relative_entropy.is_some()
            || self.max_ngrams.is_some()
            || self.bits.is_some()
            || self.weight_bits.is_some()
    }
}

/// What a freeze wrote.
#[derive(Clone, Debug, PartialEq)]
pub struct FreezeReport {
    /// Kept n-grams per order.
    pub ngrams: Vec<u64>,
    /// The store's n-grams per order.
    pub store_ngrams: Vec<u64>,
    /// The model file's size.
    pub file_bytes: u64,
    /// Notes of the method and of freezing.
    pub notes: Vec<String>,
    /// The relative-entropy threshold applied (given, or picked for
    /// `max_ngrams`).
    pub threshold: Option<f64>,
    /// Kept n-grams per order before relative-entropy pruning (after the
    /// count thresholds).
    pub ngrams_unpruned: Vec<u64>,
    /// Bits per value of orders 2..N (32: not quantized).
    pub value_bits: u32,
    /// Bits per back-off weight (32: not quantized).
    pub weight_bits: u32,
    /// With quantized back-off weights, the largest |Σ_w P(w | h) − 1|
    /// over the contexts (0 otherwise).
    pub weight_error: f64,
}

/// Freezes the estimator's method over its store into the model file
/// `out` (written under a temporary name and renamed into place).
pub fn freeze(est: &Estimator<'_>, out: &Path, opts: &FreezeOptions) -> Result<FreezeReport> {
    let kind = est.backoff_kind()?;
    let store = est.store();
    let meta = store.meta();
    let n = meta.settings.order;
    let root = meta.root;
    let v = est.vocabulary_f64();
    let min = |k: usize| opts.min_counts.get(k - 1).copied().unwrap_or(1).max(1);
    if min(1) > 1 {
        return Err(Error::Config(
            "the unigrams are always kept (every word of V needs a probability): the first count threshold must be 1".into(),
        ));
    }
    for (flag, bits) in [("--bits", opts.bits), ("--weight-bits", opts.weight_bits)] {
        if let Some(b) = bits {
            if !(2..=16).contains(&b) {
                return Err(Error::Config(format!(
                    "{flag} {b}: quantization takes 2 to 16 bits per value"
                )));
            }
        }
    }
    if opts.relative_entropy.is_some() && opts.max_ngrams.is_some() {
        return Err(Error::Config(
            "give either a relative-entropy threshold or a size target (--max-ngrams), not both"
                .into(),
        ));
    }
    if let Some(t) = opts.relative_entropy {
        if !(t >= 0.0 && t.is_finite()) {
            return Err(Error::Config(format!(
                "--relative-entropy {t}: the threshold must be a finite number ≥ 0"
            )));
        }
    }
    if (opts.relative_entropy.is_some() || opts.max_ngrams.is_some())
        && !est.method().is_probability()
    {
        return Err(Error::Config(format!(
            "relative-entropy pruning needs probabilities; {} gives scores that do not sum to 1",
            est.method()
        )));
    }
    let pruning = (1..=n).any(|k| min(k) > 1);
    let parent_dir = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    // The temporary arrays, in a folder of their own beside the output
    // (same file system, so renaming works), removed when dropped, also
    // on an error.
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = tempfile::Builder::new()
        .prefix(&format!(".{name}.freeze-"))
        .tempdir_in(&parent_dir)
        .at(&parent_dir, "create a temporary folder in")?;
    let tpath = |name: String| tmp.path().join(name);
    let mut notes: Vec<String> = est.notes().to_vec();
    let bos = bos_id();

    // ---- the vocabulary and order 1 -----------------------------------------
    let mut ids: Vec<WordId> = Vec::new();
    for item in store.ngrams(1)? {
        ids.push(item?.0.ids()[0]);
    }
    let unk_seen = ids.binary_search(&unk_id()).is_ok();
    if !unk_seen {
        let at = ids.binary_search(&unk_id()).unwrap_err();
        ids.insert(at, unk_id());
    }
    let nw = ids.len();
    let index = |id: WordId| find_in(|i| ids[i], 0, ids.len(), id, 8).map(|i| i as u32);
    let bos_x = index(bos).ok_or_else(|| Error::corrupt(store.dir(), "the store has no <s>"))?;
    let mut q1 = vec![0.0f64; nw];
    let mut unigram_counts = vec![0u64; nw];
    let mut q_file = ArrayFile::create(tpath("q1".into()))?;
    let mut q64_file = ArrayFile::create(tpath("q64-1".into()))?;
    {
        let mut recs = store.scan_records(1, &[], None)?.peekable();
        for (x, &id) in ids.iter().enumerate() {
            let rec: Option<NgramRecord> = match recs.peek() {
                Some(Ok((k, _))) if k.ids()[0] == id => {
                    recs.next().map(|r| r.map(|r| r.1)).transpose()?
                }
                Some(Err(_)) => return Err(recs.next().expect("peeked").unwrap_err()),
                _ => None,
            };
            let c = rec.map_or(0, |r| r.count);
            let a = rec.map_or(0, |r| adjusted(r.count, r.continuation, id == bos));
            let q = if id == bos {
                0.0
            } else {
                match kind {
                    BackoffKind::Interpolated => {
                        est.step(0, c, a, Some(root), root.count_sum, 1.0 / v)
                    }
                    BackoffKind::Katz => est.katz_seen(0, c, root.count_sum),
                    BackoffKind::Stupid(_) => {
                        if c > 0 {
                            c as f64 / root.count_sum as f64
                        } else {
                            0.0
                        }
                    }
                }
            };
            q1[x] = q;
            unigram_counts[x] = c;
            q_file.f32(q as f32)?;
            q64_file.f64(q)?;
        }
    }
    let mut q_paths = vec![q_file.close()?];
    let mut q64_prev = q64_file.close()?;
    // The exact q of every finished order (index k − 1), for Katz's
    // contexts that back off past their next shorter context.
    let mut q64_maps: Vec<Bytes> = vec![map(&q64_prev)?];
    let mut skip_paths: Vec<Option<PathBuf>> = Vec::new();
    let mut word_paths: Vec<Option<PathBuf>> = vec![None];
    let mut weight_paths: Vec<PathBuf> = Vec::new();
    let mut child_paths: Vec<PathBuf> = Vec::new();
    let mut kept_counts = vec![nw as u64];
    let mut store_counts = vec![nw as u64 - u64::from(!unk_seen)];
    // The store's n-grams are read as ranks (their words' positions among
    // the store's ids): the word index of every rank.
    let rank_ids = store.rank_ids();
    let mut rank_index = vec![u32::MAX; rank_ids.len()];
    for (x, id) in ids.iter().enumerate() {
        if let Ok(r) = rank_ids.binary_search(id) {
            rank_index[r] = x as u32;
        }
    }
    let bos_rank = rank_ids.binary_search(&bos).map_or(u64::MAX, |r| r as u64);
    let threads = match opts.threads {
        0 => std::thread::available_parallelism().map_or(1, |t| t.get()),
        t => t,
    };
    let bounds = split_words(&ids, &unigram_counts, unk_seen, threads);
    let parts_n = bounds.len() - 1;
    let mut built = Built {
        words: vec![Bytes::Empty],
        children: Vec::new(),
    };
    // Per part: which of its stored n-grams of the previous order were
    // kept (by position within the part), and the entries of the kept ones.
    let mut kept_prev: Vec<Vec<u64>> = vec![Vec::new(); parts_n];
    let mut entries: Vec<(u32, u32)> = bounds
        .windows(2)
        .map(|b| (b[0] as u32, b[1] as u32))
        .collect();
    let mut tally = KatzTally::default();
    let min_counts: Vec<u64> = (1..=n).map(min).collect();

    // ---- orders 2..N ----------------------------------------------------------
    let default_beta = match kind {
        BackoffKind::Stupid(a) => a,
        _ => 1.0,
    };
    for k in 2..=n {
        let outs = {
            let o = Order {
                k,
                kind,
                v,
                ids: &ids,
                rank_ids,
                rank_index: &rank_index,
                bos_rank,
                built: &built,
                q64: &q64_maps,
                q64_prev: &q64_prev,
                min_counts: &min_counts,
                pruning,
                default_beta,
                dir: tmp.path(),
            };
            let parts: Vec<Part> = (0..parts_n)
                .map(|t| Part {
                    t,
                    first: (t > 0).then(|| ids[bounds[t]]),
                    end: (t + 1 < parts_n).then(|| ids[bounds[t + 1]]),
                    kept_prev: std::mem::take(&mut kept_prev[t]),
                    entries: entries[t],
                })
                .collect();
            run_parts(est, &o, parts)?
        };
        // Join the parts' arrays in key order.
        let total: u64 = outs.iter().map(|o| o.written).sum();
        if total > u64::from(u32::MAX) {
            return Err(too_many(k));
        }
        let w = concat(tpath(format!("w{k}")), outs.iter().map(|o| &o.w))?;
        let q = concat(tpath(format!("q{k}")), outs.iter().map(|o| &o.q))?;
        let q64 = concat(tpath(format!("q64-{k}")), outs.iter().map(|o| &o.q64))?;
        let b = concat(tpath(format!("b{}", k - 1)), outs.iter().map(|o| &o.b))?;
        let s = concat(tpath(format!("s{}", k - 1)), outs.iter().map(|o| &o.s))?;
        let mut f = ArrayFile::create(tpath(format!("f{}", k - 1)))?;
        let mut base = 0u64;
        for (t, o) in outs.iter().enumerate() {
            let a = map(&o.f)?;
            for i in 0..a.len() / 4 {
                f.u32((base + u64::from(u32_at(&a, i))) as u32)?;
            }
            drop(a);
            std::fs::remove_file(&o.f).at(&o.f, "remove")?;
            let end = base + o.written;
            entries[t] = (base as u32, end as u32);
            base = end;
        }
        f.u32(total as u32)?;
        let f = f.close()?;
        let store_n: u64 = outs.iter().map(|o| o.store_n).sum();
        let mut order_skips = false;
        for (t, o) in outs.into_iter().enumerate() {
            tally.skips += o.tally.skips;
            tally.unrepresentable += o.tally.unrepresentable;
            order_skips |= o.tally.order_skips;
            kept_prev[t] = o.kept;
        }
        kept_counts.push(total);
        store_counts.push(store_n);
        word_paths.push(Some(w));
        q_paths.push(q);
        weight_paths.push(b);
        child_paths.push(f);
        skip_paths.push(order_skips.then_some(s));
        q64_maps.push(map(&q64)?);
        q64_prev = q64;
        built
            .words
            .push(map(word_paths[k - 1].as_ref().expect("order ≥ 2"))?);
        built.children.push(map(&child_paths[k - 2])?);
    }
    if tally.skips > 0 {
        notes.push(format!(
            "katz: {} contexts pass their freed mass past their next shorter context (their children take all of its probability): the model records how far; ARPA text cannot, so there the ARPA file gives their unseen words almost nothing",
            tally.skips
        ));
    }
    if tally.unrepresentable > 0 {
        notes.push(format!(
            "katz: {} contexts give their freed mass to the uniform distribution (their children take all the probability of every shorter context); the model gives their unseen words 0",
            tally.unrepresentable
        ));
    }

    // ---- the ranking of V and the file --------------------------------------
    let mut ranking: Vec<u32> = (0..nw as u32).filter(|&x| x != bos_x).collect();
    ranking.sort_by(|&a, &b| q1[b as usize].total_cmp(&q1[a as usize]).then(a.cmp(&b)));
    let words = store.vocabulary()?;
    let mut offsets: Vec<u8> = Vec::with_capacity((nw + 1) * 8);
    let mut text: Vec<u8> = Vec::new();
    offsets.extend_from_slice(&0u64.to_le_bytes());
    for id in &ids {
        let w = words.get(id).ok_or_else(|| {
            Error::corrupt(
                store.dir(),
                format!("the word with id {id:#018x} has no text"),
            )
        })?;
        text.extend_from_slice(w.as_bytes());
        offsets.extend_from_slice(&(text.len() as u64).to_le_bytes());
    }
    drop(words);
    let mmeta = ModelMeta {
        method: est.method(),
        params: est.params().clone(),
        constants: est.constants(),
        notes: notes.clone(),
        probabilities: est.method().is_probability(),
        default_backoff: match kind {
            BackoffKind::Stupid(a) => a,
            _ => 1.0,
        },
        order: n,
        lowercase: meta.settings.lowercase,
        vocabulary: meta.totals.vocabulary,
        unk_seen,
        ngrams: kept_counts.clone(),
        store_ngrams: store_counts.clone(),
        value_bits: 32,
        weight_bits: 32,
        min_counts: (1..=n).map(min).collect(),
        relative_entropy: None,
    };
    // A model to be reduced is written whole first, into the temporary
    // folder.
    let full = tmp.path().join("full.model");
    let mut w = ModelWriter::create(if opts.reduces() { &full } else { out })?;
    w.section(
        SectionKind::Meta,
        0,
        &serde_json::to_vec_pretty(&mmeta).expect("metadata serialises"),
    )?;
    let id_bytes: Vec<u8> = ids.iter().flat_map(|x| x.to_le_bytes()).collect();
    w.section(SectionKind::Ids, 0, &id_bytes)?;
    w.section(SectionKind::WordOffsets, 0, &offsets)?;
    w.section(SectionKind::WordText, 0, &text)?;
    let rk: Vec<u8> = ranking.iter().flat_map(|x| x.to_le_bytes()).collect();
    w.section(SectionKind::Ranking, 0, &rk)?;
    let copy = |w: &mut ModelWriter, kind: SectionKind, k: usize, p: &Path| -> Result<()> {
        let mut f = File::open(p).at(p, "open")?;
        w.section_from(kind, k, &mut f, p)
    };
    let width = width_for(nw as u64 - 1);
    for k in 1..=n {
        if let Some(p) = &word_paths[k - 1] {
            let a = map(p)?;
            w.packed(
                SectionKind::Words,
                k,
                width,
                (0..a.len() / 4).map(|i| u32_at(&a, i) as u64),
            )?;
        }
        copy(&mut w, SectionKind::Probs, k, &q_paths[k - 1])?;
        if k < n {
            copy(&mut w, SectionKind::Weights, k, &weight_paths[k - 1])?;
            let a = map(&child_paths[k - 1])?;
            let ef = ef_encode((0..a.len() / 4).map(|i| u32_at(&a, i) as u64));
            w.section(SectionKind::Children, k, &ef)?;
            if let Some(p) = &skip_paths[k - 1] {
                copy(&mut w, SectionKind::Skips, k, p)?;
            }
        }
    }
    drop(built);
    let file_bytes = w.finish()?;
    let report = FreezeReport {
        ngrams_unpruned: kept_counts.clone(),
        ngrams: kept_counts,
        store_ngrams: store_counts,
        file_bytes,
        notes,
        threshold: None,
        value_bits: 32,
        weight_bits: 32,
        weight_error: 0.0,
    };
    if opts.reduces() {
        // Only the whole model is needed from here on: the arrays it was
        // copied from give their disk space back to the reduction's.
        drop(q64_maps);
        for p in std::fs::read_dir(tmp.path()).at(tmp.path(), "list")? {
            let p = p.at(tmp.path(), "list")?.path();
            if p != full {
                std::fs::remove_file(&p).at(&p, "remove")?;
            }
        }
        return reduce_model(&full, out, opts, report);
    }
    Ok(report)
}

/// Prunes by relative entropy and/or quantizes the model just written at
/// `full` into `out`.
pub(crate) fn reduce_model(
    full: &Path,
    out: &Path,
    opts: &FreezeOptions,
    mut report: FreezeReport,
) -> Result<FreezeReport> {
    let m = Model::open(full)?;
    // The scratch arrays go beside the whole model, in the freeze's
    // temporary folder.
    let dir = full.parent().unwrap_or(Path::new("."));
    let links = suffix_links(&m, dir)?;
    let threshold = match (opts.relative_entropy, opts.max_ngrams) {
        (None, None) => None,
        (theta, max) => {
            let d = prune::criterion(&m, &links, dir)?;
            let theta = match (theta, max) {
                (Some(t), _) => Some(t),
                (None, Some(max)) => prune::threshold_for(&m, &links, &d, max)?,
                (None, None) => unreachable!(),
            };
            theta.map(|t| (t, prune::select(&m, &links, &d, t).0))
        }
    };
    let (theta, keep) = match threshold {
        Some((t, keep)) => (Some(t), keep),
        None => (None, Vec::new()),
    };
    let mut meta = m.meta().clone();
    let (values, moved) = match opts.bits {
        Some(b) => {
            let (v, moved) = quantize(&m, &keep, b, dir)?;
            meta.value_bits = b;
            (v, moved)
        }
        None => (Vec::new(), 0),
    };
    if let Some(t) = theta {
        meta.notes.push(format!(
            "relative-entropy pruning (Stolcke 1998) at θ = {t:e} nats: the n-grams whose removal changes the model by less were dropped (but the contexts and suffixes of kept ones), and the back-off weights recomputed"
        ));
    }
    if let Some(b) = opts.bits {
        meta.notes.push(format!(
            "q of orders 2..{} quantized to {b} bits (2^{b} values per order fitted by Lloyd's algorithm to ln q; Whittaker & Raj 2001), the back-off weights recomputed after; the unigrams are 32-bit{}",
            m.order(),
            if moved > 0 {
                format!(
                    "; {moved} quantized {} moved one bin down so that {} context's children stay within 1",
                    if moved == 1 { "value was" } else { "values were" },
                    if moved == 1 { "its" } else { "their" }
                )
            } else {
                String::new()
            }
        ));
    }
    meta.relative_entropy = theta;
    if let Some(b) = opts.weight_bits {
        meta.weight_bits = b;
        meta.notes.push(format!(
            "back-off weights quantized to {b} bits (2^{b} values per order spread over the range of β, half at even steps of ln β and half at even steps of β): a context sums to 1 only within the rounding of its β"
        ));
    }
    let mut r = Reduction { keep, values, meta };
    let done = write_reduced(&m, &links, &mut r, out, dir)?;
    if done.unnormalised > 0 {
        r.meta.notes.push(format!(
            "{} contexts cannot be normalised after reducing (their kept children take all the mass of the context they back off to): their back-off weight is 0",
            done.unnormalised
        ));
    }
    report.notes = r.meta.notes.clone();
    report.ngrams = done.ngrams;
    report.file_bytes = done.file_bytes;
    report.threshold = theta;
    if opts.weight_bits.is_some() {
        r.meta.notes.push(format!(
            "with its quantized back-off weights every context sums to 1 within {:.1e}",
            done.weight_error
        ));
        report.notes = r.meta.notes.clone();
    }
    report.value_bits = r.meta.value_bits;
    report.weight_bits = r.meta.weight_bits;
    report.weight_error = done.weight_error;
    Ok(report)
}

/// Runs the parts of one order, each on its own thread (the first on this
/// one, with `est`; the others with their own estimator of the same method
/// and parameters), and returns what they wrote in part order.
fn run_parts(est: &Estimator<'_>, o: &Order<'_>, mut parts: Vec<Part>) -> Result<Vec<PartOut>> {
    let rest = parts.split_off(1);
    let first = parts.pop().expect("at least one part");
    let (store, method, params) = (est.store(), est.method(), est.params());
    std::thread::scope(|scope| {
        let handles: Vec<_> = rest
            .into_iter()
            .map(|part| {
                scope.spawn(move || {
                    let own = Estimator::new(store, method, params.clone())?;
                    run_part(&own, o, part)
                })
            })
            .collect();
        let mut outs = vec![run_part(est, o, first)];
        for h in handles {
            outs.push(h.join().unwrap_or_else(|e| std::panic::resume_unwind(e)));
        }
        outs.into_iter().collect()
    })
}

/// The word indices where the parts of every order start (and `ids.len()`
/// at the end): up to `threads` parts with about equal sums of the first
/// words' counts (a word's count bounds the n-grams it starts at every
/// order). A part starts at a word the store holds.
fn split_words(ids: &[WordId], counts: &[u64], unk_seen: bool, threads: usize) -> Vec<usize> {
    let total: u64 = counts.iter().sum();
    let mut bounds = vec![0];
    let mut sum = 0u64;
    let mut t = 1;
    for (x, &c) in counts.iter().enumerate() {
        if t >= threads {
            break;
        }
        let stored = unk_seen || ids[x] != unk_id();
        if sum as u128 * threads as u128 >= total as u128 * t as u128 && stored && x > 0 {
            bounds.push(x);
            while sum as u128 * threads as u128 >= total as u128 * t as u128 {
                t += 1;
            }
        }
        sum += c;
    }
    bounds.push(ids.len());
    bounds
}

/// Joins the files `parts` (in order) into `dst`: the first is renamed,
/// the others appended and removed.
fn concat<'p>(dst: PathBuf, parts: impl IntoIterator<Item = &'p PathBuf>) -> Result<PathBuf> {
    let mut parts = parts.into_iter();
    match parts.next() {
        Some(p) => std::fs::rename(p, &dst).at(&dst, "rename into")?,
        None => drop(File::create(&dst).at(&dst, "create")?),
    }
    let mut out = std::fs::OpenOptions::new()
        .append(true)
        .open(&dst)
        .at(&dst, "open")?;
    for p in parts {
        let mut f = File::open(p).at(p, "open")?;
        std::io::copy(&mut f, &mut out).at(&dst, "write")?;
        drop(f);
        std::fs::remove_file(p).at(p, "remove")?;
    }
    out.flush().at(&dst, "write")?;
    Ok(dst)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Parts start at increasing words the store holds, cover every word,
    /// and split the counts about evenly; one thread is one part.
    #[test]
    fn parts_split_the_words_evenly() {
        let unk = unk_id();
        let mut ids: Vec<WordId> = (1..=1000u64).map(|i| i * 7919).collect();
        ids.push(unk);
        ids.sort_unstable();
        let counts: Vec<u64> = (0..ids.len() as u64).map(|i| 1 + i % 13).collect();
        assert_eq!(split_words(&ids, &counts, true, 1), vec![0, ids.len()]);
        for threads in [2, 3, 8] {
            for unk_seen in [true, false] {
                let b = split_words(&ids, &counts, unk_seen, threads);
                assert_eq!(b.len(), threads + 1, "{threads} threads");
                assert_eq!((b[0], *b.last().unwrap()), (0, ids.len()));
                assert!(b.windows(2).all(|w| w[0] < w[1]));
                let total: u64 = counts.iter().sum();
                for w in b.windows(2) {
                    let part: u64 = counts[w[0]..w[1]].iter().sum();
                    let even = total / threads as u64;
                    assert!(part.abs_diff(even) <= 13, "{part} against {even}");
                }
                if !unk_seen {
                    assert!(b.iter().all(|&x| x == ids.len() || ids[x] != unk));
                }
            }
        }
        // A word with most of the counts: fewer parts, never an empty one.
        let mut heavy = counts.clone();
        heavy[10] = 1_000_000;
        let b = split_words(&ids, &heavy, true, 4);
        assert!(b.windows(2).all(|w| w[0] < w[1]) && b.len() <= 5);
    }
}
