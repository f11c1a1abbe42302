//! `quern freeze --blend`: the blended model read by the independent ARPA
//! reader (tests/integration/arpa_check.py: every context sums to 1,
//! closure under prefixes and suffixes); its n-grams are the union of the
//! parts' n-grams (`quern dump` of each store); each n-gram of order 2 or
//! more carries the exact mixture Σ λᵢ Pᵢ of the parts alone within 32-bit
//! precision (2^-24 relative rounding, IEEE 754 single), the unigrams the
//! mixture divided by its sum over the union; the summary's perplexities
//! equal `score` of the blend and of the model.

use std::collections::BTreeSet;

use quern::model::Model;
use quern::query::Predictor;
use quern::words::{bos_id, word_id, WordId};
use serde_json::Value;

use crate::blend::{cases, fixture, heldout, mix, s, with_parts, write_blend};
use crate::common::{dump_map, run_ok};

/// The n-grams of an ARPA file, as their words.
fn arpa_ngrams(text: &str) -> Vec<Vec<String>> {
    let mut out = Vec::new();
    let mut in_section = false;
    for line in text.lines() {
        if line.starts_with('\\') {
            in_section = line.ends_with("-grams:");
            continue;
        }
        if !in_section || line.trim().is_empty() {
            continue;
        }
        let f: Vec<&str> = line.split('\t').collect();
        out.push(f[1].split(' ').map(str::to_string).collect());
    }
    out
}

#[test]
fn a_frozen_blend_sums_to_one_and_carries_the_exact_mixture() {
    let f = fixture();
    let case = &cases()[0];
    let (file, weights) = write_blend(case);
    let model = f.dir.join("stores-blend.qm");
    let arpa = f.dir.join("stores-blend.arpa");
    let v: Value = serde_json::from_str(
        &run_ok(&[
            "freeze",
            "--blend",
            s(&file),
            "--out",
            s(&model),
            "--arpa",
            s(&arpa),
            "--heldout",
            s(&heldout()),
            "--json",
        ])
        .stdout,
    )
    .unwrap();
    // Every context sums to 1, closed under prefixes and suffixes.
    let m = Model::open(&model).unwrap();
    let (_, report) = crate::freeze_arpa::python_check(&arpa, None, &m);
    assert_eq!(report["closure_violations"], 0, "{report}");
    assert_eq!(report["unnormalised"], 0, "{report}");
    assert!(
        report["contexts_checked"].as_u64().unwrap() > 100_000,
        "{report}"
    );
    // No context had to be scaled on these texts.
    let notes = v["notes"].as_array().unwrap();
    assert!(
        !notes.iter().any(|n| n.as_str().unwrap().contains("scaled")),
        "{notes:?}"
    );
    // The n-grams: the union of the two stores' (and <s>, <unk>).
    let text = std::fs::read_to_string(&arpa).unwrap();
    let grams = arpa_ngrams(&text);
    let ours: BTreeSet<String> = grams.iter().map(|g| g.join(" ")).collect();
    assert_eq!(ours.len(), grams.len(), "no n-gram twice");
    let mut union: BTreeSet<String> = BTreeSet::new();
    for store in [&f.a, &f.b] {
        union.extend(dump_map(store).into_keys());
    }
    union.insert("<s>".into());
    union.insert("<unk>".into());
    assert_eq!(
        ours, union,
        "the model's n-grams are the union of the parts'"
    );
    // Every n-gram's value against the mixture of the parts alone.
    let ids: Vec<Vec<WordId>> = grams
        .iter()
        .map(|g| g.iter().map(|w| word_id(w.as_bytes())).collect())
        .collect();
    let refs: Vec<&[WordId]> = ids.iter().map(|g| &g[..]).collect();
    let each: Vec<Vec<f64>> = with_parts(&case.parts, |ps| {
        ps.iter()
            .map(|p| {
                refs.chunks(8192)
                    .flat_map(|c| p.prob_batch(c).unwrap().into_iter().map(|x| x.p))
                    .collect()
            })
            .collect()
    });
    let exact: Vec<f64> = (0..ids.len())
        .map(|t| mix(&weights, &each.iter().map(|v| v[t]).collect::<Vec<_>>()))
        .collect();
    let z: f64 = ids
        .iter()
        .zip(&exact)
        .filter(|(g, _)| g.len() == 1 && g[0] != bos_id())
        .map(|(_, p)| p)
        .sum();
    assert!(
        z > 1.0,
        "the vocabularies differ, so the mixture over the union sums past 1"
    );
    let frozen = m.prob_batch(&refs).unwrap();
    let tol = 2f64.powi(-23);
    let mut checked = [0u64; 3];
    for (t, g) in ids.iter().enumerate() {
        if g.len() == 1 && g[0] == bos_id() {
            continue;
        }
        let want = if g.len() == 1 { exact[t] / z } else { exact[t] };
        let got = frozen[t].p;
        assert!(
            (got - want).abs() <= tol * want,
            "{:?}: the model gives {got}, the mixture {want}",
            grams[t]
        );
        checked[g.len() - 1] += 1;
    }
    assert!(checked.iter().all(|&c| c > 10_000), "{checked:?}");
    // The summary: the blend's perplexity is score --blend's, the model's
    // score --model's.
    let h = &v["heldout"];
    for (key, flag, src) in [
        ("perplexity_blend", "--blend", &file),
        ("perplexity_model", "--model", &model),
    ] {
        let sc: Value =
            serde_json::from_str(&run_ok(&["score", flag, s(src), "--json", s(&heldout())]).stdout)
                .unwrap();
        let (a, b) = (h[key].as_f64().unwrap(), sc["perplexity"].as_f64().unwrap());
        assert!((a - b).abs() <= 1e-9 * b, "{key}: {a} against score's {b}");
    }
}
