//! Step 2 of a partition: derive every statistic and write store files.

use std::collections::BTreeMap;
use std::path::Path;

use super::kway::{KWayMerge, RecordSource};
use super::partition::{open_all, reduce_sources, MergeConfig};
use crate::error::{Error, Result, Side};
use crate::key::Key;
use crate::records::{Joined, PartitionStats};
use crate::shard::{RunFile, Values, MAX_VALUES};
use crate::store::build::{sst_options, Family, SstSet};
use crate::store::keys::{encode_ngram, ngram_cf};
use crate::store::ranks::KeyWriter;
use crate::store::{ContextStats, Ranks};
use crate::words::{bos_id, unk_id};

/// An n-gram below the top order whose children are still coming: its
/// record is written when the last child has been seen, with its context
/// statistics in its value.
#[derive(Clone, Default)]
struct OpenContext {
    active: bool,
    key: Vec<u8>,
    count: u64,
    continuation: u64,
    stats: ContextStats,
    documents: Option<u64>,
}

/// Counts below this are tallied in an array, not a map.
const DENSE_COUNTS: usize = 256;

/// Count-of-counts per order: small counts (nearly every n-gram's) in an
/// array, the rest in a map; a map entry per n-gram cost more than the
/// rest of the join's own work on it.
struct Tally {
    dense: Vec<[u64; DENSE_COUNTS]>,
    sparse: Vec<BTreeMap<u64, u64>>,
}

impl Tally {
    fn new(orders: usize) -> Tally {
        Tally {
            dense: vec![[0; DENSE_COUNTS]; orders],
            sparse: vec![BTreeMap::new(); orders],
        }
    }

    #[inline]
    fn add(&mut self, order: usize, count: u64) {
        match self.dense[order].get_mut(count as usize) {
            Some(x) => *x += 1,
            None => *self.sparse[order].entry(count).or_insert(0) += 1,
        }
    }

    /// Adds the tallies to `maps` (one per order), an entry per count seen.
    fn into_maps(self, maps: &mut [BTreeMap<u64, u64>]) {
        for ((dense, sparse), map) in self.dense.iter().zip(self.sparse).zip(maps) {
            for (c, &x) in dense.iter().enumerate().filter(|(_, &x)| x > 0) {
                *map.entry(c as u64).or_insert(0) += x;
            }
            for (c, x) in sparse {
                *map.entry(c).or_insert(0) += x;
            }
        }
    }
}

/// Records read this far ahead of the join, so that the rank lookups of
/// each key's last word are prefetched in two steps (the bucket start at
/// `AHEAD`, the first id of the bucket at `AHEAD / 2`) and their cache
/// misses overlap; done one key at a time they were nearly three quarters
/// of the key writer's time, a tenth of the join's.
const AHEAD: usize = 16;

/// A record source read [`AHEAD`] records ahead, prefetching rank lookups.
struct Ahead<'r, S> {
    src: S,
    ranks: &'r Ranks,
    ring: [(Key, Values); AHEAD],
    /// Records in the ring, from `head` on (wrapping).
    len: usize,
    head: usize,
    done: bool,
}

impl<'r, S: RecordSource> Ahead<'r, S> {
    fn new(src: S, ranks: &'r Ranks) -> Self {
        Ahead {
            src,
            ranks,
            ring: [(Key::default(), [0; MAX_VALUES]); AHEAD],
            len: 0,
            head: 0,
            done: false,
        }
    }

    fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
        while !self.done && self.len < AHEAD {
            match self.src.next_record()? {
                Some(rec) => {
                    let last = |k: &Key| k.ids().last().copied().unwrap_or(0);
                    self.ranks.prefetch_bucket(last(&rec.0));
                    let slot = (self.head + self.len) % AHEAD;
                    self.ring[slot] = rec;
                    self.len += 1;
                    if self.len > AHEAD / 2 {
                        let mid = (self.head + self.len - 1 - AHEAD / 2) % AHEAD;
                        self.ranks.prefetch_ids(last(&self.ring[mid].0));
                    }
                }
                None => self.done = true,
            }
        }
        if self.len == 0 {
            return Ok(None);
        }
        let rec = self.ring[self.head];
        self.head = (self.head + 1) % AHEAD;
        self.len -= 1;
        Ok(Some(rec))
    }
}

/// Joins partition `q`'s merged counts with its continuation contributions
/// (`suffixes`: file, section) and writes its SST files to `sst_dir`, with
/// keys of word ranks from `ranks` (every word of the input must be there).
pub fn join_partition(
    cfg: &MergeConfig,
    q: u32,
    counts: &RunFile,
    suffixes: Vec<(RunFile, u32)>,
    ranks: &Ranks,
    sst_dir: &Path,
) -> Result<Joined> {
    let n = cfg.order;
    let suffixes = reduce_sources(cfg, suffixes)?;
    let mut cont = KWayMerge::new(open_all(cfg, &suffixes)?)?;
    let mut next_cont = cont.next_record()?;
    let mut rows = Ahead::new(counts.section(0)?, ranks);
    let opts = sst_options();
    let mut sink = SstSet::new(&opts, sst_dir, format!("p{q:04}"));
    let (bos, unk) = (bos_id(), unk_id());
    let mut stats = PartitionStats {
        ngrams: vec![0; n],
        coc_raw: vec![BTreeMap::new(); n],
        coc_left_type: vec![BTreeMap::new(); n],
        ..Default::default()
    };
    // open[j]: the n-gram of order j (1 ≤ j < N) whose children come next.
    let mut open: Vec<OpenContext> = vec![OpenContext::default(); n];
    let mut coc_raw = Tally::new(n);
    let mut coc_left = Tally::new(n);
    let mut keys = KeyWriter::default();
    let mut kbuf = Vec::with_capacity(8 * n);
    let mut vbuf = Vec::with_capacity(32);
    let bad = |what: String| Error::corrupt(counts.path(), what);
    // A continuation count is a suffix's: with no count of its own, that
    // suffix was not counted.
    let not_counted = |side, missing: &Key| Error::NotCounted {
        path: counts.path().to_path_buf(),
        side,
        missing: missing.ids().to_vec(),
    };
    let cf: Vec<Family> = (0..=n).map(|k| sink.family(&ngram_cf(k))).collect();
    // `--document-counts`: each n-gram's documents, the last field of its
    // value.
    let docs = counts.value_width() >= 2;
    let mut cbuf = Vec::with_capacity(64);

    let close = |sink: &mut SstSet,
                 open: &mut [OpenContext],
                 from: usize,
                 vb: &mut Vec<u8>|
     -> Result<()> {
        for (j, o) in open.iter_mut().enumerate().skip(from.max(1)) {
            if o.active {
                o.active = false;
                vb.clear();
                encode_ngram(
                    o.count,
                    Some(o.continuation),
                    Some(&o.stats),
                    o.documents,
                    vb,
                );
                sink.put_in(cf[j], &o.key, vb)?;
            }
        }
        Ok(())
    };

    while let Some((key, vals)) = rows.next_record()? {
        let k = key.order();
        if k > n {
            return Err(bad(format!(
                "an n-gram of order {k} in a store of order {n}"
            )));
        }
        let c = vals[0];
        let mut continuation = 0;
        if let Some((ck, cv)) = &next_cont {
            if *ck < key {
                return Err(not_counted(Side::Suffix, ck));
            }
            if *ck == key {
                continuation = cv[0];
                next_cont = cont.next_record()?;
            }
        }
        let starts_bos = key.ids()[0] == bos;
        let a = if k == n || starts_bos {
            c
        } else {
            continuation
        };
        stats.ngrams[k - 1] += 1;
        if !(k == 1 && starts_bos) {
            coc_raw.add(k - 1, c);
            coc_left.add(k - 1, a);
        }
        if k == 1 && key.ids()[0] == unk {
            stats.unk_seen = true;
        }
        keys.write(ranks, &key, &mut kbuf).ok_or_else(|| {
            bad("an n-gram with a word that is in no dictionary of the ingest".into())
        })?;
        let documents = docs.then_some(vals[1]);
        if let Some(dc) = documents {
            // A document count is at least 1 and at most the count; any
            // other sum is a damaged run, or a documents sum gone wrong.
            if dc == 0 || dc > c {
                return Err(bad(format!(
                    "an n-gram in {dc} documents with a count of {c}"
                )));
            }
        }
        close(&mut sink, &mut open, k, &mut cbuf)?;
        if k == 1 {
            if !starts_bos {
                stats.root.add_child(c, a);
            }
        } else {
            let parent = &mut open[k - 1];
            if !parent.active || !kbuf.starts_with(&parent.key) {
                return Err(not_counted(Side::Prefix, &Key::new(&key.ids()[..k - 1])));
            }
            parent.stats.add_child(c, a);
        }
        if k < n {
            let o = &mut open[k];
            o.active = true;
            o.key.clear();
            o.key.extend_from_slice(&kbuf);
            o.count = c;
            o.continuation = continuation;
            o.stats = ContextStats::default();
            o.documents = documents;
        } else {
            vbuf.clear();
            encode_ngram(c, None, None, documents, &mut vbuf);
            sink.put_in(cf[k], &kbuf, &vbuf)?;
        }
    }
    close(&mut sink, &mut open, 1, &mut cbuf)?;
    if let Some((ck, _)) = &next_cont {
        return Err(not_counted(Side::Suffix, ck));
    }
    coc_raw.into_maps(&mut stats.coc_raw);
    coc_left.into_maps(&mut stats.coc_left_type);
    Ok(Joined {
        ssts: sink.finish()?,
        stats,
    })
}

#[cfg(test)]
mod tests {
    use super::super::kway::tests::VecSource;
    use super::*;

    #[test]
    fn reading_ahead_hands_out_every_record_once_in_order() {
        // Lengths around the ring's size and its half, where an off-by-one
        // in the ring would drop, repeat or reorder a record; the ranks
        // are empty, of one word, and of many words.
        let rank_sets = [
            Ranks::default(),
            Ranks::from_sorted(vec![7]),
            Ranks::from_sorted((0..1000u64).map(|i| i << 50 | i).collect()),
        ];
        for ranks in &rank_sets {
            for n in [0, 1, 7, 8, 9, 15, 16, 17, 31, 32, 33, 100] {
                let recs: Vec<(Key, Values)> = (0..n as u64)
                    .map(|i| (Key::new(&[i, i * 31 + 5]), [i, i + 1, 0, 0]))
                    .collect();
                let mut a = Ahead::new(VecSource(recs.clone().into_iter()), ranks);
                let mut got = Vec::new();
                while let Some(r) = a.next_record().unwrap() {
                    got.push(r);
                }
                assert_eq!(got, recs, "{n} records");
                assert!(a.next_record().unwrap().is_none());
            }
        }
    }
}
