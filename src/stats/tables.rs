//! Per-order tables: count-of-counts, Good-Turing and Katz, discounts.

use serde::Serialize;

use crate::discount::{modified, single, Unusable};
use crate::query::katz::usable_k;
use crate::query::kneser_ney::left_type_n;
use crate::store::OrderStats;

/// A discount, or why the data leave it unusable.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Discount {
    /// The value, where defined and in range.
    pub value: Option<f64>,
    /// Why not (`None` when `value` is given).
    pub undefined: Option<String>,
}

impl Discount {
    fn from(r: std::result::Result<f64, Unusable>) -> Discount {
        match r {
            Ok(v) => Discount {
                value: Some(v),
                undefined: None,
            },
            Err(e) => Discount {
                value: None,
                undefined: Some(e.to_string()),
            },
        }
    }
}

/// The discounts of one order from its left-type count-of-counts
/// ([`crate::discount`], the definition the estimators use).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Discounts {
    /// Modified Kneser-Ney D1 (Chen & Goodman 1998).
    pub d1: Discount,
    /// Modified Kneser-Ney D2.
    pub d2: Discount,
    /// Modified Kneser-Ney D3+.
    pub d3plus: Discount,
    /// The single Kneser-Ney discount D = n1/(n1 + 2 n2) (Ney, Essen &
    /// Kneser 1994).
    pub kn: Discount,
}

/// One row of the Good-Turing table.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct GoodTuringRow {
    /// The count r.
    pub r: u64,
    /// n_r (raw).
    pub n_r: u64,
    /// n_{r+1} (raw).
    pub n_next: u64,
    /// r* = (r+1) n_{r+1} / n_r (Good 1953); `None` where n_r = 0.
    pub r_star: Option<f64>,
    /// Katz's d_r at the K used (Katz 1987); `None` above that K.
    pub katz_d: Option<f64>,
}

/// The Good-Turing table of one order, r = 1..=K, over raw counts.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct GoodTuring {
    /// The K asked for.
    pub k_requested: usize,
    /// The largest K ≤ `k_requested` at which every d_r is valid (what
    /// `--method katz` uses).
    pub k_used: usize,
    /// Why `k_requested` was not usable, if it was not.
    pub note: Option<String>,
    /// r = 1..=`k_requested`.
    pub rows: Vec<GoodTuringRow>,
}

/// Count-of-counts spectra.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Spectra {
    /// `(r, n_r)` over raw counts, r ascending.
    pub raw: Vec<(u64, u64)>,
    /// `(r, n_r)` over left-type counts (continuation counts below the top
    /// order, raw counts at it and for n-grams that start with `<s>`).
    pub left_type: Vec<(u64, u64)>,
}

/// Everything reported of one order.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct OrderReport {
    /// The order k.
    pub order: usize,
    /// Stored k-grams (for k = 1 including `<s>`).
    pub ngrams: u64,
    /// Raw n_1.
    pub singletons: u64,
    /// n_1 / Σ n_r (raw): the share of the counted k-grams seen once.
    pub singleton_share: Option<f64>,
    /// The spectra (possibly cut at `--max-count`).
    pub count_of_counts: Spectra,
    /// Each discount on its own, with why it is unusable.
    pub discounts: Discounts,
    /// Good-Turing and Katz.
    pub good_turing: GoodTuring,
}

/// The report of one order.
pub fn order_report(o: &OrderStats, katz_k: usize) -> OrderReport {
    let total: u64 = o.coc_raw.iter().map(|e| e.1).sum();
    let n1 = o.raw(1);
    let (k_used, d, note) = usable_k(o, katz_k);
    let n = left_type_n(o);
    let rows = (1..=katz_k as u64)
        .map(|r| {
            let (nr, nn) = (o.raw(r), o.raw(r + 1));
            GoodTuringRow {
                r,
                n_r: nr,
                n_next: nn,
                r_star: (nr > 0).then(|| (r + 1) as f64 * nn as f64 / nr as f64),
                katz_d: (r as usize <= k_used).then(|| d[r as usize]),
            }
        })
        .collect();
    OrderReport {
        order: o.order,
        ngrams: o.ngrams,
        singletons: n1,
        singleton_share: (total > 0).then(|| n1 as f64 / total as f64),
        count_of_counts: Spectra {
            raw: o.coc_raw.clone(),
            left_type: o.coc_left_type.clone(),
        },
        discounts: Discounts {
            d1: Discount::from(modified(n, 1, "left-type")),
            d2: Discount::from(modified(n, 2, "left-type")),
            d3plus: Discount::from(modified(n, 3, "left-type")),
            kn: Discount::from(single(n, "left-type")),
        },
        good_turing: GoodTuring {
            k_requested: katz_k,
            k_used,
            note,
            rows,
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand-worked: raw n1..n4 = 10, 4, 2, 1; left-type n1..n3 = 6, 3, 0.
    #[test]
    fn tables_by_hand() {
        let o = OrderStats {
            order: 2,
            ngrams: 17,
            coc_raw: vec![(1, 10), (2, 4), (3, 2), (4, 1)],
            coc_left_type: vec![(1, 6), (2, 3), (4, 1)],
        };
        let r = order_report(&o, 2);
        assert_eq!(r.singletons, 10);
        assert_eq!(r.singleton_share, Some(10.0 / 17.0));
        // r* = (r+1) n_{r+1} / n_r: 2·4/10 = 0.8, 3·2/4 = 1.5.
        assert_eq!(r.good_turing.rows[0].r_star, Some(0.8));
        assert_eq!(r.good_turing.rows[1].r_star, Some(1.5));
        // Katz K = 2: x = 3 n3/n1 = 0.6; d1 = (0.8 − 0.6)/0.4 = 0.5,
        // d2 = (0.75 − 0.6)/0.4 = 0.375.
        assert_eq!(r.good_turing.k_used, 2);
        let d1 = r.good_turing.rows[0].katz_d.unwrap();
        let d2 = r.good_turing.rows[1].katz_d.unwrap();
        assert!((d1 - 0.5).abs() < 1e-12 && (d2 - 0.375).abs() < 1e-12);
        // Left-type: Y = 6/12 = 0.5; D1 = 1 − 2·0.5·3/6 = 0.5; D2 needs n3 = 0
        // → undefined, and so D3+; single D = 0.5.
        assert_eq!(r.discounts.d1.value, Some(0.5));
        assert!(r.discounts.d2.value.is_none());
        assert!(r
            .discounts
            .d2
            .undefined
            .as_ref()
            .unwrap()
            .contains("left-type n3 = 0"));
        assert!(r.discounts.d3plus.value.is_none());
        assert_eq!(r.discounts.kn.value, Some(0.5));
    }
}
