//! Step 2 of a partition: derive every statistic and write store files.

use std::collections::BTreeMap;
use std::path::Path;

use super::kway::{KWayMerge, RecordSource};
use super::partition::{open_all, reduce_sources, MergeConfig};
use crate::error::{Error, Result};
use crate::records::{Joined, PartitionStats};
use crate::shard::RunFile;
use crate::store::build::{sst_options, SstSet};
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
    let mut rows = counts.section(0)?;
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
    let mut keys = KeyWriter::default();
    let mut kbuf = Vec::with_capacity(8 * n);
    let mut vbuf = Vec::with_capacity(32);
    let bad = |what: String| Error::corrupt(counts.path(), what);
    let cf: Vec<String> = (0..=n).map(ngram_cf).collect();

    let close = |sink: &mut SstSet, open: &mut [OpenContext], from: usize| -> Result<()> {
        let mut vb = Vec::with_capacity(32);
        for (j, o) in open.iter_mut().enumerate().skip(from.max(1)) {
            if o.active {
                o.active = false;
                vb.clear();
                encode_ngram(o.count, Some(o.continuation), Some(&o.stats), &mut vb);
                sink.put(&cf[j], &o.key, &vb)?;
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
                return Err(bad(format!(
                    "a continuation count for an n-gram that was not counted ({} words)",
                    ck.order()
                )));
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
            *stats.coc_raw[k - 1].entry(c).or_insert(0) += 1;
            *stats.coc_left_type[k - 1].entry(a).or_insert(0) += 1;
        }
        if k == 1 && key.ids()[0] == unk {
            stats.unk_seen = true;
        }
        keys.write(ranks, &key, &mut kbuf).ok_or_else(|| {
            bad("an n-gram with a word that is in no dictionary of the ingest".into())
        })?;
        close(&mut sink, &mut open, k)?;
        if k == 1 {
            if !starts_bos {
                stats.root.add_child(c, a);
            }
        } else {
            let parent = &mut open[k - 1];
            if !parent.active || !kbuf.starts_with(&parent.key) {
                return Err(bad("an n-gram whose prefix was not counted".into()));
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
        } else {
            vbuf.clear();
            encode_ngram(c, None, None, &mut vbuf);
            sink.put(&cf[k], &kbuf, &vbuf)?;
        }
    }
    close(&mut sink, &mut open, 1)?;
    if next_cont.is_some() {
        return Err(bad(
            "continuation counts left over after the last n-gram".into()
        ));
    }
    Ok(Joined {
        ssts: sink.finish()?,
        stats,
    })
}
