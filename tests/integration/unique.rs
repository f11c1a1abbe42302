//! `ingest --unique lines|documents` against a Python set of prepared token
//! sequences (tests/integration/unique_check.py, standard library, reading
//! text as scripts/reference_ngrams.py does): the store of a `--unique`
//! ingest equals the plain ingest of the first occurrences the reference
//! kept (dump, dump --contexts, stats, growth curve included, so that a
//! later occurrence kept in place of the first is seen), and its duplicate
//! totals equal the reference's. On the Gutenberg texts and on files made
//! from them with repeated lines and documents; across many chunks and
//! threads, across kills and resumes, and across `--append`.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    assert_views_eq, gutenberg_dir, ingest_args, manifest, manifest_dir, python3, run, run_env,
    store_view, StoreView,
};

/// Many small chunks (so that duplicates cross chunks and threads).
const CHUNKS: (&str, &str) = ("QUERN_CHUNK_BYTES", "60000");

/// The reference's first occurrences of `inputs` (written to `out`) and
/// its counts of units, duplicates and duplicate tokens.
fn reference(unit: &str, jsonl: bool, lowercase: bool, inputs: &[PathBuf], out: &Path) -> Value {
    let mut c = Command::new(python3());
    c.current_dir(manifest_dir())
        .arg("tests/integration/unique_check.py")
        .args(["--unit", unit]);
    if jsonl {
        c.arg("--jsonl");
    }
    if lowercase {
        c.arg("--lowercase");
    }
    let o = c.arg(out).args(inputs).output().expect("run python3");
    assert!(
        o.status.success(),
        "unique_check.py failed: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    serde_json::from_slice(&o.stdout).expect("unique_check.py prints JSON")
}

fn ingest(store: &Path, flags: &[&str], inputs: &[PathBuf], env: &[(&str, &str)]) {
    run_env(&ingest_args(store, flags, inputs), env).assert_success();
}

/// The store's view without what only `--unique` reports (its setting
/// and its duplicate totals, which are given back), to compare with the
/// plain ingest of the first occurrences.
fn view_and_duplicates(store: &Path) -> (StoreView, Value) {
    let mut v = store_view(store);
    let settings = v.stats["settings"].as_object_mut().unwrap();
    assert!(
        settings.remove("unique").is_some(),
        "stats: no settings.unique"
    );
    let totals = v.stats["totals"].as_object_mut().unwrap();
    let dups = totals
        .remove("duplicates")
        .expect("stats: no totals.duplicates");
    // The reference's first occurrences are plain text: no bad lines.
    totals.remove("bad_lines");
    (v, dups)
}

/// Checks `store` (a `--unique` store with `flags`) against the reference
/// over `inputs`.
fn check(store: &Path, unit: &str, jsonl: bool, flags: &[&str], inputs: &[PathBuf], what: &str) {
    let tmp = tempfile::tempdir().unwrap();
    let kept = tmp.path().join("kept.txt");
    let lowercase = flags.contains(&"--lowercase");
    let want = reference(unit, jsonl, lowercase, inputs, &kept);
    // Source: the reference's first occurrences, counted by a plain ingest
    // (whose counts gutenberg.rs and python_check.rs check against the
    // reference counters).
    let plain = tmp.path().join("plain");
    let plain_flags: Vec<&str> = flags
        .iter()
        .copied()
        .filter(|f| !["--jsonl", "--unique", "lines", "documents"].contains(f))
        .collect();
    ingest(&plain, &plain_flags, &[kept], &[]);
    let (got, dups) = view_and_duplicates(store);
    assert_views_eq(what, &store_view(&plain), &got);
    // Source: the reference's Python set.
    assert_eq!(dups["units"], want["duplicates"], "{what}: duplicates");
    assert_eq!(
        dups["tokens"], want["duplicate_tokens"],
        "{what}: duplicate tokens"
    );
    assert!(
        want["duplicates"].as_u64().unwrap() > 0,
        "{what}: the input holds no duplicates, so nothing was checked"
    );
}

pub(crate) fn novel(name: &str) -> PathBuf {
    gutenberg_dir().join(name)
}

/// A file of repeated lines made from a novel: its first 3000 lines, then
/// each of them again in another case, with other spaces, and in another
/// order, blank lines among them; then lines 3000..6000.
pub(crate) fn repeated_lines(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(novel("persuasion.txt")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let mut out = String::new();
    for l in &lines[..3000] {
        out.push_str(l);
        out.push('\n');
    }
    for (i, l) in lines[..3000].iter().enumerate().rev() {
        let l = match i % 3 {
            0 => l.to_uppercase(),
            1 => l.split_whitespace().collect::<Vec<_>>().join("  \t "),
            _ => l.to_string(),
        };
        out.push_str(&l);
        out.push_str(if i % 7 == 0 { "\n\n" } else { "\n" });
    }
    for l in &lines[3000..6000] {
        out.push_str(l);
        out.push('\n');
    }
    let p = dir.join("repeated.txt");
    std::fs::write(&p, out).unwrap();
    p
}

/// A JSON-lines file of documents made from a novel's paragraphs (their
/// lines as sentences): every paragraph, then every third again, then
/// every fifth with its lines in reverse order (a new document of old
/// sentences), every fourth's first line before another paragraph, and
/// every fourth's words in two sentences cut elsewhere; and a line that
/// holds no document.
pub(crate) fn repeated_documents(dir: &Path) -> PathBuf {
    let text = std::fs::read_to_string(novel("northangerabbey.txt")).unwrap();
    let paras: Vec<&str> = text
        .split("\n\n")
        .map(str::trim)
        .filter(|p| !p.is_empty())
        .collect();
    let doc = |t: &str| serde_json::json!({ "text": t }).to_string() + "\n";
    let mut out = String::new();
    for p in &paras {
        out.push_str(&doc(p));
    }
    out.push_str("not a document\n");
    for p in paras.iter().step_by(3) {
        out.push_str(&doc(p));
    }
    for p in paras.iter().step_by(5) {
        let rev: Vec<&str> = p.lines().rev().collect();
        out.push_str(&doc(&rev.join("\n")));
    }
    // New documents that begin like old ones: the same first line then
    // another paragraph's; the same words with the sentence breaks moved.
    for (i, p) in paras.iter().enumerate().step_by(4) {
        let first = p.lines().next().unwrap_or("");
        let other = paras[(i + 1) % paras.len()];
        out.push_str(&doc(&format!("{first}\n{other}")));
        let words: Vec<&str> = p.split_whitespace().collect();
        let (a, b) = words.split_at(words.len() / 2);
        out.push_str(&doc(&format!("{}\n{}", a.join(" "), b.join(" "))));
    }
    let p = dir.join("documents.jsonl");
    std::fs::write(&p, out).unwrap();
    p
}

const FLAGS: &[&str] = &["--order", "3", "--memory", "24MiB", "--threads", "3", "-q"];

fn with<'a>(base: &[&'a str], more: &[&'a str]) -> Vec<&'a str> {
    base.iter().chain(more).copied().collect()
}

/// Lines: a file of repeated lines and two novels (one the source of the
/// repeats), lowercased, in many chunks on three threads.
#[test]
fn unique_lines_equal_the_first_occurrences() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![
        repeated_lines(tmp.path()),
        novel("persuasion.txt"),
        novel("emma.txt"),
    ];
    let flags = with(FLAGS, &["--lowercase", "--unique", "lines"]);
    let store = tmp.path().join("store");
    ingest(&store, &flags, &inputs, &[CHUNKS]);
    check(&store, "lines", false, &flags, &inputs, "--unique lines");
}

/// Documents and sentences of JSON-lines documents: the two units drop
/// different things (a document of old sentences in a new order is new).
#[test]
fn unique_documents_and_their_lines_equal_the_first_occurrences() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![repeated_documents(tmp.path())];
    for unit in ["documents", "lines"] {
        let flags = with(FLAGS, &["--jsonl", "--unique", unit]);
        let store = tmp.path().join(unit);
        ingest(&store, &flags, &inputs, &[CHUNKS]);
        check(
            &store,
            unit,
            true,
            &flags,
            &inputs,
            &format!("--jsonl --unique {unit}"),
        );
    }
}

/// Killed while hashing, right after marking, and while counting (order 5
/// in 16 MiB: spills in the middle of chunks, so that the resumed counting
/// starts inside one), then resumed: the same store as the reference's.
#[test]
fn unique_survives_a_kill_and_resume() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![repeated_lines(tmp.path()), novel("persuasion.txt")];
    let flags = [
        "--order",
        "5",
        "--memory",
        "16MiB",
        "--threads",
        "2",
        "-q",
        "--unique",
        "lines",
    ];
    for (point, n) in [
        (Point::Hashed, 1),
        (Point::Marked, 1),
        (Point::Committed, 3),
    ] {
        let store = tmp.path().join(format!("store-{}", point.name()));
        let args = ingest_args(&store, &flags, &inputs);
        let killed = run_env(&args, &[(KILL_VAR, &point.at(n))]);
        assert_eq!(killed.signal(), Some(9), "{}", killed.describe());
        if point == Point::Committed {
            // The resumed counting starts inside a chunk: a spill's cover
            // ends where no chunk does.
            let m = manifest(&store);
            let ends: Vec<&Value> = m["chunks"]
                .as_array()
                .unwrap()
                .iter()
                .map(|c| &c["end"])
                .collect();
            let inside = m["runsets"].as_array().unwrap().iter().any(|r| {
                r["covers"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .any(|c| !ends.contains(&&c["end"]))
            });
            assert!(inside, "no spill ended inside a chunk: {m}");
        }
        ingest(&store, &flags, &inputs, &[]);
        check(
            &store,
            "lines",
            false,
            &flags,
            &inputs,
            &format!("killed at {}", point.at(n)),
        );
    }
}

/// `--append` of a file that repeats lines of the store's first input: a
/// line counted before is a duplicate; also when the append is killed
/// after its marking and resumed. Another `--unique` is refused, naming
/// both.
#[test]
fn unique_append_knows_the_lines_counted_before() {
    let tmp = tempfile::tempdir().unwrap();
    let first = repeated_lines(tmp.path());
    let text = std::fs::read_to_string(novel("persuasion.txt")).unwrap();
    let second = tmp.path().join("second.txt");
    // Lines 2000..5000: a third counted before, in the first input.
    let part: Vec<&str> = text.lines().skip(2000).take(3000).collect();
    std::fs::write(&second, part.join("\n") + "\n").unwrap();
    let flags = with(FLAGS, &["--unique", "lines"]);
    for kill in [None, Some(Point::Marked.at(1))] {
        let store = tmp.path().join(format!("store-{}", kill.is_some()));
        ingest(&store, &flags, std::slice::from_ref(&first), &[CHUNKS]);
        let append = with(&flags, &["--append"]);
        if let Some(k) = &kill {
            let args = ingest_args(&store, &append, std::slice::from_ref(&second));
            let r = run_env(&args, &[CHUNKS, (KILL_VAR, k)]);
            assert_eq!(r.signal(), Some(9), "{}", r.describe());
        }
        ingest(&store, &append, std::slice::from_ref(&second), &[CHUNKS]);
        let both = vec![first.clone(), second.clone()];
        check(
            &store,
            "lines",
            false,
            &flags,
            &both,
            &format!("--append (kill {kill:?})"),
        );
    }
    // Refusals: the message names both settings.
    let store = tmp.path().join("store-false");
    for (other, says) in [
        (vec!["--append"], "no --unique"),
        (
            vec!["--append", "--unique", "documents"],
            "--unique documents",
        ),
    ] {
        let r = run(&ingest_args(
            &store,
            &with(FLAGS, &other),
            std::slice::from_ref(&second),
        ));
        r.assert_failure();
        assert!(
            r.stderr.contains("--unique lines") && r.stderr.contains(says),
            "{}",
            r.describe()
        );
    }
}

/// A resume with another `--unique` is refused, naming both.
#[test]
fn unique_resume_with_another_setting_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = vec![novel("persuasion.txt")];
    let store = tmp.path().join("store");
    let flags = with(FLAGS, &["--unique", "documents"]);
    let args = ingest_args(&store, &flags, &inputs);
    let r = run_env(&args, &[CHUNKS, (KILL_VAR, &Point::Hashed.at(1))]);
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    let r = run(&ingest_args(
        &store,
        &with(FLAGS, &["--unique", "lines"]),
        &inputs,
    ));
    r.assert_failure();
    assert!(
        r.stderr.contains("--unique documents") && r.stderr.contains("--unique lines"),
        "{}",
        r.describe()
    );
}

/// An input that changed after the hashing read it (it grew at its end,
/// which a plain resume would accept and count on): the resume is
/// refused, naming the input, since its new lines were never hashed.
#[test]
fn unique_resume_after_an_input_changed_is_refused() {
    let tmp = tempfile::tempdir().unwrap();
    let input = tmp.path().join("one.txt");
    std::fs::copy(novel("persuasion.txt"), &input).unwrap();
    let inputs = vec![input.clone()];
    let store = tmp.path().join("store");
    let flags = with(FLAGS, &["--unique", "lines"]);
    let args = ingest_args(&store, &flags, &inputs);
    let r = run_env(&args, &[(KILL_VAR, &Point::Marked.at(1))]);
    assert_eq!(r.signal(), Some(9), "{}", r.describe());
    let mut text = std::fs::read_to_string(&input).unwrap();
    text.push_str("A line added after the hashing.\n");
    std::fs::write(&input, text).unwrap();
    let r = run(&args);
    r.assert_failure();
    assert!(
        r.stderr.contains("one.txt") && r.stderr.contains("--unique"),
        "{}",
        r.describe()
    );
}
