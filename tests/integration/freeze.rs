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

use quern::model::{freeze, FreezeOptions, Model, Residence};
use quern::query::{prediction, Estimator, Method, Params, Prob};
use quern::store::Store;
use quern::words::{bos_id, eos_id, unk_id, word_id, WordId};

use crate::query_fixtures::{heldout_sentences, train3, train5};

/// The methods that have a back-off form.
pub(crate) const FREEZABLE: [Method; 7] = [
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
pub(crate) fn params_for(m: Method, n: usize, bucketed: bool) -> Params {
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

pub(crate) fn bound(n: usize) -> f64 {
    (n as f64 + 1.0) * 2f64.powi(-24)
}

pub(crate) fn close(a: f64, b: f64, rel: f64) -> bool {
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
            // The lowest orders' children starts come from plain arrays,
            // the others from the file's index: at order 5 (a 17 MiB
            // model) both kinds of lookup are checked below.
            let plain = model.plain_orders();
            assert!(
                plain >= 1 && (n < 5 || plain < n - 1),
                "{m}: children starts of {plain} orders in plain arrays"
            );
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
                        // And each word shown has its own probability: the
                        // model's word has, after h, the model's value in
                        // the store's distribution, and the store's word
                        // the store's value in the model's.
                        let p_of = |d: &[(WordId, f64)], w: WordId| {
                            d[d.binary_search_by_key(&w, |x| x.0).unwrap()].1
                        };
                        assert!(
                            close(p_of(&d_est, b.0), b.1, tol)
                                && close(p_of(&d_mod, a.0), a.1, tol),
                            "{m}: next rank {i} after {h:x?}: the model shows {b:?}, the store {a:?}; their own probabilities: store {:e}, model {:e}",
                            p_of(&d_est, b.0),
                            p_of(&d_mod, a.0)
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
