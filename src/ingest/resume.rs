//! Resuming an unfinished ingest: the checks that this command is the
//! interrupted one, the repair of damaged work files (the work that made
//! them is forgotten and redone, or an error names the file when it cannot
//! be), and the removal of files the manifest does not name.

use std::path::Path;

use super::manifest::{Manifest, Mode, Phase, RunSet};
use super::options::IngestOptions;
use crate::corpus::InputFile;
use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::growth;
use crate::layout::WorkDirs;
use crate::records::Settings;
use crate::shard::{DictReader, RunFile};

pub(super) fn check_resume(
    m: &Manifest,
    settings: &Settings,
    inputs: &[InputFile],
    opts: &IngestOptions,
) -> Result<()> {
    let hint = "run the same command as the interrupted ingest to resume it, or add --restart to discard it";
    if m.settings.word_list != settings.word_list {
        let say = |w: &Option<crate::records::WordListInfo>| match w {
            Some(w) => format!("a word list of {} words (xxh3 {:016x})", w.words, w.xxh3),
            None => "no word list".to_string(),
        };
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started with {}; this command gives {}: {hint}",
                say(&m.settings.word_list),
                say(&settings.word_list)
            ),
        ));
    }
    if m.settings.from_counts != settings.from_counts {
        let say = |c: bool| if c { "count tables (--counts)" } else { "text" };
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started reading {}; this command reads {}: {hint}",
                say(m.settings.from_counts),
                say(settings.from_counts)
            ),
        ));
    }
    if m.settings.unique != settings.unique {
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started with {}; this command gives {}: {hint}",
                crate::records::Unique::describe(m.settings.unique),
                crate::records::Unique::describe(settings.unique)
            ),
        ));
    }
    if m.settings.document_counts != settings.document_counts {
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started with {}; this command gives {}: {hint}",
                crate::records::Settings::describe_document_counts(m.settings.document_counts),
                crate::records::Settings::describe_document_counts(settings.document_counts)
            ),
        ));
    }
    if m.settings != *settings {
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started with order {}, {}, max line bytes {}; this command asks for order {}, {}, max line bytes {}: {hint}",
                m.settings.order, m.settings.preparation.describe(), m.settings.max_line_bytes,
                settings.order, settings.preparation.describe(), settings.max_line_bytes
            ),
        ));
    }
    if m.format != opts.format {
        return Err(Error::state(
            &opts.store,
            format!(
                "an unfinished ingest here was started reading {}; this command reads {}: {hint}",
                m.format.describe(),
                opts.format.describe()
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

/// Checks the files a resumed manifest names (footers and checksums of the
/// headers; sections are checked again as they are read) and forgets the
/// work whose files are damaged or missing, so that it is redone. Damage
/// that cannot be redone (the inputs of a finished phase are gone) is an
/// error naming the file.
pub(super) fn drop_damaged(m: &mut Manifest, d: &WorkDirs) -> Result<Vec<String>> {
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
pub(super) fn cleanup_orphans(m: &Manifest, d: &WorkDirs) -> Result<()> {
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
