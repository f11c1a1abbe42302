//! `quern vocab` against an independent count of the same text in Python
//! (`tests/integration/vocab_check.py`, standard library only): the
//! number of words, training and held-out tokens, and for every size the
//! covered training tokens and the held-out tokens outside, exactly; the
//! `--top` list word for word, and read back by `ingest --word-list`.

use std::process::Command;

use crate::common::{dump_map, gutenberg_dir, ingest_ok, manifest_dir, python3, run_ok};
use crate::query_fixtures::{heldout_path, train3};

#[test]
fn vocab_matches_python_count() {
    let train: Vec<_> = crate::common::files_under(&gutenberg_dir())
        .into_iter()
        .filter(|p| p.file_name().is_some_and(|n| n != "persuasion.txt"))
        .collect();
    let store = train3();
    let held = heldout_path();
    let dir = crate::freeze::scratch("vocab");
    let list = dir.join("top.txt");
    let sizes = "10,1k,5k,12k,1m";
    let out = run_ok(&[
        "vocab",
        "--store",
        store.to_str().unwrap(),
        "--heldout",
        held.to_str().unwrap(),
        "--sizes",
        sizes,
        "--top",
        "2k",
        "--out",
        list.to_str().unwrap(),
        "--json",
    ]);
    let got: serde_json::Value = serde_json::from_str(&out.stdout).unwrap();
    let mut py = Command::new(python3());
    py.arg(manifest_dir().join("tests/integration/vocab_check.py"))
        .arg("10,1000,5000,12000,1000000")
        .arg("2000")
        .arg(&held)
        .args(&train);
    let p = py.output().unwrap();
    assert!(p.status.success(), "{}", String::from_utf8_lossy(&p.stderr));
    let want: serde_json::Value = serde_json::from_slice(&p.stdout).unwrap();
    for key in ["words", "training_tokens", "heldout_tokens"] {
        assert_eq!(got[key], want[key], "{key}");
    }
    let (g, w) = (
        got["sizes"].as_array().unwrap(),
        want["sizes"].as_array().unwrap(),
    );
    assert_eq!(g.len(), w.len());
    for (g, w) in g.iter().zip(w) {
        for key in ["size", "words", "covered_tokens", "heldout_outside"] {
            assert_eq!(g[key], w[key], "size {}: {key}", w["size"]);
        }
        let cov = g["covered_tokens"].as_f64().unwrap() / want["training_tokens"].as_f64().unwrap();
        assert!((g["coverage"].as_f64().unwrap() - cov).abs() < 1e-12);
    }
    let top: Vec<String> = std::fs::read_to_string(&list)
        .unwrap()
        .lines()
        .map(String::from)
        .collect();
    let want_top: Vec<String> = want["top"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap().to_string())
        .collect();
    assert_eq!(top, want_top);
    // The list is what `ingest --word-list` reads: a store built with it
    // has those words and <unk> for the rest.
    let small = dir.join("small-store");
    let list_arg = list.to_str().unwrap().to_string();
    ingest_ok(
        &small,
        &["--order", "1", "--word-list", &list_arg, "--quiet"],
        &train[..1],
    );
    let words = dump_map(&small);
    assert!(words.len() > 100);
    for w in words.keys() {
        assert!(
            top.contains(w) || ["<s>", "</s>", "<unk>"].contains(&w.as_str()),
            "{w:?} is outside the list"
        );
    }
}
