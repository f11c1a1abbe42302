//! Differences between two stores' reports: corpus-wide and per order.

use serde::Serialize;

use super::Report;

/// One compared quantity.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Difference {
    /// The order, `None` for a corpus-wide quantity.
    pub order: Option<usize>,
    /// What is compared (stable names, see README.md).
    pub name: &'static str,
    /// The value in the first store (`None`: undefined there).
    pub a: Option<f64>,
    /// The value in the second store.
    pub b: Option<f64>,
    /// b − a.
    pub change: Option<f64>,
    /// b / a.
    pub ratio: Option<f64>,
}

fn diff(order: Option<usize>, name: &'static str, a: Option<f64>, b: Option<f64>) -> Difference {
    let (change, ratio) = match (a, b) {
        (Some(x), Some(y)) => (Some(y - x), (x != 0.0).then(|| y / x)),
        _ => (None, None),
    };
    Difference {
        order,
        name,
        a,
        b,
        change,
        ratio,
    }
}

/// Compares `a` with `b`: totals and fits, then every order both have.
pub fn compare(a: &Report, b: &Report) -> Vec<Difference> {
    let f = |x: u64| Some(x as f64);
    let (ta, tb) = (&a.totals, &b.totals);
    let heaps = |r: &Report| r.growth.as_ref().and_then(|g| g.heaps);
    let zipf = |r: &Report| r.rank_frequency.zipf;
    let mut out = vec![
        diff(None, "sentences", f(ta.sentences), f(tb.sentences)),
        diff(None, "tokens", f(ta.tokens), f(tb.tokens)),
        diff(None, "types", f(ta.types), f(tb.types)),
        diff(
            None,
            "type_token_ratio",
            ta.type_token_ratio,
            tb.type_token_ratio,
        ),
        diff(
            None,
            "heaps_k",
            heaps(a).map(|h| h.scale),
            heaps(b).map(|h| h.scale),
        ),
        diff(
            None,
            "heaps_beta",
            heaps(a).map(|h| h.exponent),
            heaps(b).map(|h| h.exponent),
        ),
        diff(
            None,
            "zipf_s",
            zipf(a).map(|z| z.exponent),
            zipf(b).map(|z| z.exponent),
        ),
    ];
    for oa in &a.orders {
        let Some(ob) = b.orders.iter().find(|o| o.order == oa.order) else {
            continue;
        };
        let k = Some(oa.order);
        let n = |o: &super::OrderReport, r: u64| {
            Some(
                o.count_of_counts
                    .raw
                    .iter()
                    .find(|e| e.0 == r)
                    .map_or(0, |e| e.1) as f64,
            )
        };
        out.push(diff(k, "ngrams", f(oa.ngrams), f(ob.ngrams)));
        out.push(diff(k, "n1", n(oa, 1), n(ob, 1)));
        out.push(diff(k, "n2", n(oa, 2), n(ob, 2)));
        out.push(diff(
            k,
            "singleton_share",
            oa.singleton_share,
            ob.singleton_share,
        ));
        let d = |o: &super::OrderReport| {
            [
                o.discounts.d1.value,
                o.discounts.d2.value,
                o.discounts.d3plus.value,
                o.discounts.kn.value,
            ]
        };
        let (da, db) = (d(oa), d(ob));
        for (i, name) in ["mkn_d1", "mkn_d2", "mkn_d3plus", "kn_d"]
            .into_iter()
            .enumerate()
        {
            out.push(diff(k, name, da[i], db[i]));
        }
    }
    out
}
