//! `quern blend` and `--blend`: the query-time mixture equals Σ λᵢ Pᵢ
//! computed from each part alone (the definition of a linear mixture,
//! Jelinek & Mercer 1980), for stores, models and both together, through
//! `prob`, `next` (with and without `--prefix`, against a brute-force top K
//! over the union of the parts' vocabularies), `score` (totals and
//! `--jsonl --words`), `keystrokes` (the independent Python simulation of
//! tests/integration/keystrokes_check.py) and `serve`.
//!
//! The sources: the Gutenberg novels of fixtures/ split in two, A (emma,
//! mansfieldpark, prideprejudice) and B (northangerabbey,
//! sensesensibility), order 3; persuasion.txt is held out.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use quern::model::Model;
use quern::query::{query_ids, Estimator, Method, Params, Predictor};
use quern::store::Store;
use quern::tokenize::Preparation;
use quern::words::{bos_id, eos_id, unk_id, WordId};
use serde_json::Value;

use crate::common::{bin, gutenberg_dir, ingest_ok, python3, run_ok, run_with_stdin};

/// The stores and models of the blend tests.
pub struct Fixture {
    pub dir: PathBuf,
    /// Source A, order 3.
    pub a: PathBuf,
    /// Source B, order 3.
    pub b: PathBuf,
    /// A frozen with witten-bell.
    pub a_wb: PathBuf,
    /// B frozen with mkn.
    pub b_mkn: PathBuf,
}

pub fn source_a() -> Vec<PathBuf> {
    ["emma.txt", "mansfieldpark.txt", "prideprejudice.txt"]
        .iter()
        .map(|n| gutenberg_dir().join(n))
        .collect()
}

pub fn source_b() -> Vec<PathBuf> {
    ["northangerabbey.txt", "sensesensibility.txt"]
        .iter()
        .map(|n| gutenberg_dir().join(n))
        .collect()
}

pub fn heldout() -> PathBuf {
    gutenberg_dir().join("persuasion.txt")
}

pub fn s(p: &Path) -> &str {
    p.to_str().unwrap()
}

pub fn fixture() -> &'static Fixture {
    static F: OnceLock<Fixture> = OnceLock::new();
    F.get_or_init(|| {
        let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("blend");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        std::fs::create_dir_all(&dir).unwrap();
        let (a, b) = (dir.join("a"), dir.join("b"));
        ingest_ok(&a, &["--order", "3", "--quiet"], &source_a());
        ingest_ok(&b, &["--order", "3", "--quiet"], &source_b());
        let (a_wb, b_mkn) = (dir.join("a-wb.qm"), dir.join("b-mkn.qm"));
        run_ok(&[
            "freeze",
            "--store",
            s(&a),
            "--method",
            "witten-bell",
            "--out",
            s(&a_wb),
        ]);
        run_ok(&["freeze", "--store", s(&b), "--out", s(&b_mkn)]);
        Fixture {
            dir,
            a,
            b,
            a_wb,
            b_mkn,
        }
    })
}

/// A part as the tests open it alone: a store with a method, or a model.
#[derive(Clone, Debug)]
pub enum Spec {
    Store(PathBuf, Method),
    Model(PathBuf),
}

/// A blend of the tests: its parts and the blend file's arguments.
pub struct Case {
    pub name: &'static str,
    pub parts: Vec<Spec>,
    /// `--weights` (none: fitted on the held-out novel).
    pub weights: Option<&'static str>,
}

pub fn cases() -> Vec<Case> {
    let f = fixture();
    vec![
        Case {
            name: "stores",
            parts: vec![
                Spec::Store(f.a.clone(), Method::Mkn),
                Spec::Store(f.b.clone(), Method::WittenBell),
            ],
            weights: Some("0.3,0.7"),
        },
        Case {
            name: "models",
            parts: vec![Spec::Model(f.a_wb.clone()), Spec::Model(f.b_mkn.clone())],
            weights: None,
        },
        Case {
            name: "mixed",
            parts: vec![
                Spec::Store(f.a.clone(), Method::Kn),
                Spec::Model(f.b_mkn.clone()),
            ],
            weights: Some("0.6,0.4"),
        },
    ]
}

/// Writes the blend file of `case` and returns its path and weights.
pub fn write_blend(case: &Case) -> (PathBuf, Vec<f64>) {
    let out = fixture().dir.join(format!("{}.json", case.name));
    let mut args: Vec<String> = vec!["blend".into()];
    let mut methods = Vec::new();
    for p in &case.parts {
        match p {
            Spec::Store(d, m) => {
                args.extend(["--part".into(), s(d).into()]);
                methods.push(m.name().to_string());
            }
            Spec::Model(m) => {
                args.extend(["--part".into(), s(m).into()]);
                methods.push(Model::open(m).unwrap().meta().method.name().to_string());
            }
        }
    }
    for m in methods {
        args.extend(["--method".into(), m]);
    }
    match case.weights {
        Some(w) => args.extend(["--weights".into(), w.into()]),
        None => args.extend(["--heldout".into(), s(&heldout()).into()]),
    }
    args.extend(["--out".into(), s(&out).into()]);
    run_ok(&args);
    let v: Value = serde_json::from_slice(&std::fs::read(&out).unwrap()).unwrap();
    let w = v["parts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p["weight"].as_f64().unwrap())
        .collect();
    (out, w)
}

/// Calls `f` with each part opened alone through the library.
pub fn with_parts<R>(parts: &[Spec], f: impl FnOnce(&[&dyn Predictor]) -> R) -> R {
    let stores: Vec<Option<Store>> = parts
        .iter()
        .map(|p| match p {
            Spec::Store(d, _) => Some(Store::open(d).unwrap()),
            Spec::Model(_) => None,
        })
        .collect();
    let models: Vec<Option<Model>> = parts
        .iter()
        .map(|p| match p {
            Spec::Model(m) => Some(Model::open(m).unwrap()),
            Spec::Store(..) => None,
        })
        .collect();
    let mut boxes: Vec<Box<dyn Predictor + '_>> = Vec::new();
    for (i, p) in parts.iter().enumerate() {
        match p {
            Spec::Store(_, m) => boxes.push(Box::new(
                Estimator::new(stores[i].as_ref().unwrap(), *m, Params::default()).unwrap(),
            )),
            Spec::Model(_) => boxes.push(Box::new(models[i].as_ref().unwrap())),
        }
    }
    let refs: Vec<&dyn Predictor> = boxes.iter().map(|b| b.as_ref()).collect();
    f(&refs)
}

/// Σ λᵢ pᵢ, summed in the parts' order.
pub fn mix(weights: &[f64], ps: &[f64]) -> f64 {
    weights.iter().zip(ps).fold(0.0, |acc, (l, p)| acc + l * p)
}

pub fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()) || (a == 0.0 && b == 0.0)
}

/// Queries from the held-out novel: every 40th line, n-grams of 1 to 4
/// words at every third position, with `<s>` starts and words outside V.
pub fn queries() -> Vec<String> {
    let text = std::fs::read_to_string(heldout()).unwrap();
    let mut out = Vec::new();
    for (i, line) in text
        .lines()
        .filter(|l| !l.trim().is_empty())
        .step_by(40)
        .enumerate()
    {
        let mut w: Vec<&str> = vec!["<s>"];
        w.extend(line.split_whitespace());
        w.push("</s>");
        let n = 1 + i % 4;
        for j in (1..w.len()).step_by(3) {
            out.push(w[(j + 1).saturating_sub(n)..=j].join(" "));
        }
    }
    out
}

#[test]
fn prob_equals_the_weighted_sum_of_the_parts() {
    let qs = queries();
    assert!(qs.len() > 300);
    let stdin: String = qs.iter().map(|q| format!("{q}\n")).collect();
    let prep = Preparation::default();
    let ids: Vec<Vec<WordId>> = qs.iter().map(|q| query_ids(q, &prep)).collect();
    let refs: Vec<&[WordId]> = ids.iter().map(|q| &q[..]).collect();
    for case in cases() {
        let (file, weights) = write_blend(&case);
        let r = run_with_stdin(&["prob", "--blend", s(&file), "--json"], stdin.as_bytes());
        r.assert_success();
        let rows: Vec<Value> = r
            .stdout
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        assert_eq!(rows.len(), qs.len());
        let parts: Vec<Vec<quern::query::Prob>> = with_parts(&case.parts, |ps| {
            ps.iter().map(|p| p.prob_batch(&refs).unwrap()).collect()
        });
        let mut oov = 0;
        for (t, row) in rows.iter().enumerate() {
            let pi: Vec<f64> = parts.iter().map(|v| v[t].p).collect();
            let want = mix(&weights, &pi);
            let got = row["probability"].as_f64().unwrap();
            assert!(
                close(got, want, 1e-12),
                "{}: {:?}: {got} against Σ λ p = {want}",
                case.name,
                qs[t]
            );
            // A word outside every part's vocabulary matches 0 words.
            let all_oov = parts.iter().all(|v| v[t].oov);
            oov += all_oov as usize;
            assert_eq!(
                row["matched"].as_u64() == Some(0),
                all_oov,
                "{}: {:?}",
                case.name,
                qs[t]
            );
        }
        assert!(
            oov > 0,
            "{}: some query words are outside both parts",
            case.name
        );
    }
}

/// The brute-force top `k` after `context` over the union of the parts'
/// vocabularies (a word outside a part's vocabulary scored by that part
/// as `<unk>`), filtered by `keep`; ties by the words' bytes.
fn brute_top(
    ps: &[&dyn Predictor],
    weights: &[f64],
    context: &[WordId],
    k: usize,
    keep: impl Fn(WordId, &str) -> bool,
) -> Vec<(String, f64)> {
    let mut union: Vec<WordId> = Vec::new();
    for p in ps {
        union.extend(p.distribution(&[]).unwrap().into_iter().map(|x| x.0));
    }
    union.sort_unstable();
    union.dedup();
    let qs: Vec<Vec<WordId>> = union
        .iter()
        .map(|&w| {
            let mut q = context.to_vec();
            q.push(w);
            q
        })
        .collect();
    let refs: Vec<&[WordId]> = qs.iter().map(|q| &q[..]).collect();
    let each: Vec<Vec<f64>> = ps
        .iter()
        .map(|p| p.prob_batch(&refs).unwrap().iter().map(|x| x.p).collect())
        .collect();
    let mut all: Vec<(String, f64)> = Vec::new();
    for (t, &w) in union.iter().enumerate() {
        let text = ps.iter().find_map(|p| p.word(w).unwrap()).unwrap();
        if keep(w, &text) {
            let pi: Vec<f64> = each.iter().map(|v| v[t]).collect();
            all.push((text, mix(weights, &pi)));
        }
    }
    all.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.as_bytes().cmp(b.0.as_bytes())));
    all.truncate(k);
    all
}

#[test]
fn next_equals_a_brute_force_top_k_over_the_union() {
    let contexts = [
        "<s>",
        "she was",
        "in the",
        "Captain Wentworth",
        "xyzzy qqq",
        "it is a",
    ];
    let prefixes = ["", "ha", "W", "th"];
    let prep = Preparation::default();
    for case in cases() {
        let (file, weights) = write_blend(&case);
        with_parts(&case.parts, |ps| {
            for c in contexts {
                let ctx = query_ids(c, &prep);
                for prefix in prefixes {
                    let mut args = vec!["next", "--blend", s(&file), "--json", "--top", "10"];
                    if !prefix.is_empty() {
                        args.extend(["--prefix", prefix]);
                    }
                    if !c.is_empty() {
                        args.push(c);
                    }
                    let v: Value = serde_json::from_str(&run_ok(&args).stdout).unwrap();
                    let got: Vec<(String, f64)> = v["words"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .map(|w| {
                            (
                                w["word"].as_str().unwrap().to_string(),
                                w["probability"].as_f64().unwrap(),
                            )
                        })
                        .collect();
                    let want = brute_top(ps, &weights, &ctx, 10, |w, text| {
                        if prefix.is_empty() {
                            w != bos_id()
                        } else {
                            w != bos_id()
                                && w != unk_id()
                                && w != eos_id()
                                && text.starts_with(prefix)
                        }
                    });
                    assert_eq!(got.len(), want.len(), "{}: {c:?} {prefix:?}", case.name);
                    for (g, w) in got.iter().zip(&want) {
                        assert_eq!(
                            g.0, w.0,
                            "{}: {c:?} {prefix:?}: {got:?} against {want:?}",
                            case.name
                        );
                        assert!(
                            close(g.1, w.1, 1e-12),
                            "{}: {c:?} {prefix:?}: {g:?} against {w:?}",
                            case.name
                        );
                    }
                }
            }
        });
    }
}

/// The held-out novel's predictions scored by every part alone, mixed:
/// Σ log10 (Σ λᵢ pᵢ) and the number of predictions.
fn mixed_log10(case: &Case, weights: &[f64]) -> (f64, u64) {
    let sentences = crate::query_fixtures::heldout_sentences();
    let probs = with_parts(&case.parts, |ps| {
        quern::blend::fit::part_probabilities(ps, sentences).unwrap()
    });
    let mut sum = 0.0;
    for t in 0..probs[0].len() {
        let pi: Vec<f64> = probs.iter().map(|v| v[t]).collect();
        sum += mix(weights, &pi).log10();
    }
    (sum, probs[0].len() as u64)
}

#[test]
fn score_equals_the_mixture_of_the_parts() {
    for case in cases() {
        let (file, weights) = write_blend(&case);
        let v: Value = serde_json::from_str(
            &run_ok(&["score", "--blend", s(&file), "--json", s(&heldout())]).stdout,
        )
        .unwrap();
        let (sum, n) = mixed_log10(&case, &weights);
        assert_eq!(v["predictions"].as_u64(), Some(n), "{}", case.name);
        let ppl = 10f64.powf(-sum / n as f64);
        let got = v["perplexity"].as_f64().unwrap();
        assert!(
            close(got, ppl, 1e-9),
            "{}: perplexity {got} against {ppl}",
            case.name
        );

        // --jsonl --words: every prediction of a few paragraphs.
        let text = std::fs::read_to_string(heldout()).unwrap();
        let lines: Vec<&str> = text
            .lines()
            .filter(|l| !l.trim().is_empty())
            .take(60)
            .collect();
        let docs: String = lines
            .iter()
            .map(|l| format!("{}\n", serde_json::json!({ "text": l })))
            .collect();
        let r = run_with_stdin(
            &[
                "score",
                "--blend",
                s(&file),
                "--jsonl",
                "--words",
                "--threads",
                "2",
                "-",
            ],
            docs.as_bytes(),
        );
        r.assert_success();
        let prep = Preparation::default();
        with_parts(&case.parts, |ps| {
            for (l, row) in lines.iter().zip(r.stdout.lines()) {
                let row: Value = serde_json::from_str(row).unwrap();
                let mut padded = vec![bos_id()];
                padded.extend(query_ids(l, &prep));
                padded.push(eos_id());
                let qs: Vec<&[WordId]> = (1..padded.len()).map(|i| &padded[..=i]).collect();
                let each: Vec<Vec<f64>> = ps
                    .iter()
                    .map(|p| p.prob_batch(&qs).unwrap().iter().map(|x| x.p).collect())
                    .collect();
                let words = row["words"].as_array().unwrap();
                assert_eq!(words.len(), qs.len(), "{}: {l:?}", case.name);
                for (t, w) in words.iter().enumerate() {
                    let pi: Vec<f64> = each.iter().map(|v| v[t]).collect();
                    let want = mix(&weights, &pi).log10();
                    let got = w["log10"].as_f64().unwrap();
                    assert!(
                        close(got, want, 1e-12),
                        "{}: {l:?} word {t}: {got} against {want}",
                        case.name
                    );
                }
            }
        });
    }
}

#[test]
fn keystrokes_equal_the_python_simulation() {
    // A and A frozen with witten-bell: one vocabulary, so the simulation's
    // V (read from store A) is the blend's.
    let f = fixture();
    let file = f.dir.join("same-vocab.json");
    run_ok(&[
        "blend",
        "--part",
        s(&f.a),
        "--part",
        s(&f.a_wb),
        "--weights",
        "0.5,0.5",
        "--out",
        s(&file),
    ]);
    let text = std::fs::read_to_string(heldout()).unwrap();
    let held = f.dir.join("keystrokes-held.txt");
    let excerpt: String = text
        .lines()
        .skip(200)
        .take(60)
        .map(|l| format!("{l}\n"))
        .collect();
    std::fs::write(&held, excerpt).unwrap();
    let ours: Value = serde_json::from_str(
        &run_ok(&[
            "keystrokes",
            "--json",
            "--blend",
            s(&file),
            "--top",
            "1,3",
            s(&held),
        ])
        .stdout,
    )
    .unwrap();
    let script = crate::common::manifest_dir().join("tests/integration/keystrokes_check.py");
    let out = std::process::Command::new(python3())
        .env("KEYSTROKES_LOWERCASE", "0")
        .arg(&script)
        .args([bin(), s(&f.a), "1,3", s(&held), "--blend", s(&file)])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let theirs: Value = serde_json::from_slice(&out.stdout).unwrap();
    for k in ["words", "outside_vocabulary", "keystrokes_without"] {
        assert_eq!(ours[k], theirs[k], "{k}");
    }
    assert!(ours["words"].as_u64().unwrap() > 300);
    for (p, q) in ours["results"]
        .as_array()
        .unwrap()
        .iter()
        .zip(theirs["results"].as_array().unwrap())
    {
        assert_eq!(p["top"], q["top"]);
        assert_eq!(p["keystrokes"], q["keystrokes"], "top {}", p["top"]);
    }
}

#[test]
fn serve_answers_like_the_command_line() {
    let case = &cases()[2];
    let (file, _) = write_blend(case);
    let srv = crate::serve::Server::start(&["--blend", s(&file), "--threads", "2"]);
    let (st, text) = srv.call("GET", "/info", None);
    assert_eq!(st, 200);
    let info: Value = serde_json::from_str(&text).unwrap();
    assert_eq!(info["source"], "blend");
    assert_eq!(info["method"], "blend");
    for q in queries().iter().step_by(25).take(20) {
        let words: Vec<&str> = q.split(' ').collect();
        let (ctx, w) = words.split_at(words.len() - 1);
        let (st, v) = srv.post(
            "/prob",
            &serde_json::json!({"context": ctx.join(" "), "word": w[0]}),
        );
        assert_eq!(st, 200, "{v}");
        let cli: Value =
            serde_json::from_str(&run_ok(&["prob", "--blend", s(&file), "--json", q]).stdout)
                .unwrap();
        // Source of truth: `quern prob --blend --json`, field for field.
        assert_eq!(v, cli, "{q}");
    }
    for c in ["she was", "<s>", "in the"] {
        let (st, v) = srv.post("/next", &serde_json::json!({"context": c, "top": 5}));
        assert_eq!(st, 200, "{v}");
        let cli: Value = serde_json::from_str(
            &run_ok(&["next", "--blend", s(&file), "--json", "--top", "5", c]).stdout,
        )
        .unwrap();
        for f in ["words", "rest", "context", "method", "words_scored"] {
            assert_eq!(v[f], cli[f], "{c}: {f}");
        }
    }
}
