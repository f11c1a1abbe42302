//! Writing the store: SST files per partition, then one ingestion.
//!
//! Each partition is a contiguous range of keys in every column family, so
//! the SST files of different partitions never overlap and RocksDB places
//! them without rewriting. Files are hard-linked into a staging folder and
//! ingested with `move_files`, so the originals stay valid until the ingest
//! is recorded as done and a crash mid-build can redo the build.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use rocksdb::{IngestExternalFileOptions, Options, SstFileWriter, DB};

use super::keys::{self, all_cfs};
use super::{cf_options, StoreMeta};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;

fn rocks(path: &Path) -> impl Fn(rocksdb::Error) -> Error + '_ {
    move |source| Error::Rocks {
        path: path.to_path_buf(),
        source,
    }
}

/// Options for the SST writers; keep alive while writers exist.
pub fn sst_options() -> Options {
    cf_options(&rocksdb::Cache::new_lru_cache(1 << 20))
}

/// Writes SST files for several column families, one file per family,
/// created when its first record arrives. Keys must come in increasing
/// order within each family.
pub struct SstSet<'a> {
    opts: &'a Options,
    dir: PathBuf,
    prefix: String,
    /// Per family: its name and, once its first record came, its writer
    /// and file name. A handful of families, found by index.
    families: Vec<(String, Option<(SstFileWriter<'a>, String)>)>,
}

/// A column family of an [`SstSet`], from [`SstSet::family`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Family(usize);

impl<'a> SstSet<'a> {
    /// Files go to `dir`, named `<prefix>-<cf>.sst`.
    pub fn new(opts: &'a Options, dir: &Path, prefix: String) -> Self {
        SstSet {
            opts,
            dir: dir.to_path_buf(),
            prefix,
            families: Vec::new(),
        }
    }

    /// The handle of column family `cf` for [`SstSet::put_in`] (no file is
    /// created until its first record).
    pub fn family(&mut self, cf: &str) -> Family {
        match self.families.iter().position(|(name, _)| name == cf) {
            Some(i) => Family(i),
            None => {
                self.families.push((cf.to_string(), None));
                Family(self.families.len() - 1)
            }
        }
    }

    /// Adds one record to column family `cf`.
    pub fn put(&mut self, cf: &str, key: &[u8], value: &[u8]) -> Result<()> {
        let f = self.family(cf);
        self.put_in(f, key, value)
    }

    /// Adds one record to the column family of handle `f` (a lookup per
    /// record by name cost more than the join's own work on it).
    pub fn put_in(&mut self, f: Family, key: &[u8], value: &[u8]) -> Result<()> {
        let (cf, slot) = &mut self.families[f.0];
        if slot.is_none() {
            let name = format!("{}-{cf}.sst", self.prefix);
            let path = self.dir.join(&name);
            crate::fault::full(crate::fault::Full::Sst).at(&path, "create")?;
            let w = SstFileWriter::create(self.opts);
            w.open(&path).map_err(rocks(&path))?;
            *slot = Some((w, name));
        }
        let (w, name) = slot.as_mut().expect("opened above");
        w.put(key, value).map_err(|source| Error::Rocks {
            path: PathBuf::from(&*name),
            source,
        })
    }

    /// Finishes every file (fsynced); returns `(cf, file name)` pairs, in
    /// the order of the family names.
    pub fn finish(mut self) -> Result<Vec<(String, String)>> {
        let mut out = Vec::new();
        self.families.sort_by(|a, b| a.0.cmp(&b.0));
        for (cf, slot) in self.families {
            let Some((mut w, name)) = slot else { continue };
            let path = self.dir.join(&name);
            w.finish().map_err(rocks(&path))?;
            std::fs::File::open(&path)
                .and_then(|f| f.sync_all())
                .at(&path, "fsync")?;
            out.push((cf, name));
        }
        fsutil::sync_dir(&self.dir)?;
        Ok(out)
    }
}

/// Creates a fresh database at `db_path` (removing any earlier attempt),
/// ingests the SST files (`(cf, path)`), writes the metadata and closes it.
pub fn create_db(
    db_path: &Path,
    order: usize,
    files: &[(String, PathBuf)],
    staging: &Path,
    meta: &StoreMeta,
) -> Result<()> {
    fsutil::remove_dir(db_path)?;
    fsutil::remove_dir(staging)?;
    fsutil::create_dir(staging)?;
    let mut opts = Options::default();
    opts.create_if_missing(true);
    opts.create_missing_column_families(true);
    opts.set_max_open_files(256);
    let cache = rocksdb::Cache::new_lru_cache(super::DEFAULT_CACHE_BYTES);
    let descs: Vec<_> = all_cfs(order)
        .into_iter()
        .map(|n| rocksdb::ColumnFamilyDescriptor::new(n, cf_options(&cache)))
        .collect();
    let db = DB::open_cf_descriptors(&opts, db_path, descs).map_err(rocks(db_path))?;
    let mut by_cf: BTreeMap<&str, Vec<PathBuf>> = BTreeMap::new();
    for (i, (cf, path)) in files.iter().enumerate() {
        let link = staging.join(format!("{i}.sst"));
        std::fs::hard_link(path, &link)
            .or_else(|_| std::fs::copy(path, &link).map(|_| ()))
            .at(&link, "link")?;
        by_cf.entry(cf.as_str()).or_default().push(link);
    }
    let mut ing = IngestExternalFileOptions::default();
    ing.set_move_files(true);
    for (cf, paths) in by_cf {
        let h = db
            .cf_handle(cf)
            .ok_or_else(|| Error::corrupt(db_path, format!("unknown column family {cf}")))?;
        db.ingest_external_file_cf_opts(h, &ing, paths)
            .map_err(rocks(db_path))?;
    }
    let meta_cf = db.cf_handle(keys::META_CF).expect("created above");
    let json = serde_json::to_vec(meta).expect("metadata serialises");
    let mut wo = rocksdb::WriteOptions::default();
    wo.set_sync(true);
    db.put_cf_opt(meta_cf, keys::META_KEY, json, &wo)
        .map_err(rocks(db_path))?;
    db.flush_cf(meta_cf).map_err(rocks(db_path))?;
    drop(db);
    fsutil::remove_dir(staging)?;
    Ok(())
}
