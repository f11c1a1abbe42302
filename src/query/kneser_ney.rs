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
//! h' is h without its first word. `mkn` and `kn` count with adjusted counts
//! a(·) (continuation counts below the top order, except for n-grams that
//! start with `<s>`), S = A(h); `absolute` with raw counts, S = C(h).
//!
//! * `mkn` (Chen & Goodman 1998): D_k(1) = D1, D_k(2) = D2, D_k(a ≥ 3) = D3+
//!   with Y = n1/(n1 + 2 n2), D1 = 1 − 2Y n2/n1, D2 = 2 − 3Y n3/n2,
//!   D3+ = 3 − 4Y n4/n3 from the adjusted count-of-counts of order k, and
//!   γ(h) = (D1 N1(h) + D2 N2(h) + D3+ N3+(h)) / A(h).
//! * `kn` (Ney, Essen & Kneser 1994): one D_k = n1/(n1 + 2 n2) (adjusted
//!   count-of-counts), γ(h) = D_k (N1 + N2 + N3+)(h) / A(h).
//! * `absolute` (the same paper): D_k from the raw count-of-counts,
//!   γ(h) = D_k T(h) / C(h).
//!
//! A discount is undefined where a count-of-count it divides by or
//! multiplies with is 0, and out of range outside (0, r] for D_r; either is
//! an error naming the order, unless fallback discounts are given, which are
//! then used for exactly the undefined ones and reported.

use crate::error::{Error, Result};
use crate::store::{OrderStats, StoreMeta};

use super::Level;

/// The three modified Kneser-Ney discounts of every order (index k − 1),
/// checked. Fallbacks (`[D1, D2, D3+]`) replace only undefined or
/// out-of-range values; each use is added to `notes`.
pub fn mkn_discounts_checked(
    meta: &StoreMeta,
    fallback: Option<&[f64]>,
    notes: &mut Vec<String>,
) -> Result<Vec<[f64; 3]>> {
    let fb = match fallback {
        None => None,
        Some(f) if f.len() == 3 => Some([f[0], f[1], f[2]]),
        Some(f) => {
            return Err(Error::Config(format!(
                "mkn: --fallback-discounts needs three values D1,D2,D3+, got {}",
                f.len()
            )))
        }
    };
    if let Some(f) = fb {
        for (r, d) in f.iter().enumerate() {
            if !(*d > 0.0 && *d <= (r + 1) as f64) {
                return Err(Error::Config(format!(
                    "mkn: fallback discount D{} = {d} is outside (0, {}]",
                    if r == 2 {
                        "3+".into()
                    } else {
                        (r + 1).to_string()
                    },
                    r + 1
                )));
            }
        }
    }
    let mut out = Vec::with_capacity(meta.orders.len());
    for o in &meta.orders {
        let mut ds = [0.0; 3];
        for (i, d) in ds.iter_mut().enumerate() {
            let r = (i + 1) as u64;
            match mkn_discount(o, r) {
                Ok(v) => *d = v,
                Err(why) => match fb {
                    Some(f) => {
                        notes.push(format!(
                            "mkn: order {}: {why}; using the fallback D{} = {}",
                            o.order,
                            dname(r),
                            f[i]
                        ));
                        *d = f[i];
                    }
                    None => {
                        return Err(Error::Config(format!(
                            "mkn: order {}: {why}; give --fallback-discounts D1,D2,D3+ to use fixed discounts where the data leave one undefined",
                            o.order
                        )))
                    }
                },
            }
        }
        out.push(ds);
    }
    Ok(out)
}

fn dname(r: u64) -> String {
    if r >= 3 {
        "3+".into()
    } else {
        r.to_string()
    }
}

/// D_r (r = 1, 2, 3 for 3+) of Chen & Goodman (1998) from the adjusted
/// count-of-counts of one order, or why it is undefined or out of range.
pub fn mkn_discount(o: &OrderStats, r: u64) -> std::result::Result<f64, String> {
    let n = |i: u64| o.adjusted(i);
    let need = [1, 2, r, r + 1];
    if let Some(&z) = need.iter().find(|&&i| n(i) == 0) {
        return Err(format!(
            "the discount D{} is undefined: the adjusted count-of-count n{z} is 0 (n1 = {}, n2 = {}, n3 = {}, n4 = {})",
            dname(r),
            n(1),
            n(2),
            n(3),
            n(4)
        ));
    }
    let (n1, n2) = (n(1) as f64, n(2) as f64);
    let y = n1 / (n1 + 2.0 * n2);
    let rf = r as f64;
    let d = rf - (rf + 1.0) * y * n(r + 1) as f64 / n(r) as f64;
    if d > 0.0 && d <= rf {
        Ok(d)
    } else {
        Err(format!(
            "the discount D{} = {d:.6} is outside (0, {r}] (adjusted n1 = {}, n2 = {}, n3 = {}, n4 = {})",
            dname(r),
            n(1),
            n(2),
            n(3),
            n(4)
        ))
    }
}

/// The single discount of every order, D = n1/(n1 + 2 n2), from the
/// adjusted (`kn`) or raw (`absolute`) count-of-counts, checked; the first
/// fallback value replaces an undefined one.
pub fn single_discounts_checked(
    meta: &StoreMeta,
    raw: bool,
    fallback: Option<&[f64]>,
    notes: &mut Vec<String>,
) -> Result<Vec<f64>> {
    let name = if raw { "absolute" } else { "kn" };
    let fb = fallback.and_then(|f| f.first().copied());
    if let Some(f) = fb {
        if !(f > 0.0 && f <= 1.0) {
            return Err(Error::Config(format!(
                "{name}: fallback discount {f} is outside (0, 1]"
            )));
        }
    }
    let mut out = Vec::new();
    for o in &meta.orders {
        match single_discount(o, raw) {
            Ok(d) => out.push(d),
            Err(why) => match fb {
                Some(f) => {
                    notes.push(format!(
                        "{name}: order {}: {why}; using the fallback D = {f}",
                        o.order
                    ));
                    out.push(f);
                }
                None => {
                    return Err(Error::Config(format!(
                        "{name}: order {}: {why}; give --fallback-discounts D to use a fixed discount where the data leave it undefined",
                        o.order
                    )))
                }
            },
        }
    }
    Ok(out)
}

/// The single discount D = n1/(n1 + 2 n2) of one order from its adjusted
/// (`raw` false) or raw count-of-counts, or why it is undefined.
pub fn single_discount(o: &OrderStats, raw: bool) -> std::result::Result<f64, String> {
    let (n1, n2) = if raw {
        (o.raw(1), o.raw(2))
    } else {
        (o.adjusted(1), o.adjusted(2))
    };
    let kind = if raw { "raw" } else { "adjusted" };
    if n1 == 0 || n2 == 0 {
        Err(format!(
            "the discount is undefined: the {kind} count-of-counts are n1 = {n1}, n2 = {n2}"
        ))
    } else {
        Ok(n1 as f64 / (n1 as f64 + 2.0 * n2 as f64))
    }
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
    if s.adjusted_sum == 0 {
        return lower;
    }
    let [d1, d2, d3] = *d;
    let disc = match l.a {
        0 => 0.0,
        1 => d1,
        2 => d2,
        _ => d3,
    };
    let a = s.adjusted_sum as f64;
    let gamma = (d1 * s.n1 as f64 + d2 * s.n2 as f64 + d3 * s.n3plus as f64) / a;
    (l.a as f64 - disc).max(0.0) / a + gamma * lower
}

/// `kn` (adjusted counts) or `absolute` (`raw`) over the levels of one
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
        (l.a, s.adjusted_sum, s.n1 + s.n2 + s.n3plus)
    };
    if sum == 0 {
        return lower;
    }
    let disc = if count == 0 { 0.0 } else { dk };
    let sum = sum as f64;
    (count as f64 - disc).max(0.0) / sum + dk * types as f64 / sum * lower
}
