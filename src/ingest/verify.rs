//! On resume: are the inputs still the ones already counted?
//!
//! Every counted range carries a line checksum ([`CoverDigest`]). A resume
//! in the counting phase reads each counted range again and compares, which
//! costs a read of the counted input (far less than counting it again) and
//! catches edits that keep a file's size and modification time. A file
//! whose size or modification time changed is accepted only if it is one
//! chunk (compressed, or small) and every range counted from it is
//! unchanged: that is a truncated file replaced by a complete copy, or a
//! file that grew at its end; its remainder is then counted. Anything else
//! is an error naming the file, because counts would mix two versions.
//!
//! [`CoverDigest`]: crate::corpus::CoverDigest

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use super::manifest::{Manifest, Phase};
use crate::corpus::{digest_range, InputFile};
use crate::error::{Error, Result};

/// Checks `found` (the inputs as they are now, same paths as the manifest's)
/// against what `m` counted; updates the manifest's record of a changed file
/// it accepts, and returns a note for each.
pub fn verify_inputs(m: &mut Manifest, found: &[InputFile], threads: usize) -> Result<Vec<String>> {
    let changed: Vec<usize> = (0..found.len())
        .filter(|&i| m.inputs[i].size != found[i].size || m.inputs[i].mtime_ns != found[i].mtime_ns)
        .collect();
    let refuse = |i: usize, why: &str| {
        Error::Input {
        path: found[i].path.clone(),
        detail: format!(
            "this input changed since the unfinished ingest read it (size {} → {}{}); {why}, so counts would mix two versions: add --restart",
            m.inputs[i].size,
            found[i].size,
            if m.inputs[i].mtime_ns != found[i].mtime_ns { ", modification time changed" } else { "" },
        ),
    }
    };
    // Under --unique the hashing read every input whole before counting.
    if m.phase != Phase::Counting || m.settings.unique.is_some() {
        if let Some(&i) = changed.first() {
            let why = match m.phase {
                Phase::Hashing | Phase::Counting => "its units were hashed for --unique",
                _ => "counting is finished",
            };
            return Err(refuse(i, why));
        }
        if m.phase != Phase::Counting {
            return Ok(vec![]);
        }
    }
    for &i in &changed {
        if m.chunks.iter().filter(|c| c.file as usize == i).count() > 1 {
            return Err(refuse(i, "it was cut into several chunks at planning"));
        }
    }
    // Every counted range that has a checksum, read again in parallel.
    let jobs: Vec<(usize, u64, u64, u64)> = m
        .runsets
        .iter()
        .filter(|r| r.hashes.len() == r.covers.len())
        .flat_map(|r| r.covers.iter().zip(&r.hashes))
        .filter(|(s, _)| s.end > s.start)
        .map(|(s, &h)| (s.file as usize, s.start, s.end, h))
        .collect();
    let next = AtomicUsize::new(0);
    let failure: Mutex<Option<Error>> = Mutex::new(None);
    let max_line = m.settings.max_line_bytes;
    std::thread::scope(|scope| {
        for _ in 0..threads.max(1) {
            scope.spawn(|| loop {
                let j = next.fetch_add(1, Ordering::Relaxed);
                if j >= jobs.len() || failure.lock().map(|f| f.is_some()).unwrap_or(true) {
                    return;
                }
                let (file, start, end, want) = jobs[j];
                let bad = match digest_range(&found[file], start, end, max_line) {
                    Ok(got) if got == want => None,
                    Ok(_) => Some(Error::Input {
                        path: found[file].path.clone(),
                        detail: format!(
                            "the bytes {start}..{} counted before have changed since (their line checksum differs), so counts would mix two versions: add --restart",
                            if end == u64::MAX { "end".to_string() } else { end.to_string() }
                        ),
                    }),
                    Err(e) => Some(e),
                };
                if let Some(e) = bad {
                    let mut f = failure.lock().unwrap_or_else(|p| p.into_inner());
                    f.get_or_insert(e);
                    return;
                }
            });
        }
    });
    if let Some(e) = failure.into_inner().unwrap_or_else(|p| p.into_inner()) {
        return Err(e);
    }
    let mut notes = Vec::new();
    for i in changed {
        let counted = m
            .runsets
            .iter()
            .flat_map(|r| &r.covers)
            .filter(|s| s.file as usize == i)
            .map(|s| s.end)
            .max()
            .unwrap_or(0);
        notes.push(format!(
            "{} changed (size {} → {}) after the part already counted, which is unchanged; counting goes on from byte {counted} of it",
            found[i].path.display(),
            m.inputs[i].size,
            found[i].size
        ));
        m.inputs[i] = found[i].clone();
    }
    Ok(notes)
}
