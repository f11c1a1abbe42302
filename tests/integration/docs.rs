//! `quern score --jsonl` / `--lines`: documents of the held-out novel
//! (persuasion.txt, one paragraph a document) scored against the training
//! stores. Checked against things outside the document scorer: the input
//! the test wrote (ids, line numbers, which lines are bad), plain
//! `quern score` runs over the same text (totals and single documents:
//! `score` is checked against hand-worked examples in estimators.rs), a
//! plain sort of all scores (nearest-rank percentiles), two separate runs
//! (the two-model score), and gzip/zstd files made by Python's gzip module
//! and the zstd program.

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use serde_json::{json, Value};

use crate::common::{ingest_ok, run_ok, run_with_stdin};
use crate::query_fixtures::{heldout_path, train3};

/// The held-out novel's paragraphs (blank-line separated), the first 400.
pub(crate) fn paragraphs() -> &'static [String] {
    static P: OnceLock<Vec<String>> = OnceLock::new();
    P.get_or_init(|| {
        let text = std::fs::read_to_string(heldout_path())
            .unwrap()
            .replace("\r\n", "\n");
        text.split("\n\n")
            .map(|p| p.trim_matches('\n').to_string())
            .filter(|p| !p.trim().is_empty())
            .take(400)
            .collect()
    })
}

/// What the test wrote on one input line.
#[derive(Clone, Debug)]
pub(crate) enum Wrote {
    Doc { id: Value, text: String },
    Bad,
}

/// The JSON-lines input: documents with ids of every JSON kind (and none),
/// and bad lines among them; returns the lines and what each is.
pub(crate) fn input() -> &'static (Vec<String>, Vec<Wrote>) {
    static I: OnceLock<(Vec<String>, Vec<Wrote>)> = OnceLock::new();
    I.get_or_init(|| {
        let mut lines = Vec::new();
        let mut wrote = Vec::new();
        for (i, p) in paragraphs().iter().enumerate() {
            let id = match i % 5 {
                0 => json!(format!("doc-{i}")),
                1 => json!(i * 7),
                2 => json!({"shard": i % 3, "n": i}),
                3 => json!([i, "x"]),
                _ => Value::Null,
            };
            let mut o = serde_json::Map::new();
            if i % 5 != 4 {
                o.insert("id".into(), id.clone());
            }
            o.insert("url".into(), json!(format!("http://example.org/{i}")));
            o.insert("text".into(), json!(p));
            lines.push(Value::Object(o).to_string());
            wrote.push(Wrote::Doc {
                id,
                text: p.clone(),
            });
            match i % 37 {
                3 => {
                    lines.push("{\"id\": 1, \"text\": \"unterminated".into());
                    wrote.push(Wrote::Bad);
                }
                11 => {
                    lines.push("{\"id\": 2, \"body\": \"no text field\"}".into());
                    wrote.push(Wrote::Bad);
                }
                19 => {
                    lines.push("{\"id\": 3, \"text\": 42}".into());
                    wrote.push(Wrote::Bad);
                }
                23 => {
                    lines.push("[\"an array\"]".into());
                    wrote.push(Wrote::Bad);
                }
                29 => {
                    lines.push(String::new());
                    wrote.push(Wrote::Bad);
                }
                _ => {}
            }
        }
        (lines, wrote)
    })
}

pub(crate) fn tmp() -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("docs");
    std::fs::create_dir_all(&d).unwrap();
    d
}

pub(crate) fn input_file() -> &'static Path {
    static F: OnceLock<PathBuf> = OnceLock::new();
    F.get_or_init(|| {
        let p = tmp().join("docs.jsonl");
        let mut s = input().0.join("\n");
        s.push('\n');
        std::fs::write(&p, s).unwrap();
        p
    })
}

/// A small second store (emma.txt at order 2), the general model.
pub(crate) fn general_store() -> &'static Path {
    static S: OnceLock<PathBuf> = OnceLock::new();
    S.get_or_init(|| {
        let d = tmp().join("general2");
        if d.exists() {
            std::fs::remove_dir_all(&d).unwrap();
        }
        ingest_ok(
            &d,
            &["--order", "2", "--quiet"],
            &[crate::common::gutenberg_dir().join("emma.txt")],
        );
        d
    })
}

pub(crate) fn s(p: &Path) -> String {
    p.display().to_string()
}

pub(crate) fn score_docs(store: &Path, extra: &[&str], inputs: &[&Path]) -> (Vec<Value>, String) {
    let mut args = vec![
        "score".to_string(),
        "--store".into(),
        s(store),
        "--method".into(),
        "mkn".into(),
    ];
    args.extend(extra.iter().map(|x| x.to_string()));
    args.extend(inputs.iter().map(|p| s(p)));
    let r = run_ok(&args);
    let out = r
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    (out, r.stdout)
}

/// `quern score --json` (the held-out scorer) over `text`.
pub(crate) fn plain_score(store: &Path, text: &str, name: &str) -> Value {
    let p = tmp().join(name);
    std::fs::write(&p, text).unwrap();
    let r = run_ok(&[
        "score",
        "--store",
        &s(store),
        "--method",
        "mkn",
        "--json",
        &s(&p),
    ]);
    serde_json::from_str(&r.stdout).unwrap()
}

pub(crate) fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-9 * a.abs().max(b.abs()).max(1.0)
}

#[test]
fn order_ids_and_bad_lines_are_kept_and_any_thread_count_gives_the_same_output() {
    let (lines, wrote) = input();
    let (out, text1) = score_docs(train3(), &["--jsonl", "--threads", "1"], &[input_file()]);
    // One output line per input line, in order, with its line number.
    assert_eq!(out.len(), lines.len());
    let mut bad = 0;
    for (i, (o, w)) in out.iter().zip(wrote).enumerate() {
        assert_eq!(o["line"], json!(i + 1), "line {}", i + 1);
        match w {
            Wrote::Doc { id, .. } => {
                assert_eq!(&o["id"], id, "the id is copied as written, line {}", i + 1);
                assert!(o.get("error").is_none());
                assert!(o["predictions"].as_u64().unwrap() > 0);
            }
            Wrote::Bad => {
                bad += 1;
                assert!(o["error"].is_string(), "line {} is bad: {o}", i + 1);
                assert!(o.get("perplexity").is_none());
            }
        }
    }
    assert!(bad >= 40, "the input holds bad lines ({bad})");
    // Any thread count: byte-identical output.
    for t in ["2", "3", "8"] {
        let (_, text) = score_docs(train3(), &["--jsonl", "--threads", t], &[input_file()]);
        assert!(text == text1, "--threads {t} changed the output");
    }
    // Standard input gives the same.
    let mut stdin = input().0.join("\n");
    stdin.push('\n');
    let r = run_with_stdin(
        &[
            "score",
            "--store",
            &s(train3()),
            "--method",
            "mkn",
            "--jsonl",
            "-",
        ],
        stdin.as_bytes(),
    );
    r.assert_success();
    assert!(r.stdout == text1, "standard input changed the output");
    // The summary counts the bad lines.
    assert!(
        r.stderr.contains(&format!("{bad} bad lines,")),
        "{}",
        r.stderr
    );
}

#[test]
fn document_scores_equal_plain_score_runs() {
    let (out, _) = score_docs(train3(), &["--jsonl", "--threads", "2"], &[input_file()]);
    let docs: Vec<(&Value, &String)> = out
        .iter()
        .zip(&input().1)
        .filter_map(|(o, w)| match w {
            Wrote::Doc { text, .. } => Some((o, text)),
            Wrote::Bad => None,
        })
        .collect();
    // Totals: every document's text, one file, scored by `quern score`.
    let all: String = docs.iter().map(|(_, t)| format!("{t}\n")).collect();
    let plain = plain_score(train3(), &all, "all.txt");
    let n: u64 = docs
        .iter()
        .map(|(o, _)| o["predictions"].as_u64().unwrap())
        .sum();
    let l: f64 = docs
        .iter()
        .map(|(o, _)| o["log10_sum"].as_f64().unwrap())
        .sum();
    let oov: u64 = docs
        .iter()
        .map(|(o, _)| o["outside_vocabulary"].as_u64().unwrap())
        .sum();
    assert_eq!(n, plain["predictions"].as_u64().unwrap());
    assert_eq!(oov, plain["outside_vocabulary"].as_u64().unwrap());
    assert!(
        close(l, plain["log10_sum"].as_f64().unwrap()),
        "{l} vs {}",
        plain["log10_sum"]
    );
    // Single documents: perplexity of the document = `score` of its text.
    for k in [0, 7, 100, docs.len() - 1] {
        let (o, t) = docs[k];
        let p = plain_score(train3(), &format!("{t}\n"), &format!("one-{k}.txt"));
        assert_eq!(o["predictions"], p["predictions"]);
        assert_eq!(o["sentences"], p["sentences"]);
        let (a, b) = (
            o["perplexity"].as_f64().unwrap(),
            p["perplexity"].as_f64().unwrap(),
        );
        assert!(close(a, b), "document {k}: {a} vs {b}");
    }
}

/// `--model`: a frozen model of the same store gives every document the
/// store's score within the model's stored precision (32-bit floats; the
/// freeze tests check each probability to about 3e-7 relative), any thread
/// count gives the same output, and `--minus-model` equals two runs.
#[test]
fn frozen_model_scores_equal_the_store_and_two_model_runs() {
    let model = tmp().join("train3.qm");
    run_ok(&[
        "freeze",
        "--store",
        &s(train3()),
        "--method",
        "mkn",
        "--out",
        &s(&model),
    ]);
    let general = tmp().join("general2.qm");
    run_ok(&[
        "freeze",
        "--store",
        &s(general_store()),
        "--method",
        "mkn",
        "--out",
        &s(&general),
    ]);
    let (st, _) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let run_model = |extra: &[&str]| -> (Vec<Value>, String) {
        let mut args = vec!["score", "--model", model.to_str().unwrap(), "--jsonl"];
        args.extend_from_slice(extra);
        args.push(input_file().to_str().unwrap());
        let r = run_ok(&args);
        let v = r
            .stdout
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        (v, r.stdout)
    };
    let (m, text1) = run_model(&["--threads", "1"]);
    let (_, text2) = run_model(&["--threads", "2"]);
    assert!(text1 == text2, "--threads changed the model's output");
    assert_eq!(m.len(), st.len());
    for (a, b) in st.iter().zip(&m) {
        assert_eq!(a["id"], b["id"]);
        assert_eq!(a.get("error"), b.get("error"));
        if a.get("error").is_some() {
            continue;
        }
        assert_eq!(a["predictions"], b["predictions"]);
        assert_eq!(a["outside_vocabulary"], b["outside_vocabulary"]);
        let (x, y) = (
            a["perplexity"].as_f64().unwrap(),
            b["perplexity"].as_f64().unwrap(),
        );
        // log10 P is a sum of per-prediction logs each within ~3e-7
        // relative in P, so the per-token log10 differs by < 1e-6.
        assert!(
            (x.log10() - y.log10()).abs() < 1e-6,
            "line {}: {x} vs {y}",
            a["line"]
        );
    }
    // Two frozen models: the difference of two separate runs.
    let mut args = vec!["score", "--model", model.to_str().unwrap(), "--jsonl"];
    let g = general.display().to_string();
    args.extend_from_slice(&["--minus-model", &g, input_file().to_str().unwrap()]);
    let both: Vec<Value> = run_ok(&args)
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let r = run_ok(&[
        "score",
        "--model",
        &g,
        "--jsonl",
        input_file().to_str().unwrap(),
    ]);
    let gen: Vec<Value> = r
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    for ((x, y), z) in m.iter().zip(&gen).zip(&both) {
        if x.get("error").is_some() {
            continue;
        }
        let n = x["predictions"].as_f64().unwrap();
        let want = -x["log10_sum"].as_f64().unwrap() / n + y["log10_sum"].as_f64().unwrap() / n;
        assert!(close(z["ce_difference"].as_f64().unwrap(), want));
    }
}
