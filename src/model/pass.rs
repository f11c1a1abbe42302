//! One order's pass of a freeze, over one part of the store: the n-grams
//! of order k whose first word lies in a range, beside the n-grams of
//! order k − 1 of the same range (both in key order, so the children of a
//! context come right after it is met).
//!
//! For each kept n-gram h·w the pass computes q(h·w) from the method's step
//! at that order and P(w | h') = q(h'·w), which it finds in the arrays of
//! order k − 1 that every part wrote before ([`Built`], shared); for each
//! kept context h of the range it writes where its children start (counted
//! from the part's first child) and β(h). A context's children all share
//! its first word, so parts never split one; [`super::orders`] runs the
//! parts on threads side by side and joins their arrays in order.
//!
//! Pruning by count keeps an n-gram of order k only if its raw count
//! reaches the k-th threshold and its context and its suffix h'·w are kept
//! (closure under prefixes and suffixes); the back-off weight of a context
//! that lost a child is recomputed so that its distribution sums to 1:
//! β(h) = (1 − Σ q(h·v)) / (1 − Σ q(h'·v)) over its kept children v.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::key::Key;
use crate::query::backoff::BackoffKind;
use crate::query::katz::EPS;
use crate::query::Estimator;
use crate::store::NgramRecord;
use crate::words::WordId;

use super::built::{Built, Bytes, Cursor};
use super::bytes::f64_at;
use super::lower::{self, Lower, Want};
use super::writer::ArrayFile;
use crate::search::find_in;

/// The n-grams a part reads ahead of its sums, whose lower entries are
/// found together ([`lower::resolve`]).
const BATCH: usize = 64;

/// Katz's contexts that back off past h' (all orders; and whether the
/// current order has one), and those it cannot represent.
#[derive(Default)]
pub(super) struct KatzTally {
    pub skips: u64,
    pub order_skips: bool,
    pub unrepresentable: u64,
}

/// What every part of one order shares.
pub(super) struct Order<'a> {
    /// The order.
    pub k: usize,
    pub kind: BackoffKind,
    /// |V|.
    pub v: f64,
    /// The word ids, increasing: word index i is `ids[i]`.
    pub ids: &'a [WordId],
    /// The store's rank of every word ([`crate::store::Store::rank_ids`]):
    /// the parts read the store's n-grams as ranks.
    pub rank_ids: &'a [WordId],
    /// The word index of every rank (`u32::MAX`: not a unigram).
    pub rank_index: &'a [u32],
    /// The rank of `<s>` (`u64::MAX` if the store has none).
    pub bos_rank: u64,
    /// The arrays of orders 1..k − 1.
    pub built: &'a Built,
    /// The suffix entry of every entry of order k − 1 (u32 each; empty
    /// for k = 2).
    pub links: &'a [u8],
    /// Whether k is the highest order: no later order reads its exact q
    /// or its links, so it writes q in f32 only, as the model holds it.
    pub top: bool,
    /// The exact q of every finished order (index k − 1), f64 each.
    pub q64: &'a [Bytes],
    /// Count threshold per order (index k − 1; at least 1).
    pub min_counts: &'a [u64],
    /// Whether any order is pruned by count.
    pub pruning: bool,
    /// β of a context without kept children.
    pub default_beta: f64,
    /// The temporary folder.
    pub dir: &'a Path,
}

impl Order<'_> {
    fn index(&self, id: WordId) -> Option<u32> {
        find_in(|i| self.ids[i], 0, self.ids.len(), id, 8).map(|i| i as u32)
    }

    /// The word index of the word of rank `r`.
    #[inline]
    fn index_of_rank(&self, r: u64) -> Option<u32> {
        self.rank_index
            .get(r as usize)
            .copied()
            .filter(|&x| x != u32::MAX)
    }

    /// The ids of a key of ranks.
    fn ids_of(&self, ranks: &[u64]) -> Vec<WordId> {
        ranks.iter().map(|&r| self.rank_ids[r as usize]).collect()
    }

    fn min(&self, k: usize) -> u64 {
        self.min_counts.get(k - 1).copied().unwrap_or(1).max(1)
    }
}

/// One part of an order: the n-grams whose first word is in `first..end`
/// (ids; `None`: unbounded).
pub(super) struct Part {
    /// The part's number (names its files).
    pub t: usize,
    pub first: Option<WordId>,
    pub end: Option<WordId>,
    /// Which of the part's n-grams of order k − 1 were kept, by position
    /// within the part (for k = 2: unused, every unigram is kept).
    pub kept_prev: Vec<u64>,
    /// The model entries of the part's kept n-grams of order k − 1.
    pub entries: (u32, u32),
}

/// What one part of an order wrote.
pub(super) struct PartOut {
    /// Order k: last words (u32), q (exact, f64; f32 at the top order),
    /// and below the top order the suffix entries (u32).
    pub w: PathBuf,
    pub q: PathBuf,
    pub l: Option<PathBuf>,
    /// Order k − 1, the part's entries: β (f32), children starts counted
    /// from the part's first child (u32), Katz's skips (u8).
    pub b: PathBuf,
    pub f: PathBuf,
    pub s: PathBuf,
    /// Kept n-grams of order k.
    pub written: u64,
    /// Stored n-grams of order k read.
    pub store_n: u64,
    /// Which of them were kept, by position within the part.
    pub kept: Vec<u64>,
    pub tally: KatzTally,
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

/// The n-grams of the previous order in key order, with which of them
/// were kept.
struct ParentStream<I> {
    it: I,
    pos: u64,
    rank: u32,
}

impl<I> ParentStream<I> {
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

/// The children starts and back-off weights of one part's kept contexts,
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

/// The error of an order too big for the format's 32-bit entries.
pub(super) fn too_many(k: usize) -> Error {
    Error::Config(format!(
        "order {k} keeps more than 4,294,967,295 n-grams, more than a model of this format version can index"
    ))
}

/// The left-type count: the continuation count, except at the top order
/// and for n-grams that start with `<s>` (the raw count there).
pub(super) fn left_type(c: u64, cont: Option<u64>, first_is_bos: bool) -> u64 {
    match cont {
        Some(x) if !first_is_bos => x,
        _ => c,
    }
}

/// Runs one part of order `o.k` with the estimator `est`.
///
/// The part reads [`BATCH`] n-grams at a time: it first takes each one's
/// context from the stream of order k − 1 (which tells whether it is
/// kept), then finds the lower entries of those with a kept context
/// together, then adds the n-grams to their contexts' sums in order.
pub(super) fn run_part(est: &Estimator<'_>, o: &Order<'_>, part: Part) -> Result<PartOut> {
    let (first, end) = (part.first, part.end);
    let k = o.k;
    let mut run = open_part(est, o, part)?;
    let mut scan = est.store().scan_first_ranks(k, first, end)?.enumerate();
    let arrays = lower::Arrays {
        k,
        built: o.built,
        rank_index: o.rank_index,
        links: o.links,
        q64: &o.q64[k - 2],
    };
    let mut items: Vec<(usize, Key, NgramRecord, bool)> = Vec::with_capacity(BATCH);
    let mut wants: Vec<Want> = Vec::with_capacity(BATCH);
    let mut lowers: Vec<Lower> = Vec::with_capacity(BATCH);
    loop {
        items.clear();
        wants.clear();
        for (pos, item) in scan.by_ref().take(BATCH) {
            let (g, rec) = item?;
            let kept = run.parent_of(&g.ids()[..k - 1])?;
            if let Some(parent) = kept {
                wants.push(Want {
                    parent,
                    rank: g.ids()[k - 1],
                });
            }
            items.push((pos, g, rec, kept.is_some()));
        }
        if items.is_empty() {
            break;
        }
        lower::resolve(&arrays, &wants, &mut lowers);
        let mut found = lowers.iter();
        for (pos, g, rec, kept) in &items {
            let lower = if *kept { found.next() } else { None };
            run.ngram(*pos, g.ids(), *rec, lower)?;
        }
    }
    run.close()
}

/// One part's pass in progress: its output files, the parent context met
/// last with the sums over its kept children so far, and the n-grams of
/// order k read and kept.
struct PartRun<'a, 'e, I> {
    est: &'a Estimator<'e>,
    o: &'a Order<'a>,
    part: Part,
    /// Order k: last words (u32), q (see [`PartOut::q`]), suffix entries.
    w_file: ArrayFile,
    q_file: ArrayFile,
    l_file: Option<ArrayFile>,
    ctx_out: ContextOut,
    cursor: Cursor,
    tally: KatzTally,
    /// Which n-grams of order k were kept, by position within the part.
    kept_now: Vec<u64>,
    parents: ParentStream<I>,
    /// The parents taken from the stream ahead of the sums (the last one
    /// is the context of the last n-gram read), and the last one's key.
    ahead: std::collections::VecDeque<(Key, NgramRecord, Option<u32>)>,
    last_ahead: Option<(Key, Option<u32>)>,
    /// The current parent: key, record, model index if kept.
    cur: Option<(Key, NgramRecord, Option<u32>)>,
    acc: Acc,
    /// F(h)/Σc of a Katz context that every word follows (0 otherwise).
    spread_f: f64,
    written: u64,
    store_n: u64,
}

/// Creates the part's files in the temporary folder and starts reading
/// its n-grams of order k − 1.
fn open_part<'a, 'e>(
    est: &'a Estimator<'e>,
    o: &'a Order<'a>,
    part: Part,
) -> Result<PartRun<'a, 'e, impl Iterator<Item = Result<(Key, NgramRecord)>> + 'e>> {
    let k = o.k;
    let tp = |name: &str| o.dir.join(format!("{name}{k}-{}", part.t));
    let w_file = ArrayFile::create(tp("w"))?;
    let q_file = ArrayFile::create(tp("q"))?;
    let l_file = if o.top {
        None
    } else {
        Some(ArrayFile::create(tp("l"))?)
    };
    let ctx_out = ContextOut {
        b: ArrayFile::create(tp("b"))?,
        f: ArrayFile::create(tp("f"))?,
        s: ArrayFile::create(tp("s"))?,
        next_p: part.entries.0,
        default_beta: o.default_beta,
        k,
    };
    let parents = ParentStream {
        it: est.store().scan_first_ranks(k - 1, part.first, part.end)?,
        pos: 0,
        rank: part.entries.0,
    };
    Ok(PartRun {
        est,
        o,
        part,
        w_file,
        q_file,
        l_file,
        ctx_out,
        cursor: Cursor::default(),
        tally: KatzTally::default(),
        kept_now: Vec::new(),
        parents,
        ahead: std::collections::VecDeque::new(),
        last_ahead: None,
        cur: None,
        acc: Acc::default(),
        spread_f: 0.0,
        written: 0,
        store_n: 0,
    })
}

impl<I> PartRun<'_, '_, I>
where
    I: Iterator<Item = Result<(Key, NgramRecord)>>,
{
    /// The error of an n-gram whose context is not stored.
    fn not_stored(&self) -> Error {
        Error::corrupt(
            self.est.store().dir(),
            format!("order {}: an n-gram whose context is not stored", self.o.k),
        )
    }

    /// The entry of the context `h` (ranks) of the n-gram just read if
    /// it is kept, taking the parents up to it from the stream of order
    /// k − 1 ahead of the sums.
    fn parent_of(&mut self, h: &[u64]) -> Result<Option<u32>> {
        let o = self.o;
        loop {
            if let Some((key, kept)) = &self.last_ahead {
                if key.ids() == h {
                    return Ok(*kept);
                }
            }
            let (pk, prec) = match self.parents.it.next() {
                Some(item) => item?,
                None => return Err(self.not_stored()),
            };
            if pk.ids() > h {
                return Err(self.not_stored());
            }
            let kept = if o.k - 1 == 1 {
                o.index_of_rank(pk.ids()[0])
            } else {
                self.parents.next_kept(&self.part.kept_prev)
            };
            self.ahead.push_back((pk, prec, kept));
            self.last_ahead = Some((pk, kept));
        }
    }

    /// Takes the stored n-gram h·w of ranks `gi`, the `pos`-th of the
    /// part, with its lower entry if h is kept: moves to its parent h,
    /// and if h is kept and h·w is not pruned, writes its last word and q
    /// and adds it to h's sums.
    fn ngram(
        &mut self,
        pos: usize,
        gi: &[u64],
        rec: NgramRecord,
        lower: Option<&Lower>,
    ) -> Result<()> {
        let (est, o) = (self.est, self.o);
        let k = o.k;
        self.store_n += 1;
        self.move_to(&gi[..k - 1])?;
        let (_, prec, kept) = self.cur.as_ref().expect("set above");
        let (prec, kept) = (*prec, *kept);
        if o.kind == BackoffKind::Katz {
            self.acc.freed += est.katz_freed(k - 1, rec.count);
        }
        let (Some(_), Some(found)) = (kept, lower) else {
            return Ok(());
        };
        let Some((x, lower_e, lower)) = self.lower(found, rec.count)? else {
            return Ok(());
        };
        let j = k - 1;
        let q = match o.kind {
            BackoffKind::Interpolated => {
                let a = left_type(rec.count, rec.continuation, gi[0] == o.bos_rank);
                est.step(j, rec.count, a, prec.context, prec.count, lower)
            }
            BackoffKind::Katz => {
                let s = prec.context.unwrap_or_default();
                let p = est.katz_seen(j, rec.count, s.count_sum);
                if s.types as f64 >= o.v && self.spread_f > EPS {
                    p + self.spread_f * lower
                } else {
                    p
                }
            }
            BackoffKind::Stupid(_) => rec.count as f64 / prec.count.max(1) as f64,
        };
        self.w_file.u32(x)?;
        if let Some(l) = &mut self.l_file {
            self.q_file.f64(q)?;
            l.u32(lower_e)?;
        } else {
            self.q_file.f32(q as f32)?;
        }
        let word = pos / 64;
        if self.kept_now.len() <= word {
            self.kept_now.resize(word + 1, 0);
        }
        self.kept_now[word] |= 1 << (pos % 64);
        self.written += 1;
        self.acc.kept += 1;
        self.acc.sum_q += q;
        self.acc.sum_lower += lower;
        Ok(())
    }

    /// Moves to the parent context `h` (ranks), finishing the contexts
    /// passed (taken from those read ahead).
    fn move_to(&mut self, h: &[u64]) -> Result<()> {
        let (est, o) = (self.est, self.o);
        let k = o.k;
        while self.cur.as_ref().is_none_or(|c| c.0.ids() != h) {
            self.finish_context()?;
            self.acc = Acc::default();
            let Some((pk, prec, kept)) = self.ahead.pop_front() else {
                return Err(self.not_stored());
            };
            self.spread_f = 0.0;
            if o.kind == BackoffKind::Katz && kept.is_some() {
                if let Some(s) = prec.context {
                    if s.types as f64 >= o.v {
                        // Every word follows this context: Katz spreads
                        // its freed mass, which needs F(h) first.
                        let mut freed = 0.0;
                        for c in est.store().children(&o.ids_of(pk.ids()))? {
                            freed += est.katz_freed(k - 1, c?.1);
                        }
                        self.spread_f = freed / s.count_sum as f64;
                    }
                }
            }
            self.cur = Some((pk, prec, kept));
        }
        Ok(())
    }

    /// The word index of w, the entry of h'·w and q(h'·w) from order
    /// k − 1, from the search's `found`; `None` (h·w pruned) where h'·w
    /// was not kept or h·w's count `count` is below the threshold.
    fn lower(&mut self, found: &Lower, count: u64) -> Result<Option<(u32, u32, f64)>> {
        let o = self.o;
        let (k, store) = (o.k, self.est.store());
        let x = found.x.ok_or_else(|| {
            Error::corrupt(store.dir(), "an n-gram holds a word that is not a unigram")
        })?;
        let Some((e, q)) = found.e else {
            if !o.pruning {
                return Err(Error::corrupt(
                    store.dir(),
                    format!("order {k}: the suffix of a stored n-gram is not stored"),
                ));
            }
            self.acc.pruned = true;
            return Ok(None);
        };
        if count < o.min(k) {
            self.acc.pruned = true;
            return Ok(None);
        }
        Ok(Some((x, e, q)))
    }

    /// Writes the children start and β of the current context, if kept
    /// (finished: all its children were read).
    fn finish_context(&mut self) -> Result<()> {
        let Some((pk, prec, Some(p))) = &self.cur else {
            return Ok(());
        };
        let (est, o) = (self.est, self.o);
        let (beta, skip) = match self.beta(prec) {
            Some(b) => (b, 1),
            None => katz_deep(
                est,
                o,
                &o.ids_of(pk.ids()),
                prec,
                &mut self.cursor,
                &mut self.tally.unrepresentable,
                (self.acc.pruned, 1.0 - self.acc.sum_q, o.min(o.k)),
            )?,
        };
        self.tally.order_skips |= skip > 1;
        self.tally.skips += u64::from(skip > 1);
        self.ctx_out
            .put(*p, self.written - self.acc.kept, beta, skip)
    }

    /// β of the finished context with the record `rec` (and the sums in
    /// `acc`); `None`: Katz must look past h'.
    fn beta(&self, rec: &NgramRecord) -> Option<f64> {
        let (est, o, acc) = (self.est, self.o, &self.acc);
        let j = o.k - 1;
        let kind = o.kind;
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
                } else if s.types as f64 >= o.v {
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
    }

    /// Finishes the last context, gives every later context of the part
    /// no kept child, and closes the files.
    fn close(mut self) -> Result<PartOut> {
        self.finish_context()?;
        self.ctx_out.fill_to(self.part.entries.1, self.written)?;
        Ok(PartOut {
            w: self.w_file.close()?,
            q: self.q_file.close()?,
            l: self.l_file.map(ArrayFile::close).transpose()?,
            b: self.ctx_out.b.close()?,
            f: self.ctx_out.f.close()?,
            s: self.ctx_out.s.close()?,
            written: self.written,
            store_n: self.store_n,
            kept: self.kept_now,
            tally: self.tally,
        })
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
fn katz_deep(
    est: &Estimator<'_>,
    o: &Order<'_>,
    h: &[WordId],
    rec: &NgramRecord,
    cursor: &mut Cursor,
    unrep: &mut u64,
    pruned: (bool, f64, u64),
) -> Result<(f64, u8)> {
    let j = h.len();
    let s = rec.context.unwrap_or_default();
    let store = est.store();
    let not_unigram = || Error::corrupt(store.dir(), "a word that is not a unigram");
    let mut kids: Vec<(u32, u64)> = Vec::new();
    for c in store.children(h)? {
        let (key, count, _) = c?;
        let v = o.index(key.ids()[j]).ok_or_else(not_unigram)?;
        kids.push((v, count));
    }
    let freed: f64 = kids.iter().map(|&(_, c)| est.katz_freed(j, c)).sum();
    let hx: Vec<u32> = h
        .iter()
        .map(|&id| o.index(id).ok_or_else(not_unigram))
        .collect::<Result<_>>()?;
    let mut xs: Vec<u32> = Vec::with_capacity(j + 1);
    let f = if pruned.0 {
        // Only the kept children: count at the threshold and h'·v kept.
        kids.retain(|&(v, c)| {
            c >= pruned.2 && {
                xs.clear();
                xs.extend_from_slice(&hx[1..]);
                xs.push(v);
                xs.len() == 1 || o.built.lookup(cursor, &xs).is_some()
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
            let e = if i == 0 {
                Some(v)
            } else {
                o.built.lookup(cursor, &xs)
            };
            let Some(e) = e else {
                return Err(Error::corrupt(
                    store.dir(),
                    "the suffix of a kept n-gram is not kept",
                ));
            };
            sum += f64_at(&o.q64[i], e as usize);
        }
        let den = 1.0 - sum;
        if den > EPS {
            return Ok((f / den, (j - i) as u8));
        }
    }
    *unrep += 1;
    Ok((0.0, 1))
}
