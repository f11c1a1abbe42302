//! The finished store: a RocksDB database of counts, continuation counts,
//! context statistics, vocabulary and metadata.
//!
//! This module is the only user of `rocksdb`. [`build`] writes sorted
//! SST files and loads them by ingestion (never one put at a time);
//! [`Store`] opens a finished store read-only. The layout is in [`keys`].
//!
//! A store directory holds `db/` (the database), and while an ingest is
//! unfinished also `work/` (its manifest and intermediate files) and
//! `ingest.lock` ([`crate::layout`]). A store with a `work/` folder is
//! unfinished: [`Store::open`] refuses it with [`Error::Unfinished`].

pub mod build;
pub mod keys;
pub mod ranks;

pub use crate::records::{
    GrowthCurve, OrderStats, Settings, StoreMeta, Totals, WordListInfo, STORE_VERSION,
};
pub use keys::{ContextStats, NgramRecord};
pub use ranks::Ranks;

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use rocksdb::{IteratorMode, Options, DB};

use crate::error::{Error, Result};
use crate::key::Key;
use crate::layout;
use crate::words::{bos_id, eos_id, unk_id, WordId, BOS, EOS, UNK};

/// Block cache of a store opened by [`Store::open`], in bytes.
pub const DEFAULT_CACHE_BYTES: usize = 8 << 20;

/// RocksDB options shared by writing and reading. Index and filter blocks
/// live in the (bounded) block cache, so opening a large store does not
/// cost memory in proportion to its size.
pub(crate) fn cf_options(cache: &rocksdb::Cache) -> Options {
    let mut o = Options::default();
    o.set_compression_type(rocksdb::DBCompressionType::Zstd);
    o.set_write_buffer_size(1 << 20);
    o.set_max_write_buffer_number(2);
    let mut b = rocksdb::BlockBasedOptions::default();
    b.set_block_size(16 << 10);
    b.set_bloom_filter(10.0, false);
    b.set_block_cache(cache);
    b.set_cache_index_and_filter_blocks(true);
    o.set_block_based_table_factory(&b);
    o
}

/// The stored value of one n-gram: its count and, below the top order, its
/// continuation count.
pub type NgramValue = (u64, Option<u64>);

/// A finished store, opened read-only.
pub struct Store {
    dir: PathBuf,
    db: DB,
    meta: StoreMeta,
    ranks: Ranks,
}

/// Read options of a scan that reads a whole order, or a large part of
/// one, once (freezing, exporting): ahead, and not into the block cache,
/// which stays for the lookups.
fn whole_scan_options() -> rocksdb::ReadOptions {
    let mut ro = rocksdb::ReadOptions::default();
    ro.fill_cache(false);
    ro.set_readahead_size(4 << 20);
    ro
}

impl Store {
    /// Opens the finished store in `dir` with a block cache of
    /// [`DEFAULT_CACHE_BYTES`].
    pub fn open(dir: &Path) -> Result<Store> {
        Self::open_with_cache(dir, DEFAULT_CACHE_BYTES)
    }

    /// Opens the finished store in `dir` with a block cache of `cache_bytes`
    /// (uncompressed data, index and filter blocks). Queries that read the
    /// same blocks again run from the cache; size it to the store for the
    /// fastest repeated queries.
    pub fn open_with_cache(dir: &Path, cache_bytes: usize) -> Result<Store> {
        if layout::work(dir).exists() {
            return Err(Error::Unfinished {
                path: dir.to_path_buf(),
                phase: None,
            });
        }
        let path = layout::db(dir);
        if !path.join("CURRENT").exists() {
            return Err(Error::state(
                dir,
                "no store here (run `quern ingest --store DIR INPUT...` first)",
            ));
        }
        let rocks = |source| Error::Rocks {
            path: path.clone(),
            source,
        };
        let cfs = DB::list_cf(&Options::default(), &path).map_err(rocks)?;
        let mut opts = Options::default();
        opts.set_max_open_files(256);
        let cache = rocksdb::Cache::new_lru_cache(cache_bytes.max(1 << 20));
        let descs: Vec<_> = cfs
            .iter()
            .map(|n| rocksdb::ColumnFamilyDescriptor::new(n, cf_options(&cache)))
            .collect();
        let db = DB::open_cf_descriptors_read_only(&opts, &path, descs, false).map_err(rocks)?;
        let meta_cf = db
            .cf_handle(keys::META_CF)
            .ok_or_else(|| Error::corrupt(&path, "no metadata column family"))?;
        let raw = db
            .get_cf(meta_cf, keys::META_KEY)
            .map_err(rocks)?
            .ok_or_else(|| Error::corrupt(&path, "no metadata record"))?;
        let meta: StoreMeta = crate::fsutil::parse_upgraded(
            &path,
            &raw,
            STORE_VERSION,
            crate::records::upgrade_store_meta,
        )?;
        let ranks = read_ranks(&db, &path)?;
        Ok(Store {
            dir: dir.to_path_buf(),
            db,
            meta,
            ranks,
        })
    }

    /// The store directory.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// Settings, totals and count-of-counts.
    pub fn meta(&self) -> &StoreMeta {
        &self.meta
    }

    /// Highest order N.
    pub fn order(&self) -> usize {
        self.meta.settings.order
    }

    fn rocks(&self, source: rocksdb::Error) -> Error {
        Error::Rocks {
            path: layout::db(&self.dir),
            source,
        }
    }

    fn cf(&self, name: &str) -> Result<&rocksdb::ColumnFamily> {
        self.db.cf_handle(name).ok_or_else(|| {
            Error::corrupt(
                layout::db(&self.dir),
                format!("missing column family {name}"),
            )
        })
    }

    /// The whole vocabulary: id → word (markers included).
    pub fn vocabulary(&self) -> Result<HashMap<WordId, String>> {
        let mut m = HashMap::new();
        for (id, w) in [(bos_id(), BOS), (eos_id(), EOS), (unk_id(), UNK)] {
            m.insert(id, w.to_string());
        }
        for item in self
            .db
            .iterator_cf(self.cf(keys::VOCAB_CF)?, IteratorMode::Start)
        {
            let (k, v) = item.map_err(|e| self.rocks(e))?;
            let id = self
                .ranks
                .read_key(&k)
                .filter(|k| k.order() == 1)
                .ok_or_else(|| Error::corrupt(layout::db(&self.dir), "bad vocabulary key"))?
                .ids()[0];
            m.insert(id, String::from_utf8_lossy(&v).into_owned());
        }
        Ok(m)
    }

    /// Every n-gram of order `k` in key order: `(key, count, continuation)`.
    pub fn ngrams(
        &self,
        k: usize,
    ) -> Result<impl Iterator<Item = Result<(Key, u64, Option<u64>)>> + '_> {
        self.scan_prefix(k, &[], None)
    }

    /// Every context of length `k` (1 ≤ k < N) in key order: the n-grams
    /// of order `k` that have a continuation, with their statistics.
    pub fn contexts(
        &self,
        k: usize,
    ) -> Result<impl Iterator<Item = Result<(Key, ContextStats)>> + '_> {
        let k = if k < self.order() { k } else { 0 };
        Ok(self.scan_records(k, &[], None)?.filter_map(|r| match r {
            Ok((key, rec)) => rec.context.map(|st| Ok((key, st))),
            Err(e) => Some(Err(e)),
        }))
    }

    /// The key of `ids` in the store's encoding, or `None` if a word of it
    /// is not in the store (so neither is the n-gram).
    fn key_of(&self, ids: &[WordId]) -> Option<Vec<u8>> {
        let mut kb = Vec::with_capacity(ids.len() * self.ranks.width());
        self.ranks.write_key(ids, &mut kb).then_some(kb)
    }

    /// The stored record of one n-gram (count, continuation count and, for
    /// a context, its statistics).
    pub fn record(&self, ids: &[WordId]) -> Result<Option<NgramRecord>> {
        if ids.is_empty() || ids.len() > self.order() {
            return Ok(None);
        }
        let Some(kb) = self.key_of(ids) else {
            return Ok(None);
        };
        let v = self
            .db
            .get_pinned_cf(self.cf(&keys::ngram_cf(ids.len()))?, &kb)
            .map_err(|e| self.rocks(e))?;
        v.map(|v| {
            keys::decode_ngram(&v, self.has_documents())
                .ok_or_else(|| Error::corrupt(layout::db(&self.dir), "bad n-gram value"))
        })
        .transpose()
    }

    /// The count and continuation count of one n-gram, if stored.
    pub fn get(&self, ids: &[WordId]) -> Result<Option<(u64, Option<u64>)>> {
        Ok(self.record(ids)?.map(|r| (r.count, r.continuation)))
    }

    /// The statistics of context `h` over its continuations; the empty
    /// context's for `h = []`. `None` if `h` has no continuation.
    pub fn context(&self, h: &[WordId]) -> Result<Option<ContextStats>> {
        if h.is_empty() {
            return Ok(Some(self.meta.root));
        }
        if h.len() >= self.order() {
            return Ok(None);
        }
        Ok(self.record(h)?.and_then(|r| r.context))
    }

    /// The stored n-grams `h·w` of order `|h| + 1`, in key order (a prefix
    /// scan): `(key, count, continuation)`. For `h = []`, every unigram.
    pub fn children<'a>(
        &'a self,
        h: &[WordId],
    ) -> Result<impl Iterator<Item = Result<(Key, u64, Option<u64>)>> + 'a> {
        self.scan_prefix(h.len() + 1, h, None)
    }

    /// The word with id `id`, if it is in the vocabulary (markers included).
    pub fn word(&self, id: WordId) -> Result<Option<String>> {
        for (mid, w) in [(bos_id(), BOS), (eos_id(), EOS), (unk_id(), UNK)] {
            if id == mid {
                return Ok(Some(w.to_string()));
            }
        }
        let Some(kb) = self.key_of(&[id]) else {
            return Ok(None);
        };
        let v = self
            .db
            .get_pinned_cf(self.cf(keys::VOCAB_CF)?, kb)
            .map_err(|e| self.rocks(e))?;
        Ok(v.map(|b| String::from_utf8_lossy(&b).into_owned()))
    }

    /// One multi-get per key length: the records of `items` (n-grams of
    /// orders 1..=N; `None` for any other length or an n-gram not stored).
    pub fn records_many(&self, items: &[&[WordId]]) -> Result<Vec<Option<NgramRecord>>> {
        let n = self.order();
        let mut out: Vec<Option<NgramRecord>> = vec![None; items.len()];
        let mut by_len: Vec<(Vec<usize>, Vec<Vec<u8>>)> = vec![Default::default(); n + 1];
        for (i, g) in items.iter().enumerate() {
            if (1..=n).contains(&g.len()) {
                if let Some(kb) = self.key_of(g) {
                    by_len[g.len()].0.push(i);
                    by_len[g.len()].1.push(kb);
                }
            }
        }
        for (k, (idx, keys)) in by_len.iter().enumerate() {
            if idx.is_empty() {
                continue;
            }
            let cf = self.cf(&keys::ngram_cf(k))?;
            let sorted = keys.windows(2).all(|w| w[0] < w[1]);
            let got = self.db.batched_multi_get_cf(cf, keys, sorted);
            for (&i, r) in idx.iter().zip(got) {
                if let Some(v) = r.map_err(|e| self.rocks(e))? {
                    out[i] =
                        Some(keys::decode_ngram(&v, self.has_documents()).ok_or_else(|| {
                            Error::corrupt(layout::db(&self.dir), "bad n-gram value")
                        })?);
                }
            }
        }
        Ok(out)
    }

    /// Counts of many n-grams at once (RocksDB multi-get; all the same
    /// order or not). `None` for n-grams not stored.
    pub fn get_many(&self, grams: &[&[WordId]]) -> Result<Vec<Option<NgramValue>>> {
        Ok(self
            .records_many(grams)?
            .into_iter()
            .map(|r| r.map(|r| (r.count, r.continuation)))
            .collect())
    }

    /// The stored n-grams of order `k` that begin with `prefix`
    /// (`prefix.len() <= k`), in key order, starting after the n-gram
    /// `after` if given (for paging): `(key, count, continuation)`.
    pub fn scan_prefix<'a>(
        &'a self,
        k: usize,
        prefix: &[WordId],
        after: Option<&[WordId]>,
    ) -> Result<impl Iterator<Item = Result<(Key, u64, Option<u64>)>> + 'a> {
        Ok(self
            .scan_records(k, prefix, after)?
            .map(|r| r.map(|(key, rec)| (key, rec.count, rec.continuation))))
    }

    /// The stored n-grams of order `k` whose first word is at least `from`
    /// and below `to` (`None`: no bound), in key order, read like a whole
    /// order (ahead, and not into the block cache): one part of an order
    /// that several threads read side by side. `from` and `to` must be
    /// words of the store. The n-grams' words are given as their ranks,
    /// positions among [`Store::rank_ids`] (a [`Key`] of ranks sorts as the
    /// ids do): a reader that numbers the words itself saves a translation
    /// per word.
    pub fn scan_first_ranks<'a>(
        &'a self,
        k: usize,
        from: Option<WordId>,
        to: Option<WordId>,
    ) -> Result<impl Iterator<Item = Result<(Key, NgramRecord)>> + 'a> {
        let path = layout::db(&self.dir);
        let bound = |w: Option<WordId>| -> Result<Option<Vec<u8>>> {
            w.map(|w| {
                self.key_of(&[w]).ok_or_else(|| {
                    Error::corrupt(&path, format!("the word with id {w:#018x} is not stored"))
                })
            })
            .transpose()
        };
        let (start, end) = (bound(from)?.unwrap_or_default(), bound(to)?);
        let cf = if k >= 1 && k <= self.order() {
            Some(self.cf(&keys::ngram_cf(k))?)
        } else {
            None
        };
        let it = cf.map(|cf| {
            let mut ro = whole_scan_options();
            if let Some(e) = end {
                ro.set_iterate_upper_bound(e);
            }
            self.db.iterator_cf_opt(
                cf,
                ro,
                IteratorMode::From(&start, rocksdb::Direction::Forward),
            )
        });
        Ok(it
            .into_iter()
            .flatten()
            .map(move |item| self.decode_record(item, &path, Ranks::read_ranks)))
    }

    /// The id of every rank: the store's word ids, increasing.
    pub fn rank_ids(&self) -> &[WordId] {
        self.ranks.ids()
    }

    /// As [`Store::scan_prefix`], with whole records. Empty when `k` is not
    /// an order of the store or a word of `prefix` is not in it.
    pub fn scan_records<'a>(
        &'a self,
        k: usize,
        prefix: &[WordId],
        after: Option<&[WordId]>,
    ) -> Result<impl Iterator<Item = Result<(Key, NgramRecord)>> + 'a> {
        let path = layout::db(&self.dir);
        let pb = self.key_of(prefix);
        let mut start = pb.clone().unwrap_or_default();
        if let Some(a) = after {
            // The smallest key greater than `after`: `after` followed by a
            // 0 byte. A word of `after` not in the store (never returned by
            // a scan) starts at the prefix.
            if let Some(mut ab) = self.key_of(a) {
                ab.push(0);
                if ab > start {
                    start = ab;
                }
            }
        }
        let cf = if k >= 1 && k <= self.order() && prefix.len() <= k && pb.is_some() {
            Some(self.cf(&keys::ngram_cf(k))?)
        } else {
            None
        };
        let pb = pb.unwrap_or_default();
        // A scan of a whole order (freezing, exporting) reads every block
        // once: it reads ahead and keeps its blocks out of the cache, which
        // stays for the lookups.
        let whole = prefix.is_empty() && after.is_none();
        let it = cf.map(|cf| {
            let ro = if whole {
                whole_scan_options()
            } else {
                rocksdb::ReadOptions::default()
            };
            self.db.iterator_cf_opt(
                cf,
                ro,
                IteratorMode::From(&start, rocksdb::Direction::Forward),
            )
        });
        Ok(it
            .into_iter()
            .flatten()
            .take_while(move |item| item.as_ref().map_or(true, |(kb, _)| kb.starts_with(&pb)))
            .map(move |item| self.decode_record(item, &path, Ranks::read_key)))
    }

    /// A scanned record, its key read by `read` (as ids or as ranks).
    fn decode_record(
        &self,
        item: RawItem,
        path: &Path,
        read: fn(&Ranks, &[u8]) -> Option<Key>,
    ) -> Result<(Key, NgramRecord)> {
        let (kb, vb) = item.map_err(|source| Error::Rocks {
            path: path.to_path_buf(),
            source,
        })?;
        let key = read(&self.ranks, &kb).ok_or_else(|| Error::corrupt(path, "bad n-gram key"))?;
        let rec = keys::decode_ngram(&vb, self.has_documents())
            .ok_or_else(|| Error::corrupt(path, "bad n-gram value"))?;
        Ok((key, rec))
    }

    /// The store holds each n-gram's document count (`ingest
    /// --document-counts`): every [`NgramRecord`] read has its `documents`.
    pub fn has_documents(&self) -> bool {
        self.meta.settings.document_counts
    }

    /// Size of the database files on disk, in bytes.
    pub fn disk_bytes(&self) -> u64 {
        dir_bytes(&layout::db(&self.dir))
    }
}

/// One item of a RocksDB iterator: a key and a value, or the error.
type RawItem = std::result::Result<(Box<[u8]>, Box<[u8]>), rocksdb::Error>;

/// Reads the sorted word ids of the `ids` column family.
fn read_ranks(db: &DB, path: &Path) -> Result<Ranks> {
    let bad = |what: &str| Error::corrupt(path, format!("word id list: {what}"));
    let cf = db
        .cf_handle(keys::IDS_CF)
        .ok_or_else(|| bad("no column family"))?;
    let mut ids: Vec<WordId> = Vec::new();
    for (i, item) in db.iterator_cf(cf, IteratorMode::Start).enumerate() {
        let (k, v) = item.map_err(|source| Error::Rocks {
            path: path.to_path_buf(),
            source,
        })?;
        if *k != (i as u32).to_be_bytes() || v.is_empty() || v.len() % 8 != 0 {
            return Err(bad("a chunk is missing or malformed"));
        }
        for c in v.chunks_exact(8) {
            let id = u64::from_le_bytes(c.try_into().expect("8 bytes"));
            if ids.last().is_some_and(|&p| p >= id) {
                return Err(bad("not increasing"));
            }
            ids.push(id);
        }
    }
    Ok(Ranks::from_sorted(ids))
}

/// Total size of the files below `dir`.
pub fn dir_bytes(dir: &Path) -> u64 {
    let mut total = 0;
    if let Ok(rd) = std::fs::read_dir(dir) {
        for e in rd.flatten() {
            match e.metadata() {
                Ok(m) if m.is_dir() => total += dir_bytes(&e.path()),
                Ok(m) => total += m.len(),
                Err(_) => {}
            }
        }
    }
    total
}
