//! Step 1 of a partition: merge the count runs, emit suffix contributions.

use std::collections::VecDeque;
use std::path::Path;
use std::sync::atomic::{AtomicU64, Ordering};

use super::kway::{KWayMerge, RecordSource};
use crate::count::Table;
use crate::error::{Error, Result};
use crate::key::{partition_of, Key};
use crate::records::Merged;
use crate::shard::{RunFile, RunWriter, SectionReader};

/// How many n-grams a suffix's continuation-table slot is asked for
/// before it is added to.
const AHEAD: usize = 8;

/// Settings of the merge steps.
pub struct MergeConfig<'a> {
    /// Highest order N.
    pub order: usize,
    /// Number of partitions.
    pub partitions: u32,
    /// Most sections merged at once.
    pub fanin: usize,
    /// Bytes for the continuation table of one merging worker.
    pub worker_bytes: usize,
    /// Folder for merged counts and continuation runs.
    pub merged_dir: &'a Path,
    /// Folder for temporary files of multi-round merges.
    pub tmp_dir: &'a Path,
    /// Source of unique temporary file ids.
    pub next_tmp: &'a AtomicU64,
}

/// Opens the sections, then deletes the inputs that are temporary round
/// files of `cfg` (the open readers keep their data until dropped).
pub(crate) fn open_all(cfg: &MergeConfig, list: &[(RunFile, u32)]) -> Result<Vec<SectionReader>> {
    let readers = list
        .iter()
        .map(|(f, p)| f.section(*p))
        .collect::<Result<Vec<_>>>()?;
    for (f, _) in list {
        if f.path().starts_with(cfg.tmp_dir) {
            let _ = std::fs::remove_file(f.path());
        }
    }
    Ok(readers)
}

/// Merges groups of `cfg.fanin` sections into temporary single-partition
/// files until at most `cfg.fanin` remain.
pub fn reduce_sources(
    cfg: &MergeConfig,
    mut list: Vec<(RunFile, u32)>,
) -> Result<Vec<(RunFile, u32)>> {
    let fanin = cfg.fanin.max(2);
    while list.len() > fanin {
        let mut next = Vec::new();
        for group in list.chunks(fanin) {
            if group.len() == 1 {
                next.push(group[0].clone());
                continue;
            }
            let width = group[0].0.value_width();
            let id = cfg.next_tmp.fetch_add(1, Ordering::SeqCst);
            let path = cfg.tmp_dir.join(format!("round-{id:06}.run"));
            let mut w = RunWriter::create(&path, 1, width)?;
            let mut m = KWayMerge::new(open_all(cfg, group)?)?;
            while let Some((k, v)) = m.next_record()? {
                w.push(0, &k, &v)?;
            }
            w.finish()?;
            next.push((RunFile::open(&path)?, 0));
        }
        list = next;
    }
    Ok(list)
}

/// Merges partition `p` of the count runs `inputs` (file, section) into
/// `merged/counts-<p>.run` and continuation runs `merged/suffix-<p>-<i>.run`.
pub fn merge_partition(cfg: &MergeConfig, p: u32, inputs: Vec<(RunFile, u32)>) -> Result<Merged> {
    let records: u64 = inputs.iter().map(|(f, s)| f.records(*s)).sum();
    // Counts, or counts and documents (`--document-counts`): every run of
    // an ingest holds the same sums.
    let width = inputs.first().map_or(1, |(f, _)| f.value_width());
    if let Some((f, _)) = inputs.iter().find(|(f, _)| f.value_width() != width) {
        return Err(Error::corrupt(
            f.path(),
            format!(
                "a run of {} sums a key among runs of {width}",
                f.value_width()
            ),
        ));
    }
    let inputs = reduce_sources(cfg, inputs)?;
    let mut merge = KWayMerge::new(open_all(cfg, &inputs)?)?;
    let counts = format!("counts-{p:04}.run");
    let mut out = RunWriter::create(&cfg.merged_dir.join(&counts), 1, width)?;
    let mut suffix_runs = Vec::new();
    let mut table = (cfg.order > 1)
        .then(|| Table::for_keys(cfg.order - 1, 1, cfg.worker_bytes, records as usize));
    let spill = |t: &mut Table, runs: &mut Vec<String>| -> Result<()> {
        let name = format!("suffix-{p:04}-{:04}.run", runs.len());
        let mut w = RunWriter::create(&cfg.merged_dir.join(&name), cfg.partitions, 1)?;
        // Dropping the sorted view empties the table.
        for (k, v) in t.sorted().iter() {
            w.push(partition_of(k.ids()[0], cfg.partitions), &k, &v)?;
        }
        w.finish()?;
        runs.push(name);
        Ok(())
    };
    // Each suffix's slot is a likely cache miss: it is asked for when the
    // n-gram arrives and added AHEAD n-grams later, so that several misses
    // are under way at once.
    let mut ahead: VecDeque<Key> = VecDeque::with_capacity(AHEAD + 1);
    while let Some((key, vals)) = merge.next_record()? {
        out.push(0, &key, &vals)?;
        if let Some(t) = table.as_mut() {
            if key.order() >= 2 {
                let suffix = Key::new(&key.ids()[1..]);
                t.prefetch(suffix.ids());
                ahead.push_back(suffix);
                if ahead.len() > AHEAD {
                    let g = ahead.pop_front().expect("not empty");
                    t.add(g.ids(), &[1]);
                    if t.is_full() {
                        spill(t, &mut suffix_runs)?;
                    }
                }
            }
        }
    }
    out.finish()?;
    if let Some(t) = table.as_mut() {
        for g in ahead {
            t.add(g.ids(), &[1]);
            if t.is_full() {
                spill(t, &mut suffix_runs)?;
            }
        }
        if !t.is_empty() {
            spill(t, &mut suffix_runs)?;
        }
    }
    Ok(Merged {
        counts,
        suffix_runs,
    })
}
