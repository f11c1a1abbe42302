//! Freezing: a store streamed, order by order, into a model file.
//!
//! Order k is one pass over the store's n-grams of order k beside its
//! n-grams of order k − 1 (both in key order, so the children of a context
//! come right after it is met): for each kept n-gram h·w it computes
//! q(h·w) from the method's step at that order and P(w | h') = q(h'·w),
//! which it finds in the arrays already written for order k − 1; for each
//! kept context h of order k − 1 it writes where its children start and
//! β(h). Every array goes to its own temporary file next to the output
//! (memory-mapped when a later order searches it); at the end the arrays
//! are copied into the model file behind the metadata and the vocabulary.
//!
//! Memory: the store's block cache (the caller's), the vocabulary (its ids,
//! words and unigram values: about 40 bytes a word), one bit per n-gram of
//! the previous order (which were kept), and buffers. The mapped arrays are
//! file pages the kernel can drop at any time.
//!
//! Pruning by count (`min_counts`) keeps an n-gram of order k only if its
//! raw count reaches the k-th threshold and its context and its suffix
//! h'·w are kept (closure under prefixes and suffixes); the back-off weight
//! of a context that lost a child is recomputed so that its distribution
//! sums to 1: β(h) = (1 − Σ q(h·v)) / (1 − Σ q(h'·v)) over its kept
//! children v.

use std::fs::File;
use std::path::{Path, PathBuf};

use crate::error::{Error, IoContext, Result};
use crate::key::Key;
use crate::query::backoff::BackoffKind;
use crate::query::katz::EPS;
use crate::query::Estimator;
use crate::store::NgramRecord;
use crate::words::{bos_id, unk_id, WordId};

use super::format::{ModelMeta, SectionKind};
use super::packed::{ef_encode, width_for};
use super::prune;
use super::quantize::quantize;
use super::reader::{find_id, map_read_only, u32_at, Model};
use super::reduce::{suffix_links, write_reduced, Reduction};
use super::writer::{ArrayFile, ModelWriter};

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

/// A file's bytes, memory-mapped (or empty).
enum Bytes {
    Map(memmap2::Mmap),
    Empty,
}

impl std::ops::Deref for Bytes {
    type Target = [u8];
    fn deref(&self) -> &[u8] {
        match self {
            Bytes::Map(m) => m,
            Bytes::Empty => &[],
        }
    }
}

fn map(path: &Path) -> Result<Bytes> {
    let f = File::open(path).at(path, "open")?;
    if f.metadata().at(path, "stat")?.len() == 0 {
        return Ok(Bytes::Empty);
    }
    Ok(Bytes::Map(map_read_only(&f, path)?))
}

/// The arrays written so far, searchable: `words[k]` and `children[k]`
/// (index k − 1 … as the order), mapped.
struct Built {
    words: Vec<Bytes>,
    children: Vec<Bytes>,
    /// Cached path of the last lookup: word indices and entries.
    path_x: Vec<u32>,
    path_e: Vec<u32>,
    /// Where the last search of each level ended (the entry found, or
    /// where the word would be), and under which parent entry: the
    /// n-grams of one context come in word order, so their suffixes are
    /// children of one entry in increasing order, and the next search
    /// gallops forward from there.
    hint: Vec<(u32, usize)>,
}

impl Built {
    /// The entry of order |xs| of the n-gram of word indices `xs`.
    fn lookup(&mut self, xs: &[u32]) -> Option<u32> {
        let mut same = 0;
        while same < xs.len() && same < self.path_x.len() && self.path_x[same] == xs[same] {
            same += 1;
        }
        self.path_x.truncate(same);
        self.path_e.truncate(same);
        if self.hint.len() < xs.len() {
            self.hint.resize(xs.len(), (u32::MAX, 0));
        }
        for t in same..xs.len() {
            let e = if t == 0 {
                xs[0]
            } else {
                // Entry path_e[t-1] of order t; its children are of order t + 1.
                let c = &self.children[t - 1];
                let w = &self.words[t];
                let n = w.len() / 4;
                let p = self.path_e[t - 1];
                let lo = (u32_at(c, p as usize) as usize).min(n);
                let hi = (u32_at(c, p as usize + 1) as usize).clamp(lo, n);
                let (hp, hpos) = self.hint[t];
                let from = if hp == p && hpos > lo && hpos <= hi && u32_at(w, hpos - 1) < xs[t] {
                    hpos
                } else {
                    lo
                };
                match gallop(w, from, hi, xs[t]) {
                    Ok(i) => {
                        self.hint[t] = (p, i + 1);
                        i as u32
                    }
                    Err(i) => {
                        self.hint[t] = (p, i);
                        return None;
                    }
                }
            };
            self.path_x.push(xs[t]);
            self.path_e.push(e);
        }
        self.path_e.last().copied()
    }
}

/// The position of `w` among the increasing u32 words `words[lo..hi]`
/// (little-endian bytes), or where it would be: galloping from `lo`
/// (1, 2, 4, … ahead), then bisecting, so that a word near `lo` costs few
/// reads.
fn gallop(words: &[u8], lo: usize, hi: usize, w: u32) -> std::result::Result<usize, usize> {
    let (mut a, mut step) = (lo, 1usize);
    let mut b = lo;
    while b < hi && u32_at(words, b) < w {
        a = b + 1;
        b = lo + step;
        step *= 2;
    }
    let b = b.min(hi);
    let (mut a, mut b) = (a.min(b), b);
    while a < b {
        let m = a + (b - a) / 2;
        if u32_at(words, m) < w {
            a = m + 1;
        } else {
            b = m;
        }
    }
    if a < hi && u32_at(words, a) == w {
        Ok(a)
    } else {
        Err(a)
    }
}

/// A folder for the temporary arrays beside the output, removed when
/// dropped (also on an error).
struct TempDir(PathBuf);

impl TempDir {
    fn create(parent: &Path, out: &Path) -> Result<TempDir> {
        let name = out
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let p = parent.join(format!(".{name}.freeze-{}", std::process::id()));
        if p.exists() {
            std::fs::remove_dir_all(&p).at(&p, "remove a stale temporary folder")?;
        }
        std::fs::create_dir(&p).at(&p, "create a temporary folder")?;
        Ok(TempDir(p))
    }

    fn path(&self) -> &Path {
        &self.0
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Katz's contexts that back off past h' (all orders; and whether the
/// current order has one), and those it cannot represent.
#[derive(Default)]
struct KatzTally {
    skips: u64,
    order_skips: bool,
    unrepresentable: u64,
}

/// Sums over the kept children of one context.
#[derive(Default)]
struct Acc {
    kept: u64,
    sum_q: f64,
    sum_lower: f64,
    pruned: bool,
    freed: f64,
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
    let tmp = TempDir::create(&parent_dir, out)?;
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
    let index = |id: WordId| find_id(|i| ids[i], ids.len(), id);
    let bos_x = index(bos).ok_or_else(|| Error::corrupt(store.dir(), "the store has no <s>"))?;
    let mut q1 = vec![0.0f64; nw];
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
            let a = rec.map_or(0, |r| adjusted(r.count, r.continuation, id));
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
    let mut built = Built {
        words: vec![Bytes::Empty],
        children: Vec::new(),
        path_x: Vec::new(),
        path_e: Vec::new(),
        hint: Vec::new(),
    };
    // Which store n-grams of the previous order were kept (by position).
    let mut kept_prev: Vec<u64> = Vec::new();
    let mut tally = KatzTally::default();

    // ---- orders 2..N ----------------------------------------------------------
    let default_beta = match kind {
        BackoffKind::Stupid(a) => a,
        _ => 1.0,
    };
    for k in 2..=n {
        let lower_q = map(&q64_prev)?;
        tally.order_skips = false;
        let mut w_file = ArrayFile::create(tpath(format!("w{k}")))?;
        let mut q_file = ArrayFile::create(tpath(format!("q{k}")))?;
        let mut q64_file = ArrayFile::create(tpath(format!("q64-{k}")))?;
        let mut ctx_out = ContextOut {
            b: ArrayFile::create(tpath(format!("b{}", k - 1)))?,
            f: ArrayFile::create(tpath(format!("f{}", k - 1)))?,
            s: ArrayFile::create(tpath(format!("s{}", k - 1)))?,
            next_p: 0,
            default_beta,
            k,
        };
        let mut kept_now: Vec<u64> = Vec::new();
        let mut parents = ParentStream {
            it: Box::new(store.scan_records(k - 1, &[], None)?),
            pos: 0,
            rank: 0,
        };
        // The current parent: key, record, model index if kept.
        let mut cur: Option<(Key, NgramRecord, Option<u32>)> = None;
        let mut acc = Acc::default();
        let mut spread_f = 0.0;
        let mut written: u64 = 0;
        let mut xs: Vec<u32> = Vec::with_capacity(k);
        let mut xs_ids: Vec<WordId> = Vec::with_capacity(k);
        let mut store_n: u64 = 0;
        // β of a finished context; `None`: Katz must look past h'.
        let beta_of = |rec: &NgramRecord, acc: &Acc| -> Option<f64> {
            let j = k - 1;
            Some(match kind {
                BackoffKind::Stupid(a) => a,
                _ if acc.kept == 0 => 1.0,
                BackoffKind::Interpolated if !acc.pruned => {
                    est.interpolation_weight(j, rec.context, rec.count)
                }
                BackoffKind::Katz if !acc.pruned => {
                    let s = rec.context.unwrap_or_default();
                    let f = acc.freed / s.count_sum.max(1) as f64;
                    let den = 1.0 - acc.sum_lower;
                    if f <= EPS {
                        0.0
                    } else if s.types as f64 >= v {
                        f
                    } else if den > EPS {
                        f / den
                    } else {
                        return None;
                    }
                }
                _ => {
                    let num = 1.0 - acc.sum_q;
                    let den = 1.0 - acc.sum_lower;
                    if kind == BackoffKind::Katz && num > EPS && den <= EPS {
                        return None;
                    }
                    if num <= 0.0 || den <= EPS {
                        0.0
                    } else {
                        num / den
                    }
                }
            })
        };
        let kept_of = |pk: &Key, parents: &mut ParentStream| -> Option<u32> {
            if k - 1 == 1 {
                index(pk.ids()[0])
            } else {
                parents.next_kept(&kept_prev)
            }
        };
        // Writes the children start and β of a finished kept context.
        let finish = |cur: &Option<(Key, NgramRecord, Option<u32>)>,
                      acc: &Acc,
                      written: u64,
                      built: &mut Built,
                      ctx_out: &mut ContextOut,
                      tally: &mut KatzTally|
         -> Result<()> {
            let Some((pk, prec, Some(p))) = cur else {
                return Ok(());
            };
            let (beta, skip) = match beta_of(prec, acc) {
                Some(b) => (b, 1),
                None => katz_deep(
                    est,
                    pk.ids(),
                    prec,
                    built,
                    &q64_maps,
                    &index,
                    &mut tally.unrepresentable,
                    (acc.pruned, 1.0 - acc.sum_q, min(k)),
                )?,
            };
            tally.order_skips |= skip > 1;
            tally.skips += u64::from(skip > 1);
            ctx_out.put(*p, written - acc.kept, beta, skip)
        };
        for (pos, item) in store.scan_records(k, &[], None)?.enumerate() {
            let (g, rec) = item?;
            store_n += 1;
            let gi = g.ids();
            let h = &gi[..k - 1];
            // Move to the parent h, finishing the ones passed.
            while cur.as_ref().is_none_or(|c| c.0.ids() != h) {
                finish(&cur, &acc, written, &mut built, &mut ctx_out, &mut tally)?;
                acc = Acc::default();
                let Some(p) = parents.it.next() else {
                    return Err(Error::corrupt(
                        store.dir(),
                        format!("order {k}: an n-gram whose context is not stored"),
                    ));
                };
                let (pk, prec) = p?;
                if pk.ids() > h {
                    return Err(Error::corrupt(
                        store.dir(),
                        format!("order {k}: an n-gram whose context is not stored"),
                    ));
                }
                let kept = kept_of(&pk, &mut parents);
                spread_f = 0.0;
                if kind == BackoffKind::Katz && kept.is_some() {
                    if let Some(s) = prec.context {
                        if s.types as f64 >= v {
                            // Every word follows this context: Katz spreads
                            // its freed mass, which needs F(h) first.
                            let mut freed = 0.0;
                            for c in store.children(pk.ids())? {
                                freed += est.katz_freed(k - 1, c?.1);
                            }
                            spread_f = freed / s.count_sum as f64;
                        }
                    }
                }
                cur = Some((pk, prec, kept));
            }
            let (_, prec, kept) = cur.as_ref().expect("set above");
            if kind == BackoffKind::Katz {
                acc.freed += est.katz_freed(k - 1, rec.count);
            }
            if kept.is_none() {
                continue;
            }
            // The word indices of h'·w: consecutive n-grams share their
            // leading words, so only those after the shared ones are looked
            // up.
            let mut same = 0;
            while same < xs.len() && same + 1 < k && xs_ids[same] == gi[same + 1] {
                same += 1;
            }
            xs.truncate(same);
            xs_ids.truncate(same);
            for &id in &gi[same + 1..] {
                xs.push(index(id).ok_or_else(|| {
                    Error::corrupt(store.dir(), "an n-gram holds a word that is not a unigram")
                })?);
                xs_ids.push(id);
            }
            let lower_e = if k == 2 {
                Some(xs[0])
            } else {
                built.lookup(&xs)
            };
            let Some(lower_e) = lower_e else {
                if !pruning {
                    return Err(Error::corrupt(
                        store.dir(),
                        format!("order {k}: the suffix of a stored n-gram is not stored"),
                    ));
                }
                acc.pruned = true;
                continue;
            };
            if rec.count < min(k) {
                acc.pruned = true;
                continue;
            }
            let at = 8 * lower_e as usize;
            let lower = f64::from_le_bytes(
                lower_q
                    .get(at..at + 8)
                    .ok_or_else(|| Error::corrupt(&q64_prev, "short temporary array"))?
                    .try_into()
                    .expect("8 bytes"),
            );
            let j = k - 1;
            let q = match kind {
                BackoffKind::Interpolated => {
                    let a = adjusted(rec.count, rec.continuation, gi[0]);
                    est.step(j, rec.count, a, prec.context, prec.count, lower)
                }
                BackoffKind::Katz => {
                    let s = prec.context.unwrap_or_default();
                    let p = est.katz_seen(j, rec.count, s.count_sum);
                    if s.types as f64 >= v && spread_f > EPS {
                        p + spread_f * lower
                    } else {
                        p
                    }
                }
                BackoffKind::Stupid(_) => rec.count as f64 / prec.count.max(1) as f64,
            };
            w_file.u32(*xs.last().expect("k ≥ 2"))?;
            q_file.f32(q as f32)?;
            q64_file.f64(q)?;
            let word = pos / 64;
            if kept_now.len() <= word {
                kept_now.resize(word + 1, 0);
            }
            kept_now[word] |= 1 << (pos % 64);
            written += 1;
            acc.kept += 1;
            acc.sum_q += q;
            acc.sum_lower += lower;
        }
        finish(&cur, &acc, written, &mut built, &mut ctx_out, &mut tally)?;
        // Every later context has no kept child.
        let n_prev = kept_counts[k - 2];
        ctx_out.fill_to(n_prev as u32, written)?;
        ctx_out
            .f
            .u32(u32::try_from(written).map_err(|_| too_many(k))?)?;
        kept_counts.push(written);
        store_counts.push(store_n);
        word_paths.push(Some(w_file.close()?));
        q_paths.push(q_file.close()?);
        weight_paths.push(ctx_out.b.close()?);
        child_paths.push(ctx_out.f.close()?);
        let sp = ctx_out.s.close()?;
        skip_paths.push(tally.order_skips.then_some(sp));
        q64_prev = q64_file.close()?;
        q64_maps.push(map(&q64_prev)?);
        kept_prev = kept_now;
        built
            .words
            .push(map(word_paths[k - 1].as_ref().expect("order ≥ 2"))?);
        built.children.push(map(&child_paths[k - 2])?);
        built.path_x.clear();
        built.path_e.clear();
        built.hint.clear();
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
        return reduce_model(&full, out, opts, report);
    }
    Ok(report)
}

/// Prunes by relative entropy and/or quantizes the model just written at
/// `full` into `out`.
fn reduce_model(
    full: &Path,
    out: &Path,
    opts: &FreezeOptions,
    mut report: FreezeReport,
) -> Result<FreezeReport> {
    let m = Model::open(full)?;
    let links = suffix_links(&m)?;
    let threshold = match (opts.relative_entropy, opts.max_ngrams) {
        (None, None) => None,
        (theta, max) => {
            let d = prune::criterion(&m, &links)?;
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
            let (v, moved) = quantize(&m, &keep, b);
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
    let done = write_reduced(&m, &links, &mut r, out)?;
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

fn too_many(k: usize) -> Error {
    Error::Config(format!(
        "order {k} keeps more than 4,294,967,295 n-grams, more than a model of this format version can index"
    ))
}

/// The adjusted count: the continuation count, except at the top order and
/// for n-grams that start with `<s>` (the raw count there).
fn adjusted(c: u64, cont: Option<u64>, first: WordId) -> u64 {
    match cont {
        Some(x) if first != bos_id() => x,
        _ => c,
    }
}

/// The n-grams of the previous order in key order, with which of them
/// were kept.
struct ParentStream<'a> {
    it: Box<dyn Iterator<Item = Result<(Key, NgramRecord)>> + 'a>,
    pos: u64,
    rank: u32,
}

impl ParentStream<'_> {
    /// Whether the n-gram just taken from `it` was kept (by its position),
    /// and its entry if so.
    fn next_kept(&mut self, kept: &[u64]) -> Option<u32> {
        let p = self.pos;
        self.pos += 1;
        let bit = kept
            .get(p as usize / 64)
            .is_some_and(|w| w >> (p % 64) & 1 == 1);
        bit.then(|| {
            self.rank += 1;
            self.rank - 1
        })
    }
}

/// The children starts and back-off weights of one order's kept n-grams,
/// written in entry order; an entry without kept children gets an empty
/// range and the default weight.
struct ContextOut {
    b: ArrayFile,
    f: ArrayFile,
    s: ArrayFile,
    next_p: u32,
    default_beta: f64,
    k: usize,
}

impl ContextOut {
    fn fill_to(&mut self, p: u32, start: u64) -> Result<()> {
        while self.next_p < p {
            self.f
                .u32(u32::try_from(start).map_err(|_| too_many(self.k))?)?;
            self.b.f32(self.default_beta as f32)?;
            self.s.put(&[1])?;
            self.next_p += 1;
        }
        Ok(())
    }

    fn put(&mut self, p: u32, start: u64, beta: f64, skip: u8) -> Result<()> {
        self.fill_to(p, start)?;
        self.f
            .u32(u32::try_from(start).map_err(|_| too_many(self.k))?)?;
        self.b.f32(beta as f32)?;
        self.s.put(&[skip])?;
        self.next_p = p + 1;
        Ok(())
    }
}

/// Katz's back-off weight for a context h whose children take all the
/// probability of h' (1 − Σ P(v | h') ≤ 1e-12): like the estimator, it
/// looks at ever shorter contexts h_i for one where the denominator
/// 1 − Σ_{v child of h} P(v | h_i) is positive, and returns β = F(h)/that
/// denominator with the number of words dropped. Where there is none, the
/// estimator spreads F(h) uniformly, which a back-off model cannot say:
/// counted in `unrep`, β = 0. `pruned`: (some child of h was pruned, the
/// mass 1 − Σ q(h·v) of its kept children, the count threshold of their
/// order): then the numerator is that mass and only kept children count.
#[allow(clippy::too_many_arguments)]
fn katz_deep(
    est: &Estimator<'_>,
    h: &[WordId],
    rec: &NgramRecord,
    built: &mut Built,
    q64: &[Bytes],
    index: &dyn Fn(WordId) -> Option<u32>,
    unrep: &mut u64,
    pruned: (bool, f64, u64),
) -> Result<(f64, u8)> {
    let j = h.len();
    let s = rec.context.unwrap_or_default();
    let store = est.store();
    let mut kids: Vec<(u32, u64)> = Vec::new();
    for c in store.children(h)? {
        let (key, count, _) = c?;
        let v = index(key.ids()[j])
            .ok_or_else(|| Error::corrupt(store.dir(), "a word that is not a unigram"))?;
        kids.push((v, count));
    }
    let freed: f64 = kids.iter().map(|&(_, c)| est.katz_freed(j, c)).sum();
    let hx: Vec<u32> = h
        .iter()
        .map(|&id| {
            index(id).ok_or_else(|| Error::corrupt(store.dir(), "a word that is not a unigram"))
        })
        .collect::<Result<_>>()?;
    let mut xs: Vec<u32> = Vec::with_capacity(j + 1);
    let f = if pruned.0 {
        // Only the kept children: count at the threshold and h'·v kept.
        kids.retain(|&(v, c)| {
            c >= pruned.2 && {
                xs.clear();
                xs.extend_from_slice(&hx[1..]);
                xs.push(v);
                xs.len() == 1 || built.lookup(&xs).is_some()
            }
        });
        pruned.1
    } else {
        freed / s.count_sum.max(1) as f64
    };
    for i in (0..j.saturating_sub(1)).rev() {
        let mut sum = 0.0;
        for &(v, _) in &kids {
            xs.clear();
            xs.extend_from_slice(&hx[j - i..]);
            xs.push(v);
            let e = if i == 0 { Some(v) } else { built.lookup(&xs) };
            let Some(e) = e else {
                return Err(Error::corrupt(
                    store.dir(),
                    "the suffix of a kept n-gram is not kept",
                ));
            };
            let b = &q64[i];
            let at = 8 * e as usize;
            sum += f64::from_le_bytes(b[at..at + 8].try_into().expect("8 bytes"));
        }
        let den = 1.0 - sum;
        if den > EPS {
            return Ok((f / den, (j - i) as u8));
        }
    }
    *unrep += 1;
    Ok((0.0, 1))
}
