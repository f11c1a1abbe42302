//! The names of a store directory's folders and files, in one place.
//!
//! ```text
//! STORE/db/             the finished database (store::Store opens it)
//! STORE/db.new/         a database being built, renamed to db/ when complete
//! STORE/db.old/         the database an --append replaces, until db/ is in place
//! STORE/work/           an unfinished ingest: its manifest and work files
//!       work/runs/      count runs, dictionaries, first-sighting files
//!       work/merged/    merged partitions and continuation runs
//!       work/sst/       store files written by the joins
//!       work/tmp/       scratch of the current phase
//!       work/staging/   scratch of the database build
//!       work/unique/    hash runs, duplicate positions, the next hash set (--unique)
//! STORE/work.new/       a work folder being created, renamed to work/
//! STORE/ingest.lock     held by the one ingest that may run here
//! STORE/unique.hashes   the hashes of every unit counted (--unique)
//! ```
//!
//! A store with a `work/` folder is unfinished. Nothing here touches the
//! disk except [`WorkDirs::create`].

use std::path::{Path, PathBuf};

use crate::error::Result;
use crate::fsutil;

/// The finished database.
pub fn db(store: &Path) -> PathBuf {
    store.join("db")
}

/// A database being built.
pub fn db_new(store: &Path) -> PathBuf {
    store.join("db.new")
}

/// The database being replaced by an append.
pub fn db_old(store: &Path) -> PathBuf {
    store.join("db.old")
}

/// The work folder of an unfinished ingest.
pub fn work(store: &Path) -> PathBuf {
    store.join("work")
}

/// A work folder being created.
pub fn work_new(store: &Path) -> PathBuf {
    store.join("work.new")
}

/// The work folder of a finished ingest, moved aside in one step before
/// it is removed.
pub fn work_done(store: &Path) -> PathBuf {
    store.join("work.done")
}

/// The lock file an ingest holds.
pub fn lock(store: &Path) -> PathBuf {
    store.join("ingest.lock")
}

/// The fixed word list a store was counted with (`ingest --word-list`).
pub fn word_list(store: &Path) -> PathBuf {
    store.join("word-list.txt")
}

/// The sorted hashes of every sentence or document a `--unique` store
/// counted (see [`crate::unique`]).
pub fn unique_hashes(store: &Path) -> PathBuf {
    store.join("unique.hashes")
}

/// Whether the finished database is there.
pub fn has_db(store: &Path) -> bool {
    db(store).join("CURRENT").exists()
}

/// The folders inside one work folder.
#[derive(Clone, Debug)]
pub struct WorkDirs {
    /// The store directory.
    pub store: PathBuf,
    /// The work folder itself (holds the manifest).
    pub work: PathBuf,
    /// Count runs, dictionaries and first-sighting files.
    pub runs: PathBuf,
    /// Merged partitions and continuation runs.
    pub merged: PathBuf,
    /// Store files written by the joins.
    pub sst: PathBuf,
    /// Scratch of the current phase.
    pub tmp: PathBuf,
    /// Scratch of the database build.
    pub staging: PathBuf,
    /// Hash runs, duplicate positions and the next hash set (`--unique`).
    pub unique: PathBuf,
}

impl WorkDirs {
    /// The folders of the work folder `work` of the store `store`.
    pub fn new(store: &Path, work: PathBuf) -> WorkDirs {
        WorkDirs {
            store: store.to_path_buf(),
            runs: work.join("runs"),
            merged: work.join("merged"),
            sst: work.join("sst"),
            tmp: work.join("tmp"),
            staging: work.join("staging"),
            unique: work.join("unique"),
            work,
        }
    }

    /// The folders of the store's work folder.
    pub fn of(store: &Path) -> WorkDirs {
        WorkDirs::new(store, work(store))
    }

    /// Creates the folders (not `staging`, which the build makes).
    pub fn create(&self) -> Result<()> {
        for d in [&self.work, &self.runs, &self.merged, &self.sst, &self.tmp] {
            fsutil::create_dir(d)?;
        }
        Ok(())
    }
}
