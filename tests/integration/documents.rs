//! `ingest --document-counts`: each n-gram's number of documents, checked
//! against tests/integration/documents_check.py (a plain count of the
//! same text with Python's collections.Counter and a set of n-grams per
//! document, standard library only) on the Gutenberg texts, as input lines
//! and as JSON-lines documents of many lines; exact across a kill and a
//! resume, `--append` and `quern stage`; shown by `top` and `ngrams
//! --pattern` with `--min-documents`.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

use quern::fault::{Point, KILL_VAR};

use crate::common::{
    gutenberg_dir, ingest_args, ingest_ok, manifest_dir, python3, run, run_env, run_ok, stats_json,
};
use crate::stage::{assert_raw_eq, plan_with, raw_view, run_all};

/// An n-gram's count and documents.
type Counted = BTreeMap<String, (u64, u64)>;

fn novel(name: &str) -> PathBuf {
    gutenberg_dir().join(name)
}

/// documents_check.py's n-grams and its number of documents with a
/// sentence.
fn python_counts(order: usize, jsonl: bool, files: &[PathBuf]) -> (Counted, u64) {
    let mut cmd = Command::new(python3());
    cmd.arg(manifest_dir().join("tests/integration/documents_check.py"))
        .args(["--order", &order.to_string()]);
    if jsonl {
        cmd.arg("--jsonl");
    }
    let out = cmd.args(files).output().expect("run python3");
    assert!(
        out.status.success(),
        "documents_check.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut m = Counted::new();
    let mut docs = None;
    for line in String::from_utf8(out.stdout).unwrap().lines() {
        let f: Vec<&str> = line.split('\t').collect();
        if f[0] == "#documents" {
            docs = Some(f[1].parse().unwrap());
            continue;
        }
        m.insert(
            f[0].to_string(),
            (f[1].parse().unwrap(), f[2].parse().unwrap()),
        );
    }
    (m, docs.expect("a #documents line"))
}

/// `quern dump`'s n-grams with their count and documents (its fourth
/// column, under the header it names).
fn quern_counts(store: &Path) -> Counted {
    let out = run_ok(&["dump", "--store", &store.display().to_string()]).stdout;
    let mut lines = out.lines();
    assert_eq!(lines.next(), Some("ngram\tcount\tcontinuation\tdocuments"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split('\t').collect();
            assert_eq!(f.len(), 4, "{l:?}");
            (
                f[0].to_string(),
                (f[1].parse().unwrap(), f[3].parse().unwrap()),
            )
        })
        .collect()
}

/// Asserts two maps equal, naming the first n-gram that differs.
fn assert_counted_eq(what: &str, python: &Counted, quern: &Counted) {
    if python == quern {
        return;
    }
    let diff = python
        .iter()
        .find(|(g, v)| quern.get(*g) != Some(v))
        .map(|(g, v)| format!("{g:?}: python {v:?}, quern {:?}", quern.get(g)))
        .or_else(|| {
            quern
                .keys()
                .find(|g| !python.contains_key(*g))
                .map(|g| format!("{g:?} only in quern"))
        });
    panic!(
        "{what}: {} n-grams in python, {} in quern; first difference {diff:?}",
        python.len(),
        quern.len()
    );
}

/// A novel's paragraphs (lines up to a blank line) as JSON-lines
/// documents, their lines kept; then the whole novel `whole` as one more
/// document of thousands of lines.
fn paragraphs_jsonl(dir: &Path, name: &str, whole: Option<&str>) -> PathBuf {
    let text = std::fs::read_to_string(novel(name)).unwrap();
    let mut out = String::new();
    for (i, para) in text.split("\n\n").enumerate() {
        let v = serde_json::json!({"id": i, "text": para});
        out.push_str(&v.to_string());
        out.push('\n');
    }
    if let Some(w) = whole {
        let all = std::fs::read_to_string(novel(w)).unwrap();
        out.push_str(&serde_json::json!({"id": "all", "text": all}).to_string());
        out.push('\n');
    }
    let p = dir.join(format!("{name}.jsonl"));
    std::fs::write(&p, out).unwrap();
    p
}

fn summary(store: &Path, flags: &[&str], inputs: &[PathBuf]) -> Value {
    let mut f = flags.to_vec();
    f.push("--json");
    let r = ingest_ok(store, &f, inputs);
    serde_json::from_str(&r.stdout).unwrap()
}

/// Input lines as documents (persuasion, order 4) and JSON-lines documents
/// of many lines (northanger abbey's paragraphs and all of emma as one
/// document, order 5, in a 16 MiB budget): every n-gram's count and
/// documents equal Python's, and the documents total is the number with
/// a sentence (and `<s>`'s documents). The budget is too small for emma's
/// distinct 5-grams, so its one document is written out in several runs:
/// the sums of a document split between runs add up in the merge. The
/// lists with `--min-documents` are checked on the first store.
#[test]
fn document_counts_equal_python_on_gutenberg() {
    let tmp = tempfile::tempdir().unwrap();
    let lines = vec![novel("persuasion.txt")];
    let store = tmp.path().join("lines");
    summary(&store, &["--order", "4", "-q", "--document-counts"], &lines);
    let (py, docs) = python_counts(4, false, &lines);
    assert_counted_eq("lines as documents", &py, &quern_counts(&store));
    assert_eq!(stats_json(&store)["totals"]["documents"], docs);
    assert_eq!(py["<s>"].1, docs);
    // Nothing else changes: the same contexts, and the same model frozen.
    let plain = tmp.path().join("plain");
    ingest_ok(&plain, &["--order", "4", "-q"], &lines);
    let contexts =
        |s: &Path| run_ok(&["dump", "--store", &s.display().to_string(), "--contexts"]).stdout;
    assert_eq!(contexts(&store), contexts(&plain));
    let model = |s: &Path| {
        let out = s.with_extension("qm");
        run_ok(&[
            "freeze",
            "--store",
            &s.display().to_string(),
            "--out",
            &out.display().to_string(),
        ]);
        std::fs::read(out).unwrap()
    };
    assert!(model(&store) == model(&plain), "the frozen models differ");
    lists_filter_on_documents(&store, &plain, &py);

    let jsonl = vec![paragraphs_jsonl(
        tmp.path(),
        "northangerabbey.txt",
        Some("emma.txt"),
    )];
    let store = tmp.path().join("jsonl");
    let flags = [
        "--order",
        "5",
        "-q",
        "--document-counts",
        "--jsonl",
        "--memory",
        "16MiB",
        "--threads",
        "1",
        "--max-line-bytes",
        "4194304",
    ];
    let s = summary(&store, &flags, &jsonl);
    let (py, docs) = python_counts(5, true, &jsonl);
    assert!(
        s["runs_written"].as_u64().unwrap() >= 3,
        "the budget did not split the big document: {s}"
    );
    assert_counted_eq("JSON-lines documents", &py, &quern_counts(&store));
    assert_eq!(stats_json(&store)["totals"]["documents"], docs);
    // A sentence's n-grams are in one document: documents ≤ count, and
    // some n-gram is repeated within a document.
    assert!(py.values().any(|(c, d)| d < c));
}

/// Killed after a spill was committed and after a partition was merged,
/// then resumed: the store equals one uninterrupted ingest. `--append` of
/// the second input onto a store of the first equals both at once. A
/// different setting on append, on resume, and with count tables is
/// refused, naming both.
#[test]
fn document_counts_survive_kill_resume_and_append() {
    let tmp = tempfile::tempdir().unwrap();
    let a = paragraphs_jsonl(tmp.path(), "persuasion.txt", None);
    let b = paragraphs_jsonl(tmp.path(), "northangerabbey.txt", None);
    let both = vec![a.clone(), b.clone()];
    let flags = [
        "--order",
        "4",
        "-q",
        "--document-counts",
        "--jsonl",
        "--memory",
        "16MiB",
        "--threads",
        "2",
    ];
    let whole = tmp.path().join("whole");
    ingest_ok(&whole, &flags, &both);
    let expected = raw_view(&whole);
    for (point, n) in [(Point::Committed, 2), (Point::Merge, 3)] {
        let store = tmp.path().join(format!("killed-{}", point.name()));
        let killed = run_env(
            &ingest_args(&store, &flags, &both),
            &[(KILL_VAR, &point.at(n))],
        );
        assert_eq!(killed.signal(), Some(9), "{}", killed.describe());
        ingest_ok(&store, &flags, &both);
        assert_raw_eq(
            &format!("killed at {}", point.at(n)),
            &expected,
            &raw_view(&store),
        );
    }

    let appended = tmp.path().join("appended");
    ingest_ok(&appended, &flags, std::slice::from_ref(&a));
    let mut more = flags.to_vec();
    more.push("--append");
    ingest_ok(&appended, &more, std::slice::from_ref(&b));
    assert_eq!(
        quern_counts(&appended),
        quern_counts(&whole),
        "--append of the second input"
    );
    assert_eq!(
        stats_json(&appended)["totals"]["documents"],
        stats_json(&whole)["totals"]["documents"]
    );

    // The same append without --document-counts is refused, naming both.
    let plain: Vec<&str> = more
        .iter()
        .copied()
        .filter(|f| *f != "--document-counts")
        .collect();
    let r = run(&ingest_args(&appended, &plain, std::slice::from_ref(&b)));
    r.assert_failure();
    assert!(
        r.stderr.contains("built with --document-counts")
            && r.stderr.contains("gives no --document-counts"),
        "{}",
        r.stderr
    );
    // A resume with another setting is refused.
    let store = tmp.path().join("resume-other");
    let killed = run_env(
        &ingest_args(&store, &flags, &both),
        &[(KILL_VAR, &Point::Committed.at(1))],
    );
    assert_eq!(killed.signal(), Some(9), "{}", killed.describe());
    let plain: Vec<&str> = flags
        .iter()
        .copied()
        .filter(|f| *f != "--document-counts")
        .collect();
    let r = run(&ingest_args(&store, &plain, &both));
    r.assert_failure();
    assert!(
        r.stderr.contains("started with --document-counts"),
        "{}",
        r.stderr
    );
    // Count tables hold no documents.
    let r = run(&ingest_args(
        &tmp.path().join("tables"),
        &["--counts", "--document-counts"],
        &[a],
    ));
    r.assert_failure();
    assert!(r.stderr.contains("--document-counts"), "{}", r.stderr);
}

/// `quern stage plan --document-counts` and its tasks give the store of
/// `quern ingest --document-counts`.
#[test]
fn document_counts_through_stage_equal_ingest() {
    let tmp = tempfile::tempdir().unwrap();
    let inputs = [
        paragraphs_jsonl(tmp.path(), "persuasion.txt", None),
        novel("northangerabbey.txt"),
    ];
    // Plain lines and JSON lines are not read together: the JSON-lines
    // input alone, then the plain one.
    for (i, input) in inputs.iter().enumerate() {
        let jsonl: &[&str] = if i == 0 { &["--jsonl"] } else { &[] };
        let single = tmp.path().join(format!("single{i}"));
        let mut flags = vec!["--order", "5", "-q", "--document-counts"];
        flags.extend(jsonl);
        ingest_ok(&single, &flags, std::slice::from_ref(input));
        let dir = tmp.path().join(format!("shared{i}"));
        let store = tmp.path().join(format!("staged{i}"));
        let mut extra: Vec<String> = vec!["--document-counts".into()];
        extra.extend(jsonl.iter().map(|s| s.to_string()));
        let p = plan_with(&dir, 3, 2, &extra, std::slice::from_ref(input));
        run_all(&dir, &store, &p);
        assert_raw_eq(
            &format!("stage of input {i}"),
            &raw_view(&single),
            &raw_view(&store),
        );
    }
}

/// `top --order 2 --min-documents D` and `ngrams --pattern 'the *'
/// --min-documents D` list what Python's counts give: n-grams without a
/// sentence marker, at least D documents, by descending count then text
/// in byte order, with their documents. `plain`: a store without
/// document counts, which refuses the bound.
fn lists_filter_on_documents(store: &Path, plain: &Path, py: &Counted) {
    let s = store.display().to_string();
    let want = |order: usize, first: Option<&str>, min_docs: u64| -> Vec<(String, u64, u64)> {
        let mut v: Vec<(String, u64, u64)> = py
            .iter()
            .filter(|(g, (_, d))| {
                let w: Vec<&str> = g.split(' ').collect();
                w.len() == order
                    && *d >= min_docs
                    && !w.iter().any(|x| *x == "<s>" || *x == "</s>")
                    && first.is_none_or(|f| w[0] == f)
            })
            .map(|(g, (c, d))| (g.clone(), *c, *d))
            .collect();
        v.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.as_bytes().cmp(b.0.as_bytes())));
        v.truncate(40);
        v
    };
    let got = |args: &[&str]| -> Vec<(String, u64, u64)> {
        run_ok(args)
            .stdout
            .lines()
            .map(|l| {
                let v: Value = serde_json::from_str(l).unwrap();
                (
                    v["ngram"].as_str().unwrap().to_string(),
                    v["count"].as_u64().unwrap(),
                    v["documents"].as_u64().unwrap(),
                )
            })
            .collect()
    };
    for min in [1, 12] {
        let m = min.to_string();
        let top = got(&[
            "top",
            "--store",
            &s,
            "--order",
            "2",
            "--limit",
            "40",
            "--json",
            "--min-documents",
            &m,
        ]);
        assert_eq!(top, want(2, None, min), "top --min-documents {min}");
        let pat = got(&[
            "ngrams",
            "--store",
            &s,
            "--pattern",
            "the * *",
            "--limit",
            "40",
            "--json",
            "--min-documents",
            &m,
        ]);
        assert_eq!(
            pat,
            want(3, Some("the"), min),
            "pattern --min-documents {min}"
        );
    }
    // A bound that leaves out n-grams of a high count: the filter is on
    // documents, not on counts.
    assert!(want(2, None, 12).iter().all(|x| x.2 >= 12));
    // A store without document counts refuses the bound.
    let r = run(&[
        "top",
        "--store",
        &plain.display().to_string(),
        "--min-documents",
        "2",
    ]);
    r.assert_failure();
    assert!(r.stderr.contains("no document counts"), "{}", r.stderr);
}
