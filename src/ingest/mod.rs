//! The ingest pipeline: inputs → count runs → merged partitions → store,
//! resumable at every step.
//!
//! [`ingest`] takes the store's lock, then either starts a new ingest (plan
//! the inputs into chunks and write a manifest), resumes the one recorded
//! in the store's manifest, or (with `append`) exports a finished store's
//! counts as a base run and starts an ingest of the new inputs on top.
//! Each phase records its durable results in the manifest as it goes
//! ([`manifest`]); on resume, everything the manifest does not name is
//! deleted and redone. Phases: counting ([`crate::count`]), merging and
//! joining ([`crate::merge`]), building ([`crate::store::build`]).

pub mod manifest;
mod space;
mod status;
mod verify;

pub use manifest::{Manifest, Phase};
pub use status::{status, IngestStatus};

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;
use std::time::Instant;

use serde::Serialize;

use crate::corpus::{self, InputFile};
use crate::count::{count_spans, CountConfig, Spill};
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::growth;
use crate::key::{Key, MAX_ORDER};
use crate::memory::{peak_rss, Plan};
use crate::merge::{join_partition, merge_partition, KWayMerge, MergeConfig, RecordSource};
use crate::shard::{DictReader, DictWriter, RunFile, RunWriter, Values};
use crate::store::{self, build, Ranks, Settings, Store, StoreMeta, Totals};
use crate::words::WordId;
use manifest::{Base, Joined, Mode, RunSet};

/// What to ingest and how.
#[derive(Clone, Debug)]
pub struct IngestOptions {
    /// The store directory.
    pub store: PathBuf,
    /// Files, directories, or `-` for standard input.
    pub inputs: Vec<PathBuf>,
    /// Highest order N.
    pub order: usize,
    /// Memory budget of the whole process, in bytes.
    pub memory: u64,
    /// Worker threads.
    pub threads: usize,
    /// Lowercase every token.
    pub lowercase: bool,
    /// Skip lines longer than this (bytes, without the line end).
    pub max_line_bytes: usize,
    /// Number of partitions (default: chosen from the thread count).
    pub partitions: Option<u32>,
    /// Discard an unfinished ingest and start again.
    pub restart: bool,
    /// Add the inputs to a finished store.
    pub append: bool,
    /// Size of the chunks plain files are cut into.
    pub chunk_bytes: u64,
}

impl IngestOptions {
    /// Options with the defaults: order 5, 1 GiB, all cores, 1 MiB lines.
    pub fn new(store: impl Into<PathBuf>, inputs: Vec<PathBuf>) -> Self {
        IngestOptions {
            store: store.into(),
            inputs,
            order: 5,
            memory: 1 << 30,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            lowercase: false,
            max_line_bytes: 1 << 20,
            partitions: None,
            restart: false,
            append: false,
            chunk_bytes: 16 << 20,
        }
    }
}

/// Receives progress; the library never prints.
pub trait Progress: Sync {
    /// A phase starts; `total` is its amount of work (bytes or partitions).
    fn phase(&self, phase: Phase, total: u64);
    /// Work done so far in the current phase.
    fn advance(&self, done: u64);
}

/// A [`Progress`] that ignores everything.
pub struct Silent;

impl Progress for Silent {
    fn phase(&self, _: Phase, _: u64) {}
    fn advance(&self, _: u64) {}
}

/// What an ingest did.
#[derive(Clone, Debug, Serialize)]
pub struct IngestSummary {
    /// The store directory.
    pub store: PathBuf,
    /// An unfinished ingest was resumed.
    pub resumed: bool,
    /// Inputs were appended to a finished store.
    pub appended: bool,
    /// Corpus totals.
    pub totals: Totals,
    /// Stored n-grams per order (index 0: unigrams).
    pub ngrams: Vec<u64>,
    /// Count run files written by this process.
    pub runs_written: u64,
    /// Bytes of temporary files written by this process.
    pub temp_bytes: u64,
    /// Size of the store on disk.
    pub store_bytes: u64,
    /// Wall-clock seconds per phase run by this process.
    pub phase_seconds: BTreeMap<String, f64>,
    /// Wall-clock seconds in all.
    pub seconds: f64,
    /// Peak resident memory of the process, bytes.
    pub peak_rss_bytes: Option<u64>,
    /// Damaged intermediate files found and the work redone because of them.
    pub repaired: Vec<String>,
}

struct Dirs {
    store: PathBuf,
    work: PathBuf,
    runs: PathBuf,
    merged: PathBuf,
    sst: PathBuf,
    tmp: PathBuf,
}

impl Dirs {
    fn new(store: &Path, work: PathBuf) -> Dirs {
        Dirs {
            store: store.to_path_buf(),
            runs: work.join("runs"),
            merged: work.join("merged"),
            sst: work.join("sst"),
            tmp: work.join("tmp"),
            work,
        }
    }
    fn create(&self) -> Result<()> {
        for d in [&self.work, &self.runs, &self.merged, &self.sst, &self.tmp] {
            fsutil::create_dir(d)?;
        }
        Ok(())
    }
}

/// The lock file of a store.
pub fn lock_path(store: &Path) -> PathBuf {
    store.join("ingest.lock")
}

fn lock(store: &Path) -> Result<std::fs::File> {
    let path = lock_path(store);
    let f = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(&path)
        .at(&path, "open")?;
    f.try_lock().map_err(|_| Error::Locked {
        path: store.to_path_buf(),
        lock: path.clone(),
    })?;
    Ok(f)
}

fn now_secs() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}

/// Runs (or resumes) an ingest.
pub fn ingest(opts: &IngestOptions, progress: &dyn Progress) -> Result<IngestSummary> {
    ingest_inner(opts, progress).map_err(|e| {
        if e.is_out_of_space() {
            space::disk_full(&opts.store, e)
        } else {
            e
        }
    })
}

fn ingest_inner(opts: &IngestOptions, progress: &dyn Progress) -> Result<IngestSummary> {
    let t0 = Instant::now();
    if opts.order == 0 || opts.order > MAX_ORDER {
        return Err(Error::Config(format!(
            "--order {} is outside 1..={MAX_ORDER}",
            opts.order
        )));
    }
    if opts.inputs.is_empty() {
        return Err(Error::Config("no inputs given".into()));
    }
    let threads = opts.threads.max(1);
    let plan = Plan::new(opts.memory, threads)?;
    fsutil::create_dir(&opts.store)?;
    let _lock = lock(&opts.store)?;
    let dirs = Dirs::new(&opts.store, store::work_dir(&opts.store));
    let settings = Settings {
        order: opts.order,
        lowercase: opts.lowercase,
        max_line_bytes: opts.max_line_bytes,
    };
    fsutil::remove_dir(&opts.store.join("work.new"))?;
    if opts.restart {
        fsutil::remove_dir(&dirs.work)?;
        fsutil::remove_dir(&opts.store.join("db.new"))?;
    }
    let loaded = Manifest::load_noted(&dirs.work).map_err(|e| match e {
        Error::Corrupt { path, detail } => Error::Corrupt {
            path,
            detail: format!(
                "{detail}; run the same command with --restart to start this ingest again"
            ),
        },
        e => e,
    })?;
    let inputs = corpus::discover(&opts.inputs)?;
    let mut repaired = Vec::new();
    let (mut m, resumed) = match loaded {
        Some((mut m, note)) => {
            repaired.extend(note);
            check_resume(&m, &settings, &inputs, opts)?;
            let notes = verify::verify_inputs(&mut m, &inputs, threads)?;
            if !notes.is_empty() {
                m.save(&dirs.work)?;
                repaired.extend(notes);
            }
            (m, true)
        }
        None => {
            if dirs.work.exists() {
                // Started, but not even the first manifest was written.
                fsutil::remove_dir(&dirs.work)?;
            }
            let finished = store::db_dir(&opts.store).join("CURRENT").exists();
            match (finished, opts.append) {
                (true, false) => {
                    return Err(Error::state(
                        &opts.store,
                        "this store is finished; use --append to add inputs to it, or give another --store",
                    ))
                }
                (false, true) => return Err(Error::state(&opts.store, "there is no finished store here to append to")),
                _ => {}
            }
            let parts = opts
                .partitions
                .unwrap_or_else(|| (threads as u32 * 16).clamp(16, 256));
            (plan_new(opts, &dirs, settings, inputs, parts)?, false)
        }
    };
    let mut run = Run {
        dirs: &dirs,
        plan,
        threads,
        progress,
        runs_written: 0,
        temp_bytes: 0,
        phase_seconds: BTreeMap::new(),
    };
    if resumed {
        repaired.extend(drop_damaged(&mut m, &dirs)?);
    }
    cleanup_orphans(&m, &dirs)?;
    let inputs = m.inputs.clone();
    // A count run found damaged while merging is forgotten and its input
    // ranges counted again (a few times at most; then the error stands).
    let mut recounts = 0;
    loop {
        run.counting(&mut m, &inputs)?;
        match run.merging(&mut m) {
            Err(Error::Corrupt { path, detail }) if recounts < 3 => {
                let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
                let before = m.runsets.len();
                m.runsets
                    .retain(|r| name.as_ref().is_none_or(|n| !r.runs.contains(n)));
                if m.runsets.len() == before {
                    return Err(Error::Corrupt { path, detail });
                }
                m.phase = Phase::Counting;
                m.merged.iter_mut().for_each(|x| *x = None);
                m.save(&dirs.work)?;
                cleanup_orphans(&m, &dirs)?;
                recounts += 1;
                repaired.push(format!(
                    "{}: {detail}; its input was counted again",
                    path.display()
                ));
            }
            r => break r?,
        }
    }
    run.joining(&mut m)?;
    run.building(&mut m)?;
    let s = Store::open(&opts.store)?;
    let meta = s.meta().clone();
    Ok(IngestSummary {
        store: opts.store.clone(),
        resumed,
        appended: m.mode == Mode::Append,
        totals: meta.totals,
        ngrams: meta.orders.iter().map(|o| o.ngrams).collect(),
        runs_written: run.runs_written,
        temp_bytes: run.temp_bytes,
        store_bytes: s.disk_bytes(),
        phase_seconds: run.phase_seconds,
        seconds: t0.elapsed().as_secs_f64(),
        peak_rss_bytes: peak_rss(),
        repaired,
    })
}

fn check_resume(
    m: &Manifest,
    settings: &Settings,
    inputs: &[InputFile],
    opts: &IngestOptions,
) -> Result<()> {
    let hint = "run the same command as the interrupted ingest to resume it, or add --restart to discard it";
    if m.settings != *settings {
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started with order {}, lowercase {}, max line bytes {}; this command asks for order {}, lowercase {}, max line bytes {}: {hint}",
                m.settings.order, m.settings.lowercase, m.settings.max_line_bytes,
                settings.order, settings.lowercase, settings.max_line_bytes
            ),
        ));
    }
    if (m.mode == Mode::Append) != opts.append {
        return Err(Error::state(
            &opts.store,
            format!(
                "the unfinished ingest here {} --append: {hint}",
                if opts.append {
                    "was started without"
                } else {
                    "was started with"
                }
            ),
        ));
    }
    if inputs.iter().any(|f| f.is_stdin()) {
        return Err(Error::state(
            &opts.store,
            "an ingest that reads standard input cannot be resumed; add --restart",
        ));
    }
    if m.inputs.len() != inputs.len() {
        return Err(Error::state(
            &opts.store,
            format!(
                "the unfinished ingest here has {} input files, this command {}: {hint}",
                m.inputs.len(),
                inputs.len()
            ),
        ));
    }
    for (a, b) in m.inputs.iter().zip(inputs) {
        if a.path != b.path {
            return Err(Error::state(
                &opts.store,
                format!(
                    "input {} differs from the unfinished ingest's {}: {hint}",
                    b.path.display(),
                    a.path.display()
                ),
            ));
        }
    }
    Ok(())
}

fn plan_new(
    opts: &IngestOptions,
    dirs: &Dirs,
    settings: Settings,
    inputs: Vec<InputFile>,
    parts: u32,
) -> Result<Manifest> {
    let chunks = corpus::plan_chunks(&inputs, opts.chunk_bytes)?;
    let mut m = Manifest {
        format_version: manifest::MANIFEST_VERSION,
        settings,
        mode: if opts.append {
            Mode::Append
        } else {
            Mode::Fresh
        },
        inputs,
        chunks,
        partitions: parts,
        phase: Phase::Counting,
        next_id: 0,
        base: None,
        runsets: vec![],
        merged: vec![None; parts as usize],
        joined: vec![None; parts as usize],
        started: now_secs(),
    };
    // Build the work folder under another name and rename it into place,
    // so a work folder always has a manifest.
    let staging = Dirs::new(&dirs.store, dirs.store.join("work.new"));
    staging.create()?;
    if opts.append {
        m.base = Some(export_base(&dirs.store, &staging.runs, &settings, parts)?);
    }
    m.save(&staging.work)?;
    fsutil::rename_durable(&staging.work, &dirs.work)?;
    Ok(m)
}

/// Writes a finished store's raw counts as one run file, and its words as a
/// dictionary, for `--append`.
fn export_base(store_dir: &Path, runs: &Path, settings: &Settings, parts: u32) -> Result<Base> {
    let s = Store::open(store_dir)?;
    let have = s.meta().settings;
    if have.order != settings.order || have.lowercase != settings.lowercase {
        return Err(Error::state(
            store_dir,
            format!(
                "the store was built with order {} and lowercase {}; --append must use the same settings",
                have.order, have.lowercase
            ),
        ));
    }
    type Rows<'a> = Box<dyn Iterator<Item = Result<(Key, u64, Option<u64>)>> + 'a>;
    struct OrderIter<'a>(Rows<'a>);
    impl RecordSource for OrderIter<'_> {
        fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
            Ok(self
                .0
                .next()
                .transpose()?
                .map(|(k, c, _)| (k, [c, 0, 0, 0])))
        }
    }
    let sources = (1..=settings.order)
        .map(|k| Ok(OrderIter(Box::new(s.ngrams(k)?))))
        .collect::<Result<Vec<_>>>()?;
    let mut merge = KWayMerge::new(sources)?;
    let run = "base.run".to_string();
    let mut w = RunWriter::create(&runs.join(&run), parts, 1)?;
    while let Some((k, v)) = merge.next_record()? {
        w.push(crate::key::partition_of(k.ids()[0], parts), &k, &v)?;
    }
    w.finish()?;
    let mut words: Vec<(WordId, Box<str>)> = s
        .vocabulary()?
        .into_iter()
        .filter(|(id, _)| {
            ![
                crate::words::bos_id(),
                crate::words::eos_id(),
                crate::words::unk_id(),
            ]
            .contains(id)
        })
        .map(|(id, w)| (id, w.into_boxed_str()))
        .collect();
    words.sort_unstable_by_key(|e| e.0);
    let dict = "base.dict".to_string();
    DictWriter::write(&runs.join(&dict), &words)?;
    let t = s.meta().totals;
    // The store's corpus comes before the new inputs: all its types are
    // seen at position 0.
    let growth = match &s.meta().growth {
        Some(curve) => {
            // The types are the stored unigrams but `<s>` (the vocabulary
            // may also name `<unk>` unseen).
            let mut all: Vec<(WordId, u32, u64)> = Vec::new();
            for row in s.ngrams(1)? {
                let (key, count, _) = row?;
                let id = key.ids()[0];
                if id != crate::words::bos_id() && count > 0 {
                    all.push((id, 0, 0));
                }
            }
            all.sort_unstable_by_key(|e| e.0);
            let firsts = "base.first".to_string();
            growth::file::write(&runs.join(&firsts), &[t.tokens.max(1)], &all)?;
            Some(manifest::BaseGrowth {
                firsts,
                tokens: t.tokens,
                curve: curve.clone(),
            })
        }
        None => None,
    };
    Ok(Base {
        run,
        dict,
        growth,
        totals: manifest::ReadTotals {
            sentences: t.sentences,
            skipped_lines: t.skipped_lines,
            invalid_utf8_lines: t.invalid_utf8_lines,
            marker_tokens: t.marker_tokens,
            bytes: t.input_bytes,
        },
    })
}

/// Checks the files a resumed manifest names (footers and checksums of the
/// headers; sections are checked again as they are read) and forgets the
/// work whose files are damaged or missing, so that it is redone. Damage
/// that cannot be redone (the inputs of a finished phase are gone) is an
/// error naming the file.
fn drop_damaged(m: &mut Manifest, d: &Dirs) -> Result<Vec<String>> {
    let run_ok = |dir: &Path, name: &str| RunFile::open(&dir.join(name)).is_ok();
    // Merged files are read whole (every section to its checksum): after
    // the merge the count runs are deleted, so damage found later could not
    // be redone.
    let run_intact = |dir: &Path, name: &str| {
        RunFile::open(&dir.join(name)).is_ok_and(|f| {
            (0..f.partitions()).all(|p| {
                f.section(p).is_ok_and(|mut s| loop {
                    match s.next_record() {
                        Ok(Some(_)) => {}
                        Ok(None) => break true,
                        Err(_) => break false,
                    }
                })
            })
        })
    };
    // Dictionaries are small: read them whole, since they are next read
    // when the store is built, after the runs that could redo them are gone.
    let dict_ok = |name: &str| {
        DictReader::open(&d.runs.join(name)).is_ok_and(|mut r| loop {
            match r.next_entry() {
                Ok(Some(_)) => {}
                Ok(None) => break true,
                Err(_) => break false,
            }
        })
    };
    let before = m.clone();
    let mut notes = Vec::new();
    if matches!(m.phase, Phase::Counting | Phase::Merging) {
        if let Some(b) = &m.base {
            let firsts_ok = b
                .growth
                .as_ref()
                .is_none_or(|g| growth::file::check(&d.runs.join(&g.firsts)).is_ok());
            if !run_ok(&d.runs, &b.run) || !dict_ok(&b.dict) || !firsts_ok {
                return Err(Error::corrupt(
                    d.runs.join(&b.run),
                    "the exported counts of the store being appended to are damaged; run the same command with --restart",
                ));
            }
        }
        let n = m.runsets.len();
        let firsts_ok = |r: &RunSet| {
            r.firsts
                .as_ref()
                .is_none_or(|f| growth::file::check(&d.runs.join(f)).is_ok())
        };
        m.runsets.retain(|r| {
            r.runs.iter().all(|f| run_ok(&d.runs, f)) && dict_ok(&r.dict) && firsts_ok(r)
        });
        if m.runsets.len() != n {
            notes.push(format!(
                "{} damaged or missing spill(s) in {}: their input was counted again",
                n - m.runsets.len(),
                d.runs.display()
            ));
            // The merged partitions hold the lost spill's counts too: recount
            // it, then merge every partition again.
            m.phase = Phase::Counting;
            m.merged.iter_mut().for_each(|x| *x = None);
        }
        for x in m.merged.iter_mut() {
            if let Some(mm) = x {
                let mm_name = mm.counts.clone();
                let ok = run_intact(&d.merged, &mm.counts)
                    && mm.suffix_runs.iter().all(|f| run_intact(&d.merged, f));
                if !ok {
                    *x = None;
                    notes.push(format!(
                        "a damaged merge of partition {} was redone",
                        mm_name
                    ));
                }
            }
        }
    }
    if matches!(m.phase, Phase::Joining | Phase::Building) {
        let dicts = m.base.iter().map(|b| &b.dict);
        for name in dicts.chain(m.runsets.iter().map(|r| &r.dict)) {
            if !dict_ok(name) {
                return Err(Error::corrupt(
                    d.runs.join(name),
                    "a word dictionary is damaged and the counts it came with are merged and gone; run the same command with --restart",
                ));
            }
        }
        let base_firsts = m
            .base
            .iter()
            .filter_map(|b| b.growth.as_ref().map(|g| &g.firsts));
        for name in base_firsts.chain(m.runsets.iter().filter_map(|r| r.firsts.as_ref())) {
            if let Err(e) = growth::file::check(&d.runs.join(name)) {
                return Err(Error::corrupt(
                    d.runs.join(name),
                    format!("{e}; the counts it came with are merged and gone, so run the same command with --restart"),
                ));
            }
        }
    }
    let sst_ok = |name: &str| std::fs::metadata(d.sst.join(name)).is_ok_and(|md| md.len() > 0);
    match m.phase {
        Phase::Joining => {
            for x in m.joined.iter_mut() {
                if x.as_ref()
                    .is_some_and(|j| !j.ssts.iter().all(|(_, f)| sst_ok(f)))
                {
                    *x = None;
                    notes.push("a partition's missing store files were written again".into());
                }
            }
        }
        Phase::Building => {
            for j in m.joined.iter().flatten() {
                if let Some((_, f)) = j.ssts.iter().find(|(_, f)| !sst_ok(f)) {
                    return Err(Error::corrupt(
                        d.sst.join(f),
                        "a store file is missing or empty and the merged counts it came from are gone; run the same command with --restart",
                    ));
                }
            }
        }
        _ => {}
    }
    if m.phase == Phase::Joining && m.joined.iter().any(Option::is_none) {
        for x in m.merged.iter().flatten() {
            for f in std::iter::once(&x.counts).chain(&x.suffix_runs) {
                if !run_intact(&d.merged, f) {
                    return Err(Error::corrupt(
                        d.merged.join(f),
                        "a merged partition is missing or damaged and the runs it was merged from are gone; run the same command with --restart",
                    ));
                }
            }
        }
    }
    if *m != before {
        m.save(&d.work)?;
    }
    Ok(notes)
}

/// Deletes files of the work folder that the manifest does not name
/// (written by a process that died before recording them).
fn cleanup_orphans(m: &Manifest, d: &Dirs) -> Result<()> {
    fsutil::remove_dir(&d.tmp)?;
    d.create()?;
    let mut keep: std::collections::HashSet<String> = std::collections::HashSet::new();
    if let Some(b) = &m.base {
        keep.insert(b.run.clone());
        keep.insert(b.dict.clone());
    }
    if let Some(g) = m.base.as_ref().and_then(|b| b.growth.as_ref()) {
        keep.insert(g.firsts.clone());
    }
    for r in &m.runsets {
        keep.extend(r.runs.iter().cloned());
        keep.insert(r.dict.clone());
        keep.extend(r.firsts.iter().cloned());
    }
    for x in m.merged.iter().flatten() {
        keep.insert(x.counts.clone());
        keep.extend(x.suffix_runs.iter().cloned());
    }
    for j in m.joined.iter().flatten() {
        keep.extend(j.ssts.iter().map(|s| s.1.clone()));
    }
    for dir in [&d.runs, &d.merged, &d.sst] {
        for e in std::fs::read_dir(dir).at(dir, "read directory")? {
            let e = e.at(dir, "read directory")?;
            let name = e.file_name().to_string_lossy().into_owned();
            if !keep.contains(&name) {
                std::fs::remove_file(e.path()).at(&e.path(), "remove")?;
            }
        }
    }
    Ok(())
}

fn merge_config<'b>(
    dirs: &'b Dirs,
    plan: &Plan,
    m: &Manifest,
    next_tmp: &'b AtomicU64,
) -> MergeConfig<'b> {
    MergeConfig {
        order: m.settings.order,
        partitions: m.partitions,
        fanin: plan.fanin,
        worker_bytes: plan.merge_worker,
        merged_dir: &dirs.merged,
        tmp_dir: &dirs.tmp,
        next_tmp,
    }
}

struct Run<'a> {
    dirs: &'a Dirs,
    plan: Plan,
    threads: usize,
    progress: &'a dyn Progress,
    runs_written: u64,
    temp_bytes: u64,
    phase_seconds: BTreeMap<String, f64>,
}

impl Run<'_> {
    fn timed<T>(&mut self, phase: Phase, f: impl FnOnce(&mut Self) -> Result<T>) -> Result<T> {
        let t = Instant::now();
        let r = f(self);
        *self
            .phase_seconds
            .entry(phase.name().to_string())
            .or_insert(0.0) += t.elapsed().as_secs_f64();
        r
    }

    fn counting(&mut self, m: &mut Manifest, inputs: &[InputFile]) -> Result<()> {
        if m.phase != Phase::Counting {
            return Ok(());
        }
        self.timed(Phase::Counting, |run| {
            let spans = m.uncovered();
            let total: u64 = m.inputs.iter().map(|f| f.size).sum();
            let todo: u64 = spans
                .iter()
                .map(|s| {
                    s.end
                        .min(m.inputs[s.file as usize].size)
                        .saturating_sub(s.start)
                })
                .sum();
            let done0 = total.saturating_sub(todo);
            run.progress.phase(Phase::Counting, total);
            run.progress.advance(done0);
            let next_id = AtomicU64::new(m.next_id);
            let read = AtomicU64::new(0);
            let cfg = CountConfig {
                inputs,
                order: m.settings.order,
                lowercase: m.settings.lowercase,
                max_line_bytes: m.settings.max_line_bytes,
                partitions: m.partitions,
                threads: run.threads,
                worker_bytes: run.plan.count_worker,
                dir: &run.dirs.runs,
                next_id: &next_id,
                progress: &read,
            };
            let shared = Mutex::new((&mut *m, 0u64, 0u64));
            let work = &run.dirs.work;
            let commit = |s: Spill| -> Result<()> {
                let mut g = shared.lock().unwrap_or_else(|e| e.into_inner());
                g.1 += s.runs.len() as u64;
                g.2 += s.bytes;
                g.0.runsets.push(RunSet {
                    id: s.id,
                    runs: s.runs,
                    dict: s.dict,
                    firsts: Some(s.firsts),
                    covers: s.covers,
                    hashes: s.hashes,
                    totals: s.totals,
                });
                g.0.next_id = next_id.load(Ordering::SeqCst);
                g.0.save(work)
            };
            let done = std::sync::atomic::AtomicBool::new(false);
            let result = std::thread::scope(|scope| {
                let ticker = scope.spawn(|| {
                    while !done.load(Ordering::Relaxed) {
                        run.progress.advance(done0 + read.load(Ordering::Relaxed));
                        std::thread::sleep(std::time::Duration::from_millis(200));
                    }
                });
                let r = count_spans(&cfg, spans, &commit);
                done.store(true, Ordering::Relaxed);
                let _ = ticker.join();
                r
            });
            let (_, runs, bytes) = shared.into_inner().unwrap_or_else(|e| e.into_inner());
            run.runs_written += runs;
            run.temp_bytes += bytes;
            result?;
            m.phase = Phase::Merging;
            m.next_id = next_id.load(Ordering::SeqCst);
            m.save(&run.dirs.work)
        })
    }

    /// Runs `job(p)` for every partition `p` in `todo` on the worker threads;
    /// `record` is called (serialised) with each result.
    fn per_partition<T: Send>(
        &self,
        todo: Vec<u32>,
        job: &(dyn Fn(u32) -> Result<T> + Sync),
        record: &mut (dyn FnMut(u32, T) -> Result<()> + Send),
    ) -> Result<()> {
        let (tx, rx) = crossbeam::channel::unbounded();
        for p in todo {
            tx.send(p).expect("open");
        }
        drop(tx);
        let record = Mutex::new(record);
        let failed = std::sync::atomic::AtomicBool::new(false);
        let first: Mutex<Option<Error>> = Mutex::new(None);
        let done = AtomicU64::new(0);
        std::thread::scope(|scope| {
            for _ in 0..self.threads {
                let rx = rx.clone();
                let (record, failed, first, done) = (&record, &failed, &first, &done);
                scope.spawn(move || {
                    while let Ok(p) = rx.recv() {
                        if failed.load(Ordering::SeqCst) {
                            return;
                        }
                        let r = job(p).and_then(|t| {
                            let mut rec = record.lock().unwrap_or_else(|e| e.into_inner());
                            (*rec)(p, t)
                        });
                        if let Err(e) = r {
                            failed.store(true, Ordering::SeqCst);
                            first
                                .lock()
                                .unwrap_or_else(|e| e.into_inner())
                                .get_or_insert(e);
                            return;
                        }
                        self.progress
                            .advance(done.fetch_add(1, Ordering::SeqCst) + 1);
                    }
                });
            }
        });
        match first.into_inner().unwrap_or_else(|e| e.into_inner()) {
            Some(e) => Err(e),
            None => Ok(()),
        }
    }

    fn merging(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase != Phase::Merging {
            return Ok(());
        }
        self.timed(Phase::Merging, |run| {
            let mut files = Vec::new();
            if let Some(b) = &m.base {
                files.push(RunFile::open(&run.dirs.runs.join(&b.run))?);
            }
            for r in &m.runsets {
                for f in &r.runs {
                    files.push(RunFile::open(&run.dirs.runs.join(f))?);
                }
            }
            for f in &files {
                if f.partitions() != m.partitions || f.value_width() != 1 {
                    return Err(Error::corrupt(
                        f.path(),
                        "run file of another ingest (partitions or width differ)",
                    ));
                }
            }
            let todo: Vec<u32> = (0..m.partitions)
                .filter(|&p| m.merged[p as usize].is_none())
                .collect();
            run.progress.phase(Phase::Merging, m.partitions as u64);
            let next_tmp = AtomicU64::new(0);
            let dirs: &Dirs = run.dirs;
            let cfg = merge_config(dirs, &run.plan, m, &next_tmp);
            let job =
                |p: u32| merge_partition(&cfg, p, files.iter().map(|f| (f.clone(), p)).collect());
            let work = run.dirs.work.clone();
            let shared = Mutex::new(&mut *m);
            run.per_partition(todo, &job, &mut |p, merged| {
                let mut g = shared.lock().unwrap_or_else(|e| e.into_inner());
                g.merged[p as usize] = Some(merged);
                g.save(&work)?;
                crate::fault::point("merge");
                Ok(())
            })?;
            m.phase = Phase::Joining;
            m.save(&run.dirs.work)?;
            run.temp_bytes += store::dir_bytes(&run.dirs.merged);
            // The merged counts hold everything the count runs held.
            remove_matching(&run.dirs.runs, ".run")
        })
    }

    fn joining(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase != Phase::Joining {
            return Ok(());
        }
        self.timed(Phase::Joining, |run| {
            if m.joined.iter().all(Option::is_some) {
                m.phase = Phase::Building;
                return m.save(&run.dirs.work);
            }
            let merged: Vec<_> = m
                .merged
                .iter()
                .map(|x| {
                    x.clone().ok_or_else(|| {
                        Error::corrupt(
                            Manifest::path(&run.dirs.work),
                            "a partition is missing its merge",
                        )
                    })
                })
                .collect::<Result<_>>()?;
            let mut suffix = Vec::new();
            for x in &merged {
                for f in &x.suffix_runs {
                    suffix.push(RunFile::open(&run.dirs.merged.join(f))?);
                }
            }
            let todo: Vec<u32> = (0..m.partitions)
                .filter(|&p| m.joined[p as usize].is_none())
                .collect();
            run.progress.phase(Phase::Joining, m.partitions as u64);
            let next_tmp = AtomicU64::new(0);
            let dirs: &Dirs = run.dirs;
            let cfg = merge_config(dirs, &run.plan, m, &next_tmp);
            let sst = run.dirs.sst.clone();
            let ranks = Ranks::from_dicts(&dictionaries(m, run.dirs))?;
            let job = |q: u32| -> Result<Joined> {
                let counts = RunFile::open(&run.dirs.merged.join(&merged[q as usize].counts))?;
                join_partition(
                    &cfg,
                    q,
                    &counts,
                    suffix.iter().map(|f| (f.clone(), q)).collect(),
                    &ranks,
                    &sst,
                )
            };
            let work = run.dirs.work.clone();
            let shared = Mutex::new(&mut *m);
            run.per_partition(todo, &job, &mut |q, joined| {
                let mut g = shared.lock().unwrap_or_else(|e| e.into_inner());
                g.joined[q as usize] = Some(joined);
                g.save(&work)?;
                crate::fault::point("join");
                Ok(())
            })?;
            m.phase = Phase::Building;
            m.save(&run.dirs.work)?;
            run.temp_bytes += store::dir_bytes(&run.dirs.sst);
            fsutil::remove_dir(&run.dirs.merged)?;
            fsutil::remove_dir(&run.dirs.tmp)
        })
    }

    fn building(&mut self, m: &mut Manifest) -> Result<()> {
        if m.phase == Phase::Building {
            self.timed(Phase::Building, |run| {
                run.progress.phase(Phase::Building, 1);
                let mut meta = assemble_meta(m, &run.dirs.work)?;
                meta.growth = growth_curve(m, run.dirs, run.plan.fanin)?;
                let mut files: Vec<(String, PathBuf)> = Vec::new();
                files.extend(write_vocab(m, run.dirs, run.plan.fanin)?);
                for j in m.joined.iter().flatten() {
                    for (cf, f) in &j.ssts {
                        files.push((cf.clone(), run.dirs.sst.join(f)));
                    }
                }
                let store = &run.dirs.store;
                let db_new = store.join("db.new");
                crate::fault::full("build").at(&db_new, "create")?;
                build::create_db(
                    &db_new,
                    m.settings.order,
                    &files,
                    &run.dirs.work.join("staging"),
                    &meta,
                )?;
                crate::fault::point("build");
                let db = store::db_dir(store);
                let old = store.join("db.old");
                if db.exists() {
                    fsutil::remove_dir(&old)?;
                    std::fs::rename(&db, &old).at(&db, "rename")?;
                }
                fsutil::rename_durable(&db_new, &db)?;
                fsutil::remove_dir(&old)?;
                m.phase = Phase::Done;
                m.save(&run.dirs.work)?;
                run.progress.advance(1);
                Ok(())
            })?;
        }
        if m.phase == Phase::Done {
            fsutil::remove_dir(&self.dirs.work)?;
            fsutil::sync_dir(&self.dirs.store)?;
        }
        Ok(())
    }
}

fn remove_matching(dir: &Path, suffix: &str) -> Result<()> {
    for e in std::fs::read_dir(dir).at(dir, "read directory")? {
        let e = e.at(dir, "read directory")?;
        if e.file_name().to_string_lossy().ends_with(suffix) {
            std::fs::remove_file(e.path()).at(&e.path(), "remove")?;
        }
    }
    Ok(())
}

/// Every dictionary of the ingest: the spills' and the appended store's.
fn dictionaries(m: &Manifest, d: &Dirs) -> Vec<PathBuf> {
    let mut paths: Vec<PathBuf> = m.runsets.iter().map(|r| d.runs.join(&r.dict)).collect();
    if let Some(b) = &m.base {
        paths.push(d.runs.join(&b.dict));
    }
    paths
}

/// Merges every dictionary into the vocabulary and word-id SSTs (in rounds
/// of at most `fanin` files, to bound the open readers).
fn write_vocab(m: &Manifest, d: &Dirs, fanin: usize) -> Result<Vec<(String, PathBuf)>> {
    let paths = dictionaries(m, d);
    let ranks = Ranks::from_dicts(&paths)?;
    crate::stage::merge_vocabulary(paths, &ranks, &d.tmp, &d.sst, fanin)
}

fn assemble_meta(m: &Manifest, work: &Path) -> Result<StoreMeta> {
    let stats = m
        .joined
        .iter()
        .map(|j| {
            j.as_ref().map(|j| &j.stats).ok_or_else(|| {
                Error::corrupt(Manifest::path(work), "a partition is missing its join")
            })
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(crate::stage::store_meta(m.settings, stats, m.read_totals()))
}

/// The vocabulary growth curve from the spills' first-sighting files, or
/// `None` where one is missing (a manifest or a store from before curves).
fn growth_curve(m: &Manifest, d: &Dirs, fanin: usize) -> Result<Option<store::GrowthCurve>> {
    let before = match &m.base {
        None => None,
        Some(b) => match &b.growth {
            None => return Ok(None),
            Some(g) => Some(growth::curve::Before {
                path: d.runs.join(&g.firsts),
                tokens: g.tokens,
                points: g.curve.points.clone(),
            }),
        },
    };
    let mut spills = Vec::new();
    for r in &m.runsets {
        let Some(f) = &r.firsts else { return Ok(None) };
        spills.push(growth::curve::SpillFirsts {
            path: d.runs.join(f),
            starts: r.covers.iter().map(|s| (s.file, s.start)).collect(),
        });
    }
    fsutil::create_dir(&d.tmp)?;
    let curve = growth::growth_curve(before.as_ref(), &spills, &d.tmp, fanin)?;
    Ok(Some(curve))
}
