//! The hashing phase of `--unique` (see [`crate::unique`]): every chunk's
//! units hashed into sorted runs, each chunk recorded in the manifest as
//! its runs become durable; then the duplicates marked against the
//! store's hash set, recorded at once. The counting phase then skips the
//! marked units, and the building phase moves the next hash set into the
//! store once its database is in place.

use std::collections::HashSet;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;

use super::manifest::{Manifest, MarkedUnits, Phase, UniqueWork};
use super::options::Progress;
use crate::corpus::InputFile;
use crate::count::UniqueSkips;
use crate::error::{Error, IoContext, Result};
use crate::fault::Point;
use crate::fsutil;
use crate::layout::{self, WorkDirs};
use crate::memory::Plan;
use crate::tokenize::Tokenizer;
use crate::unique::runs::{self, RECORD_BYTES};
use crate::unique::{hash_span, DupWriter, HashConfig, Sighting};

use super::manifest::Mode;

fn missing(d: &WorkDirs) -> Error {
    Error::corrupt(
        Manifest::path(&d.work),
        "an ingest with --unique has no record of its hashing; run the same command with --restart",
    )
}

/// Deletes the files of `work/unique` that the manifest does not name.
fn cleanup(u: &UniqueWork, d: &WorkDirs) -> Result<()> {
    fsutil::create_dir(&d.unique)?;
    let mut keep: HashSet<&str> = HashSet::new();
    match &u.marked {
        Some(mk) => {
            keep.insert(&mk.set);
            keep.extend(mk.dups.iter().flatten().map(|s| s.as_str()));
        }
        None => keep.extend(u.hashed.iter().flatten().flatten().map(|s| s.as_str())),
    }
    for e in std::fs::read_dir(&d.unique).at(&d.unique, "read directory")? {
        let e = e.at(&d.unique, "read directory")?;
        if !keep.contains(e.file_name().to_string_lossy().as_ref()) {
            std::fs::remove_file(e.path()).at(&e.path(), "remove")?;
        }
    }
    Ok(())
}

/// What the hashing phase works with.
pub(super) struct Hashing<'a> {
    pub(super) dirs: &'a WorkDirs,
    pub(super) plan: &'a Plan,
    pub(super) threads: usize,
    pub(super) word_list: Option<&'a crate::tokenize::WordSet>,
    pub(super) progress: &'a dyn Progress,
}

/// What the hashing phase did: its seconds and its temporary bytes.
pub(super) struct Hashed {
    pub(super) seconds: f64,
    pub(super) temp_bytes: u64,
}

impl Hashing<'_> {
    /// The hashing phase: hashes the chunks not yet hashed, then marks the
    /// duplicates.
    pub(super) fn run(&self, m: &mut Manifest, inputs: &[InputFile]) -> Result<Option<Hashed>> {
        if m.phase != Phase::Hashing {
            // Hash runs left by a kill right after marking go.
            if let Some(u) = &m.unique {
                if m.phase == Phase::Counting {
                    cleanup(u, self.dirs)?;
                }
            }
            return Ok(None);
        }
        let unit = m.settings.unique.ok_or_else(|| missing(self.dirs))?;
        cleanup(
            m.unique.as_ref().ok_or_else(|| missing(self.dirs))?,
            self.dirs,
        )?;
        let t = std::time::Instant::now();
        crate::memory::release_free_heap();
        let todo: Vec<usize> = {
            let u = m.unique.as_ref().ok_or_else(|| missing(self.dirs))?;
            (0..m.chunks.len())
                .filter(|&c| u.hashed.get(c).is_none_or(Option::is_none))
                .collect()
        };
        let total: u64 = m.inputs.iter().map(|f| f.size).sum();
        self.progress.phase(Phase::Hashing, total);
        let read = AtomicU64::new(0);
        let tok = Tokenizer::new(m.settings.preparation).with_word_list(self.word_list);
        let format = m.format.clone();
        let cfg = HashConfig {
            inputs,
            unique: unit,
            tokenizer: &tok,
            max_line_bytes: m.settings.max_line_bytes,
            format: &format,
            progress: &read,
            dict_bytes: self.plan.count_worker / 8,
        };
        // A sighting takes 48 bytes in memory (the u128 aligns it).
        let cap = (self.plan.count_worker / 4 * 3 / std::mem::size_of::<Sighting>()).max(1024);
        let chunks = m.chunks.clone();
        let next_id = AtomicU64::new(m.next_id);
        let dir = &self.dirs.unique;
        let work = &self.dirs.work;
        let shared = Mutex::new(&mut *m);
        let progress = self.progress;
        crate::pool::try_for_each(self.threads, todo, |c| {
            let mut buf: Vec<Sighting> = Vec::with_capacity(cap.min(1 << 16));
            let mut names = Vec::new();
            let mut spill = |buf: &mut Vec<Sighting>| -> Result<()> {
                let id = next_id.fetch_add(1, Ordering::SeqCst);
                let name = format!("hash-{id:06}.run");
                runs::write_run(&dir.join(&name), buf)?;
                names.push(name);
                buf.clear();
                Ok(())
            };
            hash_span(&cfg, chunks[c], &mut |s| {
                buf.push(s);
                if buf.len() >= cap {
                    spill(&mut buf)?;
                }
                Ok(())
            })?;
            if !buf.is_empty() {
                spill(&mut buf)?;
            }
            let mut g = shared.lock().map_err(|_| poisoned())?;
            let u = g.unique.as_mut().ok_or_else(|| missing(self.dirs))?;
            u.hashed[c] = Some(names);
            g.next_id = next_id.load(Ordering::SeqCst);
            g.save(work)?;
            progress.advance(read.load(Ordering::Relaxed));
            crate::fault::point(Point::Hashed);
            Ok(())
        })?;
        m.next_id = next_id.load(Ordering::SeqCst);
        let temp_bytes = self.mark(m)?;
        Ok(Some(Hashed {
            seconds: t.elapsed().as_secs_f64(),
            temp_bytes,
        }))
    }

    /// Marks the duplicates of every hashed unit, records them and moves
    /// on to counting; the hash runs go. Gives the bytes the runs held.
    fn mark(&self, m: &mut Manifest) -> Result<u64> {
        let d = self.dirs;
        let u = m.unique.as_ref().ok_or_else(|| missing(d))?;
        let paths: Vec<PathBuf> = u
            .hashed
            .iter()
            .flatten()
            .flatten()
            .map(|n| d.unique.join(n))
            .collect();
        // Fewer runs than the fan-in at once: merge groups first.
        let paths = runs::merge_to_fanin(paths, self.plan.fanin, &d.unique)?;
        let old = layout::unique_hashes(&d.store);
        let old = match m.mode {
            Mode::Append if old.exists() => Some(old),
            Mode::Append => {
                return Err(Error::state(
                    &d.store,
                    format!(
                        "the store was built with --unique but its hash set {} is missing; --append cannot tell its old sentences from new ones",
                        old.display()
                    ),
                ))
            }
            Mode::Fresh => None,
        };
        let id = m.next_id;
        m.next_id += 1;
        let set = format!("hashes-{id:06}.set");
        let mut dups = DupWriter::new(&m.chunks, &d.unique, self.plan.count_worker);
        let found = runs::mark(&paths, old.as_deref(), &d.unique.join(&set), &mut dups)?;
        let names = dups.finish()?;
        let u = m.unique.as_mut().ok_or_else(|| missing(d))?;
        u.marked = Some(MarkedUnits {
            dups: names,
            set,
            units: found.units,
            duplicates: found.duplicates,
        });
        m.phase = Phase::Counting;
        m.save(&d.work)?;
        crate::fault::point(Point::Marked);
        cleanup(m.unique.as_ref().ok_or_else(|| missing(d))?, d)?;
        Ok(found.units * RECORD_BYTES as u64)
    }
}

/// The units the counting skips, if this ingest has `--unique`.
pub(super) fn skips(m: &Manifest, d: &WorkDirs) -> Result<Option<UniqueSkips>> {
    let Some(unit) = m.settings.unique else {
        return Ok(None);
    };
    let mk = m
        .unique
        .as_ref()
        .and_then(|u| u.marked.as_ref())
        .ok_or_else(|| missing(d))?;
    Ok(Some(UniqueSkips {
        unit,
        chunks: m.chunks.clone(),
        files: mk
            .dups
            .iter()
            .map(|f| f.iter().map(|f| d.unique.join(f)).collect())
            .collect(),
    }))
}

/// Moves the next hash set into the store (its database is in place). A
/// set already moved (a kill before the manifest said so) is left.
pub(super) fn install_set(m: &Manifest, d: &WorkDirs) -> Result<()> {
    let Some(mk) = m.unique.as_ref().and_then(|u| u.marked.as_ref()) else {
        return Ok(());
    };
    let from = d.unique.join(&mk.set);
    if from.exists() {
        fsutil::rename_durable(&from, &layout::unique_hashes(&d.store))?;
    }
    Ok(())
}

fn poisoned() -> Error {
    Error::Poisoned {
        what: "the ingest's manifest",
    }
}
