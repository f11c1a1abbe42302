//! Interpolated discounting: modified Kneser-Ney (`mkn`), Kneser-Ney with
//! one discount per order (`kn`) and absolute discounting (`absolute`).
//!
//! All three share one recursion from P_0(w) = 1/|V| upwards. At order
//! k = |h| + 1, with a the count of h·w and S(h) the sum of the counts of
//! h's children:
//!
//! ```text
//! S(h) = 0:  P_k(w|h) = P_{k-1}(w|h')
//! else:      P_k(w|h) = max(a − D_k(a), 0) / S(h) + γ(h) · P_{k-1}(w|h')
//! ```
//!
//! h' is h without its first word. `mkn` and `kn` count with left-type counts
//! a(·) (continuation counts, the number of distinct words seen right
//! before, below the top order, except for n-grams that start with `<s>`),
//! S = A(h); `absolute` with raw counts, S = C(h).
//!
//! * `mkn` (Chen & Goodman 1998): D_k(1) = D1, D_k(2) = D2, D_k(a ≥ 3) = D3+
//!   with Y = n1/(n1 + 2 n2), D1 = 1 − 2Y n2/n1, D2 = 2 − 3Y n3/n2,
//!   D3+ = 3 − 4Y n4/n3 from the left-type count-of-counts of order k, and
//!   γ(h) = (D1 N1(h) + D2 N2(h) + D3+ N3+(h)) / A(h).
//! * `kn` (Ney, Essen & Kneser 1994): one D_k = n1/(n1 + 2 n2) (left-type
//!   count-of-counts), γ(h) = D_k (N1 + N2 + N3+)(h) / A(h).
//! * `absolute` (the same paper): D_k from the raw count-of-counts,
//!   γ(h) = D_k T(h) / C(h).
//!
//! The discounts come from [`crate::discount`], the one definition that
//! `quern stats` reports too. Where the count-of-counts leave one undefined
//! or out of range, the [`DiscountPolicy`] decides: an error naming the
//! order (`estimate`), that order's single discount in place of a modified
//! one (`estimate-or-single`, the default), given values in its place
//! (`estimate-or:`), or given values everywhere (`fixed:`). Every
//! replacement is reported in the estimator's notes.

use crate::discount::{self, modified_name};
use crate::error::{Error, Result};
use crate::store::{OrderStats, StoreMeta};

use super::level::Level;
use super::DiscountPolicy;

/// The left-type count-of-counts n1..n4 of one order.
pub fn left_type_n(o: &OrderStats) -> [u64; 4] {
    [1, 2, 3, 4].map(|r| o.left_type(r))
}

/// The raw count-of-counts n1..n4 of one order.
pub fn raw_n(o: &OrderStats) -> [u64; 4] {
    [1, 2, 3, 4].map(|r| o.raw(r))
}

/// Checks given discounts: D_r in (0, r] (`mkn`, three values) or D in
/// (0, 1] (`kn`, `absolute`: the first value).
fn given(method: &str, values: &[f64], three: bool) -> Result<Vec<f64>> {
    let v: Vec<f64> = if three {
        if values.len() != 3 {
            return Err(Error::Config(format!(
                "{method}: --discounts gives {} value(s); {method} needs three, D1,D2,D3+",
                values.len()
            )));
        }
        values.to_vec()
    } else {
        values[..1].to_vec()
    };
    for (i, d) in v.iter().enumerate() {
        let (name, hi) = if three {
            (modified_name(i + 1), (i + 1) as f64)
        } else {
            ("D", 1.0)
        };
        if !(*d > 0.0 && *d <= hi) {
            return Err(Error::Config(format!(
                "{method}: the given discount {name} = {d} is outside (0, {hi}]"
            )));
        }
    }
    Ok(v)
}

/// The three modified Kneser-Ney discounts of every order (index k − 1)
/// under `policy`; each replacement of an unusable one is added to `notes`.
pub fn mkn_discounts(
    meta: &StoreMeta,
    policy: &DiscountPolicy,
    notes: &mut Vec<String>,
) -> Result<Vec<[f64; 3]>> {
    let mut out = Vec::with_capacity(meta.orders.len());
    let instead = match policy {
        DiscountPolicy::Fixed(v) => {
            let v = given("mkn", v, true)?;
            return Ok(vec![[v[0], v[1], v[2]]; meta.orders.len()]);
        }
        DiscountPolicy::EstimateOr(v) => Some(given("mkn", v, true)?),
        _ => None,
    };
    for o in &meta.orders {
        let n = left_type_n(o);
        let mut ds = [0.0; 3];
        for (i, d) in ds.iter_mut().enumerate() {
            let why = match discount::modified(n, i + 1, "left-type") {
                Ok(v) => {
                    *d = v;
                    continue;
                }
                Err(why) => why,
            };
            let name = modified_name(i + 1);
            *d = match (policy, &instead) {
                (_, Some(v)) => {
                    notes.push(format!(
                        "mkn: order {}: {why}; the given {name} = {} takes its place (--discounts {policy})",
                        o.order, v[i]
                    ));
                    v[i]
                }
                (DiscountPolicy::EstimateOrSingle, None) => match discount::single(n, "left-type") {
                    Ok(s) => {
                        notes.push(format!(
                            "mkn: order {}: {why}; this order's single discount D = n1/(n1 + 2 n2) = {s:.6} takes its place (--discounts estimate refuses instead)",
                            o.order
                        ));
                        s
                    }
                    Err(also) => {
                        return Err(Error::Config(format!(
                            "mkn: order {}: {why}, and so does the single discount: {also}; give the discounts to use with --discounts estimate-or:D1,D2,D3+ or fixed:D1,D2,D3+",
                            o.order
                        )))
                    }
                },
                _ => {
                    return Err(Error::Config(format!(
                        "mkn: order {}: {why}; --discounts estimate takes discounts only from the counts: choose estimate-or-single (this order's single discount in its place) or estimate-or:D1,D2,D3+",
                        o.order
                    )))
                }
            };
        }
        out.push(ds);
    }
    Ok(out)
}

/// The single discount of every order, D = n1/(n1 + 2 n2), from the
/// left-type (`kn`) or raw (`absolute`) count-of-counts, under `policy`
/// (given values: the first one).
pub fn single_discounts(
    meta: &StoreMeta,
    raw: bool,
    policy: &DiscountPolicy,
    notes: &mut Vec<String>,
) -> Result<Vec<f64>> {
    let name = if raw { "absolute" } else { "kn" };
    let instead = match policy {
        DiscountPolicy::Fixed(v) => {
            return Ok(vec![given(name, v, false)?[0]; meta.orders.len()]);
        }
        DiscountPolicy::EstimateOr(v) => Some(given(name, v, false)?[0]),
        _ => None,
    };
    let mut out = Vec::new();
    for o in &meta.orders {
        let r = if raw {
            discount::single(raw_n(o), "raw")
        } else {
            discount::single(left_type_n(o), "left-type")
        };
        match (r, instead) {
            (Ok(d), _) => out.push(d),
            (Err(why), Some(f)) => {
                notes.push(format!(
                    "{name}: order {}: {why}; the given D = {f} takes its place (--discounts {policy})",
                    o.order
                ));
                out.push(f);
            }
            (Err(why), None) => {
                return Err(Error::Config(format!(
                    "{name}: order {}: {why}; give the discount to use with --discounts estimate-or:D or fixed:D",
                    o.order
                )))
            }
        }
    }
    Ok(out)
}

/// `mkn` over the levels of one prediction.
pub(crate) fn mkn(d: &[[f64; 3]], levels: &[Level], v: f64) -> f64 {
    let mut p = 1.0 / v;
    for (j, l) in levels.iter().enumerate() {
        p = mkn_step(&d[j], l, p);
    }
    p
}

/// One order of `mkn`: P_k(w|h) from the level of h·w and P_{k−1}(w|h').
#[inline]
pub(crate) fn mkn_step(d: &[f64; 3], l: &Level, lower: f64) -> f64 {
    let Some(s) = l.ctx else { return lower };
    if s.left_type_sum == 0 {
        return lower;
    }
    let [d1, d2, d3] = *d;
    let disc = match l.a {
        0 => 0.0,
        1 => d1,
        2 => d2,
        _ => d3,
    };
    let a = s.left_type_sum as f64;
    let gamma = (d1 * s.n1 as f64 + d2 * s.n2 as f64 + d3 * s.n3plus as f64) / a;
    (l.a as f64 - disc).max(0.0) / a + gamma * lower
}

/// `kn` (left-type counts) or `absolute` (`raw`) over the levels of one
/// prediction.
pub(crate) fn kn(d: &[f64], levels: &[Level], v: f64, raw: bool) -> f64 {
    let mut p = 1.0 / v;
    for (j, l) in levels.iter().enumerate() {
        p = kn_step(d[j], l, raw, p);
    }
    p
}

/// One order of `kn` or `absolute`: P_k(w|h) from the level of h·w and
/// P_{k−1}(w|h').
#[inline]
pub(crate) fn kn_step(dk: f64, l: &Level, raw: bool, lower: f64) -> f64 {
    let Some(s) = l.ctx else { return lower };
    let (count, sum, types) = if raw {
        (l.c, s.count_sum, s.types)
    } else {
        (l.a, s.left_type_sum, s.n1 + s.n2 + s.n3plus)
    };
    if sum == 0 {
        return lower;
    }
    let disc = if count == 0 { 0.0 } else { dk };
    let sum = sum as f64;
    (count as f64 - disc).max(0.0) / sum + dk * types as f64 / sum * lower
}
