//! `tune` lowers held-out perplexity from its starting point, on a split of
//! the held-out novel (first half to tune, second half to check), and its
//! parameters are in range: interp weights in [0, 1] whose mixture weights
//! λ_k Π_{m>k}(1 − λ_m) (with the uniform's Π(1 − λ_m)) sum to 1; add-k's
//! k is a minimum of the tuning perplexity. The source of truth is the
//! perplexity itself, computed by `score`.

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
    // Mixture weights of the recursion (all contexts seen) sum to 1.
    let mut rest = 1.0;
    let mut sum = 0.0;
    for &x in l.iter().rev() {
        sum += rest * x;
        rest *= 1.0 - x;
    }
    assert!((sum + rest - 1.0).abs() < 1e-12);
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
