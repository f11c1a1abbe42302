//! An independent implementation of the nine estimators, compared with
//! quern's at orders 3 and 5.
//!
//! Everything here is computed from the tables of the reference counter
//! (reference.rs: raw counts read from the text, continuation counts,
//! context statistics and count-of-counts derived from them), by plain
//! recursion over the context written from the published formulas (the
//! source is named beside each method) and the definitions in README.md
//! ("The estimators"): nothing of quern's query code is used, only its
//! answers. Training text: two novels; held-out pairs: the third novel's
//! predictions, a few hundred chosen evenly through the text within each
//! class of longest matching order (0 to N) so that every level of every
//! recursion is reached, OOV words in the context and as the word included.
//! Every probability must agree within 1e-12, through `prob` one query at a
//! time and through `prob_batch` (the batched multi-get path).

use std::path::PathBuf;
use std::sync::OnceLock;

use quern::query::{query_ids, DiscountPolicy, Estimator, Method, Params};
use quern::store::Store;

use crate::common::{gutenberg_dir, ingest_ok};
use crate::independent::{Gram, Independent, Tables, FALLBACK_MKN, FALLBACK_ONE};
use crate::reference::{BOS, UNK};

const TOL: f64 = 1e-12;

fn training_files() -> Vec<PathBuf> {
    vec![
        gutenberg_dir().join("northangerabbey.txt"),
        gutenberg_dir().join("prideprejudice.txt"),
    ]
}

fn heldout_file() -> PathBuf {
    gutenberg_dir().join("persuasion.txt")
}

/// quern's store of the training text at order `n` (built once per order).
fn store_dir(n: usize) -> &'static PathBuf {
    static S: [OnceLock<PathBuf>; 2] = [OnceLock::new(), OnceLock::new()];
    S[(n == 5) as usize].get_or_init(|| {
        let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
            .join("query-stores")
            .join(format!("independent{n}"));
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        std::fs::create_dir_all(dir.parent().unwrap()).unwrap();
        let o = n.to_string();
        ingest_ok(
            &dir,
            &["--order", &o, "--memory", "64MiB", "--quiet"],
            &training_files(),
        );
        dir
    })
}

/// The held-out novel's sentences, tokenized by the counting contract
/// (README "What is counted") and padded.
fn heldout_padded() -> Vec<Gram> {
    let bytes = std::fs::read(heldout_file()).unwrap();
    let text = String::from_utf8_lossy(&bytes);
    let mut out = Vec::new();
    for line in text.split('\n') {
        let line = line.strip_suffix('\r').unwrap_or(line);
        let words: Vec<String> = line
            .split(char::is_whitespace)
            .filter(|x| !x.is_empty())
            .map(|x| match x {
                "<s>" | "</s>" | "<unk>" => UNK.to_string(),
                x => x.to_string(),
            })
            .collect();
        if words.is_empty() {
            continue;
        }
        let mut s = vec![BOS.to_string()];
        s.extend(words);
        s.push("</s>".to_string());
        out.push(s);
    }
    out
}

/// Held-out (context, word) pairs: for each class (the predicted word
/// outside V; else the order of the longest n-gram h_j·w seen in training,
/// 1 to N, with the context cut to N − 1 words), at most `per_class` taken
/// evenly through the text; plus a few single-word queries (empty context).
fn pairs(t: &Tables, per_class: usize) -> Vec<(Gram, String)> {
    let n = t.n;
    let mut classes: Vec<Vec<(Gram, String)>> = vec![Vec::new(); n + 2];
    let mut with_oov_context = 0;
    for s in heldout_padded() {
        for i in 1..s.len() {
            let ctx = s[i.saturating_sub(n - 1)..i].to_vec();
            let (h, w) = t.map(&ctx, &s[i]);
            let class = if w == UNK && s[i] != UNK {
                n + 1
            } else {
                (0..=h.len())
                    .rev()
                    .find(|&j| t.c(&Tables::hw(&h[h.len() - j..], &w)) > 0)
                    .map_or(0, |j| j + 1)
            };
            if h.iter().any(|x| x == UNK) {
                with_oov_context += 1;
            }
            classes[class].push((ctx, s[i].clone()));
        }
    }
    assert!(with_oov_context > 100, "too few contexts with an OOV word");
    let mut out = Vec::new();
    for (class, v) in classes.iter().enumerate() {
        // Every class but "longest match 0" (only <unk> unseen in training)
        // must be populated, or the comparison misses a level.
        if class >= 1 {
            assert!(
                v.len() >= 10,
                "order {n}: only {} held-out pairs in class {class}",
                v.len()
            );
        }
        let step = (v.len() / per_class).max(1);
        out.extend(v.iter().step_by(step).take(per_class).cloned());
    }
    for w in ["the", "Anne", "</s>", "<unk>", "zzqq-never-seen"] {
        out.push((Vec::new(), w.to_string()));
    }
    out
}

fn ids_of(words: &[String]) -> Vec<u64> {
    query_ids(&words.join(" "), &quern::tokenize::Preparation::default())
}

/// The methods and parameters compared: defaults, plus weights that differ
/// per order (and per bucket) so that a weight of the wrong order shows.
fn configs(n: usize) -> Vec<(Method, Params)> {
    let mut out = Vec::new();
    for m in Method::ALL {
        let mut p = Params::default();
        match m {
            Method::Mkn => p.discounts = DiscountPolicy::EstimateOr(FALLBACK_MKN.to_vec()),
            Method::Kn | Method::Absolute => {
                p.discounts = DiscountPolicy::EstimateOr(vec![FALLBACK_ONE])
            }
            Method::Interp => {
                p.lambdas = Some([0.35, 0.55, 0.7, 0.8, 0.9][..n].to_vec());
                let mut b = p.clone();
                b.lambdas = None;
                b.bucket_lambdas = Some(
                    (0..n)
                        .map(|k| {
                            (0..5)
                                .map(|i| 0.1 + 0.08 * k as f64 + 0.1 * i as f64)
                                .collect()
                        })
                        .collect(),
                );
                out.push((m, b));
            }
            Method::AddK => p.k = 0.37,
            _ => {}
        }
        out.push((m, p));
    }
    // Katz with a larger K than the data allow at some order: lowered.
    out.push((
        Method::Katz,
        Params {
            katz_k: 9,
            ..Params::default()
        },
    ));
    out
}

fn compare_at_order(n: usize) {
    let t = Tables::new(n, &training_files());
    let store = Store::open(store_dir(n)).unwrap();
    assert_eq!(store.meta().totals.vocabulary as f64, t.v, "|V|");
    let pairs = pairs(&t, 60);
    eprintln!("order {n}: {} held-out pairs", pairs.len());
    let queries: Vec<Vec<u64>> = pairs
        .iter()
        .map(|(h, w)| {
            let mut q = ids_of(h);
            q.extend(ids_of(std::slice::from_ref(w)));
            q
        })
        .collect();
    let refs: Vec<&[u64]> = queries.iter().map(|q| &q[..]).collect();
    for (m, params) in configs(n) {
        let est = Estimator::new(&store, m, params.clone()).unwrap();
        let mine = Independent::new(&t, m, &params);
        if !est.notes().is_empty() {
            eprintln!("order {n}, {m}: {:?}", est.notes());
        }
        let batch = est.prob_batch(&refs).unwrap();
        let mut worst = 0.0f64;
        for (i, (h, w)) in pairs.iter().enumerate() {
            let (mh, mw) = t.map(h, w);
            let want = mine.p(&mh, &mw);
            let q = &queries[i];
            let one = est.prob(&q[..q.len() - 1], q[q.len() - 1]).unwrap().p;
            for (how, got) in [("prob", one), ("prob_batch", batch[i].p)] {
                let diff = (got - want).abs();
                worst = worst.max(diff);
                assert!(
                    diff <= TOL,
                    "order {n}, {m} {params:?}, {how}: P({w} | {}) = {got:.17e}, independently {want:.17e} (difference {diff:.3e})",
                    h.join(" ")
                );
            }
        }
        eprintln!("order {n}, {m}: largest difference {worst:.3e}");
    }
}

#[test]
fn nine_estimators_equal_an_independent_implementation_at_order_3() {
    compare_at_order(3);
}

#[test]
fn nine_estimators_equal_an_independent_implementation_at_order_5() {
    compare_at_order(5);
}
