//! Completion (`next --prefix`) is exact: its top K equals a brute-force
//! ranking of every word of V that begins with the prefix (source of
//! truth: the definition of top K, computed by scoring every word with
//! `distribution` and filtering the words' texts with `str::starts_with`),
//! for a store's estimator and for a frozen model, several methods, on
//! fixtures/gutenberg. The markers: never `<s>` or `<unk>`, `</s>` only
//! with an empty prefix (issue 16). The batch form of `next` equals single
//! queries.

use std::collections::HashMap;
use std::path::PathBuf;

use quern::model::{freeze, FreezeOptions, Model};
use quern::query::{Estimator, Method, Next, Params, Predictor};
use quern::store::Store;
use quern::words::{bos_id, eos_id, unk_id, word_id, WordId};

use crate::common::{run_ok, run_with_stdin};
use crate::query_fixtures::{heldout_sentences, train3, train5};

fn contexts(n: usize) -> Vec<Vec<WordId>> {
    let mut out = vec![
        vec![],
        vec![bos_id()],
        vec![word_id(b"qqzzx-unknown")],
        vec![word_id(b"the")],
        vec![bos_id(), word_id(b"She")],
    ];
    let s = heldout_sentences();
    for sent in s.iter().step_by(s.len() / 8) {
        out.push(sent[..sent.len().min(n)].to_vec());
        out.push(sent[..(sent.len() / 2).max(1)].to_vec());
    }
    out
}

/// Prefixes of every kind: empty, one and two characters (frequent and
/// rare), a whole word, one matching nothing, the markers' first
/// characters, a non-ASCII one.
const PREFIXES: &[&str] = &[
    "",
    "t",
    "th",
    "a",
    "w",
    "h",
    "I",
    "Q",
    "z",
    "un",
    "ele",
    "Elizabeth",
    "qqzzx",
    "<",
    "</",
    "é",
];

/// The brute-force top K: every word of V scored, filtered by the
/// definition, sorted by probability (ties by the words' bytes, README
/// "quern next").
fn brute(
    dist: &[(WordId, f64)],
    text: &HashMap<WordId, String>,
    prefix: &str,
    k: usize,
) -> Vec<(WordId, f64)> {
    let mut v: Vec<(WordId, f64)> = dist
        .iter()
        .copied()
        .filter(|&(w, _)| {
            w != bos_id()
                && w != unk_id()
                && (w != eos_id() || prefix.is_empty())
                && text[&w].starts_with(prefix)
        })
        .collect();
    v.sort_by(|a, b| {
        b.1.total_cmp(&a.1)
            .then_with(|| text[&a.0].as_bytes().cmp(text[&b.0].as_bytes()))
    });
    v.truncate(k);
    v
}

fn compare(
    what: &str,
    got: &Next,
    want: &[(WordId, f64)],
    dist: &[(WordId, f64)],
    allowed: impl Fn(WordId) -> bool,
) {
    assert_eq!(
        got.items.len(),
        want.len(),
        "{what}: {} words, brute force {}",
        got.items.len(),
        want.len()
    );
    for (i, ((w, p), (v, q))) in got.items.iter().zip(want).enumerate() {
        // The same word with the same probability at every rank ...
        assert_eq!((w, p), (v, q), "{what}: rank {i}");
        // ... and the word shown has the probability shown, and is one of
        // the words allowed.
        // (`distribution` is in id order.)
        let d = dist[dist.binary_search_by_key(w, |x| x.0).unwrap()].1;
        assert!((p - d).abs() <= 1e-15 + 1e-12 * p, "{what}: rank {i}");
        assert!(allowed(*w), "{what}: rank {i}: a word not allowed");
    }
    let sum: f64 = got.items.iter().map(|x| x.1).sum();
    assert!((got.rest - (1.0 - sum)).abs() < 1e-12);
    // A word is listed once.
    let mut words: Vec<WordId> = got.items.iter().map(|x| x.0).collect();
    words.sort_unstable();
    words.dedup();
    assert_eq!(words.len(), got.items.len(), "{what}: a word listed twice");
}

fn check(pred: &dyn Predictor, what: &str, text: &HashMap<WordId, String>, n: usize) -> usize {
    check_with(pred, what, text, &contexts(n), PREFIXES)
}

/// [`check`] over the given contexts and prefixes.
fn check_with(
    pred: &dyn Predictor,
    what: &str,
    text: &HashMap<WordId, String>,
    contexts: &[Vec<WordId>],
    prefixes: &[&str],
) -> usize {
    let mut checked = 0;
    for h in contexts {
        let dist = pred.distribution(h).unwrap();
        for prefix in prefixes {
            let all = brute(&dist, text, prefix, usize::MAX);
            for k in [1, 5, 40] {
                let got = pred.complete(h, prefix, k).unwrap();
                let want = &all[..k.min(all.len())];
                compare(
                    &format!("{what}: after {h:x?}, prefix {prefix:?}, k {k}"),
                    &got,
                    want,
                    &dist,
                    |w| brute(&[(w, 1.0)], text, prefix, 1).len() == 1,
                );
                checked += 1;
            }
        }
    }
    checked
}

fn scratch(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("complete")
        .join(name);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn check_store(store: &Store, methods: &[Method], name: &str) {
    let text = store.vocabulary().unwrap();
    let n = store.order();
    let dir = scratch(name);
    for &m in methods {
        let est = Estimator::new(store, m, Params::default()).unwrap();
        let c = check(&est, &format!("store {m}"), &text, n);
        assert!(c > 500);
        if !matches!(m, Method::AddK | Method::Mle) {
            let path = dir.join(format!("{m}.model"));
            freeze(&est, &path, &FreezeOptions::default()).unwrap();
            let model = Model::open(&path).unwrap();
            check(&model, &format!("model {m}"), &text, n);
        }
    }
}

#[test]
fn completion_equals_brute_force_order3() {
    let store = Store::open(train3()).unwrap();
    check_store(&store, &Method::ALL, "o3");
}

#[test]
fn completion_equals_brute_force_order5() {
    let store = Store::open(train5()).unwrap();
    check_store(
        &store,
        &[Method::Mkn, Method::Katz, Method::WittenBell],
        "o5",
    );
}

/// Batch `next` (one query a line, a tab before the prefix) gives the
/// same answers as one query at a time, in TSV and JSON.
#[test]
fn next_batch_equals_single_queries() {
    let store = train3().to_str().unwrap().to_string();
    let lines = [
        ("<s> She", "h"),
        ("she was", "ha"),
        ("", "th"),
        ("of the", ""),
        ("qqzzx-unknown", "a"),
        ("the", "zzzzqq"),
    ];
    let mut input = String::new();
    for (c, p) in lines {
        input.push_str(&format!("{c}\t{p}\n"));
    }
    input.push_str("<s> It was\n");
    let batch = run_with_stdin(
        &[
            "next", "--store", &store, "--top", "4", "--json", "--prefix", "a",
        ],
        input.as_bytes(),
    );
    batch.assert_success();
    let got: Vec<serde_json::Value> = batch
        .stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(got.len(), lines.len() + 1);
    let tsv = run_with_stdin(&["next", "--store", &store, "--top", "4"], input.as_bytes());
    tsv.assert_success();
    let mut rows = tsv.stdout.lines();
    assert_eq!(
        rows.next().unwrap(),
        "line\tcontext\tprefix\trank\tword\tprobability\tlog10"
    );
    let rows: Vec<Vec<&str>> = rows.map(|r| r.split('\t').collect()).collect();
    let all = lines
        .iter()
        .map(|&(c, p)| (c, p))
        .chain([("<s> It was", "a")]);
    for (i, (c, p)) in all.enumerate() {
        let mut args = vec!["next", "--store", &store, "--top", "4", "--json"];
        if !p.is_empty() {
            args.extend(["--prefix", p]);
        }
        // The unigram level has no single-query form: its context is empty.
        if c.is_empty() {
            continue;
        }
        args.extend(c.split_whitespace());
        let one: serde_json::Value = serde_json::from_str(run_ok(&args).stdout.trim()).unwrap();
        let b = &got[i];
        assert_eq!(b["line"], i + 1);
        assert_eq!(b["prefix"], p);
        assert_eq!(b["words"], one["words"], "line {}", i + 1);
        assert_eq!(b["context"], one["context"]);
        assert_eq!(b["rest"], one["rest"]);
        // TSV: the same words in the same order (the last line has no tab,
        // so without --prefix its prefix is empty there).
        if i < lines.len() {
            let words: Vec<&str> = rows
                .iter()
                .filter(|r| r[0] == (i + 1).to_string())
                .map(|r| r[4])
                .collect();
            let want: Vec<&str> = one["words"]
                .as_array()
                .unwrap()
                .iter()
                .map(|x| x["word"].as_str().unwrap())
                .collect();
            assert_eq!(words, want, "TSV line {}", i + 1);
        }
    }
    // The prefix that no word has: an empty list, the line still answered.
    assert_eq!(got[5]["words"].as_array().unwrap().len(), 0);
    // The empty context: the unigram level, words beginning with "th".
    let st = Store::open(train3()).unwrap();
    let est = Estimator::new(&st, Method::Mkn, Params::default()).unwrap();
    let uni = est.complete(&[], "th", 4).unwrap();
    let words: Vec<String> = uni
        .items
        .iter()
        .map(|x| est.store().word(x.0).unwrap().unwrap())
        .collect();
    let shown: Vec<&str> = got[2]["words"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x["word"].as_str().unwrap())
        .collect();
    assert_eq!(shown, words);
    assert!(words.iter().all(|w| w.starts_with("th")));
}

/// On a store built with --lowercase, the prefix is lowercased too: "TH"
/// gives what "th" gives, and every word shown begins with "th".
#[test]
fn prefix_lowercased_with_the_store() {
    let dir = scratch("lower").join("store");
    if dir.exists() {
        std::fs::remove_dir_all(&dir).unwrap();
    }
    crate::common::ingest_ok(
        &dir,
        &["--order", "3", "--lowercase", "--quiet"],
        &[crate::common::gutenberg_dir().join("persuasion.txt")],
    );
    let store = Store::open(&dir).unwrap();
    let est = Estimator::new(&store, Method::Mkn, Params::default()).unwrap();
    let h = [bos_id()];
    let a = est.complete(&h, "TH", 10).unwrap();
    let b = est.complete(&h, "th", 10).unwrap();
    assert_eq!(a, b);
    assert_eq!(a.items.len(), 10);
    for (w, _) in &a.items {
        assert!(store.word(*w).unwrap().unwrap().starts_with("th"));
    }
}

/// fixtures/unicode/several-scripts.txt: text written for these tests in
/// several scripts (Latin with diacritics, a decomposed é, Greek,
/// Cyrillic, Han, kana, Devanagari) and literal marker spellings.
pub(crate) fn several_scripts() -> PathBuf {
    crate::common::fixtures().join("unicode/several-scripts.txt")
}

/// Prefixes of the several-scripts fixture: one and more scalar values of
/// two and three bytes, capitals and small letters, a base letter without
/// its accent, a Han character, the markers' first characters.
const SCRIPT_PREFIXES: &[&str] = &[
    "",
    "é",
    "É",
    "éc",
    "e",
    "ü",
    "Ü",
    "Š",
    "š",
    "ř",
    "κ",
    "Ο",
    "ο",
    "ж",
    "Ж",
    "Щ",
    "щу",
    "猫",
    "河",
    "河边",
    "न",
    "ना",
    "caf",
    "café",
    "cafe\u{301}",
    "Zo",
    "Zoë",
    "<",
    "</",
    "ω",
];

/// Completion on a store of text in several scripts equals the brute force
/// (`str::starts_with` over every word of V), for a store and a frozen
/// model, and with `--lowercase` (prefix and words lowercased by
/// `str::to_lowercase`): the words shown are V's words that begin with the
/// lowercased prefix.
#[test]
fn completion_in_several_scripts_equals_brute_force() {
    let fixture = several_scripts();
    for lowercase in [false, true] {
        let dir = scratch(&format!("scripts-{lowercase}"));
        let store_dir = dir.join("store");
        if store_dir.exists() {
            std::fs::remove_dir_all(&store_dir).unwrap();
        }
        let mut flags = vec!["--order", "3", "--quiet"];
        if lowercase {
            flags.push("--lowercase");
        }
        crate::common::ingest_ok(&store_dir, &flags, std::slice::from_ref(&fixture));
        let store = Store::open(&store_dir).unwrap();
        let text = store.vocabulary().unwrap();
        // Words of several scripts are in V (so that the prefixes match).
        for w in ["école", "жёлтый", "猫", "नदी", "café", "cafe\u{301}"] {
            assert!(text.values().any(|x| x == w), "{w} is not in V");
        }
        let sentences = quern::query::score::read_sentences(
            std::slice::from_ref(&fixture),
            quern::tokenize::Preparation {
                lowercase,
                ..Default::default()
            },
        )
        .unwrap();
        let mut ctxs: Vec<Vec<WordId>> = vec![vec![], vec![bos_id()], vec![word_id(b"qqzzx")]];
        for s in sentences.iter().step_by(3) {
            ctxs.push(s[..2.min(s.len())].to_vec());
            ctxs.push(s[..(s.len() / 2).max(1)].to_vec());
        }
        let prefixes: Vec<String> = SCRIPT_PREFIXES
            .iter()
            .map(|p| {
                if lowercase {
                    p.to_lowercase()
                } else {
                    p.to_string()
                }
            })
            .collect();
        let prefixes: Vec<&str> = prefixes.iter().map(String::as_str).collect();
        for m in [Method::Mkn, Method::Katz, Method::Stupid] {
            let est = Estimator::new(&store, m, Params::default()).unwrap();
            let what = format!("several scripts, lowercase {lowercase}, store {m}");
            assert!(check_with(&est, &what, &text, &ctxs, &prefixes) > 500);
            // Matches for non-ASCII prefixes exist, so that the check says
            // something about them.
            let found = est.complete(&[], prefixes[1], 40).unwrap();
            assert!(
                found.items.len() >= 3,
                "{what}: {} words begin with {:?}",
                found.items.len(),
                prefixes[1]
            );
            let path = dir.join(format!("{m}.model"));
            freeze(&est, &path, &FreezeOptions::default()).unwrap();
            let model = Model::open(&path).unwrap();
            let what = format!("several scripts, lowercase {lowercase}, model {m}");
            check_with(&model, &what, &text, &ctxs, &prefixes);
            if lowercase {
                // A capital prefix gives what its lowercase gives.
                for (up, low) in [("É", "é"), ("Ж", "ж"), ("Ü", "ü"), ("ZOË", "zoë")] {
                    for h in &ctxs[..4] {
                        assert_eq!(
                            est.complete(h, up, 10).unwrap(),
                            est.complete(h, low, 10).unwrap(),
                            "{up} and {low}"
                        );
                        assert_eq!(
                            model.complete(h, up, 10).unwrap(),
                            model.complete(h, low, 10).unwrap(),
                            "{up} and {low}"
                        );
                    }
                }
            }
        }
    }
}
