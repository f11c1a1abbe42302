//! The ARPA export of frozen models, read by an independent reader written
//! in Python (`tests/integration/arpa_check.py`, standard library only):
//! every context sums to 1, the file is closed under prefixes and
//! suffixes, and its back-off answers equal the store's estimator; count
//! thresholds keep the n-grams README ("Count thresholds") says, against a
//! Python count.

use std::path::{Path, PathBuf};
use std::process::Command;

use quern::model::{arpa, freeze, FreezeOptions, Model};
use quern::query::{Estimator, Method, Params};
use quern::store::Store;

use crate::freeze::{bound, sample_contexts, scratch, FREEZABLE};
use crate::independent::{Independent, Tables};
use crate::query_fixtures::{train3, train5};

/// Runs the Python reader on an ARPA file; returns its answers to the
/// queries and its report.
/// The contexts left out of the reader's sums are the ones the model lists
/// as skipping (see [`python_check_skipping`] for a list derived in the
/// test).
pub(crate) fn python_check(
    arpa: &Path,
    queries: Option<&Path>,
    model: &Model,
) -> (Vec<f64>, serde_json::Value) {
    python_check_skipping(arpa, queries, &arpa::skipping_contexts(model))
}

/// [`python_check`] with the contexts to leave out of the sums given.
fn python_check_skipping(
    arpa: &Path,
    queries: Option<&Path>,
    skipping: &[String],
) -> (Vec<f64>, serde_json::Value) {
    let script = crate::common::manifest_dir().join("tests/integration/arpa_check.py");
    let skip = arpa.with_extension("skip");
    std::fs::write(&skip, skipping.join("\n")).unwrap();
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
            let mut want = queries(&store, &est, &qpath);
            // Katz passes the mass of a context whose children take all of
            // h''s probability further down (the model carries how far);
            // ARPA text cannot say so, so those contexts are left out of
            // the reader's sums, and queries that go through one may get
            // less from the ARPA rule than Katz gives. They are derived
            // here, from the counts, by the independent Katz
            // (independent.rs, Katz 1987 as README states it): a seen
            // context h with mass to give whose denominator
            // 1 − Σ_{v seen after h} P(v | h') is at most 1e-12. They must
            // be the model's.
            let katz = m == Method::Katz;
            let derived = if katz {
                assert_eq!(n, 3);
                Some(KatzSkips::train3())
            } else {
                None
            };
            let skipping: Vec<String> = derived.as_ref().map_or(Vec::new(), |d| d.listed());
            if let Some(d) = &derived {
                // Queries that go through a skipping context: after each of
                // 200 of them (taken evenly), a word never seen after it;
                // and the skipping context's own children (the first three
                // in byte order, from the counts), which ARPA text states
                // outright, so they must agree within the tolerance.
                let mut extra = String::new();
                let mut children = 0;
                for h in skipping.iter().step_by((skipping.len() / 200).max(1)) {
                    let hw: Vec<String> = h.split(' ').map(str::to_string).collect();
                    let mut seen: Vec<&str> = d
                        .tables
                        .children_of(&hw)
                        .iter()
                        .map(|(w, _)| w.as_str())
                        .collect();
                    seen.sort_unstable();
                    for w in seen.into_iter().take(3) {
                        let ids = quern::query::query_ids(
                            &format!("{h} {w}"),
                            &quern::tokenize::Preparation::default(),
                        );
                        let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1]).unwrap();
                        want.push(p.log10);
                        extra.push_str(&format!("{h} {w}\n"));
                        children += 1;
                    }
                    for w in ["the", "Emma", "</s>"] {
                        if d.passes_through(&hw, w).is_some() {
                            let ids = quern::query::query_ids(
                                &format!("{h} {w}"),
                                &quern::tokenize::Preparation::default(),
                            );
                            let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1]).unwrap();
                            want.push(p.log10);
                            extra.push_str(&format!("{h} {w}\n"));
                            break;
                        }
                    }
                }
                assert!(
                    children > 100,
                    "{m}: {children} children of skipping contexts asked"
                );
                let mut all = std::fs::read_to_string(&qpath).unwrap();
                all.push_str(&extra);
                std::fs::write(&qpath, all).unwrap();
            }
            let mut theirs = arpa::skipping_contexts(&model);
            theirs.sort();
            assert_eq!(
                theirs, skipping,
                "{m}: the model's skipping contexts against those derived from the counts"
            );
            let (got, report) = python_check_skipping(&arpa_path, Some(&qpath), &skipping);
            assert_eq!(report["unnormalised"].as_u64().unwrap(), 0);
            assert_eq!(
                report["skipped_contexts"].as_u64().unwrap(),
                model.skipping_contexts()
            );
            if !katz {
                assert_eq!(model.skipping_contexts(), 0);
            }
            let qlines: Vec<Vec<String>> = std::fs::read_to_string(&qpath)
                .unwrap()
                .lines()
                .map(|l| l.split(' ').map(str::to_string).collect())
                .collect();
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
                    let d = derived.as_ref().unwrap();
                    let q = &qlines[i];
                    let through = d.passes_through(&q[..q.len() - 1], &q[q.len() - 1]);
                    let Some(h) = through else {
                        panic!(
                            "{m}: query {i} {q:?}: Python {g}, store {w}, but its back-off passes through no skipping context"
                        )
                    };
                    // Bounded: Katz gives the independent value (within
                    // 1e-12, estimators_independent.rs's tolerance), and
                    // where nothing is left at h' (F(h') = 0, from the
                    // counts) the ARPA rule gives 0 (written -99).
                    let indep = d.p(&q[..q.len() - 1], &q[q.len() - 1]);
                    assert!(
                        (10f64.powf(*w) - indep).abs() <= 1e-12,
                        "{m}: query {i} {q:?}: store {}, independently {indep}",
                        10f64.powf(*w)
                    );
                    if d.freed(&h[1..]) <= KATZ_EPS {
                        assert!(
                            *g <= -99.0,
                            "{m}: query {i} {q:?}: through {h:?} with nothing left at h', Python {g}"
                        );
                    }
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
                // Some query must go through one, or the checks above
                // were not exercised.
                assert!(
                    differ > 0 && !skipping.is_empty(),
                    "{m}: {differ} queries differ"
                );
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

/// The n-grams count thresholds must keep, from a Python count of the
/// training text (scripts/reference_ngrams.py, `collections.Counter`) and
/// the rule README states ("Count thresholds"): an n-gram of order k ≥ 2 is
/// kept if its raw count is at least the k-th threshold and its context
/// and its suffix are kept (the unigrams always are). Compared with the
/// n-grams each model's ARPA text lists (one pair of ARPA text and
/// thresholds a model, the count read once); returns Python's report for
/// each.
fn python_kept_by_counts(dump: &Path, models: &[(PathBuf, Vec<u64>)]) -> Vec<serde_json::Value> {
    let prog = r#"
import json, sys
args = sys.argv
sys.path.insert(0, args[1])
sys.argv = args[:1]  # arpa_check reads its own arguments when imported
from arpa_check import read
counts = {}
for line in open(args[2], encoding="utf-8"):
    words, c, _ = line.rstrip("\n").split("\t")
    g = tuple(words.split(" "))
    counts.setdefault(len(g), {})[g] = int(c)
n = max(counts)
for arpa, mins in zip(args[3::2], args[4::2]):
    mins = [int(x) for x in mins.split(",")]
    kept = {1: set(counts[1])}
    for k in range(2, n + 1):
        kept[k] = {g for g, c in counts[k].items()
                   if c >= mins[k - 1] and g[:-1] in kept[k - 1] and g[1:] in kept[k - 1]}
    _, listed, _ = read(arpa)
    missing = extra = 0
    examples = []
    for k in range(2, n + 1):
        for g in kept[k] - set(listed[k]):
            missing += 1
            if len(examples) < 10:
                examples.append(f"{' '.join(g)!r} (count {counts[k][g]}) not kept")
        for g in set(listed[k]) - kept[k]:
            extra += 1
            if len(examples) < 10:
                examples.append(f"{' '.join(g)!r} (count {counts[k].get(g)}) kept")
    print(json.dumps({"expected": [len(kept[k]) for k in range(1, n + 1)],
                      "below_threshold_or_closure": [len(counts[k]) - len(kept[k]) for k in range(2, n + 1)],
                      "missing": missing, "extra": extra, "examples": examples}))
"#;
    let mut cmd = Command::new(crate::common::python3());
    cmd.arg("-c")
        .arg(prog)
        .arg(crate::common::manifest_dir().join("tests/integration"))
        .arg(dump);
    for (arpa, min_counts) in models {
        cmd.arg(arpa).arg(
            min_counts
                .iter()
                .map(u64::to_string)
                .collect::<Vec<_>>()
                .join(","),
        );
    }
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let reports: Vec<serde_json::Value> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(reports.len(), models.len());
    reports
}

/// Count thresholds: exactly the n-grams README's rule keeps (against a
/// Python count, [`python_kept_by_counts`]; thresholds that rise with the
/// order, and ones that fall, so that keeping a context and a suffix
/// decides too), still closed and normalised (the back-off weights are
/// recomputed); the Python reader checks the sums and the closure, the
/// model's own distribution sums to 1 too.
#[test]
fn pruned_by_count_stays_normalised() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("pruned");
    // Python's count of the training text, every order.
    let dump = dir.join("python.dump");
    let out = Command::new(crate::common::python3())
        .arg(crate::common::manifest_dir().join("scripts/reference_ngrams.py"))
        .args(["--order", "3", "--dump"])
        .arg(&dump)
        .args(crate::query_fixtures::train_inputs())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut models = Vec::new();
    for (m, min_counts) in [
        (Method::Mkn, vec![1, 2, 3]),
        (Method::Katz, vec![1, 2, 3]),
        (Method::WittenBell, vec![1, 2, 3]),
        (Method::Mkn, vec![1, 3, 2]),
    ] {
        let est = Estimator::new(&store, m, Params::default()).unwrap();
        let name = format!("{m}-{}", min_counts[1]);
        let path = dir.join(format!("{name}.model"));
        let rep = freeze(
            &est,
            &path,
            &FreezeOptions {
                min_counts: min_counts.clone(),
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
        let arpa_path = dir.join(format!("{name}.arpa"));
        arpa::write_arpa_file(&model, &arpa_path).unwrap();
        let (_, report) = python_check(&arpa_path, None, &model);
        assert_eq!(report["unnormalised"].as_u64().unwrap(), 0);
        eprintln!(
            "{m} pruned {min_counts:?}: kept {:?} of {:?}; Python: {report}",
            rep.ngrams, rep.store_ngrams
        );
        models.push((m, rep, arpa_path, min_counts));
    }
    let pairs: Vec<(PathBuf, Vec<u64>)> = models
        .iter()
        .map(|(_, _, a, c)| (a.clone(), c.clone()))
        .collect();
    let kept_all = python_kept_by_counts(&dump, &pairs);
    for ((m, rep, _, min_counts), kept) in models.iter().zip(kept_all) {
        assert!(
            kept["missing"] == 0 && kept["extra"] == 0,
            "{m} {min_counts:?}: the kept n-grams differ from Python's: {kept}"
        );
        let expected: Vec<u64> = serde_json::from_value(kept["expected"].clone()).unwrap();
        assert_eq!(expected[1..], rep.ngrams[1..], "{m} {min_counts:?}");
        eprintln!("{m} pruned {min_counts:?}: Python's count keeps {kept}");
    }
}

/// Below this, a mass or a denominator counts as zero (README, "The
/// estimators": Katz).
const KATZ_EPS: f64 = 1e-12;

/// Katz's skipping contexts derived from the counts of the order-`n`
/// training store's text (the reference counter's tables and the
/// independent Katz of independent.rs).
pub(crate) struct KatzSkips {
    tables: &'static Tables,
    ind: Independent<'static>,
    set: std::collections::BTreeSet<Vec<String>>,
}

impl KatzSkips {
    /// The five training novels at order 3 (the reference counter's
    /// tables, built once).
    fn train3() -> KatzSkips {
        static T: std::sync::OnceLock<Tables> = std::sync::OnceLock::new();
        KatzSkips::new(T.get_or_init(|| Tables::new(3, &crate::query_fixtures::train_inputs())))
    }

    /// Derived from `tables`.
    pub(crate) fn new(tables: &'static Tables) -> KatzSkips {
        let n = tables.n;
        let ind = Independent::new(tables, Method::Katz, &Params::default());
        let mut set = std::collections::BTreeSet::new();
        for h in tables.contexts() {
            if h.is_empty() || h.len() >= n || !tables.is_context(&h) {
                continue;
            }
            let kc = ind.katz_context(&h).unwrap();
            // Mass to give, some word unseen, and h' leaves nothing for
            // the words unseen after h.
            if kc.f > KATZ_EPS && !kc.spread && kc.lower != Some(h.len() - 1) {
                set.insert(h);
            }
        }
        KatzSkips { tables, ind, set }
    }

    /// The contexts as ARPA text spells them, sorted.
    pub(crate) fn listed(&self) -> Vec<String> {
        let mut v: Vec<String> = self.set.iter().map(|h| h.join(" ")).collect();
        v.sort();
        v
    }

    /// The skipping context the back-off of `word` after `ctx` passes
    /// through, if any: a suffix h of the mapped context after which the
    /// word was never seen, nor after any longer suffix.
    fn passes_through(&self, ctx: &[String], word: &str) -> Option<Vec<String>> {
        let (h, w) = self.tables.map(ctx, word);
        for s in 0..h.len() {
            let hs = &h[s..];
            if self.tables.c(&Tables::hw(hs, &w)) > 0 {
                return None;
            }
            if self.set.contains(hs) {
                return Some(hs.to_vec());
            }
        }
        None
    }

    /// The independent Katz probability of `word` after `ctx`.
    fn p(&self, ctx: &[String], word: &str) -> f64 {
        let (h, w) = self.tables.map(ctx, word);
        self.ind.p(&h, &w)
    }

    /// F(h), the mass freed at a seen context h (1 at an unseen one).
    fn freed(&self, h: &[String]) -> f64 {
        if h.is_empty() || !self.tables.is_context(h) {
            return 1.0;
        }
        self.ind.katz_context(h).unwrap().f
    }
}
