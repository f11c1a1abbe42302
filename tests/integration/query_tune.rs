//! `tune` lowers held-out perplexity from its starting point, on a split of
//! the held-out novel (first half to tune, second half to check), and its
//! parameters are what it claims: interp weights in [0, 1] that are a fixed
//! point of one more EM step computed here and a local minimum of the
//! tuning perplexity, with the perplexity it reports; add-k's k is a
//! minimum of the tuning perplexity. The source of truth is the perplexity
//! itself, computed by `score` (whose probabilities
//! estimators_independent.rs checks), and the EM step written here.

use quern::query::score::score_padded;
use quern::query::tune::tune;
use quern::query::{Estimator, Method, Params};
use quern::store::Store;

use crate::common::run_ok;
use crate::query_fixtures::{heldout_path, heldout_sentences, train3};

fn halves() -> (Vec<Vec<u64>>, Vec<Vec<u64>>) {
    let s = heldout_sentences();
    let (a, b) = s.split_at(s.len() / 2);
    (a.to_vec(), b.to_vec())
}

fn ppl(store: &Store, m: Method, p: &Params, s: &[Vec<u64>]) -> f64 {
    let e = Estimator::new(store, m, p.clone()).unwrap();
    score_padded(&e, s).unwrap().perplexity().unwrap()
}

/// One EM step for the weights λ_1..λ_N of the recursive linear
/// interpolation P_k = λ_k c(h_k w)/C(h_k) + (1 − λ_k) P_{k−1}, P_0 = 1/|V|
/// (levels with C(h_k) = 0 pass P_{k−1} on), over the held-out
/// predictions. The recursion is a chain of choices: at level k take the
/// maximum-likelihood estimate (probability λ_k) or go down. E step: for
/// each prediction, the posterior probability of reaching level k and of
/// taking its estimate there; M step: λ_k = Σ taken / Σ reached. Counts are
/// read from the store (c from its n-grams, C from its context statistics);
/// words outside V count as `<unk>`, the context cut to N − 1 words.
fn em_step(store: &Store, lambdas: &[f64], sentences: &[Vec<u64>]) -> Vec<f64> {
    let n = store.order();
    let meta = store.meta();
    let v = meta.totals.vocabulary as f64;
    let unk = quern::words::unk_id();
    let bos = quern::words::bos_id();
    let known = |w: u64| w == unk || store.get(&[w]).unwrap().is_some();
    let mut taken = vec![0.0; n];
    let mut reached = vec![0.0; n];
    for s in sentences {
        for i in 1..s.len() {
            let start = i.saturating_sub(n - 1);
            let h: Vec<u64> = s[start..i]
                .iter()
                .map(|&x| if known(x) { x } else { unk })
                .collect();
            let w = if s[i] != bos && known(s[i]) {
                s[i]
            } else {
                unk
            };
            // (order index, ML estimate) of the levels with C(h) > 0,
            // shortest context first.
            let mut levels = Vec::new();
            for j in 0..=h.len() {
                let hj = &h[h.len() - j..];
                let big_c = if j == 0 {
                    meta.root.count_sum
                } else {
                    store.context(hj).unwrap().map_or(0, |c| c.count_sum)
                };
                if big_c == 0 {
                    continue;
                }
                let mut g = hj.to_vec();
                g.push(w);
                let c = store.get(&g).unwrap().map_or(0, |x| x.0);
                levels.push((j, c as f64 / big_c as f64));
            }
            // Forward: p[i] after the first i levels.
            let mut p = vec![1.0 / v];
            for &(j, ml) in &levels {
                let last = p[p.len() - 1];
                p.push(lambdas[j] * ml + (1.0 - lambdas[j]) * last);
            }
            // Backward from the top level.
            let mut reach = 1.0;
            for (i, &(j, ml)) in levels.iter().enumerate().rev() {
                reached[j] += reach;
                taken[j] += reach * lambdas[j] * ml / p[i + 1];
                reach *= (1.0 - lambdas[j]) * p[i] / p[i + 1];
            }
        }
    }
    (0..n)
        .map(|j| {
            if reached[j] > 0.0 {
                taken[j] / reached[j]
            } else {
                lambdas[j]
            }
        })
        .collect()
}

#[test]
fn tune_interp_lowers_heldout_perplexity() {
    let store = Store::open(train3()).unwrap();
    let (tune_set, check_set) = halves();
    let start = Params::default();
    let t = tune(&store, Method::Interp, &start, &tune_set, None).unwrap();
    let (before, after) = (t.before.unwrap(), t.after.unwrap());
    assert!(after < before, "interp: {before} -> {after}");
    let l = t.params.lambdas.clone().unwrap();
    assert_eq!(l.len(), 3);
    assert!(l.iter().all(|&x| x > 0.0 && x < 1.0), "{l:?}");
    // The perplexity reported is that of the weights returned.
    let here = ppl(&store, Method::Interp, &t.params, &tune_set);
    assert!((here - after).abs() <= 1e-9 * after, "{here} vs {after}");
    // The weights are a fixed point of EM: one more step, computed here
    // from the store's counts (Jelinek & Mercer 1980; the E and M steps of
    // Dempster, Laird & Rubin 1977 for a mixture), moves none by more than
    // 1e-4, where the starting weights 0.5 move by far more.
    let step = em_step(&store, &l, &tune_set);
    eprintln!("tuned weights {l:?}, one EM step later {step:?}");
    for (k, (a, b)) in l.iter().zip(&step).enumerate() {
        assert!(
            (a - b).abs() < 1e-4,
            "order {}: tuned weight {a}, one EM step later {b} ({l:?} -> {step:?})",
            k + 1
        );
    }
    let from_start = em_step(&store, &[0.5; 3], &tune_set);
    assert!(
        from_start.iter().any(|x| (x - 0.5).abs() > 1e-2),
        "{from_start:?}"
    );
    // And a local minimum of the tuning perplexity: moving any one weight
    // by 0.01 either way does not lower it.
    for k in 0..3 {
        for delta in [-0.01, 0.01] {
            let mut moved = l.clone();
            moved[k] += delta;
            if !(0.0..=1.0).contains(&moved[k]) {
                continue;
            }
            let p = Params {
                lambdas: Some(moved.clone()),
                ..Params::default()
            };
            let q = ppl(&store, Method::Interp, &p, &tune_set);
            assert!(
                q >= here,
                "weights {moved:?} give {q}, below the tuned {here}"
            );
        }
    }
    // Better on the half it did not see, too.
    assert!(
        ppl(&store, Method::Interp, &t.params, &check_set)
            < ppl(&store, Method::Interp, &start, &check_set)
    );
    // Bucketed weights: in range, and at least as good on the tuning half as
    // one weight per order (they include it as a special case; EM from 0.5).
    let tb = tune(&store, Method::Interp, &start, &tune_set, Some(6)).unwrap();
    let b = tb.params.bucket_lambdas.clone().unwrap();
    assert_eq!(b.len(), 3);
    assert!(b
        .iter()
        .all(|w| w.len() == 6 && w.iter().all(|&x| (0.0..=1.0).contains(&x))));
    assert!(
        tb.after.unwrap() <= after * 1.0001,
        "{} vs {after}",
        tb.after.unwrap()
    );
}

#[test]
fn tune_add_k_finds_a_minimum() {
    let store = Store::open(train3()).unwrap();
    let (tune_set, check_set) = halves();
    let start = Params::default();
    let t = tune(&store, Method::AddK, &start, &tune_set, None).unwrap();
    assert!(t.after.unwrap() < t.before.unwrap());
    let k = t.params.k;
    assert!(k > 0.0 && k < 1.0, "k = {k}");
    let at = |k: f64| {
        ppl(
            &store,
            Method::AddK,
            &Params {
                k,
                ..Params::default()
            },
            &tune_set,
        )
    };
    let here = at(k);
    assert!(at(k * 1.05) >= here && at(k / 1.05) >= here);
    assert!(
        ppl(&store, Method::AddK, &t.params, &check_set)
            < ppl(&store, Method::AddK, &start, &check_set)
    );
}

#[test]
fn tune_writes_params_that_score_reads_back() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("interp.json");
    let store = train3().display().to_string();
    let held = heldout_path().display().to_string();
    let r = run_ok(&[
        "tune",
        "--store",
        &store,
        "--method",
        "interp",
        "--json",
        "--out",
        &out.display().to_string(),
        &held,
    ]);
    let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let after = v["perplexity_after"].as_f64().unwrap();
    assert!(after < v["perplexity_before"].as_f64().unwrap());
    let r = run_ok(&[
        "score",
        "--store",
        &store,
        "--method",
        "interp",
        "--json",
        "--tuned",
        &out.display().to_string(),
        &held,
    ]);
    let s: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
    let p = s["perplexity"].as_f64().unwrap();
    assert!((p - after).abs() <= 1e-9 * after, "{p} vs {after}");
    // A parameters file of another method is refused.
    let r = crate::common::run(&[
        "score",
        "--store",
        &store,
        "--method",
        "add-k",
        "--tuned",
        &out.display().to_string(),
        &held,
    ]);
    r.assert_failure();
    assert!(r.stderr.contains("fitted for interp"), "{}", r.stderr);
}
