//! Frequency lists (`quern top`) and pattern results (`quern ngrams
//! --pattern`) against plain Python over the same text
//! (tests/integration/corpus_check.py: collections.Counter over the
//! sentences as scripts/reference_ngrams.py reads them), on the Gutenberg
//! texts; and the helpers the other corpus tests share.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use crate::common::{gutenberg_files, ingest_ok, manifest_dir, python3, run_ok};

/// Runs tests/integration/corpus_check.py with `args`; its JSON lines.
pub fn python_json(args: &[String]) -> Vec<Value> {
    let out = Command::new(python3())
        .arg(manifest_dir().join("tests/integration/corpus_check.py"))
        .args(args)
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "corpus_check.py {args:?} failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    json_lines(&String::from_utf8(out.stdout).unwrap())
}

/// `python3` with SciPy, which the statistics' G² is checked against.
/// Panics with the remedy when SciPy is missing: never skipped quietly.
pub fn require_scipy() {
    let ok = Command::new(python3())
        .args(["-c", "import scipy.stats"])
        .output()
        .is_ok_and(|o| o.status.success());
    assert!(
        ok,
        "SciPy is not installed for python3: run scripts/setup (G² is checked against \
         scipy.stats.power_divergence)"
    );
}

/// One JSON value a line.
pub fn json_lines(s: &str) -> Vec<Value> {
    s.lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("{e}: {l}")))
        .collect()
}

/// `quern ARGS` that must succeed; its JSON lines.
pub fn quern_json(args: &[String]) -> Vec<Value> {
    json_lines(&run_ok(args).stdout)
}

/// `a` and `b` equal within a relative 1e-9 (f64 sums in another order).
pub fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
}

pub fn s(x: &str) -> String {
    x.to_string()
}

/// `paths` as arguments.
pub fn path_args(paths: &[PathBuf]) -> Vec<String> {
    paths.iter().map(|p| p.display().to_string()).collect()
}

/// A store of `files` at order 3 (lowercased when `lowercase`).
pub fn store_of(dir: &Path, files: &[PathBuf], lowercase: bool) -> PathBuf {
    let store = dir.join(if lowercase { "lower" } else { "cased" });
    let mut extra = vec!["--order", "3"];
    if lowercase {
        extra.push("--lowercase");
    }
    ingest_ok(&store, &extra, files);
    store
}

/// The two lists agree item by item: rank, n-gram, count, per_million.
fn assert_same_list(what: &str, python: &[Value], quern: &[Value]) {
    assert_eq!(python.len(), quern.len(), "{what}: list lengths");
    for (p, q) in python.iter().zip(quern) {
        for f in ["rank", "ngram", "count"] {
            assert_eq!(p[f], q[f], "{what}: field {f} of {q}");
        }
        let (pm, qm) = (p["per_million"].as_f64(), q["per_million"].as_f64());
        assert!(
            close(pm.unwrap(), qm.unwrap()),
            "{what}: per_million {p} vs {q}"
        );
        assert!(
            q.get("documents").is_none(),
            "no store records documents yet"
        );
    }
}

#[test]
fn frequency_lists_equal_python_on_gutenberg() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    for lowercase in [false, true] {
        let store = store_of(tmp.path(), &files, lowercase);
        for (order, limit) in [(1, 300), (2, 200), (3, 150)] {
            let mut py = vec![s("top"), s("--order"), order.to_string()];
            py.extend([s("--limit"), limit.to_string()]);
            if lowercase {
                py.push(s("--lowercase"));
            }
            py.extend(path_args(&files));
            let python = python_json(&py);
            let q = quern_json(&[
                s("top"),
                s("--store"),
                store.display().to_string(),
                s("--order"),
                order.to_string(),
                s("--limit"),
                limit.to_string(),
                s("--json"),
            ]);
            // Source: Python's collections.Counter, sorted by (-count, text).
            assert_same_list(
                &format!("top order {order}, lowercase {lowercase}"),
                &python,
                &q,
            );
        }
    }
}

#[test]
fn min_count_and_formats_of_top() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(1);
    let store = store_of(tmp.path(), &files, false);
    let st = store.display().to_string();
    let mut py = vec![s("top"), s("--order"), s("2")];
    py.extend(path_args(&files));
    // Source: Python's Counter; every bigram seen at least 40 times.
    let want: Vec<Value> = python_json(&py)
        .into_iter()
        .filter(|v| v["count"].as_u64().unwrap() >= 40)
        .collect();
    let q = quern_json(&[
        s("top"),
        s("--store"),
        st.clone(),
        s("--order"),
        s("2"),
        s("--min-count"),
        s("40"),
        s("--limit"),
        s("100000"),
        s("--json"),
    ]);
    assert_same_list("top --min-count 40", &want, &q);
    let tsv = run_ok(&["top", "--store", &st, "--limit", "3"]).stdout;
    let csv = run_ok(&["top", "--store", &st, "--limit", "3", "--csv"]).stdout;
    assert_eq!(tsv.lines().next(), Some("rank\tngram\tcount\tper_million"));
    assert_eq!(csv.lines().next(), Some("rank,ngram,count,per_million"));
    assert_eq!(tsv.lines().count(), 4);
    assert_eq!(
        tsv.replace('\t', ","),
        csv,
        "CSV is the TSV with commas here"
    );
}

#[test]
fn patterns_equal_python_on_gutenberg() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    let store = store_of(tmp.path(), &files, true);
    // A fixed lead (prefix scan), a leading wildcard (scan of the order),
    // two wildcards, a sentence opening, a word absent from the text.
    for pattern in ["the * of", "* of the", "in * *", "<s> she *", "* zyzzyva"] {
        let mut py = vec![s("pattern"), s("--pattern"), s(pattern), s("--lowercase")];
        py.extend([s("--limit"), s("250")]);
        py.extend(path_args(&files));
        let python = python_json(&py);
        let q = quern_json(&[
            s("ngrams"),
            s("--store"),
            store.display().to_string(),
            s("--pattern"),
            s(pattern),
            s("--limit"),
            s("250"),
            s("--json"),
        ]);
        // Source: Python's Counter over the padded sentences, `*` any word
        // but <s> and </s>.
        assert_same_list(&format!("pattern {pattern:?}"), &python, &q);
        if pattern != "* zyzzyva" {
            assert!(!q.is_empty(), "pattern {pattern:?} found nothing");
        }
    }
}
