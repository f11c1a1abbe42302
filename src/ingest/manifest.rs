//! The manifest: what an unfinished ingest has durably done.
//!
//! One JSON file, `work/manifest.json`, rewritten atomically (temporary
//! file, fsync, rename, fsync of the directory) after every step that makes
//! work durable. A line `#xxh3=<hex>` after the JSON guards against a torn
//! or edited file. Work not recorded here is redone on resume; files in the
//! work folder that it does not name are deleted then.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::corpus::{Format, InputFile, Span};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::records::{BadLineAt, GrowthCurve, Joined, Merged, ReadTotals, Settings};

/// Format version of the manifest. Version 1 is read too, converted by
/// [`crate::records::upgrade_partition_records`].
pub const MANIFEST_VERSION: u32 = 2;

/// Where an ingest is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Phase {
    /// `--unique`: hashing every unit, then marking the duplicates.
    Hashing,
    /// Reading inputs into run files.
    Counting,
    /// Merging each partition's runs; emitting continuation contributions.
    Merging,
    /// Joining counts with continuation counts; writing store files.
    Joining,
    /// Loading the store.
    Building,
    /// The store is complete; only clean-up is left.
    Done,
}

impl Phase {
    /// The phase's name as shown to users.
    pub fn name(self) -> &'static str {
        match self {
            Phase::Hashing => "hashing",
            Phase::Counting => "counting",
            Phase::Merging => "merging",
            Phase::Joining => "joining",
            Phase::Building => "building",
            Phase::Done => "done",
        }
    }
}

/// One durable spill of a counting worker.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct RunSet {
    /// Unique id.
    pub id: u64,
    /// Run file names (in `work/runs`).
    pub runs: Vec<String>,
    /// Dictionary file name (in `work/runs`).
    pub dict: String,
    /// First-sighting file name (in `work/runs`; see [`crate::growth`]);
    /// absent in manifests written before growth curves were kept.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub firsts: Option<String>,
    /// Input ranges whose counts the runs hold.
    pub covers: Vec<Span>,
    /// The line checksum of each cover, recomputed on resume (empty in
    /// manifests written before checksums were kept).
    #[serde(default)]
    pub hashes: Vec<u64>,
    /// What the readers saw in those ranges.
    pub totals: ReadTotals,
    /// The first bad lines of those ranges (`--jsonl`).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub bad: Vec<BadLineAt>,
}

/// The counts of an existing store, exported for `--append`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Base {
    /// Run file with the store's raw counts (in `work/runs`).
    pub run: String,
    /// Its dictionary (in `work/runs`).
    pub dict: String,
    /// The store's reader totals.
    pub totals: ReadTotals,
    /// The store's words as a first-sighting file (in `work/runs`), its
    /// token count and its growth curve; absent if the store had no curve.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub growth: Option<BaseGrowth>,
}

/// The growth curve of the store being appended to.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct BaseGrowth {
    /// First-sighting file of its words, all at position 0.
    pub firsts: String,
    /// Its tokens T.
    pub tokens: u64,
    /// Its curve.
    pub curve: GrowthCurve,
}

/// The durable work of `--unique` (see [`crate::unique`]); its files are
/// in `work/unique`.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct UniqueWork {
    /// Per chunk: the hash runs of its units, once written.
    pub hashed: Vec<Option<Vec<String>>>,
    /// The duplicates, once marked.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub marked: Option<MarkedUnits>,
}

/// The result of marking: the duplicates of each chunk and the store's
/// next hash set.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct MarkedUnits {
    /// Per chunk: its file of duplicate positions (`None`: none there).
    pub dups: Vec<Option<String>>,
    /// The next hash set (the store's and this ingest's units), moved into
    /// the store when its database is in place.
    pub set: String,
    /// Units read by the hashing.
    pub units: u64,
    /// Of those, duplicates.
    pub duplicates: u64,
}

/// Whether this ingest builds a new store or extends a finished one.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Mode {
    /// A new store.
    Fresh,
    /// New inputs added to a finished store.
    Append,
}

/// The whole state of an unfinished ingest.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Manifest {
    /// [`MANIFEST_VERSION`].
    pub format_version: u32,
    /// Counting settings (must match on resume).
    pub settings: Settings,
    /// How the input lines hold documents (must match on resume).
    #[serde(default, skip_serializing_if = "Format::is_lines")]
    pub format: Format,
    /// Fresh or append.
    pub mode: Mode,
    /// The inputs, as found when planned (must match on resume).
    pub inputs: Vec<InputFile>,
    /// Their chunks.
    pub chunks: Vec<Span>,
    /// Number of hash partitions.
    pub partitions: u32,
    /// Current phase.
    pub phase: Phase,
    /// Next unused file id.
    pub next_id: u64,
    /// Exported counts of the store being appended to.
    pub base: Option<Base>,
    /// Durable spills.
    pub runsets: Vec<RunSet>,
    /// Per partition: merged, or not yet.
    pub merged: Vec<Option<Merged>>,
    /// Per partition: joined, or not yet.
    pub joined: Vec<Option<Joined>>,
    /// Unix time (seconds) the ingest started.
    pub started: u64,
    /// `--unique`: its hashing and marking.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unique: Option<UniqueWork>,
}

impl Manifest {
    /// The manifest path inside a work folder.
    pub fn path(work: &Path) -> PathBuf {
        work.join("manifest.json")
    }

    /// The previous manifest, kept beside the current one.
    pub fn prev_path(work: &Path) -> PathBuf {
        work.join("manifest.prev.json")
    }

    /// Reads and verifies the manifest in `work`, if there is one, falling
    /// back to the previous one as [`Manifest::load_noted`] does.
    pub fn load(work: &Path) -> Result<Option<Manifest>> {
        Ok(Self::load_noted(work)?.map(|(m, _)| m))
    }

    /// Reads and verifies the manifest in `work`. If it is missing (a crash
    /// between the two renames of [`Manifest::save`]) or damaged (truncated,
    /// zeroed, a flipped byte), the previous manifest is used instead and a
    /// note says so: it describes an earlier durable state, and whatever was
    /// recorded after it is redone. Both damaged: the current one's error.
    pub fn load_noted(work: &Path) -> Result<Option<(Manifest, Option<String>)>> {
        let path = Self::path(work);
        let prev = Self::prev_path(work);
        let current = match Self::load_file(&path) {
            Ok(None) => None,
            Ok(Some(m)) => return Ok(Some((m, None))),
            Err(e @ Error::Corrupt { .. }) => Some(e),
            Err(e) => return Err(e),
        };
        match (current, Self::load_file(&prev)) {
            (None, Ok(None)) => Ok(None),
            (None, Ok(Some(m))) => Ok(Some((
                m,
                Some(format!(
                    "{} was missing; resumed from {}",
                    path.display(),
                    prev.display()
                )),
            ))),
            (Some(e), Ok(Some(m))) => Ok(Some((
                m,
                Some(format!(
                    "{e}; resumed from the previous manifest {}, and work recorded after it was redone",
                    prev.display()
                )),
            ))),
            (Some(e), _) => Err(e),
            (None, Err(e)) => Err(e),
        }
    }

    /// Reads and verifies one manifest file.
    fn load_file(path: &Path) -> Result<Option<Manifest>> {
        fsutil::read_checked_json_upgraded(
            path,
            MANIFEST_VERSION,
            crate::records::upgrade_partition_records,
        )
    }

    /// Writes the manifest atomically and durably, keeping the one it
    /// replaces as the previous manifest: temporary file and fsync, then
    /// current → previous, temporary → current, fsync of the folder.
    pub fn save(&self, work: &Path) -> Result<()> {
        let text = fsutil::checked_json_text(self);
        let path = Self::path(work);
        let tmp = fsutil::tmp_name(&path);
        fsutil::write_synced(&tmp, text.as_bytes())?;
        match std::fs::rename(&path, Self::prev_path(work)) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            r => r.at(&path, "rename")?,
        }
        fsutil::rename_durable(&tmp, &path)
    }

    /// Sums the reader totals of the base and every run set.
    pub fn read_totals(&self) -> ReadTotals {
        let mut t = self.base.as_ref().map(|b| b.totals).unwrap_or_default();
        for r in &self.runsets {
            t.add(&r.totals);
        }
        t
    }

    /// Input bytes, as sizes on disk, that the run sets cover: a plain file
    /// by its covered ranges; a compressed file, whose offsets count the
    /// decompressed stream, in full once it is covered to its end, not
    /// before.
    pub fn counted_bytes(&self) -> u64 {
        self.runsets
            .iter()
            .flat_map(|r| &r.covers)
            .map(|s| {
                let f = &self.inputs[s.file as usize];
                if f.compression != crate::corpus::Compression::None {
                    if s.end == u64::MAX {
                        f.size
                    } else {
                        0
                    }
                } else {
                    s.end.min(f.size).saturating_sub(s.start)
                }
            })
            .sum()
    }

    /// The parts of every chunk that no run set covers yet.
    pub fn uncovered(&self) -> Vec<Span> {
        let mut covered: BTreeMap<u32, Vec<(u64, u64)>> = BTreeMap::new();
        for r in &self.runsets {
            for s in &r.covers {
                covered.entry(s.file).or_default().push((s.start, s.end));
            }
        }
        for v in covered.values_mut() {
            v.sort_unstable();
        }
        let mut todo = Vec::new();
        for c in &self.chunks {
            let mut at = c.start;
            for &(s, e) in covered.get(&c.file).map(|v| v.as_slice()).unwrap_or(&[]) {
                if e <= at || s >= c.end {
                    continue;
                }
                if s > at {
                    todo.push(Span {
                        file: c.file,
                        start: at,
                        end: s,
                    });
                }
                at = at.max(e);
            }
            if at < c.end {
                todo.push(Span {
                    file: c.file,
                    start: at,
                    end: c.end,
                });
            }
        }
        todo
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uncovered_is_chunks_minus_covers() {
        let mut m = Manifest {
            format_version: MANIFEST_VERSION,
            settings: Settings {
                order: 3,
                preparation: Default::default(),
                max_line_bytes: 10,
                word_list: None,
                from_counts: false,
                unique: None,
                document_counts: false,
            },
            format: Format::Lines,
            mode: Mode::Fresh,
            inputs: vec![],
            chunks: vec![
                Span {
                    file: 0,
                    start: 0,
                    end: 100,
                },
                Span {
                    file: 0,
                    start: 100,
                    end: u64::MAX,
                },
                Span {
                    file: 1,
                    start: 0,
                    end: u64::MAX,
                },
            ],
            partitions: 1,
            phase: Phase::Counting,
            next_id: 0,
            base: None,
            runsets: vec![],
            merged: vec![],
            joined: vec![],
            started: 0,
            unique: None,
        };
        let span = |file, start, end| Span { file, start, end };
        m.runsets.push(RunSet {
            id: 0,
            runs: vec![],
            dict: String::new(),
            firsts: None,
            covers: vec![span(0, 0, 40), span(0, 100, 150), span(1, 0, u64::MAX)],
            hashes: vec![],
            totals: ReadTotals::default(),
            bad: vec![],
        });
        assert_eq!(
            m.uncovered(),
            vec![span(0, 40, 100), span(0, 150, u64::MAX)]
        );
        let dir = tempfile::tempdir().unwrap();
        m.save(dir.path()).unwrap();
        assert_eq!(Manifest::load(dir.path()).unwrap(), Some(m));
        let p = Manifest::path(dir.path());
        let text = std::fs::read_to_string(&p)
            .unwrap()
            .replace("\"order\": 3", "\"order\": 4");
        std::fs::write(&p, text).unwrap();
        assert!(matches!(
            Manifest::load(dir.path()),
            Err(Error::Corrupt { .. })
        ));
    }

    /// A manifest of order 2 with one partition and nothing done yet.
    fn empty() -> Manifest {
        Manifest {
            format_version: MANIFEST_VERSION,
            settings: Settings {
                order: 2,
                preparation: Default::default(),
                max_line_bytes: 10,
                word_list: None,
                from_counts: false,
                unique: None,
                document_counts: false,
            },
            format: Format::Lines,
            mode: Mode::Fresh,
            inputs: vec![],
            chunks: vec![],
            partitions: 1,
            phase: Phase::Counting,
            next_id: 0,
            base: None,
            runsets: vec![],
            merged: vec![None],
            joined: vec![None],
            started: 0,
            unique: None,
        }
    }

    /// A torn or damaged current manifest falls back to the previous one;
    /// both damaged is an error naming the current file.
    #[test]
    fn damaged_manifest_falls_back_to_the_previous() {
        let dir = tempfile::tempdir().unwrap();
        let mut m1 = empty();
        m1.save(dir.path()).unwrap();
        let m2 = Manifest {
            phase: Phase::Merging,
            next_id: 7,
            ..m1.clone()
        };
        m2.save(dir.path()).unwrap();
        let cur = Manifest::path(dir.path());
        let good = std::fs::read(&cur).unwrap();
        let damages: Vec<(&str, Vec<u8>)> = vec![
            ("truncated", good[..good.len() / 2].to_vec()),
            ("zero-length", vec![]),
            ("flipped byte", {
                let mut b = good.clone();
                b[good.len() / 3] ^= 0x20;
                b
            }),
        ];
        for (what, bytes) in damages {
            std::fs::write(&cur, &bytes).unwrap();
            let (m, note) = Manifest::load_noted(dir.path()).unwrap().unwrap();
            assert_eq!(m, m1, "{what}: not the previous manifest");
            assert!(note.unwrap().contains("manifest.json"), "{what}");
        }
        std::fs::remove_file(&cur).unwrap();
        let (m, note) = Manifest::load_noted(dir.path()).unwrap().unwrap();
        assert_eq!(m, m1);
        assert!(note.is_some());
        std::fs::write(&cur, b"{").unwrap();
        std::fs::write(Manifest::prev_path(dir.path()), b"").unwrap();
        match Manifest::load_noted(dir.path()) {
            Err(Error::Corrupt { path, .. }) => assert_eq!(path, cur),
            other => panic!("both damaged: {other:?}"),
        }
        m1.next_id = 3;
        m1.save(dir.path()).unwrap();
        assert_eq!(Manifest::load(dir.path()).unwrap(), Some(m1));
    }

    /// Plain files count their covered bytes; a compressed file counts only
    /// once covered to its end (its offsets are in the decompressed stream).
    #[test]
    fn counted_bytes_of_plain_and_compressed_inputs() {
        use crate::corpus::{Compression, InputFile};
        let input = |name: &str, compression, size| InputFile {
            path: name.into(),
            compression,
            size,
            mtime_ns: 0,
        };
        let span = |file, start, end| Span { file, start, end };
        let runset = |covers: Vec<Span>| RunSet {
            id: 0,
            runs: vec![],
            dict: String::new(),
            firsts: None,
            covers,
            hashes: vec![],
            totals: ReadTotals::default(),
            bad: vec![],
        };
        let mut m = Manifest {
            inputs: vec![
                input("a.txt", Compression::None, 1000),
                input("b.gz", Compression::Gzip, 300),
            ],
            runsets: vec![runset(vec![span(0, 0, 400), span(1, 0, 2000)])],
            ..empty()
        };
        // 2000 decompressed bytes of a 300-byte .gz file: not known to be done.
        assert_eq!(m.counted_bytes(), 400);
        m.runsets.push(runset(vec![
            span(0, 400, u64::MAX),
            span(1, 2000, u64::MAX),
        ]));
        assert_eq!(m.counted_bytes(), 1300);
    }
}
