//! Orders 2..N of a freeze: what they share ([`Plan`]), the arrays of
//! the finished orders ([`Arrays`]), and one order k: its parts (cut by
//! the n-grams' first word, [`split_words`]) run on threads side by side
//! ([`super::pass`]), and their arrays joined in key order, each
//! children start shifted by the children of the parts before.

use std::fs::File;
use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{IoContext, Result};
use crate::query::backoff::BackoffKind;
use crate::query::Estimator;
use crate::words::{bos_id, unk_id, WordId};

use super::built::{map, Built, Bytes};
use super::bytes::{f64_at, u32_at};
use super::format::SectionKind;
use super::packed::{ef_encode, width_for};
use super::pass::{run_part, too_many, KatzTally, Order, Part, PartOut};
use super::writer::{ArrayFile, ModelWriter};

/// What every order 2..N of one freeze shares: the method, the words
/// and the store's ranks, where the parts start, the count thresholds.
pub(super) struct Plan<'a> {
    kind: BackoffKind,
    /// |V|.
    v: f64,
    ids: &'a [WordId],
    /// The store's n-grams are read as ranks (their words' positions
    /// among the store's ids): the id of every rank, and the word index
    /// of every rank (`u32::MAX`: not a unigram).
    rank_ids: &'a [WordId],
    rank_index: Vec<u32>,
    bos_rank: u64,
    /// The word indices where the parts start, and `ids.len()`.
    pub(super) bounds: Vec<usize>,
    min_counts: Vec<u64>,
    pruning: bool,
    default_beta: f64,
    dir: &'a Path,
}

impl<'a> Plan<'a> {
    /// The plan of freezing the words `ids` (word index i is `ids[i]`)
    /// with the parts that start at `bounds` and the count thresholds
    /// `min_counts` (index k − 1, at least 1), the temporary arrays in
    /// `dir`.
    pub(super) fn new(
        est: &'a Estimator<'_>,
        kind: BackoffKind,
        ids: &'a [WordId],
        bounds: Vec<usize>,
        min_counts: Vec<u64>,
        dir: &'a Path,
    ) -> Plan<'a> {
        let rank_ids = est.store().rank_ids();
        let mut rank_index = vec![u32::MAX; rank_ids.len()];
        for (x, id) in ids.iter().enumerate() {
            if let Ok(r) = rank_ids.binary_search(id) {
                rank_index[r] = x as u32;
            }
        }
        let bos_rank = rank_ids
            .binary_search(&bos_id())
            .map_or(u64::MAX, |r| r as u64);
        Plan {
            kind,
            v: est.vocabulary_f64(),
            ids,
            rank_ids,
            rank_index,
            bos_rank,
            bounds,
            pruning: min_counts.iter().any(|&m| m > 1),
            min_counts,
            default_beta: match kind {
                BackoffKind::Stupid(a) => a,
                _ => 1.0,
            },
            dir,
        }
    }
}

/// An order's q: in f32, as the model holds it (unigrams and the top
/// order), or exact, in f64 (the orders a later order reads).
enum QPath {
    F32(PathBuf),
    F64(PathBuf),
}

/// The arrays of the finished orders (temporary files; index k − 1 by
/// order, the weights, children and skips of orders 1..N − 1), the ones
/// the next order searches mapped, and what each part of the next order
/// starts from.
pub(super) struct Arrays {
    q_paths: Vec<QPath>,
    /// The exact q of every finished order mapped (for Katz's contexts
    /// that back off past their next shorter context).
    pub(super) q64_maps: Vec<Bytes>,
    /// The suffix entries of the last finished order (from order 2 on)
    /// and their file.
    links: Bytes,
    links_path: Option<PathBuf>,
    word_paths: Vec<Option<PathBuf>>,
    weight_paths: Vec<PathBuf>,
    child_paths: Vec<PathBuf>,
    skip_paths: Vec<Option<PathBuf>>,
    pub(super) kept_counts: Vec<u64>,
    pub(super) store_counts: Vec<u64>,
    pub(super) built: Built,
    /// Per part: which of its stored n-grams of the previous order were
    /// kept (by position within the part), and the entries of the kept
    /// ones.
    kept_prev: Vec<Vec<u64>>,
    entries: Vec<(u32, u32)>,
    pub(super) tally: KatzTally,
}

impl Arrays {
    /// The arrays after order 1 (q in f32 and f64 at `q_path` and
    /// `q64_path`, `ngrams` words of which the store holds
    /// `store_ngrams`), for the parts that start at `bounds`.
    pub(super) fn new(
        q_path: &Path,
        q64_path: &Path,
        ngrams: u64,
        store_ngrams: u64,
        bounds: &[usize],
    ) -> Result<Arrays> {
        Ok(Arrays {
            q_paths: vec![QPath::F32(q_path.to_path_buf())],
            q64_maps: vec![map(q64_path)?],
            links: Bytes::Empty,
            links_path: None,
            word_paths: vec![None],
            weight_paths: Vec::new(),
            child_paths: Vec::new(),
            skip_paths: Vec::new(),
            kept_counts: vec![ngrams],
            store_counts: vec![store_ngrams],
            built: Built {
                universe: ngrams,
                words: vec![Bytes::Empty],
                children: Vec::new(),
            },
            kept_prev: vec![Vec::new(); bounds.len() - 1],
            entries: bounds
                .windows(2)
                .map(|b| (b[0] as u32, b[1] as u32))
                .collect(),
            tally: KatzTally::default(),
        })
    }

    /// Freezes order `k`: runs its parts side by side and joins their
    /// arrays.
    pub(super) fn freeze_order(
        &mut self,
        est: &Estimator<'_>,
        plan: &Plan<'_>,
        k: usize,
    ) -> Result<()> {
        let parts_n = plan.bounds.len() - 1;
        let outs = {
            let o = Order {
                k,
                kind: plan.kind,
                v: plan.v,
                ids: plan.ids,
                rank_ids: plan.rank_ids,
                rank_index: &plan.rank_index,
                bos_rank: plan.bos_rank,
                built: &self.built,
                q64: &self.q64_maps,
                links: &self.links,
                top: k == plan.min_counts.len(),
                min_counts: &plan.min_counts,
                pruning: plan.pruning,
                default_beta: plan.default_beta,
                dir: plan.dir,
            };
            let parts: Vec<Part> = (0..parts_n)
                .map(|t| Part {
                    t,
                    first: (t > 0).then(|| plan.ids[plan.bounds[t]]),
                    end: (t + 1 < parts_n).then(|| plan.ids[plan.bounds[t + 1]]),
                    kept_prev: std::mem::take(&mut self.kept_prev[t]),
                    entries: self.entries[t],
                })
                .collect();
            run_parts(est, &o, parts)?
        };
        self.join(k, outs, plan.dir)
    }

    /// Joins the arrays of order `k`'s parts in key order (files in
    /// `dir`), and maps the ones the next order searches.
    fn join(&mut self, k: usize, outs: Vec<PartOut>, dir: &Path) -> Result<()> {
        let tpath = |name: String| dir.join(name);
        let total: u64 = outs.iter().map(|o| o.written).sum();
        if total > u64::from(u32::MAX) {
            return Err(too_many(k));
        }
        let w = concat(tpath(format!("w{k}")), outs.iter().map(|o| &o.w))?;
        let q = concat(tpath(format!("q{k}")), outs.iter().map(|o| &o.q))?;
        let links = match outs
            .iter()
            .map(|o| o.l.as_ref())
            .collect::<Option<Vec<_>>>()
        {
            Some(ls) if !ls.is_empty() => Some(concat(tpath(format!("l{k}")), ls)?),
            _ => None,
        };
        let b = concat(tpath(format!("b{}", k - 1)), outs.iter().map(|o| &o.b))?;
        let s = concat(tpath(format!("s{}", k - 1)), outs.iter().map(|o| &o.s))?;
        let f = self.join_children(tpath(format!("f{}", k - 1)), &outs, total)?;
        let store_n: u64 = outs.iter().map(|o| o.store_n).sum();
        let mut order_skips = false;
        for (t, o) in outs.into_iter().enumerate() {
            self.tally.skips += o.tally.skips;
            self.tally.unrepresentable += o.tally.unrepresentable;
            order_skips |= o.tally.order_skips;
            self.kept_prev[t] = o.kept;
        }
        self.kept_counts.push(total);
        self.store_counts.push(store_n);
        self.word_paths.push(Some(w));
        if links.is_some() {
            self.q64_maps.push(map(&q)?);
            self.q_paths.push(QPath::F64(q));
        } else {
            self.q_paths.push(QPath::F32(q));
        }
        self.weight_paths.push(b);
        self.child_paths.push(f);
        self.skip_paths.push(order_skips.then_some(s));
        // The links of order k − 1 are read by order k's pass only.
        self.links = Bytes::Empty;
        if let Some(old) = self.links_path.take() {
            std::fs::remove_file(&old).at(&old, "remove")?;
        }
        if let Some(l) = links {
            self.links = map(&l)?;
            self.links_path = Some(l);
        }
        self.built
            .words
            .push(map(self.word_paths[k - 1].as_ref().expect("order ≥ 2"))?);
        self.built.children.push(map(&self.child_paths[k - 2])?);
        Ok(())
    }

    /// Joins the parts' children starts into the file `path`, each part's
    /// shifted by the `total` children of the parts before and ended by
    /// the total; records the entries of each part's kept n-grams.
    fn join_children(&mut self, path: PathBuf, outs: &[PartOut], total: u64) -> Result<PathBuf> {
        let mut f = ArrayFile::create(path)?;
        let mut base = 0u64;
        for (t, o) in outs.iter().enumerate() {
            let a = map(&o.f)?;
            for i in 0..a.len() / 4 {
                f.u32((base + u64::from(u32_at(&a, i))) as u32)?;
            }
            drop(a);
            std::fs::remove_file(&o.f).at(&o.f, "remove")?;
            let end = base + o.written;
            self.entries[t] = (base as u32, end as u32);
            base = end;
        }
        f.u32(total as u32)?;
        f.close()
    }

    /// Writes the arrays of orders 1..=`n` into the model (`nw` words).
    pub(super) fn write(&self, w: &mut ModelWriter, n: usize, nw: usize) -> Result<()> {
        let copy = |w: &mut ModelWriter, kind: SectionKind, k: usize, p: &Path| -> Result<()> {
            let mut f = File::open(p).at(p, "open")?;
            w.section_from(kind, k, &mut f, p)
        };
        let width = width_for(nw as u64 - 1);
        for k in 1..=n {
            if let Some(p) = &self.word_paths[k - 1] {
                let a = map(p)?;
                w.packed(
                    SectionKind::Words,
                    k,
                    width,
                    (0..a.len() / 4).map(|i| u32_at(&a, i) as u64),
                )?;
            }
            match &self.q_paths[k - 1] {
                QPath::F32(p) => copy(w, SectionKind::Probs, k, p)?,
                QPath::F64(p) => {
                    let a = map(p)?;
                    w.floats(
                        SectionKind::Probs,
                        k,
                        (0..a.len() / 8).map(|i| f64_at(&a, i) as f32),
                    )?;
                }
            }
            if k < n {
                copy(w, SectionKind::Weights, k, &self.weight_paths[k - 1])?;
                let a = map(&self.child_paths[k - 1])?;
                let ef = ef_encode((0..a.len() / 4).map(|i| u32_at(&a, i) as u64));
                w.section(SectionKind::Children, k, &ef)?;
                if let Some(p) = &self.skip_paths[k - 1] {
                    copy(w, SectionKind::Skips, k, p)?;
                }
            }
        }
        Ok(())
    }
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
pub(super) fn split_words(
    ids: &[WordId],
    counts: &[u64],
    unk_seen: bool,
    threads: usize,
) -> Vec<usize> {
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
