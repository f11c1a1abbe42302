//! `quern freeze --from-arpa`: ARPA text read back into a model file.
//!
//! Sources of truth:
//! - the model frozen directly from the store (itself checked against the
//!   store's estimator in `freeze.rs`): the model read back from its ARPA
//!   text must give the same probability for every word of V after
//!   sampled contexts and over running text, within what the text keeps.
//!   A probability is a product of at most N stored values (one q, up to
//!   N − 1 weights); each went from a 32-bit float to 7 decimals of log10
//!   (±5e-8, i.e. ln(10)·5e-8 ≈ 1.16e-7 relative) and back to a 32-bit
//!   float (2^-24 relative), so the bound is N·(1.16e-7 + 2^-24);
//! - the ARPA format's own rules (counts in the header, fields of a line,
//!   closure under prefixes and suffixes): each malformed file must be
//!   refused at the line this test finds by reading the text itself.

use std::path::Path;

use quern::model::{arpa, freeze, FreezeOptions, Model};
use quern::query::{prediction, Estimator, Method, Params};
use quern::store::Store;
use quern::words::WordId;

use crate::common::run;
use crate::freeze::{sample_contexts, scratch};
use crate::query_fixtures::{heldout_sentences, train3, train5};

fn bound(n: usize) -> f64 {
    n as f64 * (1.16e-7 + 2f64.powi(-24))
}

fn rel(a: f64, b: f64) -> f64 {
    if a == b {
        0.0
    } else {
        (a - b).abs() / a.abs().max(b.abs())
    }
}

/// Freezes `m` over `store_dir`, writes it as ARPA text, reads that back
/// with the binary and compares the two models.
fn round_trip(store_dir: &Path, m: Method, name: &str, gz: bool) {
    let store = Store::open(store_dir).unwrap();
    let n = store.order();
    let dir = scratch(name);
    let est = Estimator::new(&store, m, Params::default()).unwrap();
    let direct_path = dir.join("direct.model");
    freeze(&est, &direct_path, &FreezeOptions::default()).unwrap();
    let direct = Model::open(&direct_path).unwrap();
    let text = dir.join(if gz { "m.arpa.gz" } else { "m.arpa" });
    arpa::write_arpa_file(&direct, &text).unwrap();
    if !gz {
        // The lines of every section reversed: the format leaves their
        // order free, and quern writes them in its own key order, so the
        // reader must sort them itself.
        let t = std::fs::read_to_string(&text).unwrap();
        let mut out: Vec<&str> = Vec::new();
        let mut section: Vec<&str> = Vec::new();
        let mut inside = false;
        for l in t.lines() {
            if inside && (l.is_empty() || l.starts_with('\\')) {
                out.extend(section.drain(..).rev());
                inside = false;
            }
            if inside {
                section.push(l);
            } else {
                out.push(l);
                inside = l.ends_with("-grams:");
            }
        }
        std::fs::write(&text, out.join("\n") + "\n").unwrap();
    }
    let back_path = dir.join("back.model");
    let out = run(&[
        "freeze",
        "--from-arpa",
        text.to_str().unwrap(),
        "--out",
        back_path.to_str().unwrap(),
        "--json",
    ]);
    out.assert_success();
    let back = Model::open(&back_path).unwrap();
    back.verify().unwrap();
    assert_eq!(back.meta().ngrams, direct.meta().ngrams, "{m}: n-grams");
    assert_eq!(back.meta().vocabulary, direct.meta().vocabulary);
    let tol = bound(n);
    let mut worst: f64 = 0.0;
    let ctxs = sample_contexts(n, 40);
    for h in &ctxs {
        let a = direct.distribution(h).unwrap();
        let b = back.distribution(h).unwrap();
        assert_eq!(a.len(), b.len());
        for (&(wa, pa), &(wb, pb)) in a.iter().zip(&b) {
            assert_eq!(wa, wb);
            let r = rel(pa, pb);
            worst = worst.max(r);
            assert!(
                r <= tol,
                "{m}: P({wa:x} | {h:x?}) direct {pa:e}, from ARPA {pb:e}"
            );
        }
        let na = direct.next(h, 10).unwrap();
        let nb = back.next(h, 10).unwrap();
        assert_eq!(na.context, nb.context);
        for (x, y) in na.items.iter().zip(&nb.items) {
            assert!(rel(x.1, y.1) <= tol, "{m}: next after {h:x?}: {x:?} {y:?}");
        }
    }
    let mut qs: Vec<&[WordId]> = Vec::new();
    for s in heldout_sentences().iter().take(800) {
        for i in 1..s.len() {
            qs.push(prediction(s, i, n));
        }
    }
    let pa = direct.prob_batch(&qs).unwrap();
    let pb = back.prob_batch(&qs).unwrap();
    for ((q, a), b) in qs.iter().zip(&pa).zip(&pb) {
        assert!(rel(a.p, b.p) <= tol, "{m}: {q:x?}: {a:?} vs {b:?}");
        assert_eq!(a.oov, b.oov, "{m}: {q:x?}");
        // The order that answered, but for words outside V: ARPA text
        // does not say whether <unk> was seen in training (where it was
        // not, the model frozen directly answers an OOV word at order 0;
        // the one read back has <unk> as a listed unigram).
        if !a.oov {
            assert_eq!(a.order, b.order, "{m}: {q:x?}");
        }
    }
    eprintln!(
        "{m} order {n}: {} contexts × |V| and {} running predictions, largest relative difference {worst:.2e} (bound {tol:.2e})",
        ctxs.len(),
        qs.len()
    );
}

#[test]
fn arpa_round_trip_order3() {
    round_trip(train3(), Method::Mkn, "from-arpa-mkn3", true);
    round_trip(train3(), Method::WittenBell, "from-arpa-wb3", false);
}

#[test]
fn arpa_round_trip_order5() {
    round_trip(train5(), Method::Mkn, "from-arpa-mkn5", false);
}

/// The line numbers (1-based) of `text` where the section `\k-grams:`
/// starts, by reading the text.
fn section_line(lines: &[&str], k: usize) -> usize {
    lines
        .iter()
        .position(|l| *l == format!("\\{k}-grams:"))
        .unwrap()
        + 1
}

/// Malformed ARPA files, each made from a good one by changing one thing,
/// are refused with the file's name and the line where the format breaks.
#[test]
fn malformed_arpa_refused_at_its_line() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("from-arpa-bad");
    let est = Estimator::new(&store, Method::Mkn, Params::default()).unwrap();
    let mp = dir.join("good.model");
    // A small model: only n-grams seen at least 40 times.
    let opts = FreezeOptions {
        min_counts: vec![1, 40, 40],
        ..Default::default()
    };
    freeze(&est, &mp, &opts).unwrap();
    let good_path = dir.join("good.arpa");
    arpa::write_arpa_file(&Model::open(&mp).unwrap(), &good_path).unwrap();
    let good = std::fs::read_to_string(&good_path).unwrap();
    let lines: Vec<&str> = good.lines().collect();
    let s1 = section_line(&lines, 1);
    let s2 = section_line(&lines, 2);
    let s3 = section_line(&lines, 3);
    let header = lines.iter().position(|l| *l == "\\data\\").unwrap() + 1;
    // Every case: (what, the text with line `at` replaced by `by` (None:
    // removed), the line the error must name).
    let edit = |at: usize, by: Option<String>| -> String {
        let mut v: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
        match by {
            Some(b) => v[at - 1] = b,
            None => {
                v.remove(at - 1);
            }
        }
        v.join("\n") + "\n"
    };
    let fields =
        |at: usize| -> Vec<String> { lines[at - 1].split('\t').map(|s| s.to_string()).collect() };
    // A bigram line and its words.
    let bi = s2 + 5;
    let bw = fields(bi);
    let words: Vec<&str> = bw[1].split(' ').collect();
    // A word that is a unigram of the file, renamed: the first later line
    // that uses it as a first or last word has a prefix or suffix missing.
    let uni = s1
        + 1
        + lines[s1..s2]
            .iter()
            .position(|l| l.contains(&format!("\t{}\t", words[0])))
            .unwrap();
    let first_use = s2
        + 1
        + lines[s2..]
            .iter()
            .position(|l| {
                l.split('\t')
                    .nth(1)
                    .is_some_and(|ng| ng.split(' ').any(|w| w == words[0]))
            })
            .unwrap();
    let mut cases: Vec<(&str, String, usize)> = vec![
        (
            "a count that is not a number",
            edit(header + 2, Some("ngram 2=many".into())),
            header + 2,
        ),
        (
            "a probability above 1",
            edit(bi, Some(format!("0.25\t{}", bw[1..].join("\t")))),
            bi,
        ),
        (
            "a probability that is not a number",
            edit(bi, Some(format!("high\t{}", bw[1..].join("\t")))),
            bi,
        ),
        (
            "a bigram with one word",
            edit(bi, Some(format!("{}\t{}", bw[0], words[0]))),
            bi,
        ),
        (
            "a back-off weight that is not finite",
            edit(bi, Some(format!("{}\t{}\tinf", bw[0], bw[1]))),
            bi,
        ),
        (
            "a back-off weight at the top order",
            edit(s3 + 1, Some(format!("{}\t-0.5", lines[s3]))),
            s3 + 1,
        ),
        (
            "an n-gram listed twice",
            edit(bi + 1, Some(lines[bi - 1].to_string())),
            bi + 1,
        ),
        (
            "a word renamed in the unigrams",
            edit(
                uni,
                Some(lines[uni - 1].replacen(&format!("\t{}\t", words[0]), "\tzzq-renamed\t", 1)),
            ),
            first_use,
        ),
        (
            "a section header out of order",
            edit(s3, Some("\\4-grams:".into())),
            s3,
        ),
        (
            "the end marker missing",
            edit(lines.len(), Some(String::new())),
            lines.len() + 1,
        ),
    ];
    // A bigram removed: the section ends one line early, where the
    // header's count is not reached.
    let short = edit(bi, None);
    let s2_end = s2 + lines[s2..].iter().position(|l| l.is_empty()).unwrap();
    cases.push(("a bigram missing", short, s2_end));
    for (what, text, line) in cases {
        let p = dir.join("bad.arpa");
        std::fs::write(&p, &text).unwrap();
        let out = run(&[
            "freeze",
            "--from-arpa",
            p.to_str().unwrap(),
            "--out",
            dir.join("bad.model").to_str().unwrap(),
        ]);
        out.assert_failure();
        let want = format!("{}:{line}: expected ", p.display());
        assert!(
            out.stderr.contains(&want),
            "{what}: wanted {want:?} in {}",
            out.stderr
        );
        assert!(!dir.join("bad.model").exists(), "{what}: no model written");
    }
}
