//! Inputs cut into many chunks. Plain files are cut into line-aligned
//! chunks (16 MiB for an ingest, at least 1 MiB in a staged plan) that
//! threads and map tasks read separately; no fixture is that large, so here
//! the test setting `QUERN_CHUNK_BYTES` (DEVELOPERS.md) cuts them into
//! chunks of a few bytes to a few KiB. Source of truth: the independent
//! reference counter (reference.rs), which reads every file whole.

use std::io::Write;
use std::path::{Path, PathBuf};

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_views_eq, checked_json, gutenberg_dir, ingest_args, manifest, run_env, store_view, Run,
};
use crate::reference::{Reference, Settings};

const CHUNK_VAR: &str = "QUERN_CHUNK_BYTES";

/// The spans `(file, start, end)` of a JSON list of chunks or spans.
fn spans_of(v: &Value) -> Vec<(usize, u64, u64)> {
    v.as_array()
        .unwrap_or_else(|| panic!("not a list of spans: {v}"))
        .iter()
        .map(|s| {
            (
                s["file"].as_u64().unwrap() as usize,
                s["start"].as_u64().unwrap(),
                s["end"].as_u64().unwrap(),
            )
        })
        .collect()
}

/// The spans cover each file exactly once, from 0 to its end, and every
/// cut is right after a `\n` of the file (source: the bytes of the file).
fn assert_line_aligned_cover(what: &str, files: &[PathBuf], spans: &[(usize, u64, u64)]) {
    let mut spans = spans.to_vec();
    spans.sort();
    for (i, f) in files.iter().enumerate() {
        let bytes = std::fs::read(f).unwrap();
        let mine: Vec<_> = spans.iter().filter(|s| s.0 == i).collect();
        assert!(!mine.is_empty(), "{what}: {} has no chunk", f.display());
        let mut at = 0u64;
        for s in &mine {
            assert_eq!(s.1, at, "{what}: {}: a gap or overlap at {at}", f.display());
            if s.1 > 0 {
                assert_eq!(
                    bytes[s.1 as usize - 1],
                    b'\n',
                    "{what}: {}: a chunk starts at {} inside a line",
                    f.display(),
                    s.1
                );
            }
            at = s.2;
        }
        assert_eq!(
            at,
            u64::MAX,
            "{what}: {}: the last chunk does not run to the end",
            f.display()
        );
    }
}

fn ingest_env(store: &Path, flags: &[&str], inputs: &[PathBuf], env: &[(&str, &str)]) -> Run {
    run_env(&ingest_args(store, flags, inputs), env)
}

/// Two novels cut into chunks of 4,099 bytes (about 220 chunks, most
/// boundaries inside a line before they are moved to the next line start),
/// counted by 3 threads with a small budget, interrupted and resumed:
/// the reference's counts exactly.
#[test]
fn ingest_of_novels_cut_into_small_chunks_equals_the_reference() {
    let files = vec![
        gutenberg_dir().join("northangerabbey.txt"),
        gutenberg_dir().join("persuasion.txt"),
    ];
    let tmp = tempfile::tempdir().unwrap();
    let store = tmp.path().join("store");
    let flags = [
        "--order",
        "5",
        "--memory",
        "32MiB",
        "--threads",
        "3",
        "--quiet",
    ];
    // Stop after the second recorded spill to read the chunk plan.
    let r = ingest_env(
        &store,
        &flags,
        &files,
        &[
            (CHUNK_VAR, "4099"),
            (KILL_VAR, Point::Committed.at(2).as_str()),
        ],
    );
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    let m = manifest(&store);
    let chunks = spans_of(&m["chunks"]);
    let total: u64 = files.iter().map(|f| f.metadata().unwrap().len()).sum();
    assert!(
        chunks.len() as u64 >= total / 4099 * 9 / 10,
        "{} chunks for {total} bytes",
        chunks.len()
    );
    assert_line_aligned_cover("ingest plan", &files, &chunks);
    // The resume reads the recorded plan (the setting is not given again).
    let r = ingest_env(&store, &flags, &files, &[]);
    r.assert_success();
    let expected = Reference::from_paths(Settings::order(5), &files).view();
    assert_views_eq(
        "two novels in 4,099-byte chunks, 3 threads",
        &expected,
        &store_view(&store),
    );
}

/// A small file of awkward lines (CRLF, blank and whitespace-only lines,
/// invalid UTF-8, literal markers, lines longer than `--max-line-bytes`, no
/// final newline) cut into one chunk per line (`QUERN_CHUNK_BYTES=1`) and
/// into 7-byte chunks, beside a gzip copy (always one chunk): the
/// reference's counts, skipped lines and invalid lines exactly.
#[test]
fn awkward_lines_one_chunk_per_line_equal_the_reference() {
    let tmp = tempfile::tempdir().unwrap();
    let plain = tmp.path().join("awkward.txt");
    let mut text: Vec<u8> = Vec::new();
    let mut x: u64 = 11;
    for i in 0..300u64 {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        match i % 9 {
            0 => text.extend_from_slice(b"the ferry left at dawn\r\n"),
            1 => text.extend_from_slice(b"\n"),
            2 => text.extend_from_slice(b"   \t \r\n"),
            3 => text.extend_from_slice(b"caf\xff \xfe bad <s> bytes </s>\n"),
            4 => {
                // Longer than the 64-byte limit: skipped wherever it falls.
                for k in 0..(20 + x % 30) {
                    write!(text, "w{} ", (x >> (k % 40)) % 13).unwrap();
                }
                text.push(b'\n');
            }
            _ => {
                for k in 0..(1 + x % 8) {
                    write!(text, "w{} ", (x >> (3 * k)) % 13).unwrap();
                }
                text.extend_from_slice(b"<unk>\n");
            }
        }
    }
    text.extend_from_slice(b"last line without a newline");
    std::fs::write(&plain, &text).unwrap();
    let gz = tmp.path().join("copy.txt.gz");
    let mut enc = flate2::write::GzEncoder::new(Vec::new(), flate2::Compression::default());
    enc.write_all(&text).unwrap();
    std::fs::write(&gz, enc.finish().unwrap()).unwrap();
    let files = vec![plain.clone(), gz];
    let settings = Settings::order(4).max_line_bytes(64);
    let expected = Reference::from_paths(settings, &files).view();
    assert!(
        expected.stats["totals"]["skipped_lines"].as_u64().unwrap() > 20,
        "the fixture has no over-long lines: {}",
        expected.stats["totals"]
    );
    for chunk in ["1", "7"] {
        let store = tmp.path().join(format!("store-{chunk}"));
        let flags = [
            "--order",
            "4",
            "--max-line-bytes",
            "64",
            "--threads",
            "3",
            "--memory",
            "64MiB",
            "--quiet",
        ];
        // Stopped after its first spill to read the plan, then resumed.
        let r = ingest_env(
            &store,
            &flags,
            &files,
            &[
                (CHUNK_VAR, chunk),
                (KILL_VAR, Point::Committed.at(1).as_str()),
            ],
        );
        assert_eq!(r.signal(), Some(9), "{}", r.describe());
        let m = manifest(&store);
        let chunks = spans_of(&m["chunks"]);
        let plain_chunks: Vec<_> = chunks.iter().filter(|c| c.0 == 0).copied().collect();
        let lines = text.split(|&b| b == b'\n').count();
        if chunk == "1" {
            // Every line is a chunk of its own.
            assert_eq!(plain_chunks.len(), lines, "QUERN_CHUNK_BYTES=1");
        } else {
            assert!(plain_chunks.len() > lines / 3, "{}", plain_chunks.len());
        }
        assert_eq!(
            chunks.iter().filter(|c| c.0 == 1).count(),
            1,
            "a gzip file is one chunk"
        );
        assert_line_aligned_cover(
            &format!("QUERN_CHUNK_BYTES={chunk}"),
            &files[..1],
            &plain_chunks,
        );
        ingest_env(&store, &flags, &files, &[(CHUNK_VAR, chunk)]).assert_success();
        assert_views_eq(
            &format!("awkward lines, QUERN_CHUNK_BYTES={chunk}"),
            &expected,
            &store_view(&store),
        );
    }
    // A setting that is not a size is refused, naming the variable.
    let r = ingest_env(
        &tmp.path().join("bad"),
        &["--quiet"],
        &files,
        &[(CHUNK_VAR, "0")],
    );
    r.assert_failure();
    assert!(r.stderr.contains(CHUNK_VAR), "{}", r.describe());
}

/// The same two novels through `quern stage` (plan, map with 3 threads,
/// merge, join, assemble), planned with chunks of 4,099 bytes packed into
/// 3 map tasks: each task reads about 70 scattered chunks. The reference's
/// counts exactly.
#[test]
fn stage_tasks_over_small_chunks_equal_the_reference() {
    let files = vec![
        gutenberg_dir().join("northangerabbey.txt"),
        gutenberg_dir().join("persuasion.txt"),
    ];
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("shared");
    let store = tmp.path().join("store");
    let d = dir.display().to_string();
    let env = [(CHUNK_VAR, "4099")];
    let stage = |args: &[&str]| -> Value {
        let mut a = vec!["stage"];
        a.extend_from_slice(args);
        let r = run_env(&a, &env);
        r.assert_success();
        serde_json::from_str(r.stdout.trim()).unwrap_or_else(|e| panic!("{e}: {}", r.stdout))
    };
    let mut plan = vec![
        "plan",
        "--dir",
        &d,
        "--order",
        "5",
        "--partitions",
        "4",
        "--map-tasks",
        "3",
    ];
    let names: Vec<String> = files.iter().map(|f| f.display().to_string()).collect();
    plan.extend(names.iter().map(String::as_str));
    let p = stage(&plan);
    assert_eq!(p["map_tasks"], 3, "{p}");
    let job = checked_json(&dir.join("job.json"));
    let tasks = job["map_tasks"].as_array().unwrap();
    let mut all = Vec::new();
    for t in tasks {
        let spans = spans_of(t);
        assert!(spans.len() > 50, "a map task of {} spans", spans.len());
        all.extend(spans);
    }
    assert_line_aligned_cover("stage plan", &files, &all);
    for t in 0..3 {
        let t = t.to_string();
        stage(&[
            "map",
            "--dir",
            &d,
            "--task",
            &t,
            "--threads",
            "3",
            "--memory",
            "32MiB",
        ]);
    }
    for st in ["merge", "join"] {
        for q in 0..4 {
            let q = q.to_string();
            stage(&[st, "--dir", &d, "--partition", &q, "--memory", "32MiB"]);
        }
    }
    let s = store.display().to_string();
    stage(&["assemble", "--dir", &d, "--store", &s]);
    let expected = Reference::from_paths(Settings::order(5), &files).view();
    assert_views_eq(
        "stage tasks over 4,099-byte chunks",
        &expected,
        &store_view(&store),
    );
}
