//! Finishing a store: the one path from the partitions' outputs to a
//! database in place, taken by the single-machine ingest
//! ([`crate::ingest`]) and by the cluster's assemble stage
//! ([`crate::stage`]).
//!
//! 1. [`store_meta`] sums the partitions' statistics and the readers'
//!    totals into the store's metadata, with the vocabulary growth curve
//!    merged from the counting workers' first-sighting files.
//! 2. [`build_db`] merges the dictionaries into the word list and loads it
//!    with every partition's store files and the metadata into a new
//!    database folder.
//! 3. [`replace_db`] moves that folder into place (the ingest; the assemble
//!    stage renames it itself, because two copies may race).
//!
//! Inputs: settings, per-partition [`PartitionStats`], [`ReadTotals`],
//! dictionary paths, `(column family, SST path)` pairs and first-sighting
//! files. Memory: merges are in rounds of at most `fanin` open files.

mod vocab;

pub use vocab::merge_vocabulary;

use std::path::{Path, PathBuf};

use crate::error::{IoContext, Result};
use crate::fsutil;
use crate::growth::curve::{Before, SpillFirsts};
use crate::layout;
use crate::records::{PartitionStats, ReadTotals, Settings, StoreMeta};
use crate::store::{build, Ranks};

/// The first-sighting files a growth curve is merged from.
pub struct GrowthInputs {
    /// The curve of the store being appended to, if any.
    pub before: Option<Before>,
    /// The counting workers' first-sighting files, in any order.
    pub spills: Vec<SpillFirsts>,
}

/// The store's metadata from every partition's statistics and the readers'
/// totals, with the growth curve of `growth` (`None`: no curve, as for a
/// store from before curves were kept). `tmp` holds the growth merge's
/// rounds; it is created and removed.
pub fn store_meta<'a>(
    settings: Settings,
    partitions: impl IntoIterator<Item = &'a PartitionStats>,
    read: ReadTotals,
    growth: Option<&GrowthInputs>,
    tmp: &Path,
    fanin: usize,
) -> Result<StoreMeta> {
    let mut meta = crate::records::store_meta(settings, partitions, read);
    if let Some(g) = growth {
        fsutil::create_dir(tmp)?;
        let curve = crate::growth::growth_curve(g.before.as_ref(), &g.spills, tmp, fanin);
        fsutil::remove_dir(tmp)?;
        meta.growth = Some(curve?);
    }
    Ok(meta)
}

/// Builds a complete database at `db_new` (an earlier attempt there is
/// replaced): the word list merged from `dicts`, the partitions' store
/// files `ssts` (`(column family, path)`) and `meta`. `scratch` (emptied
/// first, left for the caller to remove) holds the word list's store
/// files, the vocabulary merge's rounds and RocksDB's staging.
pub fn build_db(
    meta: &StoreMeta,
    dicts: Vec<PathBuf>,
    ssts: &[(String, PathBuf)],
    db_new: &Path,
    scratch: &Path,
    fanin: usize,
) -> Result<()> {
    fsutil::remove_dir(scratch)?;
    fsutil::create_dir(scratch)?;
    let ranks = Ranks::from_dicts(&dicts)?;
    let mut files = merge_vocabulary(dicts, &ranks, &scratch.join("rounds"), scratch, fanin)?;
    files.extend(ssts.iter().cloned());
    build::create_db(
        db_new,
        meta.settings.order,
        &files,
        &scratch.join("staging"),
        meta,
    )
}

/// Moves the database built at `db_new` into place as the store's `db/`,
/// keeping an earlier database as `db.old` until the new one is in place.
pub fn replace_db(store: &Path, db_new: &Path) -> Result<()> {
    let db = layout::db(store);
    let old = layout::db_old(store);
    if db.exists() {
        fsutil::remove_dir(&old)?;
        std::fs::rename(&db, &old).at(&db, "rename")?;
    }
    fsutil::rename_durable(db_new, &db)?;
    fsutil::remove_dir(&old)
}
