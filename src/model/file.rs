//! A model file opened: [`Model`] owns the bytes (mapped or loaded), the
//! metadata and the section directory, checks them on open, and gives the
//! rest of the module its arrays through accessors.
//!
//! Opening reads the trailer, the directory and the small sections (the
//! metadata, the vocabulary and the unigram ranking) and checks their
//! checksums and every section's bounds and length, so a truncated file or
//! a damaged directory, header or vocabulary is refused at once, in
//! milliseconds whatever the file's size. Then the lowest orders' children
//! starts are decoded into plain arrays in memory ([`plain_starts`]: 4
//! bytes an entry, at most a sixteenth of the file; 0.1 s and 104 MB for a
//! 3.9 GB model). The large n-gram arrays are checked by [`Model::verify`]
//! (in `verify.rs`): every checksum and every structural invariant.
//! Lookups never index outside the map, so a damaged array that was not
//! verified gives wrong numbers, never a crash.

use std::fs::File;
use std::ops::Range;
use std::path::{Path, PathBuf};

use memmap2::Mmap;

use crate::error::{Error, IoContext, Result};
use crate::search::IdDirectory;
use crate::words::{bos_id, unk_id, WordId};

use super::bytes::{load_read_only, map_read_only, prefetch, u32_at, u64_at, Residence};
use super::cache::Completion;
use super::format::{
    ModelMeta, SectionKind, END_MAGIC, HEADER_BYTES, MAGIC, MODEL_VERSION, TRAILER_BYTES,
};
use super::packed::width_for;
use super::sections::{read_orders, want_len, Directory, OrderSections};
use super::seek::find_by;

/// A frozen model, memory-mapped and read-only. `Send + Sync`: one model
/// serves any number of threads (every query method takes `&self`).
pub struct Model {
    path: PathBuf,
    map: Mmap,
    meta: ModelMeta,
    dir: Directory,
    /// Words, `<s>` included.
    nw: usize,
    ids: Range<usize>,
    offsets: Range<usize>,
    text: Range<usize>,
    ranking: Range<usize>,
    orders: Vec<OrderSections>,
    bos: u32,
    unk: u32,
    /// Where each bucket of word ids starts in the sorted ids (about 16
    /// ids a bucket), so a word is found among a few ids instead of all.
    id_dir: IdDirectory,
    /// Search structures built on first use (`super::complete`).
    completion: Box<Completion>,
    /// The word indices of the metadata's never-suggest words that are in
    /// V, increasing.
    never: Vec<u32>,
    /// The children starts of orders 1 to `plain.len()`, decoded from
    /// their Elias–Fano indexes on open and clamped to the next order
    /// (see [`plain_starts`]).
    plain: Vec<Vec<u32>>,
}

/// The memory that plain children starts may take beyond the unigrams'
/// (always decoded: 4 bytes a word): 1/16 of the file's size, or 4 MiB
/// for a small model.
fn plain_budget(file_bytes: usize) -> usize {
    (file_bytes / 16).max(4 << 20)
}

/// The children starts of the lowest orders as plain arrays of u32: the
/// unigrams', and each next order's while all of them together stay
/// within [`plain_budget`]. Nearly every prediction in running
/// text searches the children of a unigram and of a bigram, and one read
/// of a plain array replaces a select in the Elias–Fano index (its sample,
/// upper bits and low bits). What is allocated is bounded by the file's
/// size: the unigrams' starts by its word ids (8 bytes a word, checked on
/// open), the others by the budget.
fn plain_starts(b: &[u8], orders: &[OrderSections]) -> Vec<Vec<u32>> {
    let mut plain = Vec::new();
    let mut bytes = 0;
    for k in 1..orders.len() {
        let o = &orders[k - 1].children;
        bytes += 4 * o.len;
        if k > 1 && bytes > plain_budget(b.len()) {
            break;
        }
        let most = orders[k].len.min(u32::MAX as usize) as u64;
        let mut starts = Vec::with_capacity(o.len);
        o.for_each(b, |v| starts.push(v.min(most) as u32));
        plain.push(starts);
    }
    plain
}

impl Model {
    /// Opens the model file at `path`: checks the header, the trailer, the
    /// directory, every section's bounds, and the checksums of the small
    /// sections. A truncated or damaged file is refused with an error that
    /// names it.
    pub fn open(path: &Path) -> Result<Model> {
        Model::open_as(path, Residence::Mapped)
    }

    /// [`Model::open`], with the bytes reached as `residence` says.
    pub fn open_as(path: &Path, residence: Residence) -> Result<Model> {
        let bad = |d: String| Error::corrupt(path, format!("not a usable quern model: {d}"));
        let map = read_checked_frame(path, residence, &bad)?;
        let b = &map[..];
        let dir = Directory::read(b, &bad)?;
        let meta_r = dir.checked(b, SectionKind::Meta, 0, &bad)?;
        let meta: ModelMeta = serde_json::from_slice(&b[meta_r])
            .map_err(|e| bad(format!("the metadata does not parse: {e}")))?;
        let n = meta.order;
        if !(1..=crate::key::MAX_ORDER).contains(&n) || meta.ngrams.len() != n {
            return Err(bad(format!(
                "order {n} with {} counts per order",
                meta.ngrams.len()
            )));
        }
        let ids = dir.checked(b, SectionKind::Ids, 0, &bad)?;
        let nw = ids.len() / 8;
        let offsets = dir.checked(b, SectionKind::WordOffsets, 0, &bad)?;
        let text = dir.checked(b, SectionKind::WordText, 0, &bad)?;
        let ranking = dir.checked(b, SectionKind::Ranking, 0, &bad)?;
        want_len(&ids, meta.ngrams[0] * 8, "word ids", &bad)?;
        want_len(&offsets, (nw as u64 + 1) * 8, "word offsets", &bad)?;
        want_len(&ranking, meta.vocabulary * 4, "unigram ranking", &bad)?;
        // The ranking's checksum was read whole; its word indices are
        // used to index the unigrams, so they are checked here too.
        let rk = &b[ranking.clone()];
        if let Some(i) = (0..meta.vocabulary as usize).find(|&i| u32_at(rk, i) as usize >= nw) {
            return Err(bad(format!(
                "the unigram ranking holds word index {} at {i}, past the {nw} words",
                u32_at(rk, i)
            )));
        }
        let width = width_for(nw.saturating_sub(1) as u64);
        let orders = read_orders(b, &dir, &meta, width, &bad)?;
        let id_bytes = &b[ids.clone()];
        let id_dir = IdDirectory::new(nw, |i| u64_at(id_bytes, i), 16, 18);
        let plain = plain_starts(b, &orders);
        let mut m = Model {
            id_dir,
            path: path.to_path_buf(),
            map,
            meta,
            dir,
            nw,
            ids,
            offsets,
            text,
            ranking,
            orders,
            bos: 0,
            unk: 0,
            completion: Default::default(),
            never: Vec::new(),
            plain,
        };
        let need = |m: &Model, id: WordId, what: &str| {
            m.index_of(id)
                .ok_or_else(|| bad(format!("the vocabulary has no {what}")))
        };
        m.bos = need(&m, bos_id(), "<s>")?;
        m.unk = need(&m, unk_id(), "<unk>")?;
        let mut never: Vec<u32> = (m.meta.never_suggest.iter())
            .filter_map(|w| m.index_of(crate::words::word_id(w.as_bytes())))
            .filter(|&x| x != m.bos)
            .collect();
        never.sort_unstable();
        never.dedup();
        m.never = never;
        Ok(m)
    }

    /// The file it was opened from.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The metadata record.
    pub fn meta(&self) -> &ModelMeta {
        &self.meta
    }

    /// The file's size in bytes.
    pub fn file_bytes(&self) -> u64 {
        self.map.len() as u64
    }

    // ---- raw access ----------------------------------------------------------

    /// The whole file's bytes.
    #[inline(always)]
    pub(super) fn bytes(&self) -> &[u8] {
        &self.map
    }

    /// The section directory.
    pub(super) fn directory(&self) -> &Directory {
        &self.dir
    }

    /// The bytes of the vocabulary's sections, in file order: ids, word
    /// offsets, word text, unigram ranking.
    pub(super) fn vocabulary_sections(&self) -> [&[u8]; 4] {
        let b = &self.map[..];
        [
            &b[self.ids.clone()],
            &b[self.offsets.clone()],
            &b[self.text.clone()],
            &b[self.ranking.clone()],
        ]
    }

    /// The arrays of order `k` (1-based).
    #[inline(always)]
    pub(super) fn sections(&self, k: usize) -> &OrderSections {
        &self.orders[k - 1]
    }

    /// The n-grams kept at order `k` (1-based).
    #[inline]
    pub(crate) fn kept(&self, k: usize) -> usize {
        self.orders[k - 1].len
    }

    /// Words, `<s>` included (word indices are `0..` this).
    #[inline]
    pub(crate) fn words_with_bos(&self) -> usize {
        self.nw
    }

    /// The word index of `<s>`.
    #[inline]
    pub(crate) fn bos_index(&self) -> u32 {
        self.bos
    }

    /// The word index of `<unk>`.
    #[inline]
    pub(crate) fn unk_index(&self) -> u32 {
        self.unk
    }

    /// The word indices never suggested (stored in the metadata),
    /// increasing.
    pub(crate) fn never_suggested(&self) -> &[u32] {
        &self.never
    }

    /// The lazily built search structures.
    pub(super) fn completion(&self) -> &Completion {
        &self.completion
    }

    /// V by the stored unigram q, best first (the file's ranking).
    pub(crate) fn unigram_ranking(&self) -> impl Iterator<Item = u32> + '_ {
        let rk = &self.map[self.ranking.clone()];
        (0..self.meta.vocabulary as usize).map(move |i| u32_at(rk, i))
    }

    /// The word index of `id`, if the model has it (`<s>` included).
    #[inline]
    pub(crate) fn index_of(&self, id: WordId) -> Option<u32> {
        let ids = &self.map[self.ids.clone()];
        self.id_dir.find(|i| u64_at(ids, i), id)
    }

    /// Prefetches the bucket of the directory that [`Model::index_of`]
    /// reads first for `id`.
    #[inline(always)]
    pub(crate) fn prefetch_bucket(&self, id: WordId) {
        self.id_dir.prefetch_bucket(id);
    }

    /// Prefetches the ids that [`Model::index_of`] searches for `id` (its
    /// bucket of the directory should be in the cache).
    #[inline(always)]
    pub(crate) fn prefetch_ids(&self, id: WordId) {
        if let Some(lo) = self.id_dir.first_index(id) {
            prefetch(&self.map, self.ids.start + 8 * lo);
        }
    }

    /// The bytes of word index `x` (UTF-8 unless the file is damaged;
    /// empty for an index out of range).
    #[inline]
    pub(crate) fn word_bytes(&self, x: u32) -> &[u8] {
        let offs = &self.map[self.offsets.clone()];
        let t = &self.map[self.text.clone()];
        if x as usize >= self.nw {
            return &[];
        }
        let a = (u64_at(offs, x as usize) as usize).min(t.len());
        let z = (u64_at(offs, x as usize + 1) as usize).clamp(a, t.len());
        &t[a..z]
    }

    /// The id of word index `x` (0 for an index out of range, which only
    /// an unverified damaged array gives).
    pub(crate) fn id_at(&self, x: u32) -> WordId {
        let ids = &self.map[self.ids.clone()];
        if (x as usize) < self.nw {
            u64_at(ids, x as usize)
        } else {
            0
        }
    }

    /// The text of word index `x` (lossy for damaged bytes).
    pub(crate) fn text_at(&self, x: u32) -> String {
        String::from_utf8_lossy(self.word_bytes(x)).into_owned()
    }

    /// q of entry `e` of order `k`.
    #[inline]
    pub(crate) fn q(&self, k: usize, e: u32) -> f64 {
        self.orders[k - 1].probs.get(&self.map, e as usize) as f64
    }

    /// β of entry `e` of order `k` (k < N).
    #[inline]
    pub(crate) fn beta(&self, k: usize, e: u32) -> f64 {
        self.orders[k - 1].weights.get(&self.map, e as usize) as f64
    }

    /// How many words entry `e` of order `k` (k < N) drops when it backs
    /// off (1 unless the order has a skips section).
    #[inline]
    pub(crate) fn skip(&self, k: usize, e: u32) -> usize {
        let r = &self.orders[k - 1].skips;
        if r.is_empty() {
            1
        } else {
            self.map[r.clone()]
                .get(e as usize)
                .map_or(1, |&s| s.max(1) as usize)
        }
    }

    /// How many contexts back off past their next shorter context (`katz`
    /// only): the ARPA text cannot say so, and there it is not the method.
    pub fn skipping_contexts(&self) -> u64 {
        let mut n = 0;
        for o in &self.orders {
            n += self.map[o.skips.clone()].iter().filter(|&&s| s > 1).count() as u64;
        }
        n
    }

    /// Whether order `k` (k < N) has a skips section.
    #[cfg(feature = "store")]
    pub(crate) fn has_skips_at(&self, k: usize) -> bool {
        !self.orders[k - 1].skips.is_empty()
    }

    /// The children of entry `e` of order `k` (k < N): a range of entries
    /// of order k + 1, clamped to it.
    #[inline]
    pub(crate) fn children(&self, k: usize, e: u32) -> Range<usize> {
        let o = &self.orders[k - 1];
        let n = self.orders[k].len;
        if e as usize >= o.len {
            return n..n;
        }
        if let Some(s) = self.plain.get(k - 1) {
            let s = &s[e as usize..e as usize + 2];
            return s[0] as usize..s[1].max(s[0]) as usize;
        }
        let (lo, hi) = o.children.pair(&self.map, e as usize);
        let lo = (lo as usize).min(n);
        lo..(hi as usize).clamp(lo, n)
    }

    /// How many of the lowest orders read their children starts from plain
    /// arrays decoded on open (the others read the file's Elias–Fano
    /// index).
    pub fn plain_orders(&self) -> usize {
        self.plain.len()
    }

    /// Children start `i` of order `k` as decoded on open, if that order's
    /// starts are a plain array.
    pub(super) fn plain_start(&self, k: usize, i: usize) -> Option<u32> {
        self.plain.get(k - 1).and_then(|s| s.get(i).copied())
    }

    /// Prefetches what [`Model::children`] of entry `e` of order `k` reads
    /// first (the upper bits it then scans depend on it; see
    /// [`Model::prefetch_children_scan`]).
    #[inline(always)]
    pub(super) fn prefetch_children(&self, k: usize, e: usize) {
        if let Some(x) = self.plain.get(k - 1) {
            if let Some(x) = x.get(e) {
                crate::hint::prefetch(x);
            }
        } else {
            let o = &self.orders[k - 1].children;
            prefetch(&self.map, o.sample_byte(e));
            prefetch(&self.map, o.low_byte(e));
        }
    }

    /// Prefetches the upper bits that [`Model::children`] of entry `e` of
    /// order `k` scans, once [`Model::prefetch_children`]'s lines are in
    /// the cache (nothing where the starts are a plain array).
    #[inline(always)]
    pub(super) fn prefetch_children_scan(&self, k: usize, e: usize) {
        if k > self.plain.len() {
            // The scan from the sample may run into the next line.
            let at = self.orders[k - 1].children.scan_byte(&self.map, e);
            prefetch(&self.map, at);
            prefetch(&self.map, at + 64);
        }
    }

    /// The last word of entry `e` of order `k`.
    #[inline]
    pub(crate) fn word_of(&self, k: usize, e: usize) -> u32 {
        if k == 1 {
            e as u32
        } else {
            self.orders[k - 1].words.get(&self.map, e) as u32
        }
    }

    /// The entry of order `k + 1` that continues entry `e` of order `k`
    /// with word `w`, if kept.
    #[inline]
    pub(crate) fn child(&self, k: usize, e: u32, w: u32) -> Option<u32> {
        let r = self.children(k, e);
        let words = &self.orders[k].words;
        find_by(
            |i| words.get(&self.map, i) as u32,
            r.start,
            r.end,
            w,
            self.nw as u64,
        )
        .map(|i| i as u32)
    }
}

/// Reads or maps the file at `path` and checks its frame: long enough for
/// a header and a trailer, the magic at both ends, and the version.
fn read_checked_frame(
    path: &Path,
    residence: Residence,
    bad: &dyn Fn(String) -> Error,
) -> Result<Mmap> {
    let mut f = File::open(path).at(path, "open")?;
    let size = f.metadata().at(path, "stat")?.len();
    if size < (HEADER_BYTES + TRAILER_BYTES) as u64 {
        return Err(bad(format!(
            "{size} bytes, shorter than a header and a trailer (truncated?)"
        )));
    }
    let map = match residence {
        Residence::Mapped => map_read_only(&f, path)?,
        Residence::Loaded => load_read_only(&mut f, path, size)?,
    };
    let b = &map[..];
    if b[..8] != MAGIC {
        return Err(bad("the file does not start with the model magic".into()));
    }
    let version = u32::from_le_bytes(b[8..12].try_into().expect("4 bytes"));
    if b[b.len() - 8..] != END_MAGIC {
        return Err(bad(
            "the trailer is missing (the file is truncated or was not finished)".into(),
        ));
    }
    if version != MODEL_VERSION {
        return Err(Error::Version {
            path: path.to_path_buf(),
            found: version,
            expected: MODEL_VERSION,
        });
    }
    Ok(map)
}
