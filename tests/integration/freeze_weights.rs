//! 8-bit back-off weights (`--weight-bits 8`), one weight at a time.
//!
//! Source of truth: the rule README and `quern::model` state for quantized
//! back-off weights, recomputed here from the model's ARPA text alone (the
//! format's definition: a context's children are the listed n-grams that
//! extend it). Each context h of order k < N gets the weight that makes it
//! sum to 1 against what its shorter context h' really holds once h''s own
//! weight was rounded,
//!
//!   β*(h) = (1 − Σ_{w after h} q(h w)) / (1 + ε(h') − Σ_{w after h} q(h' w)),
//!   ε(h)  = Σ_{w after h} q(h w) + β'(h) · (1 + ε(h') − Σ_{w after h} q(h' w)) − 1,
//!
//! with ε of the empty context 0 (the unigrams are exact), and then the
//! weight written, β'(h), must be the code of its order nearest to β* in
//! ln (the codes: the distinct weights the order lists). ARPA text holds
//! 7 decimals of log10; the check allows each computed β* the error those
//! carry through the sums, and counts the contexts where that error
//! leaves more than one code possible.

use std::collections::HashMap;

use quern::model::FreezeOptions;
use quern::query::Method;
use quern::store::Store;

use crate::freeze::scratch;
use crate::freeze_reduce::{frozen, read_arpa, Arpa};
use crate::query_fixtures::train3;

/// 10^x, with ARPA's −99 for 0.
fn p10(x: f64) -> f64 {
    if x <= -99.0 {
        0.0
    } else {
        10f64.powf(x)
    }
}

/// The codes of `weights` (positive, ascending, deduplicated) in ln.
fn codes(weights: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut v: Vec<f64> = weights.filter(|&b| b > 0.0).map(f64::ln).collect();
    v.sort_by(f64::total_cmp);
    v.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
    v
}

/// The index of the code nearest in ln to `l`.
fn nearest(codes: &[f64], l: f64) -> usize {
    let i = codes.partition_point(|&c| c < l);
    match (i.checked_sub(1), codes.get(i)) {
        (Some(j), Some(&c)) if (l - codes[j]) <= (c - l) => j,
        (Some(j), None) => j,
        _ => i,
    }
}

#[test]
fn quantized_weights_are_their_nearest_codes() {
    let store = Store::open(train3()).unwrap();
    let dir = scratch("weight-codes");
    let opts = FreezeOptions {
        bits: Some(8),
        weight_bits: Some(8),
        ..Default::default()
    };
    let (_, model) = frozen(&store, Method::Mkn, &opts, &dir, "b8w8");
    let arpa: Arpa = read_arpa(&dir.join("b8w8.arpa"));
    let n = model.order();
    assert_eq!(arpa.len(), n);
    // ε of the contexts of the previous order (the empty context: 0).
    let mut eps_lower: HashMap<String, f64> = HashMap::from([(String::new(), 0.0)]);
    let (mut checked, mut loose, mut zero) = (0usize, 0usize, 0usize);
    for k in 1..n {
        // children[h] = the words listed after h (order k + 1).
        let mut children: HashMap<&str, Vec<&str>> = HashMap::new();
        for g in arpa[k].keys() {
            let (h, w) = g.rsplit_once(' ').unwrap();
            children.entry(h).or_default().push(w);
        }
        let order_codes = codes(arpa[k - 1].values().map(|&(_, b)| p10(b.unwrap())));
        assert!(
            order_codes.len() > 16 && order_codes.len() <= 256,
            "order {k}: {} codes",
            order_codes.len()
        );
        let mut eps: HashMap<String, f64> = HashMap::new();
        for (h, &(_, beta)) in &arpa[k - 1] {
            let coded = p10(beta.unwrap());
            let lower = h.split_once(' ').map_or("", |x| x.1);
            let kids = children.get(h.as_str()).map_or(&[][..], Vec::as_slice);
            // The order of h' (0: the empty context, whose children are
            // the unigrams).
            let lk = if lower.is_empty() { 0 } else { k - 1 };
            let (mut sum_q, mut sum_lower) = (0.0, 0.0);
            for w in kids {
                sum_q += p10(arpa[k][&format!("{h} {w}")].0);
                let hw = if lower.is_empty() {
                    w.to_string()
                } else {
                    format!("{lower} {w}")
                };
                sum_lower += p10(arpa[lk][&hw].0);
            }
            let e_low = eps_lower[lower];
            let (num, den) = (1.0 - sum_q, 1.0 + e_low - sum_lower);
            eps.insert(h.clone(), sum_q + coded * den - 1.0);
            if num <= 0.0 || den <= 1e-12 {
                assert_eq!(
                    coded, 0.0,
                    "order {k}: {h:?}: nothing to give, weight {coded}"
                );
                zero += 1;
                continue;
            }
            let want = num / den;
            // The error 7 decimals of log10 carry (≤ 1.2e-7 relative per
            // value), through the sums and the lower ε.
            let d = 2e-7 * (sum_q + 1.0) / num + 2e-7 * (sum_lower + 1.0) / den + 1e-6;
            let lo = nearest(&order_codes, want.ln() + (1.0 - d).ln());
            let hi = nearest(&order_codes, want.ln() + (1.0 + d).ln());
            let got = nearest(&order_codes, coded.ln());
            assert!(
                (coded.ln() - order_codes[got]).abs() < 1e-5,
                "order {k}: {h:?}: weight {coded} is no code"
            );
            assert!(
                (lo..=hi).contains(&got),
                "order {k}: {h:?}: weight {coded}, but β* = {want} (±{d:.1e}) is nearest to {}",
                order_codes[nearest(&order_codes, want.ln())].exp()
            );
            checked += 1;
            loose += usize::from(hi > lo);
        }
        eps_lower = eps;
        eprintln!(
            "order {k}: {} codes; {checked} weights checked so far, {loose} with two codes possible, {zero} zero",
            order_codes.len()
        );
    }
    assert!(checked > 100_000, "{checked} weights checked");
    assert!(
        loose * 100 < checked,
        "{loose} of {checked} weights left two codes possible: the check is too loose"
    );
}
