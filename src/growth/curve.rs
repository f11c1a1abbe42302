//! From the side files of every spill to the growth curve.

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::path::{Path, PathBuf};

use super::file::{self, Reader};
use super::sample_points;
use crate::error::{Error, Result};
use crate::records::GrowthCurve;
use crate::words::WordId;

/// One spill's side file and where each of its covers starts in corpus
/// order: `(input index, first byte)`, in the order the file lists them.
pub struct SpillFirsts {
    /// The side file.
    pub path: PathBuf,
    /// Where each cover starts.
    pub starts: Vec<(u32, u64)>,
}

/// What came before the inputs of this ingest (`--append`).
pub struct Before {
    /// Side file of the earlier corpus: one cover, every word at 0.
    pub path: PathBuf,
    /// Tokens of the earlier corpus.
    pub tokens: u64,
    /// Its curve (sample points and its last point).
    pub points: Vec<(u64, u64)>,
}

/// Computes the growth curve of `spills` (read after `before`, if given).
/// `tmp` holds the intermediate files of merge rounds when there are more
/// than `fanin` files.
pub fn growth_curve(
    before: Option<&Before>,
    spills: &[SpillFirsts],
    tmp: &Path,
    fanin: usize,
) -> Result<GrowthCurve> {
    let base = before.map_or(0, |b| b.tokens);
    // Every cover in corpus order gets its global token offset.
    let mut covers: Vec<((u32, u64), usize, usize, u64)> = Vec::new();
    for (i, s) in spills.iter().enumerate() {
        let r = Reader::open(&s.path)?;
        if r.covers().len() != s.starts.len() {
            return Err(Error::corrupt(
                &s.path,
                format!(
                    "lists {} covered ranges, the manifest {}",
                    r.covers().len(),
                    s.starts.len()
                ),
            ));
        }
        for (j, (&start, &n)) in s.starts.iter().zip(r.covers()).enumerate() {
            covers.push((start, i, j, n));
        }
    }
    covers.sort_unstable();
    let mut offsets: Vec<Vec<u64>> = spills.iter().map(|s| vec![0; s.starts.len()]).collect();
    let mut at = base;
    for &(_, i, j, n) in &covers {
        offsets[i][j] = at;
        at += n;
    }
    let total = at;
    let mut inputs: Vec<(PathBuf, Vec<u64>)> = Vec::new();
    if let Some(b) = before {
        inputs.push((b.path.clone(), vec![0]));
    }
    for (s, o) in spills.iter().zip(offsets) {
        inputs.push((s.path.clone(), o));
    }
    // Merge rounds bound the open readers.
    let fanin = fanin.max(2);
    let mut round = 0;
    let mut made: Vec<PathBuf> = Vec::new();
    while inputs.len() > fanin {
        let mut next = Vec::new();
        for (k, group) in inputs.chunks(fanin).enumerate() {
            let out = tmp.join(format!("firsts-{round}-{k}.first"));
            let mut entries = Vec::new();
            merge_min(group, |id, p| {
                entries.push((id, 0u32, p));
                Ok(())
            })?;
            file::write(&out, &[total.max(1)], &entries)?;
            made.push(out.clone());
            next.push((out, vec![0]));
        }
        inputs = next;
        round += 1;
    }
    let grid = sample_points(total);
    let mut hist = vec![0u64; grid.len() + 1];
    let mut types = 0u64;
    merge_min(&inputs, |_, p| {
        hist[grid.partition_point(|&t| t <= p)] += 1;
        types += 1;
        Ok(())
    })?;
    for f in made {
        let _ = std::fs::remove_file(f);
    }
    let mut points = Vec::new();
    if let Some(b) = before {
        points.extend(
            b.points
                .iter()
                .copied()
                .filter(|&(t, _)| t <= base && grid.binary_search(&t).is_ok()),
        );
    }
    let mut seen = 0;
    for (i, &t) in grid.iter().enumerate() {
        seen += hist[i];
        if t > base {
            points.push((t, seen));
        }
    }
    if total > 0 {
        points.push((total, types));
    }
    Ok(GrowthCurve { points })
}

/// K-way merge by id; calls `emit(id, least global position)` once per id,
/// ids ascending.
fn merge_min(
    inputs: &[(PathBuf, Vec<u64>)],
    mut emit: impl FnMut(WordId, u64) -> Result<()>,
) -> Result<()> {
    let mut readers = inputs
        .iter()
        .map(|(p, _)| Reader::open(p))
        .collect::<Result<Vec<_>>>()?;
    let mut heap = BinaryHeap::new();
    for (i, r) in readers.iter_mut().enumerate() {
        if let Some((id, c, p)) = r.next_entry()? {
            heap.push(Reverse((id, inputs[i].1[c as usize] + p, i)));
        }
    }
    let mut cur: Option<(WordId, u64)> = None;
    while let Some(Reverse((id, p, i))) = heap.pop() {
        if let Some((nid, c, np)) = readers[i].next_entry()? {
            heap.push(Reverse((nid, inputs[i].1[c as usize] + np, i)));
        }
        match cur {
            Some((cid, cp)) if cid == id => cur = Some((cid, cp.min(p))),
            Some((cid, cp)) => {
                emit(cid, cp)?;
                cur = Some((id, p));
            }
            None => cur = Some((id, p)),
        }
    }
    if let Some((cid, cp)) = cur {
        emit(cid, cp)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: corpus order "a b </s> | c a </s> | b d </s> | f d"
    /// in four covers held by three spills, listed out of corpus order.
    #[test]
    fn first_positions_across_spills_and_rounds() {
        let dir = tempfile::tempdir().unwrap();
        let (a, b, c, d, e, f) = (10, 20, 30, 40, 50, 60); // e = </s>
        let s0 = dir.path().join("s0.first");
        file::write(
            &s0,
            &[3, 2],
            &[(a, 0, 0), (b, 0, 1), (d, 1, 1), (e, 0, 2), (f, 1, 0)],
        )
        .unwrap();
        let s1 = dir.path().join("s1.first");
        file::write(&s1, &[3], &[(a, 0, 1), (c, 0, 0), (e, 0, 2)]).unwrap();
        let s2 = dir.path().join("s2.first");
        file::write(&s2, &[3], &[(b, 0, 0), (d, 0, 1), (e, 0, 2)]).unwrap();
        let spills = vec![
            SpillFirsts {
                path: s2,
                starts: vec![(0, 200)],
            },
            SpillFirsts {
                path: s0,
                starts: vec![(0, 0), (0, 300)],
            },
            SpillFirsts {
                path: s1,
                starts: vec![(0, 100)],
            },
        ];
        // Global first positions: a 0, b 1, </s> 2, c 3, d 7, f 9; T = 11.
        let want = vec![
            (1, 1),
            (2, 2),
            (3, 3),
            (4, 4),
            (5, 4),
            (6, 4),
            (7, 4),
            (8, 5),
            (9, 5),
            (10, 6),
            (11, 6),
        ];
        for fanin in [2, 8] {
            let g = growth_curve(None, &spills, dir.path(), fanin).unwrap();
            assert_eq!(g.points, want, "fanin {fanin}");
        }
        // The same text appended after a corpus of 4 tokens whose words
        // were a and z: its points up to 4 are kept, the rest shift by 4.
        let bf = dir.path().join("base.first");
        file::write(&bf, &[4], &[(a, 0, 0), (70, 0, 0)]).unwrap();
        let before = Before {
            path: bf,
            tokens: 4,
            points: vec![(1, 1), (2, 2), (3, 2), (4, 2)],
        };
        let g = growth_curve(Some(&before), &spills, dir.path(), 2).unwrap();
        // After 4 + t tokens: {a, z} plus the new words (b, </s>, c, d, f)
        // first seen at 1, 2, 3, 7, 9 of the new text.
        assert_eq!(
            g.points,
            vec![
                (1, 1),
                (2, 2),
                (3, 2),
                (4, 2),
                (5, 2),
                (6, 3),
                (7, 4),
                (8, 5),
                (9, 5),
                (10, 5),
                (12, 6),
                (13, 6),
                (14, 7),
                (15, 7)
            ]
        );
    }
}
