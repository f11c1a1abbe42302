//! Frozen models made smaller: relative-entropy pruning (`--relative-entropy`,
//! `--max-ngrams`) and quantization (`--bits`).
//!
//! Sources of truth:
//! - Stolcke 1998, "Entropy-based pruning of backoff language models": the
//!   criterion D of every n-gram is recomputed independently in Python
//!   (`tests/integration/prune_check.py`, standard library only) from the
//!   unpruned model's ARPA text and the paper's formula, and the pruned
//!   model's ARPA text must list exactly the n-grams with D ≥ θ plus the
//!   contexts and suffixes of kept ones;
//! - the definition of a probability distribution: the pruned and the
//!   quantized models sum to 1 after every context, both over V from the
//!   binary model and in the independent ARPA reader
//!   (`tests/integration/arpa_check.py`), which also checks closure;
//! - the definition of B-bit codes: at most 2^B distinct values per order.

use std::collections::HashSet;
use std::path::Path;
use std::process::Command;

use quern::model::{arpa, freeze, FreezeOptions, FreezeReport, Model};
use quern::query::{prediction, Estimator, Method, Params};
use quern::store::Store;

use crate::freeze::{python_check, sample_contexts, scratch};
use crate::query_fixtures::{heldout_sentences, train3};

/// Freezes `m` over the order-3 store with `opts` into `dir/name.model`
/// and its ARPA text `dir/name.arpa`.
fn frozen(
    store: &Store,
    m: Method,
    opts: &FreezeOptions,
    dir: &Path,
    name: &str,
) -> (FreezeReport, Model) {
    let est = Estimator::new(store, m, Params::default()).unwrap();
    let path = dir.join(format!("{name}.model"));
    let rep = freeze(&est, &path, opts).unwrap();
    let model = Model::open(&path).unwrap();
    model.verify().unwrap();
    arpa::write_arpa_file(&model, &dir.join(format!("{name}.arpa"))).unwrap();
    (rep, model)
}

/// The model's own distribution sums to 1 after sampled contexts.
fn sums_to_one(model: &Model, what: &str) {
    for h in sample_contexts(model.order(), 40) {
        let sum: f64 = model.distribution(&h).unwrap().iter().map(|x| x.1).sum();
        assert!(
            (sum - 1.0).abs() <= 1e-5,
            "{what}: sums to {sum} after {h:x?}"
        );
    }
}

/// Held-out perplexity of the model on the held-out novel.
fn perplexity(model: &Model) -> f64 {
    let n = model.order();
    let mut qs = Vec::new();
    for s in heldout_sentences() {
        for i in 1..s.len() {
            qs.push(prediction(s, i, n));
        }
    }
    let ps = model.prob_batch(&qs).unwrap();
    let sum: f64 = ps.iter().map(|p| p.log10).sum();
    10f64.powf(-sum / ps.len() as f64)
}

/// Runs `prune_check.py` on the full and the pruned ARPA text.
fn stolcke_check(full: &Path, pruned: &Path, theta: f64) -> serde_json::Value {
    let script = crate::common::manifest_dir().join("tests/integration/prune_check.py");
    let out = Command::new("python3")
        .arg(&script)
        .arg(full)
        .arg(pruned)
        .arg(format!("{theta:e}"))
        .output()
        .expect("python3 runs");
    let text = String::from_utf8_lossy(&out.stdout);
    let report: serde_json::Value = serde_json::from_str(text.lines().last().unwrap_or("{}"))
        .unwrap_or_else(|e| panic!("{e}: {text}\n{}", String::from_utf8_lossy(&out.stderr)));
    assert!(
        out.status.success(),
        "Stolcke's criterion disagrees: {report}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    report
}

/// The n-grams dropped at θ are exactly those whose D (recomputed in
/// Python from the paper) is below θ, closure aside; kept n-grams keep
/// their probabilities; the result is closed and sums to 1.
#[test]
fn relative_entropy_pruning_follows_stolcke() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("stolcke");
    for m in [Method::Mkn, Method::WittenBell] {
        let (full, _) = frozen(&store, m, &FreezeOptions::default(), &dir, &format!("{m}"));
        // Witten-Bell spreads more mass to the back-off: its n-grams
        // matter more, and a larger θ is needed to drop as many.
        let theta = if m == Method::Mkn { 1e-7 } else { 1e-6 };
        let opts = FreezeOptions {
            relative_entropy: Some(theta),
            ..Default::default()
        };
        let (rep, model) = frozen(&store, m, &opts, &dir, &format!("{m}-re"));
        assert_eq!(rep.threshold, Some(theta));
        assert_eq!(rep.ngrams_unpruned, full.ngrams);
        assert_eq!(model.meta().ngrams, rep.ngrams);
        assert!(
            rep.ngrams[1] < full.ngrams[1] && rep.ngrams[2] < full.ngrams[2],
            "{m}: θ = {theta} drops n-grams of orders 2 and 3: {:?} of {:?}",
            rep.ngrams,
            full.ngrams
        );
        let full_arpa = dir.join(format!("{m}.arpa"));
        let re_arpa = dir.join(format!("{m}-re.arpa"));
        let report = stolcke_check(&full_arpa, &re_arpa, theta);
        let dropped: u64 = full.ngrams.iter().sum::<u64>() - rep.ngrams.iter().sum::<u64>();
        // Ties within the ARPA text's 7 decimals of θ may go either way:
        // they must be rare.
        assert!(
            report["borderline"].as_u64().unwrap() * 1000 <= dropped,
            "{m}: {report}"
        );
        let (_, norm) = python_check(&re_arpa, None, &model);
        assert_eq!(norm["unnormalised"].as_u64().unwrap(), 0, "{m}: {norm}");
        assert_eq!(norm["closure_violations"].as_u64().unwrap(), 0);
        sums_to_one(&model, &format!("{m} pruned"));
        let (p_full, p_re) = (
            perplexity(&Model::open(&dir.join(format!("{m}.model"))).unwrap()),
            perplexity(&model),
        );
        eprintln!(
            "{m}: θ = {theta}: kept {:?} of {:?}; held-out perplexity {p_full:.2} → {p_re:.2}; Stolcke check: {report}",
            rep.ngrams, full.ngrams
        );
    }
}

/// `--max-ngrams` picks the threshold: the model has at most N n-grams and
/// is what that threshold gives; a target below the unigrams is refused;
/// a target above the model's size prunes nothing.
#[test]
fn max_ngrams_reaches_the_size() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("max-ngrams");
    let (full, _) = frozen(&store, Method::Mkn, &FreezeOptions::default(), &dir, "full");
    let all: u64 = full.ngrams.iter().sum();
    for target in [all / 2, all / 5] {
        let opts = FreezeOptions {
            max_ngrams: Some(target),
            ..Default::default()
        };
        let (rep, model) = frozen(&store, Method::Mkn, &opts, &dir, &format!("max{target}"));
        let kept: u64 = rep.ngrams.iter().sum();
        assert!(kept <= target, "{kept} > {target}");
        assert!(kept * 100 >= target * 99, "{kept} far below {target}");
        let theta = rep.threshold.expect("a threshold was picked");
        // The same threshold given by hand gives the same model.
        let (again, _) = frozen(
            &store,
            Method::Mkn,
            &FreezeOptions {
                relative_entropy: Some(theta),
                ..Default::default()
            },
            &dir,
            "again",
        );
        assert_eq!(again.ngrams, rep.ngrams);
        sums_to_one(&model, "max-ngrams");
        eprintln!(
            "--max-ngrams {target}: θ = {theta:e}, kept {kept} {:?}",
            rep.ngrams
        );
    }
    let est = Estimator::new(&store, Method::Mkn, Params::default()).unwrap();
    let err = freeze(
        &est,
        &dir.join("small.model"),
        &FreezeOptions {
            max_ngrams: Some(full.ngrams[0] - 1),
            ..Default::default()
        },
    )
    .unwrap_err()
    .to_string();
    assert!(err.contains("--max-ngrams"), "{err}");
    let (rep, _) = frozen(
        &store,
        Method::Mkn,
        &FreezeOptions {
            max_ngrams: Some(all),
            ..Default::default()
        },
        &dir,
        "all",
    );
    assert_eq!((rep.ngrams, rep.threshold), (full.ngrams, None));
}

/// Distinct log10 values of every order in ARPA text.
fn distinct_values(arpa: &Path) -> Vec<usize> {
    distinct_column(arpa, 0)
}

/// Distinct entries of column `col` (0: the log10 value, 2: the back-off
/// weight) of every order's lines in ARPA text; lines without that column
/// are left out.
fn distinct_column(arpa: &Path, col: usize) -> Vec<usize> {
    let text = std::fs::read_to_string(arpa).unwrap();
    let mut out: Vec<HashSet<String>> = Vec::new();
    for line in text.lines() {
        if line.starts_with('\\') && line.ends_with("-grams:") {
            out.push(HashSet::new());
        } else if let Some(set) = out.last_mut().filter(|_| line.contains('\t')) {
            if let Some(v) = line.split('\t').nth(col) {
                set.insert(v.to_string());
            }
        }
    }
    out.iter().map(|s| s.len()).collect()
}

/// `--bits`: at most 2^B values per order above 1, the unigrams exact,
/// every context still sums to 1 (back-off weights recomputed), also
/// after pruning and for Katz (whose contexts may skip).
#[test]
fn quantized_models_stay_normalised() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("bits");
    let (_, full) = frozen(&store, Method::Mkn, &FreezeOptions::default(), &dir, "full");
    let p_full = perplexity(&full);
    let full_values = distinct_values(&dir.join("full.arpa"));
    for (m, bits, re) in [
        (Method::Mkn, 8, None),
        (Method::Mkn, 4, None),
        (Method::Mkn, 8, Some(1e-7)),
        (Method::Katz, 8, None),
    ] {
        let name = format!("{m}-{bits}-{}", re.is_some());
        let opts = FreezeOptions {
            bits: Some(bits),
            relative_entropy: re,
            ..Default::default()
        };
        let (rep, model) = frozen(&store, m, &opts, &dir, &name);
        assert_eq!(rep.value_bits, bits);
        assert_eq!(model.meta().value_bits, bits);
        let values = distinct_values(&dir.join(format!("{name}.arpa")));
        if m == Method::Mkn && re.is_none() {
            assert_eq!(values[0], full_values[0], "the unigrams are exact");
        }
        for (k, &v) in values.iter().enumerate().skip(1) {
            assert!(v <= 1 << bits, "{name}: order {}: {v} values", k + 1);
            if m == Method::Mkn {
                // So that the bound says something: unquantized, there are more.
                assert!(full_values[k] > 1 << bits, "{name}: order {}", k + 1);
            }
        }
        sums_to_one(&model, &name);
        let (_, norm) = python_check(&dir.join(format!("{name}.arpa")), None, &model);
        assert_eq!(norm["unnormalised"].as_u64().unwrap(), 0, "{name}: {norm}");
        let p = perplexity(&model);
        if m == Method::Mkn && bits == 8 && re.is_none() {
            // 8-bit codes cost little (Whittaker & Raj 2001 report no
            // real loss at 8 bits; from memory): within 1 %.
            assert!(
                p <= p_full * 1.01,
                "{name}: perplexity {p} against {p_full}"
            );
        }
        eprintln!(
            "{name}: values per order {values:?}; held-out perplexity {p:.3} (unquantized mkn {p_full:.3}); notes {:?}",
            rep.notes.last()
        );
    }
}

/// `--weight-bits`: at most 2^W back-off weights per order, and every
/// context sums to 1 within the error the freeze reports, which is not 0
/// (so the check is not vacuous) but small; the file is smaller than with
/// 32-bit weights.
#[test]
fn quantized_weights_stay_within_their_reported_error() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("weight-bits");
    let (_, full) = frozen(&store, Method::Mkn, &FreezeOptions::default(), &dir, "full");
    let full_weights = distinct_column(&dir.join("full.arpa"), 2);
    let q8 = FreezeOptions {
        bits: Some(8),
        ..Default::default()
    };
    let (rep32, _) = frozen(&store, Method::Mkn, &q8, &dir, "b8");
    assert_eq!((rep32.weight_bits, rep32.weight_error), (32, 0.0));
    let opts = FreezeOptions {
        bits: Some(8),
        weight_bits: Some(8),
        ..Default::default()
    };
    let (rep, model) = frozen(&store, Method::Mkn, &opts, &dir, "b8w8");
    assert_eq!((rep.weight_bits, model.meta().weight_bits), (8, 8));
    let weights = distinct_column(&dir.join("b8w8.arpa"), 2);
    for k in 0..2 {
        assert!(full_weights[k] > 256, "order {}: {full_weights:?}", k + 1);
        assert!(weights[k] <= 256, "order {}: {weights:?}", k + 1);
    }
    let err = rep.weight_error;
    // 256 bins spread over ln β and over β: the rounding moves a context's
    // sum by well under 2 % (our expectation from the bins' spacing).
    assert!(err > 0.0 && err < 0.02, "reported error {err}");
    let mut worst: f64 = 0.0;
    for h in sample_contexts(model.order(), 40) {
        let sum: f64 = model.distribution(&h).unwrap().iter().map(|x| x.1).sum();
        worst = worst.max((sum - 1.0).abs());
        assert!(
            (sum - 1.0).abs() <= err + 1e-6,
            "sums to {sum} after {h:x?}, beyond the reported {err}"
        );
    }
    assert!(worst > 1e-7, "the sampled sums show the rounding: {worst}");
    assert!(
        rep.file_bytes < rep32.file_bytes,
        "{} bytes with 8-bit weights, {} with 32-bit",
        rep.file_bytes,
        rep32.file_bytes
    );
    let (p_full, p) = (perplexity(&full), perplexity(&model));
    assert!(p <= p_full * 1.02, "perplexity {p} against {p_full}");
    eprintln!(
        "8-bit q and β: {} bytes (32-bit β: {}), largest |sum − 1| {err:.2e} (sampled {worst:.2e}), perplexity {p:.3} (unquantized {p_full:.3})",
        rep.file_bytes, rep32.file_bytes
    );
}
