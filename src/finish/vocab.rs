//! The store's word list: every dictionary merged by id into the
//! vocabulary and word-id store files.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::fsutil;
use crate::shard::{DictReader, DictWriter};
use crate::store::{build, keys, Ranks};
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
