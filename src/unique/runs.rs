//! Sorted runs of [`Sighting`]s, their k-way merge, and the store's hash
//! set.
//!
//! A run file: `QUERNHR1`, the record count (u64 LE), then each record
//! (hash u128, input u32, sentence u32, offset u64, all LE; 32 bytes) in
//! ascending (hash, position) order. A hash set file: `QUERNUS1`, the
//! count (u64 LE), then the hashes (u128 LE) strictly ascending. Readers
//! check the length against the count and the order of every record, so
//! a torn or damaged file is an error naming it, never a wrong answer.

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use super::{DupWriter, Position, Sighting};
use crate::error::{Error, IoContext, Result};

const RUN_MAGIC: &[u8; 8] = b"QUERNHR1";
const SET_MAGIC: &[u8; 8] = b"QUERNUS1";
/// Bytes of one run record.
pub const RECORD_BYTES: usize = 32;
const BUF: usize = 1 << 16;

fn encode(s: &Sighting) -> [u8; RECORD_BYTES] {
    let mut b = [0u8; RECORD_BYTES];
    b[..16].copy_from_slice(&s.hash.to_le_bytes());
    b[16..20].copy_from_slice(&s.at.file.to_le_bytes());
    b[20..24].copy_from_slice(&s.at.sub.to_le_bytes());
    b[24..].copy_from_slice(&s.at.offset.to_le_bytes());
    b
}

fn decode(b: &[u8; RECORD_BYTES]) -> Sighting {
    let le4 = |r: std::ops::Range<usize>| u32::from_le_bytes(b[r].try_into().expect("4 bytes"));
    Sighting {
        hash: u128::from_le_bytes(b[..16].try_into().expect("16 bytes")),
        at: Position {
            file: le4(16..20),
            sub: le4(20..24),
            offset: u64::from_le_bytes(b[24..].try_into().expect("8 bytes")),
        },
    }
}

/// A file written through a buffer, with its header, and fsynced at the
/// end.
struct Sink {
    w: BufWriter<File>,
    path: PathBuf,
}

impl Sink {
    fn create(path: &Path, magic: &[u8; 8], count: u64) -> Result<Sink> {
        let f = File::create(path).at(path, "create")?;
        let mut s = Sink {
            w: BufWriter::with_capacity(BUF, f),
            path: path.to_path_buf(),
        };
        s.put(magic)?;
        s.put(&count.to_le_bytes())?;
        Ok(s)
    }

    fn put(&mut self, b: &[u8]) -> Result<()> {
        self.w.write_all(b).at(&self.path, "write")
    }

    fn finish(self) -> Result<()> {
        let f = self
            .w
            .into_inner()
            .map_err(|e| e.into_error())
            .at(&self.path, "write")?;
        f.sync_all().at(&self.path, "fsync")
    }
}

/// Sorts `recs` and writes them as a run file at `path`, fsynced.
pub fn write_run(path: &Path, recs: &mut [Sighting]) -> Result<()> {
    recs.sort_unstable();
    let mut s = Sink::create(path, RUN_MAGIC, recs.len() as u64)?;
    for r in recs.iter() {
        s.put(&encode(r))?;
    }
    s.finish()
}

/// Opens a file of `magic` whose records are `width` bytes, checking its
/// length against its count; gives the reader and the count.
fn open_checked(path: &Path, magic: &[u8; 8], width: u64) -> Result<(BufReader<File>, u64)> {
    let f = File::open(path).at(path, "open")?;
    let len = f.metadata().at(path, "stat")?.len();
    let mut r = BufReader::with_capacity(BUF, f);
    let mut head = [0u8; 16];
    r.read_exact(&mut head)
        .map_err(|_| Error::corrupt(path, "shorter than its 16-byte header"))?;
    if &head[..8] != magic {
        return Err(Error::corrupt(
            path,
            format!(
                "starts with {:?}, not {:?}",
                String::from_utf8_lossy(&head[..8]),
                String::from_utf8_lossy(magic)
            ),
        ));
    }
    let count = u64::from_le_bytes(head[8..].try_into().expect("8 bytes"));
    let want = count.checked_mul(width).and_then(|b| b.checked_add(16));
    if want != Some(len) {
        return Err(Error::corrupt(
            path,
            format!("{len} bytes long; its header promises {count} records of {width} bytes"),
        ));
    }
    Ok((r, count))
}

/// Reads a run file in order, checking that order.
pub struct RunReader {
    r: BufReader<File>,
    path: PathBuf,
    left: u64,
    last: Option<Sighting>,
}

impl RunReader {
    /// Opens a run file.
    pub fn open(path: &Path) -> Result<RunReader> {
        let (r, left) = open_checked(path, RUN_MAGIC, RECORD_BYTES as u64)?;
        Ok(RunReader {
            r,
            path: path.to_path_buf(),
            left,
            last: None,
        })
    }

    /// The next record, or `None` at the end.
    pub fn next_record(&mut self) -> Result<Option<Sighting>> {
        if self.left == 0 {
            return Ok(None);
        }
        let mut b = [0u8; RECORD_BYTES];
        self.r.read_exact(&mut b).at(&self.path, "read")?;
        self.left -= 1;
        let s = decode(&b);
        if self.last.is_some_and(|l| l >= s) {
            return Err(Error::corrupt(&self.path, "records out of order"));
        }
        self.last = Some(s);
        Ok(Some(s))
    }
}

/// The records of several runs in one ascending stream.
struct Merge {
    runs: Vec<RunReader>,
    heap: BinaryHeap<Reverse<(Sighting, usize)>>,
}

impl Merge {
    fn new(paths: &[PathBuf]) -> Result<Merge> {
        let mut runs = paths
            .iter()
            .map(|p| RunReader::open(p))
            .collect::<Result<Vec<_>>>()?;
        let mut heap = BinaryHeap::with_capacity(runs.len());
        for (i, r) in runs.iter_mut().enumerate() {
            if let Some(s) = r.next_record()? {
                heap.push(Reverse((s, i)));
            }
        }
        Ok(Merge { runs, heap })
    }

    fn next(&mut self) -> Result<Option<Sighting>> {
        let Some(Reverse((s, i))) = self.heap.pop() else {
            return Ok(None);
        };
        if let Some(n) = self.runs[i].next_record()? {
            self.heap.push(Reverse((n, i)));
        }
        Ok(Some(s))
    }
}

/// Merges the runs `paths` into one run at `out`, fsynced.
pub fn merge_runs(paths: &[PathBuf], out: &Path) -> Result<()> {
    let count: u64 = paths
        .iter()
        .map(|p| open_checked(p, RUN_MAGIC, RECORD_BYTES as u64).map(|x| x.1))
        .sum::<Result<u64>>()?;
    let mut m = Merge::new(paths)?;
    let mut s = Sink::create(out, RUN_MAGIC, count)?;
    while let Some(r) = m.next()? {
        s.put(&encode(&r))?;
    }
    s.finish()
}

/// Merges `paths` in rounds of `fanin` runs (files `merge-R-I.run` in
/// `dir`) until at most `fanin` are left, and gives those.
pub fn merge_to_fanin(mut paths: Vec<PathBuf>, fanin: usize, dir: &Path) -> Result<Vec<PathBuf>> {
    let fanin = fanin.max(2);
    let mut round = 0;
    while paths.len() > fanin {
        let mut next = Vec::new();
        for (i, group) in paths.chunks(fanin).enumerate() {
            let out = dir.join(format!("merge-{round}-{i:06}.run"));
            merge_runs(group, &out)?;
            next.push(out);
        }
        round += 1;
        paths = next;
    }
    Ok(paths)
}

/// The hash range (of `parts` equal ranges, ascending) that `hash` falls
/// in: a staged ingest marks each range in its own task.
pub fn range_of(hash: u128, parts: u32) -> u32 {
    (((hash >> 64) * parts as u128) >> 64) as u32
}

/// Writes the hash sets `paths`, each of a higher range than the one
/// before, as one set at `out`, fsynced; gives its count. A set out of
/// order, or overlapping the one before, is an error naming it.
pub fn concat_sets(paths: &[PathBuf], out: &Path) -> Result<u64> {
    let count: u64 = paths
        .iter()
        .map(|p| open_checked(p, SET_MAGIC, 16).map(|x| x.1))
        .sum::<Result<u64>>()?;
    let mut s = Sink::create(out, SET_MAGIC, count)?;
    let mut last: Option<u128> = None;
    for p in paths {
        let mut r = SetReader::open(p)?;
        while let Some(h) = r.next_hash()? {
            if last.is_some_and(|l| l >= h) {
                return Err(Error::corrupt(
                    p,
                    "its hashes overlap those of the set before it",
                ));
            }
            last = Some(h);
            s.put(&h.to_le_bytes())?;
        }
    }
    s.finish()?;
    Ok(count)
}

/// Reads a hash set file in order, checking that order.
pub struct SetReader {
    r: BufReader<File>,
    path: PathBuf,
    left: u64,
    last: Option<u128>,
}

impl SetReader {
    /// Opens a hash set file.
    pub fn open(path: &Path) -> Result<SetReader> {
        let (r, left) = open_checked(path, SET_MAGIC, 16)?;
        Ok(SetReader {
            r,
            path: path.to_path_buf(),
            left,
            last: None,
        })
    }

    /// The next hash, or `None` at the end.
    pub fn next_hash(&mut self) -> Result<Option<u128>> {
        if self.left == 0 {
            return Ok(None);
        }
        let mut b = [0u8; 16];
        self.r.read_exact(&mut b).at(&self.path, "read")?;
        self.left -= 1;
        let h = u128::from_le_bytes(b);
        if self.last.is_some_and(|l| l >= h) {
            return Err(Error::corrupt(&self.path, "hashes out of order"));
        }
        self.last = Some(h);
        Ok(Some(h))
    }
}

/// What [`mark`] found.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Marked {
    /// Sightings read.
    pub units: u64,
    /// Sightings marked as duplicates.
    pub duplicates: u64,
    /// Hashes in the new set.
    pub set: u64,
}

/// Merges the runs `paths` and the hash set `old` (the store's, if any):
/// every sighting but the first of its hash, and every sighting of a hash
/// in `old`, goes to `dups`; the union of `old` and the runs' hashes is
/// written as a set file at `new_set`, fsynced. At most `paths.len()` + 1
/// files are open at once.
pub fn mark(
    paths: &[PathBuf],
    old: Option<&Path>,
    new_set: &Path,
    dups: &mut DupWriter,
) -> Result<Marked> {
    let mut m = Merge::new(paths)?;
    let mut old = old.map(SetReader::open).transpose()?;
    // The count in the header is written last: the union's size is known
    // only at the end.
    let mut set = Sink::create(new_set, SET_MAGIC, 0)?;
    let mut found = Marked::default();
    let mut old_next = match &mut old {
        Some(o) => o.next_hash()?,
        None => None,
    };
    let mut last: Option<u128> = None;
    while let Some(s) = m.next()? {
        found.units += 1;
        // Old hashes below this one go to the new set as they are.
        while let Some(h) = old_next.filter(|&h| h < s.hash) {
            set.put(&h.to_le_bytes())?;
            found.set += 1;
            old_next = old.as_mut().map_or(Ok(None), |o| o.next_hash())?;
        }
        if last == Some(s.hash) || old_next == Some(s.hash) {
            dups.push(s.at)?;
            found.duplicates += 1;
        }
        if last != Some(s.hash) {
            if old_next != Some(s.hash) {
                set.put(&s.hash.to_le_bytes())?;
                found.set += 1;
            }
            last = Some(s.hash);
        }
    }
    while let Some(h) = old_next {
        set.put(&h.to_le_bytes())?;
        found.set += 1;
        old_next = old.as_mut().map_or(Ok(None), |o| o.next_hash())?;
    }
    let path = set.path.clone();
    let mut f = set
        .w
        .into_inner()
        .map_err(|e| e.into_error())
        .at(&path, "write")?;
    use std::io::{Seek, SeekFrom};
    f.seek(SeekFrom::Start(8)).at(&path, "seek")?;
    f.write_all(&found.set.to_le_bytes()).at(&path, "write")?;
    f.sync_all().at(&path, "fsync")?;
    Ok(found)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::corpus::Span;
    use crate::unique::Skips;
    use std::collections::{BTreeSet, HashMap};

    /// A small deterministic generator (SplitMix64, as published by
    /// Steele, Lea and Flood, 2014).
    fn splitmix(state: &mut u64) -> u64 {
        *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = *state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Sightings spilled as several sorted runs, merged in rounds and
    /// marked against an old set, equal what a plain in-memory pass over
    /// them in input order finds: the first sighting of each hash kept
    /// unless the old set holds it, the new set the union.
    #[test]
    fn spilled_runs_mark_the_same_duplicates_as_one_pass() {
        let dir = tempfile::tempdir().unwrap();
        let mut st = 7u64;
        // Few distinct hashes, so that most of them repeat.
        let all: Vec<Sighting> = (0..5000u64)
            .map(|i| Sighting {
                hash: (splitmix(&mut st) % 700) as u128 * 0x1_0000_0000_0001,
                at: Position {
                    file: (i / 2000) as u32,
                    offset: (i % 2000) * 10,
                    sub: (splitmix(&mut st) % 3) as u32,
                },
            })
            .collect();
        let old: BTreeSet<u128> = (0..40u128).map(|h| h * 17 * 0x1_0000_0000_0001).collect();
        // Expected, from one pass in input order.
        let mut in_order = all.clone();
        in_order.sort_by_key(|s| s.at);
        in_order.dedup_by_key(|s| s.at);
        let mut seen: BTreeSet<u128> = old.clone();
        let mut want_dups: Vec<Position> = Vec::new();
        for s in &in_order {
            if !seen.insert(s.hash) {
                want_dups.push(s.at);
            }
        }
        // Spilled in pieces of 333, merged two at a time, then marked.
        let mut paths = Vec::new();
        for (i, piece) in in_order.chunks(333).enumerate() {
            let p = dir.path().join(format!("r{i}.run"));
            write_run(&p, &mut piece.to_vec()).unwrap();
            paths.push(p);
        }
        let mut round = 0;
        while paths.len() > 2 {
            paths = paths
                .chunks(2)
                .enumerate()
                .map(|(i, g)| {
                    let out = dir.path().join(format!("m{round}-{i}.run"));
                    merge_runs(g, &out).unwrap();
                    out
                })
                .collect();
            round += 1;
        }
        let old_path = dir.path().join("old.set");
        let mut s = Sink::create(&old_path, SET_MAGIC, old.len() as u64).unwrap();
        for h in &old {
            s.put(&h.to_le_bytes()).unwrap();
        }
        s.finish().unwrap();
        let chunks = vec![
            Span {
                file: 0,
                start: 0,
                end: 9000,
            },
            Span {
                file: 0,
                start: 9000,
                end: u64::MAX,
            },
            Span {
                file: 1,
                start: 0,
                end: u64::MAX,
            },
            Span {
                file: 2,
                start: 0,
                end: u64::MAX,
            },
        ];
        let dups_dir = dir.path().join("dups");
        std::fs::create_dir(&dups_dir).unwrap();
        let new_set = dir.path().join("new.set");
        // A tiny buffer: the duplicates are appended in many flushes.
        let mut w = DupWriter::new(&chunks, &dups_dir, 0);
        let found = mark(&paths, Some(&old_path), &new_set, &mut w).unwrap();
        let names = w.finish().unwrap();
        assert_eq!(found.units, in_order.len() as u64);
        assert_eq!(found.duplicates, want_dups.len() as u64);
        // Each chunk's file holds exactly its duplicates.
        let mut by_chunk: HashMap<usize, Vec<(u64, u32)>> = HashMap::new();
        for d in &want_dups {
            by_chunk
                .entry(DupWriter::chunk_of(&chunks, *d))
                .or_default()
                .push((d.offset, d.sub));
        }
        for (c, name) in names.iter().enumerate() {
            let want = by_chunk.remove(&c).unwrap_or_default();
            let mut got = match name {
                Some(n) => Skips::load(&dups_dir.join(n)).unwrap(),
                None => Skips::none(),
            };
            assert_eq!(got.at, want, "chunk {c}");
            for &(o, k) in &want {
                assert!(got.is_dup(o, k));
            }
        }
        // The new set is the union, in order.
        let mut r = SetReader::open(&new_set).unwrap();
        let mut got = Vec::new();
        while let Some(h) = r.next_hash().unwrap() {
            got.push(h);
        }
        let want: Vec<u128> = seen.into_iter().collect();
        assert_eq!(got, want);
        assert_eq!(found.set, want.len() as u64);
    }

    /// The hash ranges cut the hashes in ascending order, from range 0 to
    /// the last; the sets of ascending ranges concatenate into one set, and
    /// sets that overlap are refused, naming the second.
    #[test]
    fn ranges_ascend_and_their_sets_concatenate() {
        let dir = tempfile::tempdir().unwrap();
        assert_eq!(range_of(0, 7), 0);
        assert_eq!(range_of(u128::MAX, 7), 6);
        assert_eq!(range_of(u128::MAX, 1), 0);
        let mut st = 11u64;
        let mut hashes: Vec<u128> = (0..3000)
            .map(|_| ((splitmix(&mut st) as u128) << 64) | splitmix(&mut st) as u128)
            .collect();
        hashes.sort_unstable();
        hashes.dedup();
        let parts = 5;
        let ranges: Vec<u32> = hashes.iter().map(|&h| range_of(h, parts)).collect();
        assert!(ranges.windows(2).all(|w| w[0] <= w[1]));
        assert_eq!((ranges[0], *ranges.last().unwrap()), (0, parts - 1));
        let write = |name: &str, hs: &[u128]| {
            let p = dir.path().join(name);
            let mut s = Sink::create(&p, SET_MAGIC, hs.len() as u64).unwrap();
            for h in hs {
                s.put(&h.to_le_bytes()).unwrap();
            }
            s.finish().unwrap();
            p
        };
        let sets: Vec<PathBuf> = (0..parts)
            .map(|p| {
                let mine: Vec<u128> = hashes
                    .iter()
                    .zip(&ranges)
                    .filter(|(_, &r)| r == p)
                    .map(|(&h, _)| h)
                    .collect();
                write(&format!("p{p}.set"), &mine)
            })
            .collect();
        let all = dir.path().join("all.set");
        assert_eq!(concat_sets(&sets, &all).unwrap(), hashes.len() as u64);
        let mut r = SetReader::open(&all).unwrap();
        let mut got = Vec::new();
        while let Some(h) = r.next_hash().unwrap() {
            got.push(h);
        }
        assert_eq!(got, hashes);
        // The same sets in another order overlap.
        let swapped = [sets[1].clone(), sets[0].clone()];
        let e = concat_sets(&swapped, &dir.path().join("bad.set"));
        assert!(matches!(e, Err(Error::Corrupt { path, .. }) if path == sets[0]));
    }

    /// A torn run and a run out of order are errors naming the file.
    #[test]
    fn damaged_runs_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.run");
        let s = |hash: u128, offset: u64| Sighting {
            hash,
            at: Position {
                file: 0,
                offset,
                sub: 0,
            },
        };
        write_run(&p, &mut [s(5, 0), s(3, 8)]).unwrap();
        let bytes = std::fs::read(&p).unwrap();
        std::fs::write(&p, &bytes[..bytes.len() - 1]).unwrap();
        assert!(matches!(RunReader::open(&p), Err(Error::Corrupt { path, .. }) if path == p));
        // The two records swapped.
        let mut swapped = bytes[..16].to_vec();
        swapped.extend_from_slice(&bytes[16 + RECORD_BYTES..]);
        swapped.extend_from_slice(&bytes[16..16 + RECORD_BYTES]);
        std::fs::write(&p, &swapped).unwrap();
        let mut r = RunReader::open(&p).unwrap();
        assert!(r.next_record().unwrap().is_some());
        assert!(matches!(r.next_record(), Err(Error::Corrupt { .. })));
    }
}
