//! What typing needs (issue 32): folded completion (`--match folded`)
//! equals a brute-force ranking of every word of V whose folded text
//! begins with the folded prefix, the folding done by Python's standard
//! library (`str.casefold`, `unicodedata.normalize("NFD")`, category Mn
//! dropped); a never-suggest list, given at query time or stored in the
//! model, never appears and changes no probability; `freeze --max-bytes`
//! files are within the size, accepted by `check-model`, and near the
//! largest that fits.

use std::collections::{HashMap, HashSet};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use quern::model::{freeze, FreezeOptions, Model};
use quern::query::{Estimator, Method, Next, Params, Predictor};
use quern::store::Store;
use quern::words::{bos_id, eos_id, unk_id, word_id, WordId};
use quern::PrefixMatch;

use crate::common::{gutenberg_dir, ingest_ok, python3, run, run_ok};
use crate::query_fixtures::{heldout_path, heldout_sentences, train3};

fn scratch(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
        .join("typing")
        .join(name);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// The folded form of every string, by Python's standard library.
fn python_fold(texts: &[String]) -> Vec<String> {
    let code = "import json, sys, unicodedata\n\
        f = lambda s: ''.join(c for c in unicodedata.normalize('NFD', s.casefold()) \
        if unicodedata.category(c) != 'Mn')\n\
        print(json.dumps([f(s) for s in json.load(sys.stdin)]))";
    let mut child = Command::new(python3())
        .args(["-c", code])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("run python3");
    let input = serde_json::to_vec(texts).unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let feed = std::thread::spawn(move || stdin.write_all(&input));
    let out = child.wait_with_output().unwrap();
    feed.join().unwrap().unwrap();
    assert!(out.status.success());
    serde_json::from_slice(&out.stdout).unwrap()
}

/// A store of Emma's first 4,000 lines in which some words are written in
/// capitals, capitalised or with accents, plus words whose folding is not
/// their lowercase (ß, final sigma, a ligature): the text the folded
/// completion is checked on, beside the Gutenberg novels as they are.
fn accented_store() -> PathBuf {
    let dir = scratch("accented");
    let store = dir.join("store");
    if store.exists() {
        std::fs::remove_dir_all(&store).unwrap();
    }
    let novel = std::fs::read_to_string(gutenberg_dir().join("emma.txt")).unwrap();
    let accent = |w: &str| -> String {
        let mut done = false;
        w.chars()
            .map(|c| {
                let r = match (done, c) {
                    (false, 'a') => 'á',
                    (false, 'e') => 'é',
                    (false, 'o') => 'ô',
                    (false, 'u') => 'ü',
                    (false, 'E') => 'É',
                    _ => c,
                };
                done |= r != c;
                r
            })
            .collect()
    };
    let mut out = String::new();
    for (i, line) in novel.lines().take(4000).enumerate() {
        let words: Vec<String> = line
            .split_whitespace()
            .enumerate()
            .map(|(j, w)| match (i * 7 + j) % 11 {
                0 => w.to_uppercase(),
                1 => accent(w),
                2 => accent(&w.to_uppercase()),
                _ => w.to_string(),
            })
            .collect();
        out.push_str(&words.join(" "));
        if i % 50 == 0 {
            out.push_str(" Straße STRASSE ΣΊΣΥΦΟΣ σίσυφος ﬁne Ångström");
        }
        out.push('\n');
    }
    let text = dir.join("accented.txt");
    std::fs::write(&text, out).unwrap();
    ingest_ok(&store, &["--order", "3", "--quiet"], &[text]);
    store
}

/// The brute-force top K: every word of V scored, those allowed by `ok`
/// kept, sorted by probability (ties by the words' bytes, README "quern
/// next").
fn brute(
    dist: &[(WordId, f64)],
    text: &HashMap<WordId, String>,
    ok: impl Fn(WordId) -> bool,
    k: usize,
) -> Vec<(WordId, f64)> {
    let mut v: Vec<(WordId, f64)> = dist.iter().copied().filter(|&(w, _)| ok(w)).collect();
    v.sort_by(|a, b| {
        b.1.total_cmp(&a.1)
            .then_with(|| text[&a.0].as_bytes().cmp(text[&b.0].as_bytes()))
    });
    v.truncate(k);
    v
}

fn same(what: &str, got: &Next, want: &[(WordId, f64)]) {
    assert_eq!(got.items.len(), want.len(), "{what}: how many");
    for (i, (g, w)) in got.items.iter().zip(want).enumerate() {
        assert_eq!(g, w, "{what}: rank {i}");
    }
}

fn contexts() -> Vec<Vec<WordId>> {
    let mut out = vec![vec![], vec![bos_id()], vec![word_id(b"the")]];
    let s = heldout_sentences();
    for sent in s.iter().step_by(s.len() / 6) {
        out.push(sent[..sent.len().min(3)].to_vec());
    }
    out
}

const FOLDED_PREFIXES: &[&str] = &[
    "gu", "GU", "Gu", "em", "EM", "é", "É", "e", "á", "a", "ô", "ss", "STRA", "straß", "σ", "Σ",
    "σίσ", "ﬁ", "fi", "ang", "Å", "ü", "qqzz",
];

/// Folded completion equals the brute force over V with Python's folding,
/// for a store and for a model frozen from it, on the Gutenberg novels and
/// on the accented text.
#[test]
fn folded_completion_equals_brute_force() {
    let mut checked = 0;
    let mut capital_offered = 0;
    for (name, dir) in [
        ("gutenberg", train3().to_path_buf()),
        ("accented", accented_store()),
    ] {
        let store = Store::open(&dir).unwrap();
        let text: HashMap<WordId, String> = store.vocabulary().unwrap().into_iter().collect();
        let words: Vec<WordId> = text.keys().copied().collect();
        let texts: Vec<String> = words.iter().map(|w| text[w].clone()).collect();
        let folded: HashMap<WordId, String> =
            words.iter().copied().zip(python_fold(&texts)).collect();
        let prefixes: Vec<String> = FOLDED_PREFIXES.iter().map(|s| s.to_string()).collect();
        let folded_prefixes = python_fold(&prefixes);
        let est = Estimator::new(&store, Method::Mkn, Params::default()).unwrap();
        let path = scratch(name).join("mkn.model");
        freeze(&est, &path, &FreezeOptions::default()).unwrap();
        let model = Model::open(&path).unwrap();
        for (what, pred) in [("store", &est as &dyn Predictor), ("model", &model)] {
            for h in contexts() {
                let dist = pred.distribution(&h).unwrap();
                for (prefix, fp) in prefixes.iter().zip(&folded_prefixes) {
                    let ok = |w: WordId| {
                        w != bos_id()
                            && w != unk_id()
                            && w != eos_id()
                            && folded[&w].starts_with(fp.as_str())
                    };
                    let all = brute(&dist, &text, ok, usize::MAX);
                    for k in [1, 5, 40] {
                        let got = pred
                            .complete_matching(&h, prefix, PrefixMatch::Folded, k)
                            .unwrap();
                        let want = &all[..k.min(all.len())];
                        same(
                            &format!("{name} {what}: {h:x?} {prefix:?} k {k}"),
                            &got,
                            want,
                        );
                        capital_offered += got
                            .items
                            .iter()
                            .filter(|(w, _)| !text[w].starts_with(prefix.as_str()))
                            .count();
                        checked += 1;
                    }
                }
            }
        }
    }
    assert!(checked > 1000, "{checked}");
    // Words shown as the model has them, not as typed (`gu` offers
    // `Guillemot`-like capitals, `e` offers `é…`).
    assert!(capital_offered > 100, "{capital_offered}");
    // The command line and the exact default.
    let s = train3().to_str().unwrap();
    let r = run_ok(&[
        "next", "--store", s, "--prefix", "em", "--match", "folded", "--top", "3", "<s>",
    ]);
    assert!(r.stdout.contains("Emma"), "{}", r.stdout);
    let r = run_ok(&["next", "--store", s, "--prefix", "em", "--top", "3", "<s>"]);
    assert!(!r.stdout.contains("Emma"), "{}", r.stdout);
    let r = run(&[
        "next", "--store", s, "--prefix", "em", "--match", "loose", "<s>",
    ]);
    r.assert_failure();
    assert!(
        r.stderr.contains("exact") && r.stderr.contains("folded"),
        "{}",
        r.stderr
    );
}

/// Probabilities of every held-out prediction, and whole distributions,
/// are the same with and without a never-suggest list; `next` and
/// completion never show its words and equal the brute-force top K of
/// the others; the list given at query time (library and command line)
/// answers as the list stored in the model.
#[test]
fn never_suggested_words_are_never_shown_and_change_nothing_else() {
    let store = Store::open(train3()).unwrap();
    let est = Estimator::new(&store, Method::Mkn, Params::default()).unwrap();
    let text: HashMap<WordId, String> = store.vocabulary().unwrap().into_iter().collect();
    // The most probable words after the contexts below, and one outside V.
    let listed = ["the", "Emma", "Harriet", "to", "her", "qqzzx-none"];
    let never: HashSet<WordId> = listed.iter().map(|w| word_id(w.as_bytes())).collect();
    let dir = scratch("never");
    let (plain, listing) = (dir.join("plain.model"), dir.join("listing.model"));
    freeze(&est, &plain, &FreezeOptions::default()).unwrap();
    let opts = FreezeOptions {
        never_suggest: listed.iter().map(|w| w.to_string()).collect(),
        ..Default::default()
    };
    freeze(&est, &listing, &opts).unwrap();
    let (a, b) = (Model::open(&plain).unwrap(), Model::open(&listing).unwrap());
    // No probability changes.
    let queries: Vec<Vec<WordId>> = heldout_sentences()
        .iter()
        .take(400)
        .flat_map(|s| (1..s.len()).map(move |i| s[i.saturating_sub(2)..=i].to_vec()))
        .collect();
    let refs: Vec<&[WordId]> = queries.iter().map(|q| &q[..]).collect();
    let (pa, pb) = (a.prob_batch(&refs).unwrap(), b.prob_batch(&refs).unwrap());
    assert!(pa.len() > 3000);
    for (i, (x, y)) in pa.iter().zip(&pb).enumerate() {
        assert_eq!(x.p.to_bits(), y.p.to_bits(), "query {i}");
    }
    let mut shown_before = 0;
    for h in contexts() {
        let dist = a.distribution(&h).unwrap();
        assert_eq!(dist, b.distribution(&h).unwrap());
        for prefix in ["", "t", "E", "H", "h"] {
            let ok = |w: WordId| {
                !never.contains(&w)
                    && w != bos_id()
                    && w != unk_id()
                    && (w != eos_id() || prefix.is_empty())
                    && text[&w].starts_with(prefix)
            };
            for k in [1, 5, 20] {
                let want = brute(&dist, &text, ok, k);
                let what = format!("{h:x?} {prefix:?} {k}");
                let stored = b.complete(&h, prefix, k).unwrap();
                same(&format!("stored list: {what}"), &stored, &want);
                let sum: f64 = want.iter().map(|x| x.1).sum();
                assert!((stored.rest - (1.0 - sum)).abs() < 1e-12);
                let given = a
                    .suggest(&h, prefix, PrefixMatch::Exact, &never, k)
                    .unwrap();
                same(&format!("query-time list: {what}"), &given, &want);
                // The store gives the same words (its probabilities agree
                // with the model's within f32 storage, so words only).
                let s = est
                    .suggest(&h, prefix, PrefixMatch::Exact, &never, k)
                    .unwrap();
                let words = |n: &Next| n.items.iter().map(|x| x.0).collect::<Vec<_>>();
                assert_eq!(words(&s), words(&stored), "store: {what}");
                let before = a.complete(&h, prefix, k).unwrap();
                shown_before += before.items.iter().filter(|x| never.contains(&x.0)).count();
            }
            // `next` (every word of V allowed) never shows them either.
            let next = b.next(&h, 10).unwrap();
            let want = brute(&dist, &text, |w| !never.contains(&w), 10);
            same(&format!("next after {h:x?}"), &next, &want);
        }
    }
    // The listed words would have been shown without the list.
    assert!(shown_before > 20, "{shown_before}");
    // The command line: --never-suggest at query time answers as the
    // stored list.
    let list = dir.join("never.txt");
    std::fs::write(&list, listed.join("\n") + "\n").unwrap();
    let cli = |m: &Path, extra: &[&str]| {
        let mut args = vec!["next", "--model", m.to_str().unwrap(), "--top", "8"];
        args.extend(extra);
        args.push("<s>");
        run_ok(&args).stdout
    };
    // (The heading's count of words scored may differ: the stored list
    // holds only the words of V.)
    let table = |t: String| t.lines().skip(1).collect::<Vec<_>>().join("\n");
    let given = table(cli(&plain, &["--never-suggest", list.to_str().unwrap()]));
    assert_eq!(given, table(cli(&listing, &[])));
    assert!(given.lines().all(|l| !l.contains(" the ")), "{given}");
    assert_ne!(given, table(cli(&plain, &[])));
}

/// `freeze --max-bytes`: at three sizes the file is at most SIZE (its
/// length on disk), `check-model` accepts it, and a model with 1% more
/// n-grams would not fit (so it is near the largest that fits); with
/// --bits the quantized model fits; a size no pruning reaches is refused.
#[test]
fn max_bytes_models_fit_and_verify() {
    let s = train3().to_str().unwrap();
    let dir = scratch("max-bytes");
    let heldout = heldout_path();
    let mut last_kept = 0;
    for (budget, extra) in [
        (1_500_000u64, &[][..]),
        (3_000_000, &[][..]),
        (5_000_000, &[][..]),
        (2_000_000, &["--bits", "8"][..]),
    ] {
        let out = dir.join(format!("{budget}-{}.model", extra.len()));
        let b = budget.to_string();
        let mut args = vec!["freeze", "--store", s, "--out", out.to_str().unwrap()];
        args.extend([
            "--max-bytes",
            &b,
            "--heldout",
            heldout.to_str().unwrap(),
            "--json",
        ]);
        args.extend(extra);
        let r = run_ok(&args);
        let v: serde_json::Value = serde_json::from_str(&r.stdout).unwrap();
        let on_disk = std::fs::metadata(&out).unwrap().len();
        assert_eq!(v["model_bytes"].as_u64(), Some(on_disk));
        assert!(on_disk <= budget, "{on_disk} > {budget}");
        run_ok(&["check-model", out.to_str().unwrap()]);
        let kept: u64 = v["ngrams_kept"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_u64().unwrap())
            .sum();
        let pp = v["heldout"]["perplexity_model"].as_f64().unwrap();
        assert!(pp.is_finite() && pp > 1.0);
        crate::common::report(&format!(
            "freeze --max-bytes {budget} {extra:?}: {on_disk} bytes, {kept} n-grams, held-out perplexity {pp:.2}"
        ));
        if extra.is_empty() {
            assert!(kept > last_kept);
            last_kept = kept;
            // 1% more n-grams do not fit.
            let more = (kept + kept / 100).to_string();
            let bigger = dir.join("bigger.model");
            let r = run_ok(&[
                "freeze",
                "--store",
                s,
                "--out",
                bigger.to_str().unwrap(),
                "--max-ngrams",
                &more,
            ]);
            drop(r);
            let len = std::fs::metadata(&bigger).unwrap().len();
            assert!(
                len > budget,
                "{more} n-grams take {len} bytes, within {budget}"
            );
        } else {
            assert_eq!(v["value_bits"], 8);
        }
    }
    let out = dir.join("tiny.model");
    let r = run(&[
        "freeze",
        "--store",
        s,
        "--out",
        out.to_str().unwrap(),
        "--max-bytes",
        "100K",
    ]);
    r.assert_failure();
    assert!(r.stderr.contains("--max-bytes"), "{}", r.stderr);
}
