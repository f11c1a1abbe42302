//! The last stage: vocabulary, metadata and the store. The vocabulary and
//! metadata functions are shared with the single-machine ingest.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

use super::tasks::MapResult;
use super::{join_dir, map_dir, need_done, unique, Job, Outcome, TaskReport};
use crate::error::{Error, Result};
use crate::fsutil;
use crate::ingest::manifest::{Joined, PartitionStats, ReadTotals};
use crate::memory::Plan;
use crate::shard::{DictReader, DictWriter};
use crate::store::{
    self, build, keys, ContextStats, OrderStats, Ranks, Settings, Store, StoreMeta, Totals,
};
use crate::words::WordId;

/// Merges dictionary files by id, calling `emit` once per word, and turns
/// one id with two different words into [`Error::HashCollision`].
pub fn merge_dicts(
    paths: &[PathBuf],
    mut emit: impl FnMut(WordId, &str) -> Result<()>,
) -> Result<()> {
    let mut readers = paths
        .iter()
        .map(|p| DictReader::open(p))
        .collect::<Result<Vec<_>>>()?;
    let mut heap = std::collections::BinaryHeap::new();
    for (i, r) in readers.iter_mut().enumerate() {
        if let Some((id, w)) = r.next_entry()? {
            heap.push(std::cmp::Reverse((id, w, i)));
        }
    }
    let mut last: Option<(WordId, String)> = None;
    while let Some(std::cmp::Reverse((id, w, i))) = heap.pop() {
        if let Some(next) = readers[i].next_entry()? {
            heap.push(std::cmp::Reverse((next.0, next.1, i)));
        }
        if let Some((lid, lw)) = &last {
            if *lid == id {
                if *lw != w {
                    return Err(Error::HashCollision {
                        first: lw.clone(),
                        second: w,
                        id,
                    });
                }
                continue;
            }
        }
        emit(id, &w)?;
        last = Some((id, w));
    }
    Ok(())
}

/// Merges the dictionaries `paths` into the store's word list: SST files
/// `sst_dir/all-vocab.sst` (rank → word) and `sst_dir/all-ids.sst` (the
/// sorted ids of `ranks`, which must hold every word of the dictionaries),
/// in rounds of at most `fanin` files through `tmp` (created and removed),
/// to bound the open readers. Returns `(column family, path)` pairs.
pub fn merge_vocabulary(
    mut paths: Vec<PathBuf>,
    ranks: &Ranks,
    tmp: &Path,
    sst_dir: &Path,
    fanin: usize,
) -> Result<Vec<(String, PathBuf)>> {
    fsutil::create_dir(tmp)?;
    let mut round = 0;
    while paths.len() > fanin.max(2) {
        let mut next = Vec::new();
        for (i, group) in paths.chunks(fanin.max(2)).enumerate() {
            let out = tmp.join(format!("vocab-{round}-{i}.dict"));
            let mut w = DictWriter::create(&out)?;
            merge_dicts(group, |id, word| w.push(id, word))?;
            w.finish()?;
            for p in group.iter().filter(|p| p.starts_with(tmp)) {
                let _ = std::fs::remove_file(p);
            }
            next.push(out);
        }
        paths = next;
        round += 1;
    }
    for cf in [keys::VOCAB_CF, keys::IDS_CF] {
        let _ = std::fs::remove_file(sst_dir.join(format!("all-{cf}.sst")));
    }
    let opts = build::sst_options();
    let mut sink = build::SstSet::new(&opts, sst_dir, "all".into());
    let mut kb = Vec::with_capacity(4);
    merge_dicts(&paths, |id, word| {
        let r = ranks.rank(id).ok_or_else(|| {
            Error::corrupt(
                sst_dir,
                format!("the word {word:?} is missing from the store's word list"),
            )
        })?;
        kb.clear();
        ranks.write_rank(r, &mut kb);
        sink.put(keys::VOCAB_CF, &kb, word.as_bytes())
    })?;
    let mut chunk = Vec::with_capacity(keys::IDS_PER_CHUNK * 8);
    for (i, ids) in ranks.ids().chunks(keys::IDS_PER_CHUNK).enumerate() {
        chunk.clear();
        for id in ids {
            chunk.extend_from_slice(&id.to_le_bytes());
        }
        sink.put(keys::IDS_CF, &(i as u32).to_be_bytes(), &chunk)?;
    }
    fsutil::remove_dir(tmp)?;
    Ok(sink
        .finish()?
        .into_iter()
        .map(|(cf, name)| (cf, sst_dir.join(name)))
        .collect())
}

/// The store's metadata from every partition's statistics and the readers'
/// totals.
pub fn store_meta<'a>(
    settings: Settings,
    partitions: impl IntoIterator<Item = &'a PartitionStats>,
    read: ReadTotals,
) -> StoreMeta {
    let n = settings.order;
    let mut ngrams = vec![0u64; n];
    let mut raw = vec![BTreeMap::<u64, u64>::new(); n];
    let mut adj = vec![BTreeMap::<u64, u64>::new(); n];
    let mut root = ContextStats::default();
    let mut unk_seen = false;
    for s in partitions {
        for k in 0..n {
            ngrams[k] += s.ngrams[k];
            for (r, c) in &s.coc_raw[k] {
                *raw[k].entry(*r).or_insert(0) += c;
            }
            for (r, c) in &s.coc_adjusted[k] {
                *adj[k].entry(*r).or_insert(0) += c;
            }
        }
        root.merge(&s.root);
        unk_seen |= s.unk_seen;
    }
    let totals = Totals {
        sentences: read.sentences,
        tokens: root.count_sum,
        types: root.types,
        vocabulary: root.types + u64::from(!unk_seen),
        unk_seen,
        skipped_lines: read.skipped_lines,
        invalid_utf8_lines: read.invalid_utf8_lines,
        marker_tokens: read.marker_tokens,
        input_bytes: read.bytes,
    };
    let orders = (0..n)
        .map(|k| OrderStats {
            order: k + 1,
            ngrams: ngrams[k],
            coc_raw: raw[k].iter().map(|(a, b)| (*a, *b)).collect(),
            coc_adjusted: adj[k].iter().map(|(a, b)| (*a, *b)).collect(),
        })
        .collect();
    StoreMeta {
        format_version: store::STORE_VERSION,
        settings,
        totals,
        orders,
        root,
        growth: None,
    }
}

/// Builds the store in `store_dir` from every output of the plan in `dir`:
/// the vocabulary from the map outputs' dictionaries, the metadata from the
/// joins' statistics and the maps' totals, and the n-grams and contexts by
/// ingesting the joins' SST files. A finished store with the same metadata
/// is recognised and skipped; another store there is an error.
pub fn run_assemble(dir: &Path, store_dir: &Path, memory: u64) -> Result<TaskReport> {
    let t0 = Instant::now();
    let job = Job::load(dir)?;
    let id = job.id();
    let mut dicts = Vec::new();
    let mut firsts = Vec::new();
    let mut read = ReadTotals::default();
    for t in 0..job.map_tasks.len() as u32 {
        let m = map_dir(dir, t);
        let d = need_done::<MapResult>(&m, "map", t, &id)?;
        dicts.extend(d.result.dicts.iter().map(|f| m.join(f)));
        read.add(&d.result.totals);
        for (f, starts) in &d.result.firsts {
            firsts.push(crate::growth::curve::SpillFirsts {
                path: m.join(f),
                starts: starts.clone(),
            });
        }
    }
    let mut joined = Vec::new();
    for q in 0..job.partitions {
        let j = join_dir(dir, q);
        let d = need_done::<Joined>(&j, "join", q, &id)?;
        joined.push((j, d.result));
    }
    let mut meta = store_meta(job.settings, joined.iter().map(|(_, j)| &j.stats), read);
    let plan = Plan::new(memory, 1)?;
    // The vocabulary growth curve, as the single-machine ingest computes it.
    fsutil::create_dir(store_dir)?;
    let gtmp = store_dir.join(format!(".growth.{}.tmp", unique()));
    fsutil::create_dir(&gtmp)?;
    let curve = crate::growth::growth_curve(None, &firsts, &gtmp, plan.fanin);
    fsutil::remove_dir(&gtmp)?;
    meta.growth = Some(curve?);
    let ngrams: u64 = meta.orders.iter().map(|o| o.ngrams).sum();
    let db = store::db_dir(store_dir);
    if db.join("CURRENT").exists() {
        let s = Store::open(store_dir)?;
        if *s.meta() != meta {
            return Err(Error::state(
                store_dir,
                format!(
                    "a different store is already here (not the one the plan in {} builds): give another --store",
                    dir.display()
                ),
            ));
        }
        let bytes = s.disk_bytes();
        return Ok(report(Outcome::Skipped, store_dir, ngrams, bytes, t0));
    }
    fsutil::create_dir(store_dir)?;
    let u = unique();
    let work = store_dir.join(format!(".assemble.{u}.tmp"));
    let db_new = store_dir.join(format!(".db.{u}.tmp"));
    let r = (|| {
        fsutil::create_dir(&work)?;
        let ranks = Ranks::from_dicts(&dicts)?;
        let mut files = merge_vocabulary(dicts, &ranks, &work.join("rounds"), &work, plan.fanin)?;
        for (j, d) in &joined {
            for (cf, f) in &d.ssts {
                files.push((cf.clone(), j.join(f)));
            }
        }
        build::create_db(
            &db_new,
            job.settings.order,
            &files,
            &work.join("staging"),
            &meta,
        )?;
        crate::fault::point("stage-written");
        let outcome = match std::fs::rename(&db_new, &db) {
            Ok(()) => Outcome::Written,
            Err(_) if db.join("CURRENT").exists() => {
                // Another copy finished first; it built the same store if
                // its metadata is ours.
                let same = Store::open(store_dir).is_ok_and(|s| *s.meta() == meta);
                if !same {
                    return Err(Error::state(
                        store_dir,
                        "another store was put here while this one was being built",
                    ));
                }
                fsutil::remove_dir(&db_new)?;
                Outcome::Raced
            }
            Err(e) => return Err(Error::io(&db, "rename", e)),
        };
        fsutil::sync_dir(store_dir)?;
        crate::fault::point("stage-done");
        fsutil::remove_dir(&work)?;
        Ok(outcome)
    })();
    if r.is_err() {
        let _ = fsutil::remove_dir(&work);
        let _ = fsutil::remove_dir(&db_new);
    }
    let outcome = r?;
    let bytes = store::dir_bytes(&db);
    Ok(report(outcome, store_dir, ngrams, bytes, t0))
}

fn report(outcome: Outcome, store: &Path, ngrams: u64, bytes: u64, t0: Instant) -> TaskReport {
    TaskReport {
        stage: "assemble",
        task: 0,
        outcome,
        output: store.to_path_buf(),
        work: ngrams,
        output_bytes: bytes,
        seconds: t0.elapsed().as_secs_f64(),
    }
}
