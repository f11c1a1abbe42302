//! Hand-checkable cases: a tiny corpus of our own, every count, discount
//! and probability worked out here from the published formulas (the paper
//! named beside each), compared with what the estimators compute from the
//! store. Plus the discount formulas on made-up count-of-counts, and a
//! textbook's add-one example.
//!
//! The corpus (order 2), four sentences:
//!
//! ```text
//! a            ->  <s> a </s>
//! c c b        ->  <s> c c b </s>
//! c c          ->  <s> c c </s>
//! c a          ->  <s> c a </s>
//! ```
//!
//! Unigram counts (without <s>): a 2, b 1, c 5, </s> 4; T = 12.
//! V = {a, b, c, </s>, <unk>}, |V| = 5.
//! Bigram counts: <s>a 1, <s>c 3, a</s> 2, cc 2, cb 1, c</s> 1, ca 1, b</s> 1.
//! Continuation counts N1+(•w) (distinct left neighbours): a {<s>, c} = 2,
//! b {c} = 1, c {<s>, c} = 2, </s> {a, b, c} = 3. At N = 2 the unigrams'
//! left-type counts are these, the bigrams' their raw counts.
//! Context statistics (C, T, A, N1, N2, N3+):
//!   root  12, 4, 8, 1, 2, 1      [<s>]  4, 2, 4, 1, 0, 1
//!   [c]    5, 4, 5, 3, 1, 0      [a]    2, 1, 2, 0, 1, 0     [b] 1, 1, 1, 1, 0, 0
//! Count-of-counts: order 1 raw n1 = 1, n2 = 1, n4 = 1, n5 = 1; order 1
//! left-type n1 = 1, n2 = 2, n3 = 1; order 2 (raw = left-type) n1 = 5, n2 = 2,
//! n3 = 1.

use std::path::PathBuf;
use std::sync::OnceLock;

use quern::query::{query_ids, DiscountPolicy, Estimator, Method, Params};
use quern::store::{ContextStats, OrderStats, Store};

use crate::common::ingest_ok;

const CORPUS: &str = "a\nc c b\nc c\nc a\n";
const V: f64 = 5.0;

fn tiny() -> &'static PathBuf {
    static S: OnceLock<PathBuf> = OnceLock::new();
    S.get_or_init(|| {
        let base = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("query-stores");
        std::fs::create_dir_all(&base).unwrap();
        let text = base.join("tiny.txt");
        std::fs::write(&text, CORPUS).unwrap();
        let dir = base.join("tiny");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        ingest_ok(&dir, &["--order", "2", "--quiet"], &[text]);
        dir
    })
}

pub(crate) fn est(store: &Store, m: Method, p: Params) -> Estimator<'_> {
    Estimator::new(store, m, p).unwrap()
}

/// P(last word | the words before it) for a query written as text.
pub(crate) fn p(e: &Estimator<'_>, q: &str) -> f64 {
    let ids = query_ids(q, &quern::tokenize::Preparation::default());
    e.prob(&ids[..ids.len() - 1], ids[ids.len() - 1]).unwrap().p
}

pub(crate) fn close(got: f64, want: f64, what: &str) {
    assert!(
        (got - want).abs() <= 1e-12,
        "{what}: got {got:.15}, worked by hand {want:.15}"
    );
}

pub(crate) fn ctx(c: u64, t: u64, a: u64, n1: u64, n2: u64, n3: u64) -> ContextStats {
    ContextStats {
        count_sum: c,
        types: t,
        left_type_sum: a,
        n1,
        n2,
        n3plus: n3,
    }
}

#[test]
fn the_tiny_store_holds_the_hand_counts() {
    let s = Store::open(tiny()).unwrap();
    let id = |w: &str| query_ids(w, &quern::tokenize::Preparation::default());
    let m = s.meta();
    assert_eq!(m.totals.tokens, 12);
    assert_eq!(m.totals.vocabulary, 5);
    for (w, c, cont) in [("a", 2, 2), ("b", 1, 1), ("c", 5, 2), ("</s>", 4, 3)] {
        assert_eq!(s.get(&id(w)).unwrap(), Some((c, Some(cont))), "{w}");
    }
    for (g, c) in [
        ("<s> a", 1),
        ("<s> c", 3),
        ("a </s>", 2),
        ("c c", 2),
        ("c b", 1),
        ("c </s>", 1),
        ("c a", 1),
        ("b </s>", 1),
    ] {
        assert_eq!(s.get(&id(g)).unwrap(), Some((c, None)), "{g}");
    }
    assert_eq!(m.root, ctx(12, 4, 8, 1, 2, 1));
    assert_eq!(s.context(&id("<s>")).unwrap(), Some(ctx(4, 2, 4, 1, 0, 1)));
    assert_eq!(s.context(&id("c")).unwrap(), Some(ctx(5, 4, 5, 3, 1, 0)));
    assert_eq!(s.context(&id("a")).unwrap(), Some(ctx(2, 1, 2, 0, 1, 0)));
    assert_eq!(s.context(&id("b")).unwrap(), Some(ctx(1, 1, 1, 1, 0, 0)));
    assert_eq!(m.orders[0].coc_raw, vec![(1, 1), (2, 1), (4, 1), (5, 1)]);
    assert_eq!(m.orders[0].coc_left_type, vec![(1, 1), (2, 2), (3, 1)]);
    assert_eq!(m.orders[1].coc_raw, vec![(1, 5), (2, 2), (3, 1)]);
}

/// Modified Kneser-Ney, Chen & Goodman (1998), section 3 / eq. (17)-(19):
/// Y = n1/(n1+2n2), D1 = 1 − 2Y n2/n1, D2 = 2 − 3Y n3/n2, D3+ = 3 − 4Y n4/n3,
/// interpolated with γ(h) = (D1 N1 + D2 N2 + D3+ N3+)/A(h).
#[test]
fn mkn_by_hand() {
    let s = Store::open(tiny()).unwrap();
    // n4 = 0 at both orders: D3+ is undefined, and the strict policy
    // refuses, naming the order.
    let strict = Params {
        discounts: DiscountPolicy::Estimate,
        ..Params::default()
    };
    let err = Estimator::new(&s, Method::Mkn, strict)
        .err()
        .expect("mkn must refuse an undefined D3+ under --discounts estimate")
        .to_string();
    assert!(
        err.contains("order 1") && err.contains("D3+") && err.contains("n4 = 0"),
        "{err}"
    );
    // The default policy puts the order's single discount n1/(n1 + 2 n2)
    // in D3+'s place (order 1: 1/5, order 2: 5/9, as in the kn test) and
    // says so, once per order.
    let e = est(&s, Method::Mkn, Params::default());
    assert_eq!(e.notes().len(), 2, "{:?}", e.notes());
    assert!(e.notes()[0].contains("order 1") && e.notes()[0].contains("single discount"));
    let c = e.constants();
    close(
        c["discounts"][0][2].as_f64().unwrap(),
        1.0 / 5.0,
        "D3+ of order 1 (default)",
    );
    close(
        c["discounts"][1][2].as_f64().unwrap(),
        5.0 / 9.0,
        "D3+ of order 2 (default)",
    );
    let params = Params {
        discounts: DiscountPolicy::EstimateOr(vec![0.7, 1.2, 1.4]),
        ..Params::default()
    };
    let e = est(&s, Method::Mkn, params);
    // The given values are used for D3+ only, at both orders, and reported.
    assert_eq!(e.notes().len(), 2, "{:?}", e.notes());
    // Order 1 (left-type n1 = 1, n2 = 2, n3 = 1): Y = 1/5, D1 = 1 − 2·(1/5)·2 = 0.2,
    // D2 = 2 − 3·(1/5)·(1/2) = 1.7, D3+ = 1.4 (given).
    let y1 = 1.0 / 5.0;
    let (d1, d2, d3) = (1.0 - 2.0 * y1 * 2.0, 2.0 - 3.0 * y1 * 1.0 / 2.0, 1.4);
    close(d1, 0.2, "D1 of order 1");
    // Root: A = 8, N1 = 1, N2 = 2, N3+ = 1.
    let g0 = (d1 * 1.0 + d2 * 2.0 + d3 * 1.0) / 8.0;
    let p1 = |a: f64| {
        let d = match a as u64 {
            0 => 0.0,
            1 => d1,
            2 => d2,
            _ => d3,
        };
        (a - d).max(0.0) / 8.0 + g0 / V
    };
    close(p(&e, "a"), p1(2.0), "P(a)");
    close(p(&e, "b"), p1(1.0), "P(b)");
    close(p(&e, "c"), p1(2.0), "P(c)");
    close(p(&e, "</s>"), p1(3.0), "P(</s>)");
    close(p(&e, "<unk>"), p1(0.0), "P(<unk>)");
    close(
        p(&e, "never-seen"),
        p1(0.0),
        "an OOV word is scored as <unk>",
    );
    // Order 2 (n1 = 5, n2 = 2, n3 = 1): Y = 5/9, D1 = 1 − 2·(5/9)·(2/5) = 5/9,
    // D2 = 2 − 3·(5/9)·(1/2) = 7/6, D3+ = 1.4 (given).
    let y2 = 5.0 / 9.0;
    let (e1, e2, e3) = (1.0 - 2.0 * y2 * 2.0 / 5.0, 2.0 - 3.0 * y2 / 2.0, 1.4);
    close(e1, 5.0 / 9.0, "D1 of order 2");
    close(e2, 7.0 / 6.0, "D2 of order 2");
    // [c]: A = 5, N1 = 3, N2 = 1.
    let gc = (e1 * 3.0 + e2 * 1.0) / 5.0;
    close(p(&e, "c c"), (2.0 - e2) / 5.0 + gc * p1(2.0), "P(c | c)");
    close(p(&e, "c b"), (1.0 - e1) / 5.0 + gc * p1(1.0), "P(b | c)");
    close(p(&e, "c <unk>"), gc * p1(0.0), "P(<unk> | c)");
    // [<s>]: A = 4, N1 = 1 (<s> a), N3+ = 1 (<s> c, 3).
    let gs = (e1 * 1.0 + e3 * 1.0) / 4.0;
    close(
        p(&e, "<s> c"),
        (3.0 - e3) / 4.0 + gs * p1(2.0),
        "P(c | <s>)",
    );
    close(p(&e, "<s> </s>"), gs * p1(3.0), "P(</s> | <s>)");
    // An unseen context ([</s>] has no children) backs off to order 1.
    close(p(&e, "</s> a"), p1(2.0), "P(a | </s>)");
}

/// Kneser-Ney with one discount per order, Ney, Essen & Kneser (1994):
/// D = n1/(n1 + 2 n2) over left-type counts; absolute discounting (the same
/// paper) with raw counts.
#[test]
fn kn_and_absolute_by_hand() {
    let s = Store::open(tiny()).unwrap();
    let e = est(&s, Method::Kn, Params::default());
    // Left-type: order 1 n1 = 1, n2 = 2 → D = 1/5; order 2 n1 = 5, n2 = 2 → 5/9.
    let (d1, d2) = (1.0 / 5.0, 5.0 / 9.0);
    let p1 = |a: f64| (a - if a > 0.0 { d1 } else { 0.0 }) / 8.0 + d1 * 4.0 / 8.0 / V;
    close(p(&e, "a"), p1(2.0), "kn P(a)");
    close(p(&e, "<unk>"), p1(0.0), "kn P(<unk>)");
    close(
        p1(2.0) * 2.0 + p1(1.0) + p1(3.0) + p1(0.0),
        1.0,
        "kn unigrams sum",
    );
    close(
        p(&e, "c c"),
        (2.0 - d2) / 5.0 + d2 * 4.0 / 5.0 * p1(2.0),
        "kn P(c | c)",
    );
    close(p(&e, "a c"), d2 * 1.0 / 2.0 * p1(2.0), "kn P(c | a)");

    let e = est(&s, Method::Absolute, Params::default());
    // Raw: order 1 n1 = 1, n2 = 1 → D = 1/3; order 2 → 5/9. C(root) = 12, T = 4.
    let (r1, r2) = (1.0 / 3.0, 5.0 / 9.0);
    let q1 = |c: f64| (c - if c > 0.0 { r1 } else { 0.0 }) / 12.0 + r1 * 4.0 / 12.0 / V;
    close(p(&e, "c"), q1(5.0), "absolute P(c)");
    close(p(&e, "</s>"), q1(4.0), "absolute P(</s>)");
    close(
        p(&e, "c c"),
        (2.0 - r2) / 5.0 + r2 * 4.0 / 5.0 * q1(5.0),
        "absolute P(c | c)",
    );
    close(
        p(&e, "<s> b"),
        r2 * 2.0 / 4.0 * q1(1.0),
        "absolute P(b | <s>)",
    );
}

/// Witten & Bell (1991), method C as an interpolated estimator:
/// P(w|h) = (c(hw) + T(h) P(w|h')) / (C(h) + T(h)).
#[test]
fn witten_bell_by_hand() {
    let s = Store::open(tiny()).unwrap();
    let e = est(&s, Method::WittenBell, Params::default());
    let p1 = |c: f64| (c + 4.0 / V) / (12.0 + 4.0);
    close(p(&e, "c"), p1(5.0), "P(c)");
    close(p(&e, "<unk>"), p1(0.0), "P(<unk>)");
    close(
        p(&e, "c c"),
        (2.0 + 4.0 * p1(5.0)) / (5.0 + 4.0),
        "P(c | c)",
    );
    close(
        p(&e, "<s> a"),
        (1.0 + 2.0 * p1(2.0)) / (4.0 + 2.0),
        "P(a | <s>)",
    );
    close(
        p(&e, "b b"),
        (0.0 + 1.0 * p1(1.0)) / (1.0 + 1.0),
        "P(b | b)",
    );
}

/// Katz (1987) back-off with Good-Turing (Good 1953) discounts,
/// d_r = (r*/r − (K+1) n_{K+1}/n_1) / (1 − (K+1) n_{K+1}/n_1), r* = (r+1) n_{r+1}/n_r.
#[test]
fn katz_by_hand() {
    let s = Store::open(tiny()).unwrap();
    let e = est(&s, Method::Katz, Params::default());
    // Order 1 raw n1 = 1, n2 = 1, n3 = 0, n4 = 1, n5 = 1: K = 5, 4, 3 divide by
    // n3 = 0; K = 2: d1 = 2·n2/n1 = 2 > 1; K = 1: d1 = 0. So K = 0 (no
    // discount). Order 2 n1 = 5, n2 = 2, n3 = 1, n4 = 0: K = 5, 4 divide by
    // n4 = 0; K = 3: d3 = 4·n4/n3/3 = 0; K = 2: x = 3·1/5 = 0.6,
    // d1 = (2·2/5 − 0.6)/0.4 = 0.5, d2 = (3·1/2/2 − 0.6)/0.4 = 0.375.
    assert_eq!(e.notes().len(), 2, "{:?}", e.notes());
    assert!(e.notes()[0].contains("order 1") && e.notes()[0].contains("K lowered to 0"));
    assert!(e.notes()[1].contains("order 2") && e.notes()[1].contains("K lowered to 2"));
    let (d1, d2) = (
        (2.0 * 2.0 / 5.0 - 0.6) / 0.4,
        (3.0 * 1.0 / 2.0 / 2.0 - 0.6) / 0.4,
    );
    close(d1, 0.5, "d1");
    close(d2, 0.375, "d2");
    // Unigrams undiscounted: P(w) = c/12; <unk> (count 0) gets the freed mass, 0.
    let u = |c: f64| c / 12.0;
    close(p(&e, "c"), u(5.0), "P(c)");
    close(p(&e, "<unk>"), 0.0, "P(<unk>)");
    // [c]: C = 5, children c 2, b 1, </s> 1, a 1.
    let seen = d2 * 2.0 / 5.0 + 3.0 * d1 * 1.0 / 5.0;
    close(p(&e, "c c"), d2 * 2.0 / 5.0, "P(c | c)");
    close(p(&e, "c a"), d1 / 5.0, "P(a | c)");
    // F(c) = 1 − 0.45 = 0.55. The only unseen word is <unk>; the unigram
    // denominator 1 − (2+1+5+4)/12 is 0, so the uniform distribution is used:
    // 1 − T/|V| = 1 − 4/5, and P(<unk> | c) = F · (1/5) / (1/5) = F.
    close(
        p(&e, "c <unk>"),
        (1.0 - seen) * (1.0 / V) / (1.0 - 4.0 / V),
        "P(<unk> | c)",
    );
    // [<s>]: C = 4, <s> a 1 (d1), <s> c 3 (above K: undiscounted).
    let ps = d1 * 1.0 / 4.0 + 3.0 / 4.0;
    close(p(&e, "<s> a"), d1 / 4.0, "P(a | <s>)");
    close(p(&e, "<s> c"), 3.0 / 4.0, "P(c | <s>)");
    // Unseen at <s>: b, </s>, <unk>, in proportion to the unigram
    // distribution over them: denominator 1 − (2 + 5)/12.
    let den = 1.0 - (2.0 + 5.0) / 12.0;
    close(p(&e, "<s> b"), (1.0 - ps) * u(1.0) / den, "P(b | <s>)");
    close(
        p(&e, "<s> </s>"),
        (1.0 - ps) * u(4.0) / den,
        "P(</s> | <s>)",
    );
    close(p(&e, "<s> <unk>"), 0.0, "P(<unk> | <s>)");
    // [a]: C = 2, a </s> 2 (d2): F = 1 − 0.375; denominator 1 − 4/12.
    close(
        p(&e, "a c"),
        (1.0 - d2) * u(5.0) / (1.0 - 4.0 / 12.0),
        "P(c | a)",
    );
    // An unseen context backs off unchanged.
    close(p(&e, "</s> a"), u(2.0), "P(a | </s>)");
}

/// Jelinek & Mercer (1980) linear interpolation, recursive:
/// P(w|h) = λ c(hw)/C(h) + (1 − λ) P(w|h'), one weight per order, or per
/// bucket of C(h) (2^b ≤ C < 2^(b+1)).
#[test]
fn interp_by_hand() {
    let s = Store::open(tiny()).unwrap();
    let e = est(
        &s,
        Method::Interp,
        Params {
            lambdas: Some(vec![0.6, 0.7]),
            ..Params::default()
        },
    );
    let p1 = |c: f64| 0.6 * c / 12.0 + 0.4 / V;
    close(p(&e, "c"), p1(5.0), "P(c)");
    close(p(&e, "c c"), 0.7 * 2.0 / 5.0 + 0.3 * p1(5.0), "P(c | c)");
    close(p(&e, "c <unk>"), 0.3 * p1(0.0), "P(<unk> | c)");
    let e = est(
        &s,
        Method::Interp,
        Params {
            bucket_lambdas: Some(vec![vec![0.6], vec![0.9, 0.5, 0.2]]),
            ..Params::default()
        },
    );
    // C(b) = 1 → bucket 0 (0.9); C(a) = 2 → bucket 1 (0.5); C(c) = 5 → 2 (0.2).
    close(p(&e, "b </s>"), 0.9 * 1.0 + 0.1 * p1(4.0), "P(</s> | b)");
    close(
        p(&e, "a </s>"),
        0.5 * 2.0 / 2.0 + 0.5 * p1(4.0),
        "P(</s> | a)",
    );
    close(p(&e, "c c"), 0.2 * 2.0 / 5.0 + 0.8 * p1(5.0), "P(c | c)");
}

/// Additive smoothing (Lidstone; Laplace for k = 1), maximum likelihood, and
/// stupid back-off (Brants, Popat, Xu, Och & Dean 2007, α = 0.4).
#[test]
fn add_k_mle_stupid_by_hand() {
    let s = Store::open(tiny()).unwrap();
    let e = est(&s, Method::AddK, Params::default());
    close(
        p(&e, "<s> a"),
        (1.0 + 1.0) / (4.0 + V),
        "Laplace P(a | <s>)",
    );
    let e = est(
        &s,
        Method::AddK,
        Params {
            k: 0.5,
            ..Params::default()
        },
    );
    close(p(&e, "c c"), (2.0 + 0.5) / (5.0 + 0.5 * V), "P(c | c)");
    close(p(&e, "c <unk>"), 0.5 / (5.0 + 0.5 * V), "P(<unk> | c)");
    close(p(&e, "</s> a"), 1.0 / V, "unseen context: uniform");
    close(p(&e, "a"), (2.0 + 0.5) / (12.0 + 0.5 * V), "P(a), order 1");

    let e = est(&s, Method::Mle, Params::default());
    close(p(&e, "c c"), 2.0 / 5.0, "mle P(c | c)");
    close(p(&e, "c <unk>"), 0.0, "mle P(<unk> | c)");
    close(p(&e, "<s> b"), 0.0, "mle P(b | <s>)");
    close(p(&e, "</s> a"), 2.0 / 12.0, "mle, unseen context: order 1");

    let e = est(&s, Method::Stupid, Params::default());
    close(p(&e, "c c"), 2.0 / 5.0, "S(c | c) = c(cc)/c(c)");
    close(p(&e, "<s> c"), 3.0 / 4.0, "S(c | <s>) = c(<s> c)/c(<s>)");
    close(p(&e, "b a"), 0.4 * 2.0 / 12.0, "S(a | b) = 0.4 c(a)/T");
    close(p(&e, "b <unk>"), 0.0, "S(<unk> | b)");
}

/// The Chen & Goodman (1998) discounts and Katz's Good-Turing factors on
/// made-up count-of-counts, worked by hand.
#[test]
fn discount_formulas_on_made_up_counts() {
    let o = OrderStats {
        order: 2,
        ngrams: 0,
        coc_raw: vec![(1, 10), (2, 4), (3, 2), (4, 1)],
        coc_left_type: vec![(1, 6), (2, 3), (3, 2), (4, 1)],
    };
    // Y = 6/12 = 0.5: D1 = 1 − 2·0.5·3/6 = 0.5, D2 = 2 − 3·0.5·2/3 = 1,
    // D3+ = 3 − 4·0.5·1/2 = 2.
    use quern::discount::modified;
    use quern::query::kneser_ney::left_type_n;
    let n = left_type_n(&o);
    close(modified(n, 1, "left-type").unwrap(), 0.5, "D1");
    close(modified(n, 2, "left-type").unwrap(), 1.0, "D2");
    close(modified(n, 3, "left-type").unwrap(), 2.0, "D3+");
    // Katz, raw n1..n4 = 10, 4, 2, 1. K = 2: x = 3·2/10 = 0.6,
    // r*_1 = 2·4/10 = 0.8 → d1 = (0.8 − 0.6)/0.4 = 0.5,
    // r*_2 = 3·2/4 = 1.5 → d2 = (0.75 − 0.6)/0.4 = 0.375.
    use quern::query::katz::good_turing;
    let d = good_turing(&o, 2).unwrap();
    close(d[1], 0.5, "d1");
    close(d[2], 0.375, "d2");
    // K = 3: x = 4·1/10 = 0.4; d1 = (0.8 − 0.4)/0.6, d2 = (0.75 − 0.4)/0.6,
    // r*_3 = 4·n4/n3 = 2 → d3 = (2/3 − 0.4)/0.6.
    let d = good_turing(&o, 3).unwrap();
    close(d[1], 0.4 / 0.6, "d1 at K = 3");
    close(d[2], 0.35 / 0.6, "d2 at K = 3");
    close(d[3], (2.0 / 3.0 - 0.4) / 0.6, "d3 at K = 3");
    // K = 4 needs n5 (r*_4 = 5·n5/n4 = 0 → d4 = 0, out of range); K = 5
    // divides by n5 = 0.
    assert!(good_turing(&o, 4).is_err());
    assert!(good_turing(&o, 5).is_err());
    // For K = 1 the Good-Turing factor is always 0 (r*_1 = 2 n2/n1 = x).
    assert!(good_turing(&o, 1).is_err());
}

/// A published worked example, from memory: Jurafsky & Martin, "Speech and
/// Language Processing" (3rd ed. draft), chapter 3, add-one smoothing of the
/// Berkeley Restaurant Project bigrams, |V| = 1446: c(i) = 2533,
/// c(i want) = 827, c(want) = 927, c(want to) = 608, c(chinese) = 158,
/// c(chinese food) = 82. Their smoothed P(want | i) = 0.21, P(to | want) =
/// 0.26, and reconstituted counts c* = (c + 1) C/(C + V) of 527, 238 and 8.2.
#[test]
fn laplace_matches_the_textbook_example_from_memory() {
    use quern::query::simple::lidstone;
    let v = 1446.0;
    let round = |x: f64, d: i32| (x * 10f64.powi(d)).round() / 10f64.powi(d);
    assert_eq!(round(lidstone(827, 2533, 1.0, v), 2), 0.21);
    assert_eq!(round(lidstone(608, 927, 1.0, v), 2), 0.26);
    assert_eq!(round(lidstone(827, 2533, 1.0, v) * 2533.0, 0), 527.0);
    assert_eq!(round(lidstone(608, 927, 1.0, v) * 927.0, 0), 238.0);
    assert_eq!(round(lidstone(82, 158, 1.0, v) * 158.0, 1), 8.2);
}

/// Scoring on the tiny store, by hand: "c x" (x not in V) is the
/// predictions c | <s>, <unk> | c, </s> | <unk>; under Katz the second is
/// F(c) = 0.55 and the third backs off to P(</s>) = 4/12 ([<unk>] is no
/// context); `mle` gives <unk> | c probability 0 and an infinite perplexity.
#[test]
fn score_report_by_hand() {
    use quern::query::score::score_padded;
    let s = Store::open(tiny()).unwrap();
    let sent = query_ids("<s> c x </s>", &quern::tokenize::Preparation::default());
    let e = est(&s, Method::Katz, Params::default());
    let r = score_padded(&e, std::slice::from_ref(&sent)).unwrap();
    assert_eq!((r.sentences, r.predictions, r.oov, r.zero), (1, 3, 1, 0));
    let (d1, d2) = (0.5, 0.375);
    let f: f64 = 1.0 - (d2 * 2.0 / 5.0 + 3.0 * d1 / 5.0);
    let logs = [(3.0f64 / 4.0).log10(), f.log10(), (4.0f64 / 12.0).log10()];
    close(r.log10_prob().unwrap(), logs.iter().sum(), "log10 P");
    close(
        r.perplexity().unwrap(),
        10f64.powf(-logs.iter().sum::<f64>() / 3.0),
        "perplexity",
    );
    close(
        r.perplexity_in_vocab().unwrap(),
        10f64.powf(-(logs[0] + logs[2]) / 2.0),
        "perplexity without the OOV",
    );
    let e = est(&s, Method::Mle, Params::default());
    let r = score_padded(&e, &[sent]).unwrap();
    assert_eq!(r.zero, 1);
    assert_eq!(r.perplexity(), None);
    assert_eq!(r.log10_prob(), None);
    // Without the OOV prediction the rest is finite: 3/4 and 4/12.
    close(
        r.perplexity_in_vocab().unwrap(),
        10f64.powf(-((0.75f64).log10() + (4.0f64 / 12.0).log10()) / 2.0),
        "mle perplexity without OOV",
    );
}

/// The statistics report (`quern stats`) and the estimators take their
/// discounts from one function: where the report gives a value, `mkn` and
/// `kn` use exactly that value; where the report says a modified discount
/// is unusable, the default policy uses the report's single discount.
#[test]
fn stats_report_and_estimators_agree_on_discounts() {
    let s = Store::open(tiny()).unwrap();
    let rep = quern::stats::report(s.meta(), &quern::stats::ReportOptions::default());
    let mkn = est(&s, Method::Mkn, Params::default()).constants();
    let kn = est(&s, Method::Kn, Params::default()).constants();
    let mut replaced = 0;
    for (k, o) in rep.orders.iter().enumerate() {
        let d = &o.discounts;
        let single = d.kn.value.expect("the tiny corpus has n1, n2 > 0");
        assert_eq!(
            kn["discounts"][k].as_f64(),
            Some(single),
            "kn order {}",
            k + 1
        );
        for (i, x) in [&d.d1, &d.d2, &d.d3plus].into_iter().enumerate() {
            let used = mkn["discounts"][k][i].as_f64().unwrap();
            match x.value {
                Some(v) => assert_eq!(used, v, "order {} D{}", k + 1, i + 1),
                None => {
                    assert_eq!(used, single, "order {} D{}", k + 1, i + 1);
                    replaced += 1;
                }
            }
        }
    }
    assert!(replaced > 0, "the tiny corpus leaves D3+ undefined");
}
