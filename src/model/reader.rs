//! Opening a model file: the memory map (an `unsafe` call, argued below),
//! the checks made on open, and the full verification.
//!
//! Opening reads the trailer, the directory and the small sections (the
//! metadata, the vocabulary and the unigram ranking) and checks their
//! checksums and every section's bounds and length, so a truncated file or
//! a damaged directory, header or vocabulary is refused at once, in
//! milliseconds whatever the file's size. The large n-gram arrays are
//! checked by [`Model::verify`] (`quern freeze --verify`): every checksum
//! and every structural invariant. Lookups never index outside the map,
//! so a damaged array that was not verified gives wrong numbers, never a
//! crash.

use std::fs::File;
use std::ops::Range;
use std::path::{Path, PathBuf};

use memmap2::Mmap;

use crate::error::{Error, IoContext, Result};
use crate::words::{bos_id, unk_id, WordId};

use super::format::{
    Entry, ModelMeta, SectionKind, END_MAGIC, ENTRY_BYTES, HEADER_BYTES, MAGIC, MODEL_VERSION,
    TRAILER_BYTES,
};
use super::packed::{width_for, EliasFano, Packed};

/// Maps `file` (opened read-only) into memory.
///
/// # Safety
///
/// This function is safe to call, but it rests on one assumption that the
/// compiler cannot check: nobody changes or truncates the file while the
/// map lives. quern never writes a model file (or a freeze's temporary
/// array file) in place once it is mapped: files are written whole under a
/// temporary name and renamed into place, so a later freeze to the same
/// name replaces the directory entry and leaves the mapped inode intact.
/// Another program that truncates a mapped file makes reads past the new
/// end fault (SIGBUS); one that rewrites it in place changes what the map
/// reads. Both are outside what quern supports, as for any read-only data
/// file.
#[allow(unsafe_code)]
pub(crate) fn map_read_only(file: &File, path: &Path) -> Result<Mmap> {
    // SAFETY: `Mmap::map` is unsafe because the mapped file could be
    // modified or truncated by another process while the map is alive,
    // which Rust's aliasing rules cannot see. The file is opened read-only,
    // the map is read-only, and quern only ever replaces model and
    // temporary array files by renaming a new file over them (see the
    // `# Safety` section above), so the mapped bytes do not change under
    // us in any supported use.
    unsafe { Mmap::map(file) }.at(path, "memory-map")
}

/// Reads `file` whole into anonymous memory that the kernel is asked to
/// back with huge pages (`MADV_HUGEPAGE`, where transparent huge pages are
/// enabled for it), then makes it read-only. No `unsafe`: the memory
/// belongs to this process alone, so nothing can change it behind us.
///
/// A model much larger than the CPU caches spends a large part of each
/// lookup walking page tables for 4 KiB pages of a mapped file; with 2 MiB
/// pages the page table entries of the whole model fit in the caches.
pub(crate) fn load_read_only(file: &mut File, path: &Path, size: u64) -> Result<Mmap> {
    use std::io::Read;
    let len = usize::try_from(size)
        .map_err(|_| Error::corrupt(path, format!("{size} bytes do not fit in memory")))?;
    let mut m = memmap2::MmapMut::map_anon(len.max(1)).at(path, "allocate memory for")?;
    #[cfg(target_os = "linux")]
    {
        // Advice only: a kernel without transparent huge pages keeps 4 KiB
        // pages, which is still correct.
        let _ = m.advise(memmap2::Advice::HugePage);
    }
    file.read_exact(&mut m[..len]).at(path, "read")?;
    let m = m.make_read_only().at(path, "protect")?;
    Ok(m)
}

/// How a model's bytes are reached.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Residence {
    /// Memory-mapped: opened in milliseconds whatever its size; pages are
    /// read on first use and shared with other processes that map it.
    #[default]
    Mapped,
    /// Read whole into this process's memory, on huge pages where the
    /// system allows: opening reads the whole file (seconds a gigabyte),
    /// and lookups in a model far larger than the CPU cache are faster.
    Loaded,
}

/// Reads the u32 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes(b[4 * i..4 * i + 4].try_into().expect("4 bytes"))
}

/// Reads the f32 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn f32_at(b: &[u8], i: usize) -> f32 {
    f32::from_le_bytes(b[4 * i..4 * i + 4].try_into().expect("4 bytes"))
}

/// Reads the u64 at index `i` of little-endian bytes.
#[inline(always)]
pub(crate) fn u64_at(b: &[u8], i: usize) -> u64 {
    u64::from_le_bytes(b[8 * i..8 * i + 8].try_into().expect("8 bytes"))
}

/// Asks the CPU to bring the cache line of `b[at]` in, without waiting
/// for it (nothing at all where there is no such instruction). A lookup
/// that knows the addresses of several independent reads ahead of time
/// issues them together this way, so their cache misses overlap instead of
/// following one another. `at` is clamped to `b`.
#[inline(always)]
pub(crate) fn prefetch(b: &[u8], at: usize) {
    if let Some(x) = b.get(at.min(b.len().saturating_sub(1))) {
        crate::hint::prefetch(x);
    }
}

/// Stored values (q or β) of one order: 32-bit floats, or codes into
/// bins.
#[derive(Clone, Debug, Default)]
pub(crate) enum Values {
    /// None stored (β at the top order).
    #[default]
    None,
    /// One f32 a value.
    F32(Range<usize>),
    /// One packed code a value, and the value of every code (f32).
    Coded { codes: Packed, bins: Range<usize> },
}

impl Values {
    /// Value `i` (`b` is the whole map); a code past the bins reads as the
    /// last bin.
    #[inline(always)]
    pub(crate) fn get(&self, b: &[u8], i: usize) -> f32 {
        match self {
            Values::F32(r) => f32_at(&b[r.clone()], i),
            Values::Coded { codes, bins } => {
                let bins = &b[bins.clone()];
                let c = (codes.get(b, i) as usize).min(bins.len() / 4 - 1);
                f32_at(bins, c)
            }
            Values::None => 1.0,
        }
    }

    /// The byte (in the map) where value `i` lies, to prefetch.
    #[inline(always)]
    pub(crate) fn byte_of(&self, i: usize) -> usize {
        match self {
            Values::F32(r) => r.start + 4 * i,
            Values::Coded { codes, .. } => codes.byte_of(i),
            Values::None => 0,
        }
    }
}

/// The sections of one order.
#[derive(Clone, Debug, Default)]
pub(crate) struct OrderSections {
    /// Kept n-grams.
    pub len: usize,
    /// Last words (empty at order 1, where entry i is word i).
    pub words: Packed,
    /// q values.
    pub probs: Values,
    /// β values (none at the top order).
    pub weights: Values,
    /// Child starts, len + 1 of them (empty at the top order).
    pub children: EliasFano,
    /// Words dropped on backing off, one byte each (empty: 1 for all).
    pub skips: Range<usize>,
}

/// A frozen model, memory-mapped and read-only. `Send + Sync`: one model
/// serves any number of threads (every query method takes `&self`).
pub struct Model {
    pub(crate) path: PathBuf,
    pub(crate) map: Mmap,
    pub(crate) meta: ModelMeta,
    pub(crate) entries: Vec<Entry>,
    pub(crate) n: usize,
    /// Words, `<s>` included.
    pub(crate) nw: usize,
    pub(crate) ids: Range<usize>,
    pub(crate) offsets: Range<usize>,
    pub(crate) text: Range<usize>,
    pub(crate) ranking: Range<usize>,
    pub(crate) orders: Vec<OrderSections>,
    pub(crate) bos: u32,
    pub(crate) unk: u32,
    /// Where each bucket of word ids starts in the sorted ids: bucket b
    /// holds the ids whose top bits are b (`id >> id_shift`), so a word is
    /// found among a few ids (about 16) instead of all of them.
    pub(crate) id_dir: Vec<u32>,
    pub(crate) id_shift: u32,
    /// Search structures built on first use (`super::complete`).
    pub(crate) completion: Box<super::complete::Completion>,
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
        let mut f = File::open(path).at(path, "open")?;
        let size = f.metadata().at(path, "stat")?.len();
        let bad = |d: String| Error::corrupt(path, format!("not a usable quern model: {d}"));
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
        let t = &b[b.len() - TRAILER_BYTES..];
        if t[24..32] != END_MAGIC {
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
        let dir_off = u64_at(t, 0);
        let count = u64_at(t, 1);
        let dir_hash = u64_at(t, 2);
        let dir_end = (b.len() - TRAILER_BYTES) as u64;
        if count > 4096
            || dir_off < HEADER_BYTES as u64
            || dir_off.checked_add(count * ENTRY_BYTES as u64) != Some(dir_end)
        {
            return Err(bad(format!(
                "the directory ({count} entries at byte {dir_off}) does not fit the file of {size} bytes"
            )));
        }
        let d = &b[dir_off as usize..dir_end as usize];
        if xxhash_rust::xxh3::xxh3_64(d) != dir_hash {
            return Err(bad("the directory's checksum does not match".into()));
        }
        let entries: Vec<Entry> = d.chunks_exact(ENTRY_BYTES).map(Entry::decode).collect();
        for e in &entries {
            if e.offset < HEADER_BYTES as u64
                || e.offset.checked_add(e.len).is_none_or(|end| end > dir_off)
            {
                return Err(bad(format!(
                    "section {} of order {} (bytes {}..+{}) lies outside the data",
                    e.kind, e.order, e.offset, e.len
                )));
            }
        }
        let find = |kind: SectionKind, order: usize| -> Result<Range<usize>> {
            entries
                .iter()
                .find(|e| e.kind == kind as u32 && e.order as usize == order)
                .map(|e| e.offset as usize..(e.offset + e.len) as usize)
                .ok_or_else(|| bad(format!("no {} section of order {order}", kind.name())))
        };
        let checked = |kind: SectionKind, order: usize| -> Result<Range<usize>> {
            let r = find(kind, order)?;
            let e = entries
                .iter()
                .find(|e| e.kind == kind as u32 && e.order as usize == order)
                .expect("found above");
            if xxhash_rust::xxh3::xxh3_64(&b[r.clone()]) != e.hash {
                return Err(bad(format!(
                    "the checksum of the {} section does not match",
                    kind.name()
                )));
            }
            Ok(r)
        };
        let meta_r = checked(SectionKind::Meta, 0)?;
        let meta: ModelMeta = serde_json::from_slice(&b[meta_r])
            .map_err(|e| bad(format!("the metadata does not parse: {e}")))?;
        let n = meta.order;
        if !(1..=crate::key::MAX_ORDER).contains(&n) || meta.ngrams.len() != n {
            return Err(bad(format!(
                "order {n} with {} counts per order",
                meta.ngrams.len()
            )));
        }
        let ids = checked(SectionKind::Ids, 0)?;
        let nw = ids.len() / 8;
        let offsets = checked(SectionKind::WordOffsets, 0)?;
        let text = checked(SectionKind::WordText, 0)?;
        let ranking = checked(SectionKind::Ranking, 0)?;
        let want = |r: &Range<usize>, bytes: u64, what: &str| -> Result<()> {
            if r.len() as u64 != bytes {
                Err(bad(format!(
                    "the {what} section holds {} bytes, {bytes} expected",
                    r.len()
                )))
            } else {
                Ok(())
            }
        };
        want(&ids, meta.ngrams[0] * 8, "word ids")?;
        want(&offsets, (nw as u64 + 1) * 8, "word offsets")?;
        want(&ranking, meta.vocabulary * 4, "unigram ranking")?;
        let width = width_for(nw.saturating_sub(1) as u64);
        let values = |kind: SectionKind,
                      codes: SectionKind,
                      bins: SectionKind,
                      k: usize,
                      bits: u32,
                      len: u64|
         -> Result<Values> {
            if bits >= 32 {
                let r = find(kind, k)?;
                want(&r, len * 4, kind.name())?;
                return Ok(Values::F32(r));
            }
            if !(1..=16).contains(&bits) {
                return Err(bad(format!("{bits} bits a value")));
            }
            let c = find(codes, k)?;
            want(&c, Packed::bytes(len as usize, bits) as u64, codes.name())?;
            let bins = checked(bins, k)?;
            if bins.is_empty() || bins.len() % 4 != 0 || bins.len() / 4 > 1 << bits {
                return Err(bad(format!(
                    "order {k}: {} bytes of {}",
                    bins.len(),
                    SectionKind::name(bins_kind(kind))
                )));
            }
            Ok(Values::Coded {
                codes: Packed {
                    at: c,
                    width: bits,
                    len: len as usize,
                },
                bins,
            })
        };
        let mut orders = Vec::with_capacity(n);
        for k in 1..=n {
            let len = meta.ngrams[k - 1];
            let pbits = if k == 1 { 32 } else { meta.value_bits };
            let mut o = OrderSections {
                len: len as usize,
                probs: values(
                    SectionKind::Probs,
                    SectionKind::ProbCodes,
                    SectionKind::ProbBins,
                    k,
                    pbits,
                    len,
                )?,
                ..Default::default()
            };
            if k > 1 {
                let r = find(SectionKind::Words, k)?;
                want(
                    &r,
                    Packed::bytes(len as usize, width) as u64,
                    "n-gram words",
                )?;
                o.words = Packed {
                    at: r,
                    width,
                    len: len as usize,
                };
            }
            if k < n {
                o.weights = values(
                    SectionKind::Weights,
                    SectionKind::WeightCodes,
                    SectionKind::WeightBins,
                    k,
                    meta.weight_bits,
                    len,
                )?;
                let r = find(SectionKind::Children, k)?;
                o.children = match EliasFano::open(b, r) {
                    Some(ef) if ef.len as u64 == len + 1 => ef,
                    _ => {
                        return Err(bad(format!(
                            "order {k}: the children index does not hold {} starts",
                            len + 1
                        )))
                    }
                };
                if let Ok(r) = find(SectionKind::Skips, k) {
                    want(&r, len, "back-off skips")?;
                    o.skips = r;
                }
            }
            orders.push(o);
        }
        let (id_dir, id_shift) = id_directory(&b[ids.clone()], nw);
        let mut m = Model {
            id_dir,
            id_shift,
            path: path.to_path_buf(),
            map,
            meta,
            entries,
            n,
            nw,
            ids,
            offsets,
            text,
            ranking,
            orders,
            bos: 0,
            unk: 0,
            completion: Default::default(),
        };
        let need = |m: &Model, id: WordId, what: &str| {
            m.index_of(id)
                .ok_or_else(|| bad(format!("the vocabulary has no {what}")))
        };
        m.bos = need(&m, bos_id(), "<s>")?;
        m.unk = need(&m, unk_id(), "<unk>")?;
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

    /// Checks every section's checksum and every structural invariant
    /// (children ranges increasing and ending at the next order's count,
    /// words increasing within each context and in range, values finite
    /// and probabilities within [0, 1], the ranking a permutation of V).
    /// Reads the whole file.
    pub fn verify(&self) -> Result<()> {
        let b = &self.map[..];
        let bad = |d: String| Error::corrupt(&self.path, d);
        for e in &self.entries {
            let r = e.offset as usize..(e.offset + e.len) as usize;
            if xxhash_rust::xxh3::xxh3_64(&b[r]) != e.hash {
                let name = SectionKind::from_u32(e.kind).map_or("unknown", |k| k.name());
                return Err(bad(format!(
                    "the checksum of the {name} section of order {} (bytes {}..+{}) does not match",
                    e.order, e.offset, e.len
                )));
            }
        }
        let ids = &b[self.ids.clone()];
        for i in 1..self.nw {
            if u64_at(ids, i - 1) >= u64_at(ids, i) {
                return Err(bad(format!("the word ids are not increasing at {i}")));
            }
        }
        let offs = &b[self.offsets.clone()];
        for i in 0..self.nw {
            let (a, z) = (u64_at(offs, i), u64_at(offs, i + 1));
            if a > z || z as usize > self.text.len() {
                return Err(bad(format!("the offsets of word {i} are out of range")));
            }
        }
        let mut seen = vec![false; self.nw];
        let rk = &b[self.ranking.clone()];
        for i in 0..self.meta.vocabulary as usize {
            let x = u32_at(rk, i) as usize;
            if x >= self.nw || x == self.bos as usize || std::mem::replace(&mut seen[x], true) {
                return Err(bad(format!(
                    "the unigram ranking is not a permutation of V at {i}"
                )));
            }
        }
        for k in 1..=self.n {
            let o = &self.orders[k - 1];
            for i in 0..o.len {
                let q = o.probs.get(b, i);
                if !(q.is_finite() && q >= 0.0 && (q <= 1.0 || !self.meta.probabilities)) {
                    return Err(bad(format!("order {k}: value {q} of n-gram {i}")));
                }
            }
            if k < self.n {
                for i in 0..o.len {
                    let x = o.weights.get(b, i);
                    if !(x.is_finite() && x >= 0.0) {
                        return Err(bad(format!("order {k}: back-off weight {x} of n-gram {i}")));
                    }
                }
                for i in 0..if o.skips.is_empty() { 0 } else { o.len } {
                    let sk = b[o.skips.start + i] as usize;
                    if sk == 0 || sk > k {
                        return Err(bad(format!("order {k}: back-off skip {sk} of n-gram {i}")));
                    }
                }
                let next = &self.orders[k];
                let mut prev = 0u64;
                for i in 0..=o.len {
                    let s = o.children.get(b, i);
                    if s < prev || (i == 0 && s != 0) || (i == o.len && s as usize != next.len) {
                        return Err(bad(format!(
                            "order {k}: the children index is broken at {i}"
                        )));
                    }
                    if i > 0 {
                        for e in prev as usize..s as usize {
                            let x = next.words.get(b, e);
                            if x as usize >= self.nw
                                || (e > prev as usize && next.words.get(b, e - 1) >= x)
                            {
                                return Err(bad(format!(
                                    "order {}: the words of the children of n-gram {} are not increasing",
                                    k + 1,
                                    i - 1
                                )));
                            }
                        }
                    }
                    prev = s;
                }
            }
        }
        Ok(())
    }

    // ---- raw access ----------------------------------------------------------

    /// The word index of `id`, if the model has it (`<s>` included).
    pub(crate) fn index_of(&self, id: WordId) -> Option<u32> {
        let ids = &self.map[self.ids.clone()];
        let b = self.bucket(id);
        let (lo, hi) = (self.id_dir[b] as usize, self.id_dir[b + 1] as usize);
        find_id_in(|i| u64_at(ids, i), lo, hi.max(lo), id)
    }

    /// The bucket of the id directory that holds `id`.
    #[inline(always)]
    fn bucket(&self, id: WordId) -> usize {
        (id >> self.id_shift) as usize
    }

    /// Prefetches the bucket of the directory that [`Model::index_of`]
    /// reads first for `id`.
    #[inline(always)]
    pub(crate) fn prefetch_bucket(&self, id: WordId) {
        if let Some(x) = self.id_dir.get(self.bucket(id)) {
            crate::hint::prefetch(x);
        }
    }

    /// Prefetches the ids that [`Model::index_of`] searches for `id` (its
    /// bucket of the directory should be in the cache).
    #[inline(always)]
    pub(crate) fn prefetch_ids(&self, id: WordId) {
        if let Some(&lo) = self.id_dir.get(self.bucket(id)) {
            prefetch(&self.map, self.ids.start + 8 * lo as usize);
        }
    }

    /// The id of word index `x`.
    pub(crate) fn id_at(&self, x: u32) -> WordId {
        u64_at(&self.map[self.ids.clone()], x as usize)
    }

    /// The text of word index `x` (lossy for damaged bytes).
    pub(crate) fn text_at(&self, x: u32) -> String {
        let offs = &self.map[self.offsets.clone()];
        let t = &self.map[self.text.clone()];
        let a = (u64_at(offs, x as usize) as usize).min(t.len());
        let z = (u64_at(offs, x as usize + 1) as usize).clamp(a, t.len());
        String::from_utf8_lossy(&t[a..z]).into_owned()
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

    /// Whether some context backs off past its next shorter context.
    pub(crate) fn has_skips(&self) -> bool {
        self.orders.iter().any(|o| !o.skips.is_empty())
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
        let (lo, hi) = o.children.pair(&self.map, e as usize);
        let lo = (lo as usize).min(n);
        lo..(hi as usize).clamp(lo, n)
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

/// The bins section that goes with a values section.
fn bins_kind(kind: SectionKind) -> SectionKind {
    match kind {
        SectionKind::Probs => SectionKind::ProbBins,
        _ => SectionKind::WeightBins,
    }
}

/// Where a search for `w` among the increasing words `at(lo..hi)` (all
/// below `universe`) stands between its reads.
///
/// Word indices are ranks of hashes, so the children of a context are
/// spread evenly over `0..universe` whatever the words' frequencies: the
/// first probe is placed from `w / universe` alone (no read of the range's
/// ends, which in a long list are two more cache misses), and the next
/// pair of probes brackets `w` from the distance the first one was off,
/// with a margin of a few standard deviations. What is left is searched by
/// interpolation with bisection steps, which keeps the worst case
/// logarithmic. [`find_by`] runs the steps in a row; `Model::extend` runs
/// each step for several searches before the next, prefetching what the
/// next step reads ([`Seek::next_read`]).
#[derive(Clone, Copy, Debug)]
pub(crate) enum Seek {
    /// Read the first probe at `p`.
    Probe { lo: usize, hi: usize, p: usize },
    /// Read the bracket `a`, `b` within `lo..hi`.
    Bracket {
        lo: usize,
        hi: usize,
        a: usize,
        b: usize,
    },
    /// Search `lo..hi` to the end.
    Rest { lo: usize, hi: usize },
    /// Found at this position.
    Found(usize),
    /// Not there.
    Absent,
}

impl Seek {
    /// The start of a search for `w` among `lo..hi`.
    #[inline(always)]
    pub(crate) fn start(lo: usize, hi: usize, w: u32, universe: u64) -> Seek {
        if hi - lo > 32 && (w as u64) < universe {
            let p = lo + ((w as u64 * (hi - lo) as u64) / universe) as usize;
            Seek::Probe { lo, hi, p }
        } else {
            Seek::Rest { lo, hi }
        }
    }

    /// The position the next step reads first (to prefetch), if any.
    #[inline(always)]
    pub(crate) fn next_read(&self) -> Option<(usize, Option<usize>)> {
        match *self {
            Seek::Probe { p, .. } => Some((p, None)),
            Seek::Bracket { a, b, .. } => Some((a, Some(b))),
            Seek::Rest { lo, hi } if lo < hi => Some((lo, Some(hi - 1))),
            _ => None,
        }
    }

    /// One step: the first probe gives the bracket, the bracket the rest,
    /// the rest the answer.
    #[inline(always)]
    pub(crate) fn step(self, at: impl Fn(usize) -> u32, w: u32, universe: u64) -> Seek {
        match self {
            Seek::Probe { mut lo, mut hi, p } => {
                let x = at(p);
                if x == w {
                    return Seek::Found(p);
                }
                let d = ((x.abs_diff(w) as u64 * (hi - lo) as u64) / universe) as usize;
                let margin = 2 * d.isqrt() + 8;
                if x < w {
                    lo = p + 1;
                } else {
                    hi = p;
                }
                if lo >= hi {
                    return Seek::Absent;
                }
                let centre = if x < w { p + d } else { p.saturating_sub(d) };
                let a = centre.saturating_sub(margin).clamp(lo, hi - 1);
                let b = (centre + margin).clamp(lo, hi - 1);
                Seek::Bracket { lo, hi, a, b }
            }
            Seek::Bracket { lo, hi, a, b } => {
                let (xa, xb) = (at(a), at(b));
                if w < xa {
                    Seek::Rest { lo, hi: a }
                } else if w > xb {
                    Seek::Rest { lo: b + 1, hi }
                } else {
                    Seek::Rest { lo: a, hi: b + 1 }
                }
            }
            Seek::Rest { lo, hi } => match search_rest(at, lo, hi, w) {
                Some(i) => Seek::Found(i),
                None => Seek::Absent,
            },
            done => done,
        }
    }

    /// Runs the steps to the end.
    #[inline(always)]
    pub(crate) fn finish(
        mut self,
        at: impl Fn(usize) -> u32 + Copy,
        w: u32,
        universe: u64,
    ) -> Option<usize> {
        loop {
            match self {
                Seek::Found(i) => return Some(i),
                Seek::Absent => return None,
                s => self = s.step(at, w, universe),
            }
        }
    }
}

/// The position of `w` among the increasing words `at(lo..hi)`, all
/// below `universe` (see [`Seek`]).
#[inline]
pub(crate) fn find_by(
    at: impl Fn(usize) -> u32 + Copy,
    lo: usize,
    hi: usize,
    w: u32,
    universe: u64,
) -> Option<usize> {
    Seek::start(lo, hi, w, universe).finish(at, w, universe)
}

/// Interpolation with bisection steps over `lo..hi`, then a scan of the
/// last 16 or fewer.
#[inline(always)]
fn search_rest(at: impl Fn(usize) -> u32, mut lo: usize, mut hi: usize, w: u32) -> Option<usize> {
    while hi - lo > 16 {
        let a = at(lo);
        let z = at(hi - 1);
        if w < a || w > z {
            return None;
        }
        let m = lo + ((w - a) as u64 * (hi - 1 - lo) as u64 / ((z - a) as u64).max(1)) as usize;
        let x = at(m);
        if x == w {
            return Some(m);
        }
        if x < w {
            lo = m + 1;
        } else {
            hi = m;
        }
        if hi - lo > 16 {
            let mid = lo + (hi - lo) / 2;
            let x = at(mid);
            if x == w {
                return Some(mid);
            }
            if x < w {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
    }
    (lo..hi).find(|&i| at(i) == w)
}

/// The position of `id` among `n` increasing ids `at(0..n)`.
#[inline]
pub(crate) fn find_id(at: impl Fn(usize) -> u64, n: usize, id: WordId) -> Option<u32> {
    find_id_in(at, 0, n, id)
}

/// The position of `id` among the increasing ids `at(lo..hi)`.
#[inline]
pub(crate) fn find_id_in(
    at: impl Fn(usize) -> u64,
    mut lo: usize,
    mut hi: usize,
    id: WordId,
) -> Option<u32> {
    // Interpolation search: ids are hashes, spread evenly.
    while hi - lo > 8 {
        let a = at(lo);
        let z = at(hi - 1);
        if id < a || id > z {
            return None;
        }
        let span = (z - a) as u128;
        let mut m = lo + (((id - a) as u128 * (hi - 1 - lo) as u128) / span.max(1)) as usize;
        m = m.clamp(lo, hi - 1);
        let x = at(m);
        if x == id {
            return Some(m as u32);
        }
        if x < id {
            lo = m + 1;
        } else {
            hi = m;
        }
        // One bisection step as well, so that a skewed range still
        // halves.
        if hi - lo > 8 {
            let mid = lo + (hi - lo) / 2;
            let x = at(mid);
            if x == id {
                return Some(mid as u32);
            }
            if x < id {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
    }
    (lo..hi).find(|&i| at(i) == id).map(|i| i as u32)
}

/// The bucket directory of the sorted word ids `ids` (`nw` of them):
/// `dir[b]` is the first index whose id's top bits are at least `b`, with
/// about 16 ids a bucket, and the shift that gives an id's bucket. Built
/// on open from the ids section (one pass; a few megabytes read for
/// millions of words). On a damaged file whose ids do not increase it is
/// still a valid (non-decreasing) directory: lookups give wrong answers,
/// never a read outside the section.
fn id_directory(ids: &[u8], nw: usize) -> (Vec<u32>, u32) {
    let bits = (usize::BITS - (nw / 16).max(1).leading_zeros()).clamp(1, 18);
    let shift = 64 - bits;
    let buckets = 1usize << bits;
    let mut dir = Vec::with_capacity(buckets + 1);
    let mut i = 0usize;
    for b in 0..buckets {
        while i < nw && ((u64_at(ids, i) >> shift) as usize) < b {
            i += 1;
        }
        dir.push(i as u32);
    }
    dir.push(nw as u32);
    (dir, shift)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A small deterministic generator (splitmix64).
    fn next(s: &mut u64) -> u64 {
        *s = s.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = *s;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// `find_by` against the standard library's binary search, on ranges
    /// of 0 to 5,000 increasing words spread evenly, bunched at one end,
    /// and in runs of neighbours (where the first probe's guess is far
    /// off): every present word found where it is, every absent one not;
    /// within a sub-range too.
    #[test]
    fn find_by_finds_what_binary_search_finds() {
        let mut s = 7u64;
        let universe = 1u64 << 20;
        for len in [0usize, 1, 2, 16, 17, 33, 100, 1000, 5000] {
            for shape in 0..3 {
                let mut v: Vec<u32> = (0..len)
                    .map(|i| match shape {
                        0 => (next(&mut s) % universe) as u32,
                        1 => (next(&mut s) % 3000) as u32,
                        _ => (i as u32 / 50) * 20_000 + (i as u32 % 50),
                    })
                    .collect();
                v.sort_unstable();
                v.dedup();
                let at = |i: usize| v[i];
                let (lo, hi) = (v.len() / 5, v.len() - v.len() / 7);
                for _ in 0..400 {
                    let w = if next(&mut s).is_multiple_of(2) && !v.is_empty() {
                        v[(next(&mut s) % v.len() as u64) as usize]
                    } else {
                        (next(&mut s) % universe) as u32
                    };
                    let want = v.binary_search(&w).ok();
                    assert_eq!(
                        find_by(at, 0, v.len(), w, universe),
                        want,
                        "{len} {shape} {w}"
                    );
                    let want = v[lo..hi].binary_search(&w).ok().map(|i| i + lo);
                    assert_eq!(
                        find_by(at, lo, hi, w, universe),
                        want,
                        "{len} {shape} {w} sub"
                    );
                }
            }
        }
    }

    /// The id directory sends every id to the bucket that holds it.
    #[test]
    fn id_directory_covers_every_id() {
        let mut s = 11u64;
        for nw in [1usize, 5, 16, 17, 1000, 70_000] {
            let mut ids: Vec<u64> = (0..nw).map(|_| next(&mut s)).collect();
            ids.sort_unstable();
            ids.dedup();
            let bytes: Vec<u8> = ids.iter().flat_map(|x| x.to_le_bytes()).collect();
            let (dir, shift) = id_directory(&bytes, ids.len());
            for (i, &id) in ids.iter().enumerate() {
                let b = (id >> shift) as usize;
                let (lo, hi) = (dir[b] as usize, dir[b + 1] as usize);
                assert!(lo <= i && i < hi, "{nw}: id {i} outside its bucket");
                assert_eq!(find_id_in(|j| ids[j], lo, hi, id), Some(i as u32));
            }
            assert_eq!(find_id_in(|j| ids[j], 0, ids.len(), 12345), None);
        }
    }
}
