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

use crate::common::{ingest_ok, run, run_ok, run_with_stdin};
use crate::query_fixtures::{heldout_path, train3};

/// The held-out novel's paragraphs (blank-line separated), the first 400.
fn paragraphs() -> &'static [String] {
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
enum Wrote {
    Doc { id: Value, text: String },
    Bad,
}

/// The JSON-lines input: documents with ids of every JSON kind (and none),
/// and bad lines among them; returns the lines and what each is.
fn input() -> &'static (Vec<String>, Vec<Wrote>) {
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

fn tmp() -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("docs");
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn input_file() -> &'static Path {
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
fn general_store() -> &'static Path {
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

fn s(p: &Path) -> String {
    p.display().to_string()
}

fn score_docs(store: &Path, extra: &[&str], inputs: &[&Path]) -> (Vec<Value>, String) {
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
fn plain_score(store: &Path, text: &str, name: &str) -> Value {
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

fn close(a: f64, b: f64) -> bool {
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

#[test]
fn percentiles_are_the_nearest_rank_of_a_sort_of_all_scores() {
    let sum = tmp().join("summary.json");
    let (out, _) = score_docs(
        train3(),
        &["--jsonl", "--summary", &s(&sum)],
        &[input_file()],
    );
    let mut v: Vec<f64> = out
        .iter()
        .filter_map(|o| o["perplexity"].as_f64())
        .collect();
    // A plain sort; the nearest-rank percentile is the value at rank
    // ceil(p/100 * n), 1-based (the textbook definition).
    v.sort_by(f64::total_cmp);
    let summary: Value = serde_json::from_str(&std::fs::read_to_string(&sum).unwrap()).unwrap();
    let d = &summary["distribution"];
    assert_eq!(d["count"].as_u64().unwrap(), v.len() as u64);
    assert_eq!(d["exact"], json!(true));
    let n = v.len() as f64;
    for p in [1, 5, 10, 25, 50, 75, 90, 95, 99] {
        let rank = ((p as f64 / 100.0 * n).ceil() as usize).max(1);
        let want = v[rank - 1];
        let got = d["percentiles"][format!("p{p}")].as_f64().unwrap();
        assert_eq!(got, want, "p{p}");
    }
    let mean = v.iter().sum::<f64>() / n;
    assert!(close(d["mean"].as_f64().unwrap(), mean));
    // The histogram holds every value, and its percentile (the bin's
    // centre) is within the documented bound of the exact one.
    let bins: Vec<(i64, u64)> = d["bins"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| (b[0].as_i64().unwrap(), b[1].as_u64().unwrap()))
        .collect();
    assert_eq!(bins.iter().map(|b| b.1).sum::<u64>(), v.len() as u64);
    let w = d["bin_width"].as_f64().unwrap();
    for x in &v {
        let b = (x.log10() / w).floor() as i64;
        assert!(bins.iter().any(|&(k, c)| k == b && c > 0));
    }
}

#[test]
fn two_model_score_equals_two_separate_runs() {
    let (a, _) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let (b, _) = score_docs(general_store(), &["--jsonl"], &[input_file()]);
    let (both, _) = score_docs(
        train3(),
        &["--jsonl", "--minus-store", &s(general_store())],
        &[input_file()],
    );
    let mut checked = 0;
    for ((x, y), z) in a.iter().zip(&b).zip(&both) {
        if x.get("error").is_some() {
            assert_eq!(z["error"], x["error"]);
            continue;
        }
        let n = x["predictions"].as_f64().unwrap();
        // Moore & Lewis (2010): H_I(s) - H_O(s), H = -log10 P / n.
        let want = -x["log10_sum"].as_f64().unwrap() / n + y["log10_sum"].as_f64().unwrap() / n;
        let got = z["ce_difference"].as_f64().unwrap();
        assert!(close(got, want), "line {}: {got} vs {want}", x["line"]);
        assert_eq!(z["perplexity"], x["perplexity"]);
        assert_eq!(z["general"]["perplexity"], y["perplexity"]);
        assert_eq!(z["general"]["outside_vocabulary"], y["outside_vocabulary"]);
        checked += 1;
    }
    assert!(checked > 300);
    // --words with two models: each prediction is the main store's own
    // (`word`, `log10`, `matched`) with `general`, the general store's own
    // `log10` and `matched`.
    let words = |store: &Path, more: &[&str]| {
        let mut a = vec!["--jsonl", "--words"];
        a.extend(more);
        score_docs(store, &a, &[input_file()]).0
    };
    let g = s(general_store());
    let (a, b, both) = (
        words(train3(), &[]),
        words(general_store(), &[]),
        words(train3(), &["--minus-store", &g]),
    );
    let mut predictions = 0;
    for ((x, y), z) in a.iter().zip(&b).zip(&both) {
        let Some(zw) = z["words"].as_array() else {
            assert!(z.get("error").is_some(), "{z}");
            continue;
        };
        let (xw, yw) = (
            x["words"].as_array().unwrap(),
            y["words"].as_array().unwrap(),
        );
        assert_eq!((zw.len(), zw.len()), (xw.len(), yw.len()));
        for ((p, q), r) in xw.iter().zip(yw).zip(zw) {
            let mut main = r.clone();
            let general = main.as_object_mut().unwrap().remove("general").unwrap();
            assert_eq!(&main, p);
            assert_eq!(
                general,
                json!({"log10": q["log10"], "matched": q["matched"]})
            );
            predictions += 1;
        }
    }
    assert!(predictions > 10_000, "{predictions}");
}

#[test]
fn the_split_keeps_the_lowest_scores_and_every_line_goes_to_one_file() {
    let (lines, _) = input();
    let (out, _) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let kept = tmp().join("kept.jsonl");
    let dropped = tmp().join("dropped.jsonl");
    // --keep-fraction 0.25: the round(0.25 n) lowest, ties to earlier lines.
    score_docs(
        train3(),
        &[
            "--jsonl",
            "--keep-fraction",
            "0.25",
            "--kept",
            &s(&kept),
            "--dropped",
            &s(&dropped),
        ],
        &[input_file()],
    );
    let mut scored: Vec<(f64, usize)> = out
        .iter()
        .enumerate()
        .filter_map(|(i, o)| o["perplexity"].as_f64().map(|p| (p, i)))
        .collect();
    scored.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let k = (0.25 * scored.len() as f64).round() as usize;
    let mut want: Vec<usize> = scored[..k].iter().map(|x| x.1).collect();
    want.sort();
    let want_kept: Vec<&str> = want.iter().map(|&i| lines[i].as_str()).collect();
    let want_dropped: Vec<&str> = (0..lines.len())
        .filter(|i| !want.contains(i))
        .map(|i| lines[i].as_str())
        .collect();
    let got_kept = std::fs::read_to_string(&kept).unwrap();
    let got_dropped = std::fs::read_to_string(&dropped).unwrap();
    assert_eq!(got_kept.lines().collect::<Vec<_>>(), want_kept);
    assert_eq!(got_dropped.lines().collect::<Vec<_>>(), want_dropped);
    // --keep-below X: exactly the documents with perplexity below X.
    let x = scored[scored.len() / 2].0;
    score_docs(
        train3(),
        &[
            "--jsonl",
            "--keep-below",
            &x.to_string(),
            "--kept",
            &s(&kept),
            "--dropped",
            &s(&dropped),
        ],
        &[input_file()],
    );
    let want_kept: Vec<&str> = out
        .iter()
        .enumerate()
        .filter(|(_, o)| o["perplexity"].as_f64().is_some_and(|p| p < x))
        .map(|(i, _)| lines[i].as_str())
        .collect();
    let got_kept = std::fs::read_to_string(&kept).unwrap();
    let got_dropped = std::fs::read_to_string(&dropped).unwrap();
    assert_eq!(got_kept.lines().collect::<Vec<_>>(), want_kept);
    assert_eq!(
        got_kept.lines().count() + got_dropped.lines().count(),
        lines.len()
    );
    // A cut without its files is refused.
    let r = run(&[
        "score",
        "--store",
        &s(train3()),
        "--method",
        "mkn",
        "--jsonl",
        "--keep-below",
        "10",
        &s(input_file()),
    ]);
    r.assert_failure();
    assert!(r.stderr.contains("--kept"), "{}", r.stderr);
}

#[test]
fn compressed_inputs_lines_format_and_words() {
    // gzip by Python's gzip module, zstd by the zstd program.
    let gz = tmp().join("docs.jsonl.gz");
    let st = std::process::Command::new("python3")
        .args([
            "-c",
            "import gzip, shutil, sys; shutil.copyfileobj(open(sys.argv[1], 'rb'), gzip.open(sys.argv[2], 'wb'))",
            &s(input_file()),
            &s(&gz),
        ])
        .status()
        .unwrap();
    assert!(st.success());
    let (_, plain) = score_docs(train3(), &["--jsonl"], &[input_file()]);
    let (_, from_gz) = score_docs(train3(), &["--jsonl"], &[&gz]);
    assert!(plain == from_gz, ".gz input changed the output");
    let zst = tmp().join("docs.jsonl.zst");
    let st = std::process::Command::new("zstd")
        .args(["-q", "-f", &s(input_file()), "-o", &s(&zst)])
        .status();
    if let Ok(st) = st {
        assert!(st.success());
        let (_, from_zst) = score_docs(train3(), &["--jsonl"], &[&zst]);
        assert!(plain == from_zst, ".zst input changed the output");
    }
    // Two inputs: each result names its file, line numbers per file.
    let (two, _) = score_docs(train3(), &["--jsonl"], &[input_file(), &gz]);
    let n = input().0.len();
    assert_eq!(two.len(), 2 * n);
    assert_eq!(two[n]["line"], json!(1));
    assert_eq!(two[n]["file"], json!(s(&gz)));
    // --lines: one document a line, the line number is the id; a one-line
    // document equals `quern score` of that line.
    let txt = tmp().join("lines.txt");
    let some: Vec<String> = paragraphs()
        .iter()
        .take(30)
        .map(|p| p.replace('\n', " "))
        .collect();
    std::fs::write(&txt, some.join("\n") + "\n").unwrap();
    let (ls, _) = score_docs(train3(), &["--lines", "--words"], &[&txt]);
    assert_eq!(ls.len(), 30);
    let store = quern::store::Store::open(train3()).unwrap();
    let stored = |ids: &[quern::words::WordId]| store.get(ids).unwrap().is_some();
    let mut matched_seen = [0usize; 4];
    for (i, o) in ls.iter().enumerate() {
        assert_eq!(o["id"], json!(i + 1));
        // --words: one object per prediction with exactly `word`, `log10`
        // and `matched`; their log10 sum to the total; the predictions
        // that matched 0 words are the ones outside the vocabulary; the
        // last is </s>.
        let w = o["words"].as_array().unwrap();
        assert_eq!(w.len() as u64, o["predictions"].as_u64().unwrap());
        for x in w {
            let keys: Vec<&str> = x.as_object().unwrap().keys().map(|k| k.as_str()).collect();
            let mut sorted = vec!["log10", "matched", "word"];
            sorted.sort();
            assert_eq!(keys, sorted, "{x}");
        }
        let sum: f64 = w.iter().map(|x| x["log10"].as_f64().unwrap()).sum();
        assert!(close(sum, o["log10_sum"].as_f64().unwrap()));
        let oov = w.iter().filter(|x| x["matched"] == json!(0)).count() as u64;
        assert_eq!(oov, o["outside_vocabulary"].as_u64().unwrap());
        assert_eq!(w.last().unwrap()["word"], json!("</s>"));
        let tokens: Vec<&str> = some[i].split_whitespace().collect();
        let got: Vec<&str> = w[..w.len() - 1]
            .iter()
            .map(|x| x["word"].as_str().unwrap())
            .collect();
        assert_eq!(got, tokens);
        // `matched` against the store read directly: 0 for a word that is
        // not a stored unigram, else the longest k (at most the order, 3)
        // for which the word and the k − 1 words before it (after `<s>`,
        // words outside V counted as `<unk>`) are a stored n-gram.
        let mut ids = vec![quern::words::bos_id()];
        for t in tokens
            .iter()
            .map(|t| t.as_bytes())
            .chain([b"</s>".as_slice()])
        {
            let id = quern::words::word_id(t);
            let want = if stored(&[id]) {
                let at = ids.len();
                ids.push(id);
                (1..=3.min(ids.len()))
                    .rev()
                    .find(|&k| stored(&ids[at + 1 - k..]))
                    .unwrap()
            } else {
                ids.push(quern::words::unk_id());
                0
            };
            let j = ids.len() - 2;
            assert_eq!(w[j]["matched"], json!(want), "line {} word {j}", i + 1);
            matched_seen[want] += 1;
        }
    }
    // The check saw every matched length.
    assert!(matched_seen.iter().all(|&n| n > 0), "{matched_seen:?}");
    let p = plain_score(train3(), &format!("{}\n", some[3]), "line4.txt");
    assert!(close(
        ls[3]["perplexity"].as_f64().unwrap(),
        p["perplexity"].as_f64().unwrap()
    ));
}

// In a module named `spark` so that the harness filter that leaves out the
// Spark tests (`--skip spark::`, scripts/test) leaves this one out too.
mod spark {
    use super::*;

    /// scripts/spark_score.py under Spark in local mode (see spark.rs for how
    /// Spark is found): each scored file equals the
    /// single-machine `quern score --jsonl` of its input byte for byte; the
    /// merged summary's counts and totals equal one single-machine run over all
    /// inputs, its percentiles are within the documented histogram bound of
    /// that run's exact ones; a second run skips every finished file.
    #[test]
    fn driver_in_local_mode_equals_single_machine() {
        let submit = crate::spark::spark_submit();
        let dir = tmp().join("spark");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        let inputs = dir.join("crawl");
        std::fs::create_dir_all(&inputs).unwrap();
        // Three .jsonl.gz files (Python's gzip module) from the test input.
        let lines = &input().0;
        let mut files = Vec::new();
        for (k, part) in lines.chunks(lines.len().div_ceil(3)).enumerate() {
            let plain = inputs.join(format!("part-{k}.jsonl"));
            std::fs::write(&plain, part.join("\n") + "\n").unwrap();
            let gz = inputs.join(format!("part-{k}.jsonl.gz"));
            let st = std::process::Command::new("python3")
                .args([
                    "-c",
                    "import gzip, shutil, sys; shutil.copyfileobj(open(sys.argv[1], 'rb'), gzip.open(sys.argv[2], 'wb'))",
                    &s(&plain),
                    &s(&gz),
                ])
                .status()
                .unwrap();
            assert!(st.success());
            std::fs::remove_file(&plain).unwrap();
            files.push(gz);
        }
        let out = dir.join("scored");
        let go = || {
            let _one = crate::spark::ONE_AT_A_TIME
                .lock()
                .unwrap_or_else(|e| e.into_inner());
            let r = std::process::Command::new(&submit)
                .args(["--master", "local[2,4]", "--conf", "spark.ui.enabled=false"])
                .args(["--driver-memory", "1g"])
                .arg(crate::common::manifest_dir().join("scripts/spark_score.py"))
                .args(["--quern", crate::common::bin(), "--store", &s(train3())])
                .args(["--out", &s(&out), &s(&inputs)])
                .env("PYSPARK_PYTHON", "python3")
                .env("SPARK_LOCAL_IP", "127.0.0.1")
                .stdin(std::process::Stdio::null())
                .output()
                .unwrap();
            let text = String::from_utf8_lossy(&r.stdout).into_owned();
            assert!(
                r.status.success(),
                "spark_score.py failed:\n{text}\n{}",
                String::from_utf8_lossy(&r.stderr)
            );
            let last = text.lines().rfind(|l| l.starts_with('{')).unwrap();
            serde_json::from_str::<Value>(last).unwrap()
        };
        let merged = go();
        for f in &files {
            let name = f.file_name().unwrap().to_string_lossy().into_owned();
            let got = std::fs::read(out.join(&name).join("scores.jsonl")).unwrap();
            let (_, want) = score_docs(train3(), &["--jsonl", "--threads", "1"], &[f]);
            assert!(got == want.as_bytes(), "{name}: Spark's output differs");
        }
        let sum = dir.join("single.json");
        let mut all: Vec<&Path> = files.iter().map(|p| p.as_path()).collect();
        all.sort();
        score_docs(train3(), &["--jsonl", "--summary", &s(&sum)], &all);
        let single: Value = serde_json::from_str(&std::fs::read_to_string(&sum).unwrap()).unwrap();
        for k in ["lines", "documents", "bad_lines", "empty_documents"] {
            assert_eq!(merged[k], single[k], "{k}");
        }
        for k in [
            "sentences",
            "predictions",
            "outside_vocabulary",
            "probability_zero",
        ] {
            assert_eq!(merged["totals"][k], single["totals"][k], "{k}");
        }
        assert!(close(
            merged["totals"]["log10_sum_nonzero"].as_f64().unwrap(),
            single["totals"]["log10_sum_nonzero"].as_f64().unwrap()
        ));
        let (md, sd) = (&merged["distribution"], &single["distribution"]);
        assert_eq!(md["count"], sd["count"]);
        assert_eq!(md["bins"], sd["bins"]);
        // Documented bound: 10^(bin_width / 2) - 1 relative.
        let bound = 10f64.powf(sd["bin_width"].as_f64().unwrap() / 2.0) - 1.0;
        for p in [1, 5, 10, 25, 50, 75, 90, 95, 99] {
            let k = format!("p{p}");
            let (a, b) = (
                md["percentiles"][&k].as_f64().unwrap(),
                sd["percentiles"][&k].as_f64().unwrap(),
            );
            assert!((a / b - 1.0).abs() <= bound * 1.000001, "{k}: {a} vs {b}");
        }
        // A second run: every file is finished and skipped, outputs unchanged.
        let before: Vec<Vec<u8>> = files
            .iter()
            .map(|f| std::fs::read(out.join(f.file_name().unwrap()).join("scores.jsonl")).unwrap())
            .collect();
        let again = go();
        for t in again["tasks"].as_array().unwrap() {
            assert_eq!(t["outcome"], json!("skipped"), "{t}");
        }
        for (f, b) in files.iter().zip(&before) {
            let now = std::fs::read(out.join(f.file_name().unwrap()).join("scores.jsonl")).unwrap();
            assert!(&now == b);
        }
        // A damaged output is redone on the next run.
        let victim = out.join(files[1].file_name().unwrap()).join("scores.jsonl");
        std::fs::write(&victim, b"damaged\n").unwrap();
        let third = go();
        let redone: Vec<&Value> = third["tasks"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|t| t["outcome"] != json!("skipped"))
            .collect();
        assert_eq!(redone.len(), 1, "{third}");
        assert!(std::fs::read(&victim).unwrap() == before[1]);
    }
    /// scripts/spark_score.py with a frozen model shipped to the executors
    /// by `spark-submit --files` (given to the driver by its bare name, so
    /// that only the shipped copy can be found), one task's quern process
    /// SIGKILLed after its first batch of results and another task itself
    /// SIGKILLed between writing its done.json and its commit: Spark
    /// retries both, every scored file equals the single-machine
    /// `quern score --model` of its input byte for byte, the killed tasks
    /// report a second attempt, and no temporary folder is left.
    #[test]
    fn shipped_model_and_killed_tasks_equal_single_machine() {
        let submit = crate::spark::spark_submit();
        let dir = tmp().join("spark-model");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        let inputs = dir.join("crawl");
        std::fs::create_dir_all(&inputs).unwrap();
        let model = dir.join("ref3.qm");
        run_ok(&[
            "freeze",
            "--store",
            &s(train3()),
            "--method",
            "mkn",
            "--out",
            &s(&model),
        ]);
        // Three plain .jsonl files; the batches are small enough (2,048
        // lines) that the first has more than one.
        let lines = &input().0;
        let mut files = Vec::new();
        for (k, part) in lines.chunks(lines.len().div_ceil(3)).enumerate() {
            let f = inputs.join(format!("part-{k}.jsonl"));
            std::fs::write(&f, part.join("\n") + "\n").unwrap();
            files.push(f);
        }
        let out = dir.join("scored");
        let r = {
            let _one = crate::spark::ONE_AT_A_TIME
                .lock()
                .unwrap_or_else(|e| e.into_inner());
            std::process::Command::new(&submit)
                .args(["--master", "local[2,4]", "--conf", "spark.ui.enabled=false"])
                .args(["--driver-memory", "1g", "--files", &s(&model)])
                .arg(crate::common::manifest_dir().join("scripts/spark_score.py"))
                .args(["--quern", crate::common::bin(), "--model", "ref3.qm"])
                .args(["--fault-kill", "part-0.jsonl:scoring"])
                .args(["--fault-kill", "part-2.jsonl:commit"])
                .args(["--out", &s(&out), &s(&inputs)])
                .current_dir(&dir)
                .env("PYSPARK_PYTHON", "python3")
                .env("SPARK_LOCAL_IP", "127.0.0.1")
                .stdin(std::process::Stdio::null())
                .output()
                .unwrap()
        };
        let text = String::from_utf8_lossy(&r.stdout).into_owned();
        let err = String::from_utf8_lossy(&r.stderr);
        assert!(r.status.success(), "spark_score.py failed:\n{text}\n{err}");
        assert!(
            err.contains("killed by signal 9"),
            "the quern process of part-0 was not killed:\n{err}"
        );
        let merged: Value =
            serde_json::from_str(text.lines().rfind(|l| l.starts_with('{')).unwrap()).unwrap();
        for t in merged["tasks"].as_array().unwrap() {
            assert_eq!(t["model"], json!("shipped"), "{t}");
            let killed = t["name"] == json!("part-0.jsonl") || t["name"] == json!("part-2.jsonl");
            assert_eq!(t["attempt"].as_u64().unwrap() > 0, killed, "{t}");
        }
        for f in &files {
            let name = f.file_name().unwrap().to_string_lossy().into_owned();
            let got = std::fs::read(out.join(&name).join("scores.jsonl")).unwrap();
            let want = run_ok(&[
                "score",
                "--model",
                &s(&model),
                "--jsonl",
                "--threads",
                "1",
                &s(f),
            ])
            .stdout;
            assert!(got == want.as_bytes(), "{name}: Spark's output differs");
        }
        let left: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.starts_with(".tmp-"))
            .collect();
        assert!(left.is_empty(), "temporary folders left: {left:?}");
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
