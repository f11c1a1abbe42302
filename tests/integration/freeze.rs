//! Frozen models (`quern freeze`, `quern::model`) against the store's own
//! estimator, and their ARPA export against an independent reader written
//! in Python (`tests/integration/arpa_check.py`, standard library only).
//!
//! Sources of truth:
//! - the store's [`Estimator`] for every freezable method (itself checked
//!   against the published formulas in `estimators.rs` and for
//!   normalisation in `query_normalisation.rs`): an unpruned model must
//!   give the same probability for every word of V after sampled contexts,
//!   within the precision it stores. q and β are 32-bit floats, each within
//!   2^-24 relative of the exact value (round to nearest), and a
//!   probability is a product of at most N of them (one q and up to N − 1
//!   weights), so the bound used is (N + 1)·2^-24 relative;
//! - the definition of a probability distribution: the Python reader
//!   checks that every context of the ARPA file sums to 1 and that the
//!   file is closed under prefixes and suffixes, and answers queries by
//!   the back-off rule, which must equal the estimator's probabilities.

use std::path::{Path, PathBuf};
use std::process::Command;

use quern::model::{arpa, freeze, FreezeOptions, Model, Residence};
use quern::query::{prediction, Estimator, Method, Params, Prob};
use quern::store::Store;
use quern::words::{bos_id, eos_id, unk_id, word_id, WordId};

use crate::common::bin;
use crate::query_fixtures::{heldout_sentences, train3, train5};

/// The methods that have a back-off form.
const FREEZABLE: [Method; 7] = [
    Method::Mkn,
    Method::Kn,
    Method::Absolute,
    Method::WittenBell,
    Method::Katz,
    Method::Interp,
    Method::Stupid,
];

pub(crate) fn scratch(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("freeze")
        .join(name);
    if d.exists() {
        std::fs::remove_dir_all(&d).unwrap();
    }
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The parameters a method is tested with: the defaults, and for `interp`
/// per-bucket weights too (exercised by a second run).
fn params_for(m: Method, n: usize, bucketed: bool) -> Params {
    let mut p = Params::default();
    if m == Method::Interp && bucketed {
        // Weights that differ by order and bucket, so that a wrong bucket
        // would show.
        p.bucket_lambdas = Some(
            (0..n)
                .map(|k| {
                    (0..4)
                        .map(|b| 0.3 + 0.1 * k as f64 + 0.05 * b as f64)
                        .collect()
                })
                .collect(),
        );
    }
    p
}

/// Contexts of length N − 1 (and shorter) from the held-out text, taken
/// evenly, plus the awkward ones: empty, `<s>`, `</s>`, OOV words.
pub(crate) fn sample_contexts(n: usize, count: usize) -> Vec<Vec<WordId>> {
    let mut all = Vec::new();
    for s in heldout_sentences() {
        for i in 1..s.len() {
            let start = (i + 1).saturating_sub(n);
            all.push(s[start..i].to_vec());
        }
    }
    let step = (all.len() / count).max(1);
    let mut out: Vec<Vec<WordId>> = all.into_iter().step_by(step).take(count).collect();
    let oov = word_id(b"zzqxw-not-in-austen");
    out.extend([
        vec![],
        vec![bos_id()],
        vec![eos_id()],
        vec![oov],
        vec![oov; n],
        vec![bos_id(), oov],
        vec![unk_id()],
    ]);
    out
}

fn bound(n: usize) -> f64 {
    (n as f64 + 1.0) * 2f64.powi(-24)
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a == 0.0 && b == 0.0) || (a - b).abs() <= rel * a.abs().max(b.abs()) + 1e-300
}

/// Freezes, then compares the model with the estimator over all of V for
/// sampled contexts, in running text through `prob_batch` (the carried
/// state), and `next`.
fn check_exact(store_dir: &Path, name: &str, contexts: usize) {
    let store = Store::open(store_dir).unwrap();
    let n = store.order();
    let dir = scratch(name);
    let ctxs = sample_contexts(n, contexts);
    for m in FREEZABLE {
        for bucketed in [false, true] {
            if bucketed && m != Method::Interp {
                continue;
            }
            let est = Estimator::new(&store, m, params_for(m, n, bucketed)).unwrap();
            let path = dir.join(format!("{m}-{bucketed}.model"));
            let rep = freeze(&est, &path, &FreezeOptions::default()).unwrap();
            assert_eq!(
                rep.ngrams[1..],
                rep.store_ngrams[1..],
                "{m}: unpruned keeps all"
            );
            let model = Model::open(&path).unwrap();
            model.verify().unwrap();
            let tol = bound(n);
            let mut worst: f64 = 0.0;
            for h in &ctxs {
                let d_est = est.distribution(h).unwrap();
                let d_mod = model.distribution(h).unwrap();
                assert_eq!(d_est.len(), d_mod.len());
                for (&(we, pe), &(wm, pm)) in d_est.iter().zip(&d_mod) {
                    assert_eq!(we, wm);
                    if pe > 0.0 || pm > 0.0 {
                        worst = worst.max((pe - pm).abs() / pe.abs().max(pm.abs()));
                    }
                    assert!(
                        close(pe, pm, tol),
                        "{m} (buckets {bucketed}): P({we:x} | {h:x?}) store {pe:e}, model {pm:e}"
                    );
                }
                let ne = est.next(h, 10).unwrap();
                let nm = model.next(h, 10).unwrap();
                assert_eq!(ne.items.len(), nm.items.len());
                for (i, (a, b)) in ne.items.iter().zip(&nm.items).enumerate() {
                    assert!(
                        close(a.1, b.1, tol),
                        "{m}: next rank {i} after {h:x?}: {a:?} vs {b:?}"
                    );
                    // Words may swap only where two probabilities tie
                    // within the stored precision.
                    if a.0 != b.0 {
                        assert!(
                            close(a.1, b.1, 2.0 * tol),
                            "{m}: next rank {i}: {a:?} vs {b:?}"
                        );
                    }
                }
                assert_eq!(ne.context, nm.context);
            }
            // Running text: every prediction of the held-out novel, in
            // batches (the model carries its matched context from one
            // prediction to the next).
            let mut qs: Vec<&[WordId]> = Vec::new();
            for s in heldout_sentences().iter().take(1500) {
                for i in 1..s.len() {
                    qs.push(prediction(s, i, n));
                }
            }
            let pe = est.prob_batch(&qs).unwrap();
            let pm = model.prob_batch(&qs).unwrap();
            for ((q, a), b) in qs.iter().zip(&pe).zip(&pm) {
                assert!(
                    close(a.p, b.p, tol),
                    "{m}: running text {q:x?}: {a:?} vs {b:?}"
                );
                assert_eq!(
                    (a.order, a.oov, a.word),
                    (b.order, b.oov, b.word),
                    "{m}: {q:x?}"
                );
            }
            // The batch is searched as several runs in step: cut into
            // batches of any size, read into memory instead of mapped, or
            // shuffled (no running text: each query's context found from
            // scratch), it answers the same, bit for bit.
            let loaded = Model::open_as(&path, Residence::Loaded).unwrap();
            assert_eq!(loaded.prob_batch(&qs).unwrap(), pm, "{m}: loaded");
            for size in [1, 2, 3, 5, 8, 13] {
                let cut: Vec<Prob> = qs
                    .chunks(size)
                    .flat_map(|c| model.prob_batch(c).unwrap())
                    .collect();
                assert_eq!(cut, pm, "{m}: batches of {size}");
            }
            let mut shuffled: Vec<(usize, &[WordId])> = qs.iter().copied().enumerate().collect();
            shuffled.sort_by_key(|&(i, _)| (i as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15));
            let sq: Vec<&[WordId]> = shuffled.iter().map(|&(_, q)| q).collect();
            for ((i, q), b) in shuffled.iter().zip(model.prob_batch(&sq).unwrap()) {
                assert_eq!(b, pm[*i], "{m}: shuffled {q:x?}");
            }
            assert!(model.prob_batch(&[]).unwrap().is_empty());
            // Single queries, a few.
            for q in qs.iter().step_by(997) {
                let a = est.prob(&q[..q.len() - 1], q[q.len() - 1]).unwrap();
                let b = model.prob(&q[..q.len() - 1], q[q.len() - 1]).unwrap();
                assert!(close(a.p, b.p, tol), "{m}: {q:x?}: {a:?} vs {b:?}");
            }
            eprintln!(
                "{m} (order {n}, buckets {bucketed}): {} contexts × |V| = {}, {} running predictions, largest relative difference {worst:.2e} (bound {tol:.2e})",
                ctxs.len(),
                store.meta().totals.vocabulary,
                qs.len()
            );
        }
    }
}

#[test]
fn frozen_equals_store_order3() {
    check_exact(train3(), "exact3", 60);
}

#[test]
fn frozen_equals_store_order5() {
    check_exact(train5(), "exact5", 25);
}

/// Runs the Python reader on an ARPA file; returns its answers to the
/// queries and its report.
pub(crate) fn python_check(
    arpa: &Path,
    queries: Option<&Path>,
    model: &Model,
) -> (Vec<f64>, serde_json::Value) {
    let script = crate::common::manifest_dir().join("tests/integration/arpa_check.py");
    let skip = arpa.with_extension("skip");
    std::fs::write(&skip, arpa::skipping_contexts(model).join("\n")).unwrap();
    let out = Command::new("python3")
        .env("ARPA_SKIP_CONTEXTS", &skip)
        .arg(&script)
        .arg(arpa)
        .arg(queries.map_or("-".into(), |p| p.display().to_string()))
        .output()
        .expect("python3 runs");
    let text = String::from_utf8_lossy(&out.stdout);
    let lines: Vec<&str> = text.lines().collect();
    let report: serde_json::Value = serde_json::from_str(lines.last().unwrap_or(&"{}"))
        .unwrap_or_else(|e| panic!("{e}: {text}\n{}", String::from_utf8_lossy(&out.stderr)));
    assert!(
        out.status.success(),
        "the Python ARPA reader refused {}: {report}\n{}",
        arpa.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    let answers = lines[..lines.len() - 1]
        .iter()
        .map(|l| l.parse::<f64>().unwrap())
        .collect();
    (answers, report)
}

/// Query lines for the Python reader (the held-out novel's n-grams as
/// words, every seventh sentence), and the estimator's log10 for each.
fn queries(store: &Store, est: &Estimator<'_>, path: &Path) -> Vec<f64> {
    let n = store.order();
    let mut text = String::new();
    let mut want = Vec::new();
    let lines = std::fs::read_to_string(crate::query_fixtures::heldout_path()).unwrap();
    for line in lines
        .lines()
        .filter(|l| l.split_whitespace().next().is_some())
        .step_by(7)
        .take(400)
    {
        let mut toks = vec!["<s>"];
        toks.extend(line.split_whitespace());
        toks.push("</s>");
        for i in 1..toks.len() {
            let q = toks[(i + 1).saturating_sub(n)..=i].join(" ");
            let ids = quern::query::query_ids(&q, &quern::tokenize::Preparation::default());
            let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1]).unwrap();
            text.push_str(&q);
            text.push('\n');
            want.push(p.log10);
        }
    }
    assert!(want.len() > 1000);
    std::fs::write(path, text).unwrap();
    want
}

/// The ARPA export of every probability method at order 3 (and `mkn` at
/// order 5), read by the Python reader: counts, closure, every context
/// sums to 1, and its back-off probabilities equal the estimator's.
#[test]
fn arpa_read_by_python() {
    for (store_dir, methods) in [(train3(), &FREEZABLE[..6]), (train5(), &[Method::Mkn][..])] {
        let store = Store::open(store_dir).unwrap();
        let n = store.order();
        let dir = scratch(&format!("arpa{n}"));
        for &m in methods {
            let est = Estimator::new(&store, m, Params::default()).unwrap();
            let path = dir.join(format!("{m}.model"));
            freeze(&est, &path, &FreezeOptions::default()).unwrap();
            let model = Model::open(&path).unwrap();
            let arpa_path = dir.join(format!("{m}.arpa.gz"));
            arpa::write_arpa_file(&model, &arpa_path).unwrap();
            let qpath = dir.join(format!("{m}.queries"));
            let want = queries(&store, &est, &qpath);
            // Katz passes the mass of a context whose children take all of
            // h''s probability further down (the model carries how far);
            // ARPA text cannot say so, so those contexts (listed from the
            // model) are left out of the reader's sums, and queries that
            // go through one may get less from the ARPA rule than Katz
            // gives.
            let katz = m == Method::Katz;
            let (got, report) = python_check(&arpa_path, Some(&qpath), &model);
            assert_eq!(report["unnormalised"].as_u64().unwrap(), 0);
            assert_eq!(
                report["skipped_contexts"].as_u64().unwrap(),
                model.skipping_contexts()
            );
            if !katz {
                assert_eq!(model.skipping_contexts(), 0);
            }
            assert_eq!(got.len(), want.len());
            // log10 values are written with 7 decimals (±5e-8 each, at
            // most N + 1 of them summed) on top of the stored precision.
            let tol = (n as f64 + 1.0) * (5e-8 + bound(n) / std::f64::consts::LN_10);
            let mut worst: f64 = 0.0;
            let mut differ = 0;
            for (i, (g, w)) in got.iter().zip(&want).enumerate() {
                if *w == f64::NEG_INFINITY {
                    assert!(*g <= -99.0, "{m}: query {i}: Python {g}, store -inf");
                    continue;
                }
                if katz && (g - w).abs() > tol {
                    // Through a skipping context: the ARPA reader finds
                    // almost nothing left at h' where Katz has mass.
                    assert!(g < w, "{m}: query {i}: Python {g} above the store's {w}");
                    differ += 1;
                    continue;
                }
                worst = worst.max((g - w).abs());
                assert!(
                    (g - w).abs() <= tol,
                    "{m}: query {i}: Python {g}, store {w}"
                );
            }
            if katz {
                eprintln!(
                    "{m}: {} contexts skip; {differ} of {} queries go through one and differ",
                    model.skipping_contexts(),
                    want.len()
                );
            }
            let counts: Vec<u64> = serde_json::from_value(report["counts"].clone()).unwrap();
            assert_eq!(counts, model.meta().ngrams, "{m}: the counts");
            eprintln!("{m} (order {n}): Python reader: {report}; {} queries, largest |Δ log10| {worst:.2e} (bound {tol:.2e})", want.len());
        }
    }
}

/// Freezing cuts each order into parts by first word and runs them on
/// threads side by side: the model must be the same file, byte for byte,
/// whatever the number of threads (1 is the plain sequential pass; 7 cuts
/// the small fixture into parts of a few words), with and without count
/// thresholds, for an interpolated method, Katz (whose contexts may look
/// past h') and stupid back-off.
#[test]
fn threads_do_not_change_the_model() {
    let store = Store::open(train5()).unwrap();
    let dir = scratch("threads");
    for (m, min_counts) in [
        (Method::Mkn, vec![]),
        (Method::Katz, vec![]),
        (Method::Stupid, vec![]),
        (Method::WittenBell, vec![1, 2, 2, 3]),
        (Method::Katz, vec![1, 1, 2]),
    ] {
        let est = Estimator::new(&store, m, params_for(m, store.order(), false)).unwrap();
        let bytes: Vec<Vec<u8>> = [1, 2, 3, 7]
            .iter()
            .map(|&threads| {
                let path = dir.join(format!("{m}-{}-{threads}.model", min_counts.len()));
                let opts = FreezeOptions {
                    min_counts: min_counts.clone(),
                    threads,
                    ..Default::default()
                };
                freeze(&est, &path, &opts).unwrap();
                std::fs::read(&path).unwrap()
            })
            .collect();
        for (b, threads) in bytes[1..].iter().zip([2, 3, 7]) {
            assert!(
                *b == bytes[0],
                "{m} {min_counts:?}: {threads} threads wrote another model than 1"
            );
        }
    }
}

/// Count thresholds: fewer n-grams, still closed and normalised (the
/// back-off weights are recomputed); the Python reader checks the sums and
/// the closure, the model's own distribution sums to 1 too.
#[test]
fn pruned_by_count_stays_normalised() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("pruned");
    for m in [Method::Mkn, Method::Katz, Method::WittenBell] {
        let est = Estimator::new(&store, m, Params::default()).unwrap();
        let path = dir.join(format!("{m}.model"));
        let rep = freeze(
            &est,
            &path,
            &FreezeOptions {
                min_counts: vec![1, 2, 3],
                ..Default::default()
            },
        )
        .unwrap();
        assert!(rep.ngrams[1] < rep.store_ngrams[1] && rep.ngrams[2] < rep.store_ngrams[2]);
        let model = Model::open(&path).unwrap();
        model.verify().unwrap();
        for h in sample_contexts(3, 40) {
            let sum: f64 = model.distribution(&h).unwrap().iter().map(|x| x.1).sum();
            assert!(
                (sum - 1.0).abs() <= 1e-5,
                "{m}: pruned model sums to {sum} after {h:x?}"
            );
        }
        let arpa_path = dir.join(format!("{m}.arpa"));
        arpa::write_arpa_file(&model, &arpa_path).unwrap();
        let (_, report) = python_check(&arpa_path, None, &model);
        assert_eq!(report["unnormalised"].as_u64().unwrap(), 0);
        eprintln!(
            "{m} pruned 1,2,3: kept {:?} of {:?}; Python: {report}",
            rep.ngrams, rep.store_ngrams
        );
    }
}

/// `add-k` and `mle` are refused with the reason.
#[test]
fn non_backoff_methods_refused() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("refused");
    for m in [Method::AddK, Method::Mle] {
        let est = Estimator::new(&store, m, Params::default()).unwrap();
        let err = freeze(&est, &dir.join("x.model"), &FreezeOptions::default())
            .unwrap_err()
            .to_string();
        assert!(err.contains("not a back-off model"), "{m}: {err}");
        assert!(!dir.join("x.model").exists());
    }
}

fn verify_cli(path: &Path) -> (bool, String) {
    let out = Command::new(bin())
        .args(["freeze", "--verify"])
        .arg(path)
        .output()
        .unwrap();
    (
        out.status.success(),
        String::from_utf8_lossy(&out.stderr).into_owned() + &String::from_utf8_lossy(&out.stdout),
    )
}

/// Truncated and damaged model files are refused with an error naming the
/// file: on open (header, trailer, directory, metadata, vocabulary), or by
/// `--verify` (the n-gram arrays).
#[test]
fn damaged_models_refused() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("damage");
    let est = Estimator::new(&store, Method::Kn, Params::default()).unwrap();
    // A model of 32-bit values, and one whose q and β are codes into bins
    // (the sections of format 2 that only quantized models have).
    let coded = FreezeOptions {
        bits: Some(8),
        weight_bits: Some(8),
        ..Default::default()
    };
    for (name, opts) in [("good", FreezeOptions::default()), ("coded", coded)] {
        damaged_model_refused(&est, &dir, name, &opts);
    }
}

/// Freezes `est` with `opts`, then damages the file in every way the test
/// above lists and checks each is refused, naming the file.
fn damaged_model_refused(est: &Estimator<'_>, dir: &Path, name: &str, opts: &FreezeOptions) {
    let good = dir.join(format!("{name}.model"));
    freeze(est, &good, opts).unwrap();
    let bytes = std::fs::read(&good).unwrap();
    let (ok, text) = verify_cli(&good);
    assert!(ok, "{text}");
    let model = Model::open(&good).unwrap();
    let arrays: Vec<(u32, u64, u64)> = model_sections(&bytes);
    drop(model);
    let mut cases: Vec<(String, Vec<u8>, bool)> = Vec::new();
    for cut in [0, 7, 16, 100, bytes.len() / 2, bytes.len() - 1] {
        cases.push((format!("truncated to {cut}"), bytes[..cut].to_vec(), true));
    }
    let flip = |at: usize| {
        let mut b = bytes.clone();
        b[at] ^= 0x20;
        b
    };
    cases.push(("magic".into(), flip(2), true));
    cases.push(("version".into(), flip(8), true));
    cases.push(("trailer".into(), flip(bytes.len() - 3), true));
    cases.push(("directory".into(), flip(bytes.len() - 40), true));
    for (i, &(kind, off, len)) in arrays.iter().enumerate() {
        // The small sections (kinds 1 to 5: metadata, word ids, offsets
        // and text, ranking) are checked on open, wherever they lie in the
        // file (a reduced model writes its metadata last); the n-gram
        // arrays by --verify.
        cases.push((
            format!("section {i} (kind {kind})"),
            flip((off + len / 2) as usize),
            (1..=5).contains(&kind),
        ));
    }
    assert_eq!(
        arrays.iter().filter(|a| (1..=5).contains(&a.0)).count(),
        5,
        "{name}: the five small sections"
    );
    for (what, b, on_open) in cases {
        let p = dir.join("bad.model");
        std::fs::write(&p, &b).unwrap();
        let opened = Model::open(&p);
        if on_open {
            let e = opened
                .err()
                .unwrap_or_else(|| panic!("{name}, {what}: opened"))
                .to_string();
            assert!(e.contains(&p.display().to_string()), "{what}: {e}");
        }
        let (ok, text) = verify_cli(&p);
        assert!(!ok, "{name}, {what}: --verify passed a damaged file");
        assert!(text.contains(&p.display().to_string()), "{what}: {text}");
    }
}

/// (kind, offset, length) of every section, from the directory (read here
/// from the layout documented in `quern::model`, independently of the
/// reader).
fn model_sections(b: &[u8]) -> Vec<(u32, u64, u64)> {
    let u64_at = |i: usize| u64::from_le_bytes(b[i..i + 8].try_into().unwrap());
    let u32_at = |i: usize| u32::from_le_bytes(b[i..i + 4].try_into().unwrap());
    let t = b.len() - 32;
    let dir = u64_at(t) as usize;
    let count = u64_at(t + 8) as usize;
    (0..count)
        .map(|i| {
            let e = dir + 32 * i;
            (u32_at(e), u64_at(e + 8), u64_at(e + 16))
        })
        .filter(|&(_, _, len)| len > 0)
        .collect()
}

fn run_json(args: &[&str], stdin: Option<&str>) -> Vec<serde_json::Value> {
    use std::io::Write;
    let mut c = Command::new(bin());
    c.args(args)
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped());
    let mut child = c.spawn().unwrap();
    child
        .stdin
        .take()
        .unwrap()
        .write_all(stdin.unwrap_or("").as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    if text.trim_start().starts_with('{') && text.lines().count() > 1 && text.contains("\n  ") {
        vec![serde_json::from_str(&text).unwrap()]
    } else {
        text.lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect()
    }
}

/// `prob`, `next` and `score` with `--model` in place of `--store` give the
/// same `--json` fields with the same values (within the stored precision;
/// times apart).
#[test]
fn cli_model_answers_like_the_store() {
    let store = train3().display().to_string();
    let dir = scratch("cli");
    let model = dir.join("kn.qm").display().to_string();
    let st = Command::new(bin())
        .args([
            "freeze", "--store", &store, "--method", "kn", "--out", &model,
        ])
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let held = crate::query_fixtures::heldout_path().display().to_string();
    let lines: String = std::fs::read_to_string(&held)
        .unwrap()
        .lines()
        .filter(|l| !l.trim().is_empty())
        .take(300)
        .flat_map(|l| {
            let w: Vec<&str> = l.split_whitespace().collect();
            (1..=w.len()).map(move |i| w[i.saturating_sub(3)..i].join(" ") + "\n")
        })
        .collect();
    let a = run_json(
        &["prob", "--store", &store, "--method", "kn", "--json"],
        Some(&lines),
    );
    let b = run_json(&["prob", "--model", &model, "--json"], Some(&lines));
    // Read into memory instead of mapped: the same output.
    let loaded = run_json(
        &["prob", "--model", &model, "--load-model", "--json"],
        Some(&lines),
    );
    assert_eq!(b, loaded, "--load-model");
    let st = Command::new(bin())
        .args(["prob", "--store", &store, "--load-model", "a b"])
        .output()
        .unwrap();
    assert!(!st.status.success());
    assert!(
        String::from_utf8_lossy(&st.stderr).contains("--load-model reads a model file"),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    assert_eq!(a.len(), b.len());
    assert!(a.len() > 1000);
    let tol = bound(3);
    for (x, y) in a.iter().zip(&b) {
        let keys = |v: &serde_json::Value| -> Vec<String> {
            v.as_object().unwrap().keys().cloned().collect()
        };
        assert_eq!(keys(x), keys(y));
        for k in ["words", "matched"] {
            assert_eq!(x[k], y[k], "{k}: {x} vs {y}");
        }
        let (p, q) = (
            x["probability"].as_f64().unwrap(),
            y["probability"].as_f64().unwrap(),
        );
        assert!(close(p, q, tol), "{x} vs {y}");
    }
    for ctx in ["<s>", "Mr.", "she was", "zzqxw-not-in-austen"] {
        let x = &run_json(
            &[
                "next", "--store", &store, "--method", "kn", "--json", "--top", "5", ctx,
            ],
            None,
        )[0];
        let y = &run_json(
            &["next", "--model", &model, "--json", "--top", "5", ctx],
            None,
        )[0];
        let keys = |v: &serde_json::Value| -> Vec<String> {
            v.as_object().unwrap().keys().cloned().collect()
        };
        assert_eq!(keys(x), keys(y));
        assert_eq!(x["context"], y["context"]);
        for (i, j) in x["words"]
            .as_array()
            .unwrap()
            .iter()
            .zip(y["words"].as_array().unwrap())
        {
            assert_eq!(i["word"], j["word"], "{ctx}");
            assert!(close(
                i["probability"].as_f64().unwrap(),
                j["probability"].as_f64().unwrap(),
                tol
            ));
        }
    }
    let x = &run_json(
        &[
            "score", "--store", &store, "--method", "kn", "--json", &held,
        ],
        None,
    )[0];
    let y = &run_json(&["score", "--model", &model, "--json", &held], None)[0];
    let mut kx: Vec<&String> = x.as_object().unwrap().keys().collect();
    let mut ky: Vec<&String> = y.as_object().unwrap().keys().collect();
    kx.sort();
    ky.sort();
    assert_eq!(kx, ky);
    for k in [
        "sentences",
        "predictions",
        "outside_vocabulary",
        "probability_zero",
        "method",
    ] {
        assert_eq!(x[k], y[k], "{k}");
    }
    let (p, q) = (
        x["perplexity"].as_f64().unwrap(),
        y["perplexity"].as_f64().unwrap(),
    );
    assert!(close(p, q, 1e-6), "perplexity {p} vs {q}");
    // A method other than the model's is refused.
    let st = Command::new(bin())
        .args(["prob", "--model", &model, "--method", "mkn", "she", "was"])
        .output()
        .unwrap();
    assert!(!st.status.success());
    assert!(String::from_utf8_lossy(&st.stderr).contains("frozen with kn"));
}
