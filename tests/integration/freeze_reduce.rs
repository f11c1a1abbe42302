//! Frozen models made smaller: relative-entropy pruning (`--relative-entropy`,
//! `--max-ngrams`) and quantization (`--bits`).
//!
//! Sources of truth:
//! - Stolcke 1998, "Entropy-based pruning of backoff language models": the
//!   criterion D of every n-gram is recomputed independently in Python
//!   (`tests/integration/prune_check.py`, standard library only) from the
//!   unpruned model's ARPA text and the paper's formula, and the pruned
//!   model's ARPA text must list exactly the n-grams with D ≥ θ plus the
//!   contexts and suffixes of kept ones (orders 3 and 5; but for those
//!   whose D lies within the text's precision, carried through the
//!   formula, of θ); `--max-ngrams` writes the very file its threshold
//!   given by hand writes;
//! - the definition of a probability distribution: the pruned and the
//!   quantized models sum to 1 after every context, both over V from the
//!   binary model and in the independent ARPA reader
//!   (`tests/integration/arpa_check.py`), which also checks closure;
//! - the definition of B-bit codes: at most 2^B distinct values per order;
//!   and the rule README and `quern::model` state for them (Whittaker & Raj
//!   2001): every q of orders 2..N is the code nearest to the unquantized
//!   q in ln, or lower where its context's nearest codes came to more than
//!   1; the unigrams keep the unquantized model's values; with 8-bit
//!   back-off weights a context's sum is within the error the weights'
//!   roundings add up to, computed here from both models' weights.

use std::collections::{HashMap, HashSet};
use std::path::Path;
use std::process::Command;

use quern::model::{arpa, freeze, FreezeOptions, FreezeReport, Model};
use quern::query::{prediction, query_ids, Estimator, Method, Params};
use quern::store::Store;
use quern::words::WordId;

use crate::freeze::{sample_contexts, scratch};
use crate::freeze_arpa::{python_check, KatzSkips};
use crate::independent::Tables;
use crate::query_fixtures::{heldout_sentences, train3};

/// Freezes `m` over the order-3 store with `opts` into `dir/name.model`
/// and its ARPA text `dir/name.arpa`.
pub(crate) fn frozen(
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
    stolcke_check_skipping(full, pruned, theta, &[])
}

/// [`stolcke_check`], the children of the contexts `skipping` (Katz
/// contexts that back off past h') not judged.
fn stolcke_check_skipping(
    full: &Path,
    pruned: &Path,
    theta: f64,
    skipping: &[String],
) -> serde_json::Value {
    let script = crate::common::manifest_dir().join("tests/integration/prune_check.py");
    let skip = pruned.with_extension("skip");
    std::fs::write(&skip, skipping.join("\n")).unwrap();
    let out = Command::new("python3")
        .env("ARPA_SKIP_CONTEXTS", &skip)
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
        borderline_bound(&report, m);
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

/// A borderline n-gram is one whose D is within the precision of the
/// ARPA text (carried through the formula) of θ; that precision must stay
/// below θ, or the check would decide nothing for it.
fn borderline_bound(report: &serde_json::Value, m: Method) {
    let widest = report["widest_borderline_bound"].as_f64().unwrap();
    assert!(
        widest < 1.0,
        "{m}: a borderline bound of {widest} θ: {report}"
    );
}

/// Stolcke's criterion at order 5 (closure over three levels: a kept
/// 5-gram keeps its context and suffix at order 4, and theirs at 3 and 2)
/// for interpolated Kneser-Ney, Katz (whose contexts may skip) and
/// absolute discounting, on one novel, with the same checks as at order 3.
#[test]
fn relative_entropy_pruning_at_order_5_for_katz_and_absolute_too() {
    let dir = scratch("stolcke5");
    let store_dir = dir.join("store");
    crate::common::ingest_ok(
        &store_dir,
        &["--order", "5", "--quiet"],
        &[crate::common::gutenberg_dir().join("northangerabbey.txt")],
    );
    let store = Store::open(&store_dir).unwrap();
    // Katz's skipping contexts, derived from the counts (the reference
    // counter's tables and the independent Katz, as in freeze_arpa.rs).
    let tables: &'static Tables = Box::leak(Box::new(Tables::new(
        5,
        &[crate::common::gutenberg_dir().join("northangerabbey.txt")],
    )));
    let skips = KatzSkips::new(tables).listed();
    for (m, theta) in [
        (Method::Mkn, 1e-7),
        (Method::Katz, 1e-7),
        (Method::Absolute, 1e-7),
    ] {
        let (full, full_model) =
            frozen(&store, m, &FreezeOptions::default(), &dir, &format!("{m}"));
        let skipping = if m == Method::Katz {
            let mut theirs = arpa::skipping_contexts(&full_model);
            theirs.sort();
            assert_eq!(
                theirs, skips,
                "the model's skipping contexts against the derived ones"
            );
            assert!(!skips.is_empty());
            skips.clone()
        } else {
            Vec::new()
        };
        let opts = FreezeOptions {
            relative_entropy: Some(theta),
            ..Default::default()
        };
        let (rep, model) = frozen(&store, m, &opts, &dir, &format!("{m}-re"));
        assert_eq!(model.meta().ngrams, rep.ngrams);
        for k in 1..5 {
            assert!(
                rep.ngrams[k] < full.ngrams[k],
                "{m}: θ = {theta} drops n-grams of order {}: {:?} of {:?}",
                k + 1,
                rep.ngrams,
                full.ngrams
            );
        }
        let re_arpa = dir.join(format!("{m}-re.arpa"));
        let report =
            stolcke_check_skipping(&dir.join(format!("{m}.arpa")), &re_arpa, theta, &skipping);
        let dropped: u64 = full.ngrams.iter().sum::<u64>() - rep.ngrams.iter().sum::<u64>();
        assert!(
            report["borderline"].as_u64().unwrap() * 1000 <= dropped,
            "{m}: {report}"
        );
        // The n-grams not judged (children of skipping contexts) are few.
        let all: u64 = full.ngrams.iter().sum();
        assert!(
            report["not_judged"].as_u64().unwrap() * 50 <= all,
            "{m}: {report}"
        );
        borderline_bound(&report, m);
        let (_, norm) = python_check(&re_arpa, None, &model);
        assert_eq!(norm["unnormalised"].as_u64().unwrap(), 0, "{m}: {norm}");
        assert_eq!(norm["closure_violations"].as_u64().unwrap(), 0);
        sums_to_one(&model, &format!("{m} pruned at order 5"));
        eprintln!(
            "order 5, {m}: θ = {theta}: kept {:?} of {:?}; Stolcke check: {report}",
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
        // Byte for byte the same file.
        assert!(
            std::fs::read(dir.join("again.model")).unwrap()
                == std::fs::read(dir.join(format!("max{target}.model"))).unwrap(),
            "--max-ngrams {target} and --relative-entropy {theta:e} wrote different models"
        );
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
    let (_, full_katz) = frozen(
        &store,
        Method::Katz,
        &FreezeOptions::default(),
        &dir,
        "katz",
    );
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
        // The unigrams' values are the unquantized model's, bit for bit,
        // and every other q lies in its bin.
        let unq = if m == Method::Katz { &full_katz } else { &full };
        assert!(
            model.distribution(&[]).unwrap() == unq.distribution(&[]).unwrap(),
            "{name}: the unigrams' values differ from the unquantized model's"
        );
        let arpa_text = read_arpa(&dir.join(format!("{name}.arpa")));
        let moved = check_bins(unq, &model, &arpa_text, &name);
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
            "{name}: values per order {values:?}; {moved} values below their nearest code; held-out perplexity {p:.3} (unquantized mkn {p_full:.3}); notes {:?}",
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
    // The error computed here: each context's sum within what its own and
    // its suffixes' weights' roundings add up to.
    let exact_w = read_arpa(&dir.join("b8.arpa"));
    let coded_w = read_arpa(&dir.join("b8w8.arpa"));
    let within = weight_errors(&exact_w, &coded_w);
    let words = store.vocabulary().unwrap();
    let mut worst: f64 = 0.0;
    for h in sample_contexts(model.order(), 40) {
        let sum: f64 = model.distribution(&h).unwrap().iter().map(|x| x.1).sum();
        worst = worst.max((sum - 1.0).abs());
        assert!(
            (sum - 1.0).abs() <= err + 1e-6,
            "sums to {sum} after {h:x?}, beyond the reported {err}"
        );
        let e = within.after(&h, &words, model.order());
        assert!(
            (sum - 1.0).abs() <= e + 1e-6,
            "sums to {sum} after {h:x?}, beyond the error of its weights' rounding {e:e}"
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

/// One ARPA file's n-grams, per order: words → (log10 q, log10 β if listed).
pub(crate) type Arpa = Vec<HashMap<String, (f64, Option<f64>)>>;

/// Reads ARPA text (the format's definition: a `\k-grams:` section per
/// order, lines `log10 q TAB words [TAB log10 β]`).
pub(crate) fn read_arpa(path: &Path) -> Arpa {
    let text = std::fs::read_to_string(path).unwrap();
    let mut out: Arpa = Vec::new();
    for line in text.lines() {
        if line.starts_with('\\') && line.ends_with("-grams:") {
            out.push(HashMap::new());
        } else if let Some(m) = out.last_mut().filter(|_| line.contains('\t')) {
            let f: Vec<&str> = line.split('\t').collect();
            let b = f.get(2).map(|x| x.parse::<f64>().unwrap());
            m.insert(f[1].to_string(), (f[0].parse().unwrap(), b));
        }
    }
    out
}

/// Every q of orders 2..N of `quant` (the n-grams its ARPA text lists)
/// lies in its bin: it is the code nearest in ln to the unquantized
/// model's q (the codes: the distinct values of the order), or lower, and
/// lower only after a context whose children's nearest codes come to more
/// than 1. Returns how many are lower.
fn check_bins(unq: &Model, quant: &Model, arpa: &Arpa, name: &str) -> usize {
    let mut moved_total = 0;
    for (k, grams) in arpa.iter().enumerate().skip(1) {
        let ids: Vec<Vec<WordId>> = grams
            .keys()
            .map(|w| query_ids(w, &quern::tokenize::Preparation::default()))
            .collect();
        let qs: Vec<&[WordId]> = ids.iter().map(|q| &q[..]).collect();
        let before: Vec<f64> = unq.prob_batch(&qs).unwrap().iter().map(|p| p.p).collect();
        let after: Vec<f64> = quant.prob_batch(&qs).unwrap().iter().map(|p| p.p).collect();
        let mut codes: Vec<f64> = after.iter().copied().filter(|&x| x > 0.0).collect();
        codes.sort_by(f64::total_cmp);
        codes.dedup();
        let logs: Vec<f64> = codes.iter().map(|c| c.ln()).collect();
        // The nearest codes in ln (both where two are equally near, within
        // the 32-bit precision of a stored code).
        let nearest = |v: f64| -> (f64, f64) {
            let l = v.ln();
            let i = logs.partition_point(|&c| c < l);
            let cands: Vec<usize> = [i.checked_sub(1), Some(i)]
                .into_iter()
                .flatten()
                .filter(|&j| j < logs.len())
                .collect();
            let d = |j: usize| (logs[j] - l).abs();
            let best = cands
                .iter()
                .copied()
                .min_by(|&a, &b| d(a).total_cmp(&d(b)))
                .unwrap();
            let tie = cands
                .iter()
                .copied()
                .find(|&j| j != best && (d(j) - d(best)).abs() <= 1e-6)
                .unwrap_or(best);
            (codes[best], codes[tie])
        };
        let mut sums: HashMap<&[WordId], f64> = HashMap::new();
        let mut moved: Vec<usize> = Vec::new();
        for (i, (&v, &x)) in before.iter().zip(&after).enumerate() {
            let (a, b) = nearest(v);
            *sums.entry(&ids[i][..k]).or_insert(0.0) += a.max(b);
            if x == a || x == b {
                continue;
            }
            assert!(
                x < a.min(b),
                "{name}: order {}: {:?}: unquantized {v:e}, quantized {x:e}, out of its bin (nearest code {a:e})",
                k + 1,
                ids[i]
            );
            moved.push(i);
        }
        for &i in &moved {
            let s = sums[&ids[i][..k]];
            assert!(
                s > 1.0,
                "{name}: order {}: {:?} moved below its nearest code, though its context's children come to {s}",
                k + 1,
                ids[i]
            );
        }
        moved_total += moved.len();
    }
    moved_total
}

/// The back-off weights of a model with 32-bit weights and of the same
/// model with 8-bit ones, from their ARPA text.
struct WeightErrors {
    exact: Arpa,
    coded: Arpa,
}

/// The weights of both models; a weight of 0 must stay 0.
fn weight_errors(exact: &Arpa, coded: &Arpa) -> WeightErrors {
    for (k, (ek, ck)) in exact.iter().zip(coded).enumerate().take(exact.len() - 1) {
        for (w, &(_, b)) in ek {
            if let (Some(b), Some(c)) = (b, ck[w].1) {
                assert!(
                    b > -99.0 || c <= -99.0,
                    "order {}: {w}: β 0 became {c}",
                    k + 1
                );
            }
        }
    }
    WeightErrors {
        exact: exact.clone(),
        coded: coded.clone(),
    }
}

impl WeightErrors {
    /// The error of the sum after `h` that the weights' rounding allows:
    /// with β' the coded weight of the context the model matches, L the
    /// lower order's mass of its listed words and S(h') the sum after h',
    /// sum − 1 = (β' − β)(1 − L) + β'(S(h') − 1), so
    /// |sum − 1| ≤ |β' − β| + β' |S(h') − 1|, down to the unigrams (exact).
    fn after(&self, h: &[WordId], words: &HashMap<WordId, String>, n: usize) -> f64 {
        let mut w: Vec<String> = h[h.len().saturating_sub(n - 1)..]
            .iter()
            .map(|id| words.get(id).cloned().unwrap_or_else(|| "<unk>".into()))
            .collect();
        // The longest listed suffix.
        while !w.is_empty() && !self.exact[w.len() - 1].contains_key(&w.join(" ")) {
            w.remove(0);
        }
        let mut e = 0.0;
        for s in (0..w.len()).rev() {
            let key = w[s..].join(" ");
            let k = w.len() - s - 1;
            let p10 =
                |x: Option<f64>| x.map_or(1.0, |x| if x <= -99.0 { 0.0 } else { 10f64.powf(x) });
            let b = p10(self.exact[k][&key].1);
            let c = p10(self.coded[k][&key].1);
            e = (c - b).abs() + c * e;
        }
        e
    }
}
