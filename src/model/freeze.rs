//! Freezing: a store streamed, order by order, into a model file.
//!
//! The vocabulary and the unigrams come first. Order k ≥ 2 is then one
//! pass over the store's n-grams of order k beside its n-grams of order
//! k − 1 ([`super::pass`]), cut into parts by the n-grams' first word and
//! run on threads side by side ([`super::orders`]): the parts' arrays are
//! joined in key order, each children start shifted by the children of
//! the parts before, so the model is the same byte for byte whatever the
//! number of threads.
//! Every array goes to its own temporary file next to the output
//! (memory-mapped when a later order searches it); at the end the arrays
//! are copied into the model file behind the metadata and the vocabulary.
//!
//! Memory: the store's block cache (the caller's), the vocabulary (its ids,
//! words and unigram values: about 40 bytes a word), one bit per n-gram of
//! the previous order (which were kept), and buffers per thread. The
//! mapped arrays are file pages the kernel can drop at any time.

use std::path::{Path, PathBuf};

use crate::error::{Error, IoContext, Result};
use crate::query::backoff::BackoffKind;
use crate::query::Estimator;
use crate::store::{ContextStats, NgramRecord};
use crate::words::{bos_id, unk_id, WordId};

use super::file::Model;
use super::format::{ModelMeta, SectionKind};
use super::orders::{split_words, Arrays, Plan};
use super::pass::{left_type, KatzTally};
use super::prune;
use super::quantize::quantize;
use super::reduce::{suffix_links, write_reduced, Reduction};
use super::spill::Spill;
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
    /// The largest model whose file takes at most this many bytes: the
    /// relative-entropy pruning budget is searched (with `bits`, the
    /// quantized model's size).
    pub max_bytes: Option<u64>,
    /// Words the model's `next` and completion never show (stored in the
    /// metadata; they stay in V and in every probability).
    pub never_suggest: Vec<String>,
}

impl FreezeOptions {
    /// The threads of each order's parts (0 given: one per core).
    fn threads(&self) -> usize {
        match self.threads {
            0 => std::thread::available_parallelism().map_or(1, |t| t.get()),
            t => t,
        }
    }

    /// The count threshold of order `k` (at least 1).
    fn min_count(&self, k: usize) -> u64 {
        self.min_counts.get(k - 1).copied().unwrap_or(1).max(1)
    }

    /// Whether the model is reduced after freezing (pruned by relative
    /// entropy or quantized).
    pub(crate) fn reduces(&self) -> bool {
        self.relative_entropy.is_some()
            || self.max_ngrams.is_some()
            || self.max_bytes.is_some()
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
    check_options(est, opts)?;
    let n = est.store().meta().settings.order;
    let tmp = temporary_folder(out)?;
    let mut notes: Vec<String> = est.notes().to_vec();
    let uni = Unigrams::freeze(est, kind, tmp.path())?;
    let bounds = split_words(&uni.ids, &uni.counts, uni.unk_seen, opts.threads());
    let min_counts: Vec<u64> = (1..=n).map(|k| opts.min_count(k)).collect();
    let plan = Plan::new(est, kind, &uni.ids, bounds, min_counts, tmp.path());
    let nw = uni.ids.len() as u64;
    let stored = nw - u64::from(!uni.unk_seen);
    let mut arrays = Arrays::new(&uni.q_path, &uni.q64_path, nw, stored, &plan.bounds)?;
    for k in 2..=n {
        arrays.freeze_order(est, &plan, k)?;
    }
    katz_notes(&arrays.tally, &mut notes);
    let vocabulary = VocabularySections::new(est, &uni)?;
    let mmeta = model_meta(est, kind, opts, &uni, &arrays, &notes);
    // A model to be reduced is written whole first, into the temporary
    // folder.
    let full = tmp.path().join("full.model");
    let mut w = ModelWriter::create(if opts.reduces() { &full } else { out })?;
    vocabulary.write(&mut w, &mmeta, &uni.ids)?;
    arrays.write(&mut w, n, uni.ids.len())?;
    drop(arrays.built);
    let file_bytes = w.finish()?;
    let report = FreezeReport {
        ngrams_unpruned: arrays.kept_counts.clone(),
        ngrams: arrays.kept_counts,
        store_ngrams: arrays.store_counts,
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
        drop(arrays.q64_maps);
        for p in std::fs::read_dir(tmp.path()).at(tmp.path(), "list")? {
            let p = p.at(tmp.path(), "list")?.path();
            if p != full {
                std::fs::remove_file(&p).at(&p, "remove")?;
            }
        }
        if let Some(max) = opts.max_bytes {
            return fit_bytes(&full, out, opts, report, max);
        }
        return reduce_model(&full, out, opts, report);
    }
    Ok(report)
}

/// Checks the options against each other and against the method: the
/// unigrams kept whole, quantization's bits in range, one pruning target
/// at most, a threshold ≥ 0, and pruning by relative entropy only for a
/// method that gives probabilities.
fn check_options(est: &Estimator<'_>, opts: &FreezeOptions) -> Result<()> {
    if opts.min_count(1) > 1 {
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
    let targets = [
        opts.relative_entropy.is_some(),
        opts.max_ngrams.is_some(),
        opts.max_bytes.is_some(),
    ];
    if targets.iter().filter(|&&t| t).count() > 1 {
        return Err(Error::Config(
            "give one of a relative-entropy threshold, --max-ngrams and --max-bytes, not several"
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
    if (opts.relative_entropy.is_some() || opts.max_ngrams.is_some() || opts.max_bytes.is_some())
        && !est.method().is_probability()
    {
        return Err(Error::Config(format!(
            "relative-entropy pruning needs probabilities; {} gives scores that do not sum to 1",
            est.method()
        )));
    }
    Ok(())
}

/// The folder of the temporary arrays, of its own beside the output `out`
/// (same file system, so renaming works), removed when dropped, also on
/// an error.
fn temporary_folder(out: &Path) -> Result<tempfile::TempDir> {
    let parent_dir = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    tempfile::Builder::new()
        .prefix(&format!(".{name}.freeze-"))
        .tempdir_in(&parent_dir)
        .at(&parent_dir, "create a temporary folder in")
}

/// The vocabulary and order 1: the word ids in increasing order (word
/// index i is `ids[i]`, `<unk>` added if the store has none), each word's
/// q and count, and q's arrays (f32 and exact f64) in the temporary
/// folder.
struct Unigrams {
    ids: Vec<WordId>,
    unk_seen: bool,
    /// The word index of `<s>`.
    bos_x: u32,
    q1: Vec<f64>,
    counts: Vec<u64>,
    q_path: PathBuf,
    q64_path: PathBuf,
}

impl Unigrams {
    /// Reads the store's unigrams and writes q of every word of V into
    /// `dir`.
    fn freeze(est: &Estimator<'_>, kind: BackoffKind, dir: &Path) -> Result<Unigrams> {
        let store = est.store();
        let root = store.meta().root;
        let v = est.vocabulary_f64();
        let bos = bos_id();
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
        let bos_x =
            index(bos).ok_or_else(|| Error::corrupt(store.dir(), "the store has no <s>"))?;
        let mut q1 = vec![0.0f64; nw];
        let mut counts = vec![0u64; nw];
        let mut q_file = ArrayFile::create(dir.join("q1"))?;
        let mut q64_file = ArrayFile::create(dir.join("q64-1"))?;
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
            let a = rec.map_or(0, |r| left_type(r.count, r.continuation, id == bos));
            let q = if id == bos {
                0.0
            } else {
                unigram_q(est, kind, c, a, root, v)
            };
            q1[x] = q;
            counts[x] = c;
            q_file.f32(q as f32)?;
            q64_file.f64(q)?;
        }
        drop(recs);
        Ok(Unigrams {
            ids,
            unk_seen,
            bos_x,
            q1,
            counts,
            q_path: q_file.close()?,
            q64_path: q64_file.close()?,
        })
    }
}

/// q of a word other than `<s>` with count `c` and left-type count `a`, at
/// order 1 (the root context `root`, |V| = `v`).
fn unigram_q(
    est: &Estimator<'_>,
    kind: BackoffKind,
    c: u64,
    a: u64,
    root: ContextStats,
    v: f64,
) -> f64 {
    match kind {
        BackoffKind::Interpolated => est.step(0, c, a, Some(root), root.count_sum, 1.0 / v),
        BackoffKind::Katz => est.katz_seen(0, c, root.count_sum),
        BackoffKind::Stupid(_) => {
            if c > 0 {
                c as f64 / root.count_sum as f64
            } else {
                0.0
            }
        }
    }
}

/// The notes on Katz's contexts whose freed mass goes past their next
/// shorter context, or to the uniform distribution.
fn katz_notes(tally: &KatzTally, notes: &mut Vec<String>) {
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
}

/// The model's metadata, before any reduction.
fn model_meta(
    est: &Estimator<'_>,
    kind: BackoffKind,
    opts: &FreezeOptions,
    uni: &Unigrams,
    arrays: &Arrays,
    notes: &[String],
) -> ModelMeta {
    let meta = est.store().meta();
    let n = meta.settings.order;
    ModelMeta {
        method: est.method(),
        params: est.params().clone(),
        constants: est.constants(),
        notes: notes.to_vec(),
        probabilities: est.method().is_probability(),
        default_backoff: match kind {
            BackoffKind::Stupid(a) => a,
            _ => 1.0,
        },
        order: n,
        preparation: meta.settings.preparation,
        vocabulary: meta.totals.vocabulary,
        unk_seen: uni.unk_seen,
        ngrams: arrays.kept_counts.clone(),
        store_ngrams: arrays.store_counts.clone(),
        value_bits: 32,
        weight_bits: 32,
        min_counts: (1..=n).map(|k| opts.min_count(k)).collect(),
        relative_entropy: None,
        never_suggest: opts.never_suggest.clone(),
    }
}

/// The vocabulary's sections of the model: the words' texts (u64 end
/// offsets starting with 0, then the bytes, by word index) and the
/// ranking of V (the word indices but `<s>`'s by decreasing unigram q,
/// ties by index), little-endian.
struct VocabularySections {
    offsets: Vec<u8>,
    text: Vec<u8>,
    ranking: Vec<u8>,
}

impl VocabularySections {
    /// Ranks V and reads the words' texts from the store.
    fn new(est: &Estimator<'_>, uni: &Unigrams) -> Result<VocabularySections> {
        let store = est.store();
        let (ids, q1) = (&uni.ids, &uni.q1);
        let mut ranking: Vec<u32> = (0..ids.len() as u32).filter(|&x| x != uni.bos_x).collect();
        ranking.sort_by(|&a, &b| q1[b as usize].total_cmp(&q1[a as usize]).then(a.cmp(&b)));
        let words = store.vocabulary()?;
        let mut offsets: Vec<u8> = Vec::with_capacity((ids.len() + 1) * 8);
        let mut text: Vec<u8> = Vec::new();
        offsets.extend_from_slice(&0u64.to_le_bytes());
        for id in ids {
            let w = words.get(id).ok_or_else(|| {
                Error::corrupt(
                    store.dir(),
                    format!("the word with id {id:#018x} has no text"),
                )
            })?;
            text.extend_from_slice(w.as_bytes());
            offsets.extend_from_slice(&(text.len() as u64).to_le_bytes());
        }
        Ok(VocabularySections {
            offsets,
            text,
            ranking: ranking.iter().flat_map(|x| x.to_le_bytes()).collect(),
        })
    }

    /// Writes the metadata `mmeta`, the ids and these sections into the
    /// model.
    fn write(&self, w: &mut ModelWriter, mmeta: &ModelMeta, ids: &[WordId]) -> Result<()> {
        w.section(
            SectionKind::Meta,
            0,
            &serde_json::to_vec_pretty(mmeta).expect("metadata serialises"),
        )?;
        let id_bytes: Vec<u8> = ids.iter().flat_map(|x| x.to_le_bytes()).collect();
        w.section(SectionKind::Ids, 0, &id_bytes)?;
        w.section(SectionKind::WordOffsets, 0, &self.offsets)?;
        w.section(SectionKind::WordText, 0, &self.text)?;
        w.section(SectionKind::Ranking, 0, &self.ranking)
    }
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
    let (theta, keep) = prune_selection(&m, &links, opts, dir)?;
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

/// The relative-entropy threshold (given, or picked for the size
/// target) and the n-grams it keeps, per order (none: no pruning, every
/// n-gram kept).
fn prune_selection(
    m: &Model,
    links: &[Spill<u32>],
    opts: &FreezeOptions,
    dir: &Path,
) -> Result<(Option<f64>, Vec<Vec<bool>>)> {
    let threshold = match (opts.relative_entropy, opts.max_ngrams) {
        (None, None) => None,
        (theta, max) => {
            let d = prune::criterion(m, links, dir)?;
            let theta = match (theta, max) {
                (Some(t), _) => Some(t),
                (None, Some(max)) => prune::threshold_for(m, links, &d, max)?,
                (None, None) => unreachable!(),
            };
            theta.map(|t| (t, prune::select(m, links, &d, t).0))
        }
    };
    Ok(match threshold {
        Some((t, keep)) => (Some(t), keep),
        None => (None, Vec::new()),
    })
}

/// A reduction tried: its report and file.
struct Trial {
    report: FreezeReport,
    path: PathBuf,
}

/// Reduces the whole model at `full` (whose freeze reported `whole`) into
/// the largest model of at most `max` bytes at `out` (`--max-bytes`).
///
/// If the whole model (quantized, when bits are asked) fits, it is the
/// answer. Otherwise the n-gram budget of relative-entropy pruning
/// (`--max-ngrams`, which picks the smallest threshold keeping at most
/// that many) is bisected: a budget whose file fits raises the lower end,
/// one that does not lowers the upper end, until they are within 0.1% of
/// the n-grams (or one n-gram) apart. The file grows with the n-grams
/// kept, so the fitting file of the largest budget tried is the largest
/// that fits, to that precision.
pub(crate) fn fit_bytes(
    full: &Path,
    out: &Path,
    opts: &FreezeOptions,
    whole: FreezeReport,
    max: u64,
) -> Result<FreezeReport> {
    let dir = full.parent().unwrap_or(Path::new("."));
    let base = FreezeOptions {
        max_bytes: None,
        ..opts.clone()
    };
    let mut tried = 0usize;
    let mut attempt = |budget: Option<u64>| -> Result<Option<Trial>> {
        tried += 1;
        let o = FreezeOptions {
            max_ngrams: budget,
            ..base.clone()
        };
        let path = dir.join(format!("fit-{tried}.model"));
        if !o.reduces() {
            std::fs::copy(full, &path).at(&path, "copy into")?;
            return Ok(Some(Trial {
                report: whole.clone(),
                path,
            }));
        }
        match reduce_model(full, &path, &o, whole.clone()) {
            Ok(report) => Ok(Some(Trial { report, path })),
            // A budget below what no pruning can drop.
            Err(Error::Config(_)) if budget.is_some() => Ok(None),
            Err(e) => Err(e),
        }
    };
    let fits = |t: &Trial| t.report.file_bytes <= max;
    let mut best = attempt(None)?.expect("an unpruned model");
    if !fits(&best) {
        let first = best.report.file_bytes;
        let all: u64 = whole.ngrams.iter().sum();
        let (mut lo, mut hi) = (whole.ngrams[0], all);
        let mut found: Option<Trial> = None;
        while hi - lo > (hi / 1000).max(1) {
            let mid = lo + (hi - lo) / 2;
            match attempt(Some(mid))? {
                Some(t) if fits(&t) => {
                    lo = mid;
                    if let Some(old) = found.replace(t) {
                        remove_file(&old.path)?;
                    }
                }
                Some(t) => {
                    hi = mid;
                    remove_file(&t.path)?;
                }
                None => lo = mid,
            }
        }
        remove_file(&best.path)?;
        best = found.ok_or_else(|| {
            Error::Config(format!(
                "--max-bytes {max}: no pruned model fits (the whole model takes {first} bytes; the smallest pruning can give is larger than {max})"
            ))
        })?;
    }
    std::fs::rename(&best.path, out).at(out, "rename into place")?;
    let mut report = best.report;
    report.notes.push(format!(
        "--max-bytes {max}: {} bytes, {} n-grams kept ({} models tried)",
        report.file_bytes,
        report.ngrams.iter().sum::<u64>(),
        tried
    ));
    Ok(report)
}

fn remove_file(p: &Path) -> Result<()> {
    std::fs::remove_file(p).at(p, "remove")
}
