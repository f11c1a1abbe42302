//! `quern collocations` and `quern keyness` against the published formulas
//! computed in Python over the same text (tests/integration/corpus_check.py),
//! and G² also against SciPy's log-likelihood test
//! (scipy.stats.power_divergence, lambda_="log-likelihood"), on the
//! Gutenberg texts.
//!
//! A small case worked by hand (the unit tests of src/linguistics/measures.rs
//! check the same numbers): a bigram seen 10 times, its first word 20 times,
//! its second 30, N = 1000. E₁₁ = 20·30/1000 = 0.6; PMI = log₂(10/0.6) =
//! 4.0589 (Church & Hanks 1990); t = (10 − 0.6)/√10 = 2.9725 (Church et al.
//! 1991); the table 10, 10 / 20, 960 against 0.6, 19.4 / 29.4, 950.6 gives
//! G² = 2 Σ O ln(O/E) = 46.4966 (Dunning 1993); Dice = 20/50 = 0.4 and
//! logDice = 14 + log₂ 0.4 = 12.6781 (Rychlý 2008). Keyness: 30 in 1,000
//! study words against 10 in 2,000: E = 13.33, 26.67, G² = 29.0392 (Rayson
//! & Garside 2000), log ratio = log₂ 6 = 2.5850 (Hardie 2014), %DIFF = 500
//! (Gabrielatos & Marchi 2012).

use std::collections::HashMap;

use serde_json::Value;

use crate::common::{gutenberg_files, run_ok};
use crate::corpus_lists::{close, path_args, python_json, quern_json, require_scipy, s, store_of};

fn f(v: &Value, k: &str) -> f64 {
    v[k].as_f64()
        .unwrap_or_else(|| panic!("{k} is not a number in {v}"))
}

/// SciPy's G² agrees with the formula's to 1e-7 (relative).
fn assert_scipy(what: &str, g2: f64, scipy: f64) {
    assert!(
        (g2 - scipy).abs() <= 1e-7 * g2.abs().max(1.0),
        "{what}: G² {g2} vs SciPy's {scipy}"
    );
}

#[test]
fn collocation_measures_equal_their_formulas_and_scipy() {
    require_scipy();
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    let store = store_of(tmp.path(), &files, true);
    for (node, window) in [
        ("young", "0,1"),
        ("young", "1,0"),
        ("very", "2,2"),
        ("she", "1,2"),
        ("i am", "1,1"),
    ] {
        let mut py = vec![s("colloc"), s("--lowercase"), s("--node"), s(node)];
        py.extend([s("--window"), s(window)]);
        py.extend(path_args(&files));
        let python: HashMap<String, Value> = python_json(&py)
            .into_iter()
            .map(|v| (v["collocate"].as_str().unwrap().to_string(), v))
            .collect();
        let q = quern_json(&[
            s("collocations"),
            s("--store"),
            store.display().to_string(),
            s("--node"),
            s(node),
            s("--window"),
            s(window),
            s("--limit"),
            s("1000000"),
            s("--sort"),
            s("g2"),
            s("--json"),
        ]);
        let what = format!("node {node:?}, window {window}");
        let mut clamped = 0;
        assert_eq!(q.len(), python.len(), "{what}: number of collocates");
        assert!(q.len() > 20, "{what}: too few collocates to be a test");
        for row in &q {
            let c = row["collocate"].as_str().unwrap();
            let p = python
                .get(c)
                .unwrap_or_else(|| panic!("{what}: {c:?} not a collocate in Python"));
            assert_eq!(row["observed"], p["observed"], "{what}: {c}");
            // Sources beside each formula in corpus_check.py: Church & Hanks
            // 1990 (pmi), Church et al. 1991 (t_score), Dunning 1993 (g2),
            // Dice 1945 (dice), Rychlý 2008 (log_dice).
            for k in ["expected", "pmi", "t_score", "g2", "log_dice", "dice"] {
                assert!(close(f(row, k), f(p, k)), "{what}: {c} {k}: {row} vs {p}");
            }
            // A table with a cell clamped at 0 (a collocate in two windows
            // of a repeated node) is no table of counts: SciPy refuses it.
            match p["g2_scipy"].as_f64() {
                Some(sp) => assert_scipy(&format!("{what}: {c}"), f(row, "g2"), sp),
                None => clamped += 1,
            }
        }
        assert!(clamped * 50 <= q.len(), "{what}: {clamped} clamped tables");
        // Sorted by G², descending.
        assert!(
            q.windows(2).all(|w| f(&w[0], "g2") >= f(&w[1], "g2")),
            "{what}"
        );
    }
}

#[test]
fn collocations_sort_and_filter() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(1);
    let store = store_of(tmp.path(), &files, true);
    let st = store.display().to_string();
    for m in ["observed", "pmi", "t_score", "g2", "log_dice", "dice"] {
        let q = quern_json(&[
            s("collocations"),
            s("--store"),
            st.clone(),
            s("--node"),
            s("miss"),
            s("--window"),
            s("0,2"),
            s("--min-count"),
            s("3"),
            s("--sort"),
            s(m),
            s("--json"),
        ]);
        assert!(!q.is_empty());
        assert!(q.iter().all(|v| v["observed"].as_u64().unwrap() >= 3));
        assert!(q.windows(2).all(|w| f(&w[0], m) >= f(&w[1], m)), "sort {m}");
    }
    let bad = crate::common::run(&[
        "collocations",
        "--store",
        &st,
        "--node",
        "x",
        "--window",
        "3,0",
    ]);
    bad.assert_failure();
    assert!(bad.stderr.contains("window"), "{}", bad.stderr);
}

#[test]
fn keyness_equals_its_formulas_and_scipy() {
    require_scipy();
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(3);
    let study = store_of(&tmp.path().join("s"), &files[..1], true);
    let reference = store_of(&tmp.path().join("r"), &files[1..], true);
    for order in [1, 2] {
        let mut py = vec![
            s("keyness"),
            s("--lowercase"),
            s("--order"),
            order.to_string(),
        ];
        py.push(s("--study"));
        py.extend(path_args(&files[..1]));
        py.push(s("--reference"));
        py.extend(path_args(&files[1..]));
        let python: HashMap<String, Value> = python_json(&py)
            .into_iter()
            .map(|v| (v["ngram"].as_str().unwrap().to_string(), v))
            .collect();
        let args = |min_g2: &str, min_count: &str| {
            vec![
                s("keyness"),
                s("--store"),
                study.display().to_string(),
                s("--reference"),
                reference.display().to_string(),
                s("--order"),
                order.to_string(),
                format!("--min-g2={min_g2}"),
                s("--min-count"),
                s(min_count),
                s("--limit"),
                s("10000000"),
                s("--json"),
            ]
        };
        // Every n-gram of either store (no threshold).
        let all = quern_json(&args("-1", "1"));
        assert_eq!(all.len(), python.len(), "order {order}: n-grams compared");
        for row in &all {
            let g = row["ngram"].as_str().unwrap();
            let p = &python[g];
            assert_eq!(row["study_count"], p["study_count"], "{g}");
            assert_eq!(row["reference_count"], p["reference_count"], "{g}");
            // Rayson & Garside 2000 (g2), Hardie 2014 (log_ratio),
            // Gabrielatos & Marchi 2012 (percent_diff): formulas in
            // corpus_check.py.
            for k in ["g2", "log_ratio"] {
                assert!(close(f(row, k), f(p, k)), "{g} {k}: {row} vs {p}");
            }
            match (row["percent_diff"].as_f64(), p["percent_diff"].as_f64()) {
                (None, None) => {}
                (Some(a), Some(b)) => assert!(close(a, b), "{g} %DIFF {a} vs {b}"),
                other => panic!("{g} %DIFF {other:?}"),
            }
            assert_scipy(g, f(row, "g2"), f(p, "g2_scipy"));
            let positive = row["key"] == "positive";
            assert_eq!(positive, f(row, "log_ratio") > 0.0, "{g}: side");
        }
        // The default threshold (3.84) and a minimum count of 5: the same
        // set as Python's, positives by G² descending first.
        let key = quern_json(&args("3.84", "5"));
        let mut want: Vec<&String> = python
            .iter()
            .filter(|(_, p)| {
                let m = p["study_count"].as_u64().max(p["reference_count"].as_u64());
                f(p, "g2") >= 3.84 && m.unwrap() >= 5
            })
            .map(|(g, _)| g)
            .collect();
        let mut got: Vec<&str> = key.iter().map(|v| v["ngram"].as_str().unwrap()).collect();
        want.sort();
        got.sort();
        assert_eq!(got, want, "order {order}: key n-grams at G² ≥ 3.84");
        let pos: Vec<&Value> = key.iter().filter(|v| v["key"] == "positive").collect();
        assert!(pos.windows(2).all(|w| f(w[0], "g2") >= f(w[1], "g2")));
    }
}

#[test]
fn keyness_figure_is_written_where_asked() {
    let tmp = tempfile::tempdir().unwrap();
    let files = gutenberg_files(2);
    let study = store_of(&tmp.path().join("s"), &files[..1], true);
    let reference = store_of(&tmp.path().join("r"), &files[1..], true);
    for ext in ["svg", "png"] {
        let fig = tmp.path().join(format!("key.{ext}"));
        let out = run_ok(&[
            "keyness",
            "--store",
            &study.display().to_string(),
            "--reference",
            &reference.display().to_string(),
            "--limit",
            "10",
            "--figure",
            &fig.display().to_string(),
        ]);
        let bytes = std::fs::read(&fig).unwrap();
        if ext == "svg" {
            let text = String::from_utf8(bytes).unwrap();
            assert!(text.starts_with("<svg"), "SVG output");
            // One bar per key n-gram listed (10 a side).
            let listed = out.stdout.lines().count() - 1;
            assert_eq!(listed, 20, "{}", out.stdout);
            let first = out
                .stdout
                .lines()
                .nth(1)
                .unwrap()
                .split('\t')
                .nth(1)
                .unwrap();
            assert!(text.contains(first), "the figure names {first:?}");
        } else {
            // PNG signature (ISO/IEC 15948, section 5.2).
            assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
        }
    }
}
