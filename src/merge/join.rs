//! Step 2 of a partition: derive every statistic and write store files.

use std::collections::BTreeMap;
use std::path::Path;

use super::kway::{KWayMerge, RecordSource};
use super::partition::{open_all, reduce_sources, MergeConfig};
use crate::error::{Error, Result};
use crate::ingest::manifest::{Joined, PartitionStats};
use crate::key::Key;
use crate::shard::RunFile;
use crate::store::build::{sst_options, SstSet};
use crate::store::keys::{context_cf, encode_ngram, ngram_cf};
use crate::store::ContextStats;
use crate::words::{bos_id, unk_id};

/// Joins partition `q`'s merged counts with its continuation contributions
/// (`suffixes`: file, section) and writes its SST files to `sst_dir`.
pub fn join_partition(
    cfg: &MergeConfig,
    q: u32,
    counts: &RunFile,
    suffixes: Vec<(RunFile, u32)>,
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
        coc_adjusted: vec![BTreeMap::new(); n],
        ..Default::default()
    };
    // open[j]: the context of length j (1 ≤ j < N) whose children come next.
    let mut open: Vec<Option<(Key, ContextStats)>> = vec![None; n];
    let mut kbuf = Vec::with_capacity(8 * n);
    let mut vbuf = Vec::with_capacity(24);
    let bad = |what: String| Error::corrupt(counts.path(), what);

    let close = |sink: &mut SstSet,
                 open: &mut Vec<Option<(Key, ContextStats)>>,
                 from: usize|
     -> Result<()> {
        for slot in open.iter_mut().skip(from.max(1)) {
            if let Some((k, st)) = slot.take() {
                if st.types > 0 {
                    let mut kb = Vec::with_capacity(8 * k.order());
                    k.write_be(&mut kb);
                    let mut vb = Vec::with_capacity(24);
                    st.encode(&mut vb);
                    sink.put(&context_cf(k.order()), &kb, &vb)?;
                }
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
            *stats.coc_adjusted[k - 1].entry(a).or_insert(0) += 1;
        }
        if k == 1 && key.ids()[0] == unk {
            stats.unk_seen = true;
        }
        close(&mut sink, &mut open, k)?;
        if k == 1 {
            if !starts_bos {
                stats.root.add_child(c, a);
            }
        } else {
            match open[k - 1].as_mut() {
                Some((h, st)) if h.ids() == &key.ids()[..k - 1] => st.add_child(c, a),
                _ => return Err(bad("an n-gram whose prefix was not counted".into())),
            }
        }
        if k < n {
            open[k] = Some((key, ContextStats::default()));
        }
        kbuf.clear();
        key.write_be(&mut kbuf);
        vbuf.clear();
        encode_ngram(c, (k < n).then_some(continuation), &mut vbuf);
        sink.put(&ngram_cf(k), &kbuf, &vbuf)?;
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
