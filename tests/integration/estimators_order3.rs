//! Hand-checkable cases at order 3: a second tiny corpus of our own, its
//! counts, modified Kneser-Ney and Katz worked out here from the published
//! formulas (the paper named beside each), compared with what the
//! estimators compute from the store. The helpers are estimators.rs's.

use std::path::PathBuf;
use std::sync::OnceLock;

use quern::query::{query_ids, Estimator, Method, Params};
use quern::store::Store;

use crate::common::ingest_ok;
use crate::estimators::{close, ctx, est, p};

/// The order-3 corpus of the two cases below, six sentences:
///
/// ```text
/// b c d c   ->  <s> b c d c </s>
/// d a a a   ->  <s> d a a a </s>
/// c         ->  <s> c </s>
/// a a a     ->  <s> a a a </s>
/// b a       ->  <s> b a </s>
/// b a a     ->  <s> b a a </s>
/// ```
///
/// Worked by hand. Unigrams (raw): a 9, b 3, c 3, d 2, </s> 6 (<s> 6):
/// T = 23, V = {a, b, c, d, </s>, <unk>}, |V| = 6. Continuation counts
/// N1+(•w): a {d, a, <s>, b} = 4, b {<s>} = 1, c {b, d, <s>} = 3,
/// d {c, <s>} = 2, </s> {c, a} = 2.
///
/// Bigrams, raw / left-type (N1+(•vw), or raw for those starting with <s>):
/// <s> a 1/1, <s> b 3/3, <s> c 1/1, <s> d 1/1, a a 5/4 ({d, <s>, a, b}),
/// a </s> 4/2 ({a, b}), b a 2/1 ({<s>}), b c 1/1, c d 1/1, c </s> 2/2
/// ({<s>, d}), d a 1/1, d c 1/1.
///
/// Trigrams (top order: raw = left-type): <s> a a 1, <s> b a 2, <s> b c 1,
/// <s> c </s> 1, <s> d a 1, a a </s> 3, a a a 2, b a </s> 1, b a a 1,
/// b c d 1, c d c 1, d a a 1, d c </s> 1.
///
/// Context statistics (C, T, A, N1, N2, N3+) used below:
///   root   23 5 12 1 2 2    <s>   6 4 6 3 0 1     a     9 2 6 0 1 1
///   b       3 2  2 2 0 0    c     3 2 3 1 1 0     a a   5 2 5 0 1 1
///   <s> b   3 2  3 1 1 0    d c   1 1 1 1 0 0
///
/// Count-of-counts. Order 1 left-type n1..n4 = 1, 2, 1, 1; raw n2 = 1,
/// n3 = 2, n6 = 1, n9 = 1. Order 2 left-type n1..n4 = 8, 2, 1, 1; raw
/// n1..n5 = 7, 2, 1, 1, 1. Order 3 n1..n3 = 10, 2, 1 (n4 = 0).
const CORPUS3: &str = "b c d c\nd a a a\nc\na a a\nb a\nb a a\n";

fn tiny3() -> &'static PathBuf {
    static S: OnceLock<PathBuf> = OnceLock::new();
    S.get_or_init(|| {
        let base = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("query-stores");
        std::fs::create_dir_all(&base).unwrap();
        let text = base.join("tiny3.txt");
        std::fs::write(&text, CORPUS3).unwrap();
        let dir = base.join("tiny3");
        if dir.exists() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        ingest_ok(&dir, &["--order", "3", "--quiet"], &[text]);
        dir
    })
}

#[test]
fn the_order3_store_holds_the_hand_counts() {
    let s = Store::open(tiny3()).unwrap();
    let id = |w: &str| query_ids(w, &quern::tokenize::Preparation::default());
    assert_eq!(s.meta().totals.tokens, 23);
    assert_eq!(s.meta().totals.vocabulary, 6);
    assert_eq!(s.get(&id("a a")).unwrap(), Some((5, Some(4))));
    assert_eq!(s.get(&id("b a")).unwrap(), Some((2, Some(1))));
    assert_eq!(s.get(&id("<s> b")).unwrap(), Some((3, Some(0))));
    assert_eq!(s.get(&id("a a </s>")).unwrap(), Some((3, None)));
    assert_eq!(s.meta().root, ctx(23, 5, 12, 1, 2, 2));
    for (h, st) in [
        ("<s>", ctx(6, 4, 6, 3, 0, 1)),
        ("a", ctx(9, 2, 6, 0, 1, 1)),
        ("b", ctx(3, 2, 2, 2, 0, 0)),
        ("c", ctx(3, 2, 3, 1, 1, 0)),
        ("a a", ctx(5, 2, 5, 0, 1, 1)),
        ("<s> b", ctx(3, 2, 3, 1, 1, 0)),
        ("d c", ctx(1, 1, 1, 1, 0, 0)),
    ] {
        assert_eq!(s.context(&id(h)).unwrap(), Some(st), "context {h}");
    }
    let m = s.meta();
    assert_eq!(
        m.orders[0].coc_left_type,
        vec![(1, 1), (2, 2), (3, 1), (4, 1)]
    );
    assert_eq!(
        m.orders[1].coc_left_type,
        vec![(1, 8), (2, 2), (3, 1), (4, 1)]
    );
    assert_eq!(
        m.orders[1].coc_raw,
        vec![(1, 7), (2, 2), (3, 1), (4, 1), (5, 1)]
    );
    assert_eq!(m.orders[2].coc_raw, vec![(1, 10), (2, 2), (3, 1)]);
}

/// Modified Kneser-Ney at order 3, by hand from Chen & Goodman (1998),
/// "An empirical study of smoothing techniques for language modeling",
/// eq. 17 (interpolation with γ(h) = (D1 N1(h) + D2 N2(h) + D3+ N3+(h))/A(h))
/// and eq. 26 (Y = n1/(n1 + 2 n2), D_r = r − (r+1) Y n_{r+1}/n_r) over
/// the left-type counts of each order: continuation counts in the middle
/// order, raw counts at the top and for n-grams that start with <s>.
#[test]
fn mkn_by_hand_at_order_3() {
    let s = Store::open(tiny3()).unwrap();
    // Order 3 has n4 = 0: D3+ is undefined there, and only there; the
    // strict policy refuses it.
    let strict = Params {
        discounts: quern::query::DiscountPolicy::Estimate,
        ..Params::default()
    };
    let err = Estimator::new(&s, Method::Mkn, strict)
        .err()
        .expect("mkn must refuse an undefined D3+")
        .to_string();
    assert!(err.contains("order 3") && err.contains("D3+"), "{err}");
    let e = est(
        &s,
        Method::Mkn,
        Params {
            discounts: quern::query::DiscountPolicy::EstimateOr(vec![0.6, 1.1, 1.5]),
            ..Params::default()
        },
    );
    assert_eq!(e.notes().len(), 1, "{:?}", e.notes());
    let v = 6.0;
    // Order 1 (left-type n1..n4 = 1, 2, 1, 1): Y = 1/5, D1 = 1 − 2(1/5)(2/1)
    // = 1/5, D2 = 2 − 3(1/5)(1/2) = 17/10, D3+ = 3 − 4(1/5)(1/1) = 11/5.
    let (a1, a2, a3) = (1.0 / 5.0, 17.0 / 10.0, 11.0 / 5.0);
    // Order 2 (8, 2, 1, 1): Y = 8/12 = 2/3, D1 = 1 − 2(2/3)(2/8) = 2/3,
    // D2 = 2 − 3(2/3)(1/2) = 1, D3+ = 3 − 4(2/3)(1/1) = 1/3.
    let (b1, b2, b3) = (2.0 / 3.0, 1.0, 1.0 / 3.0);
    // Order 3 (10, 2, 1, 0): Y = 10/14 = 5/7, D1 = 1 − 2(5/7)(2/10) = 5/7,
    // D2 = 2 − 3(5/7)(1/2) = 13/14, D3+ the fallback 1.5.
    let (c1, c2, c3) = (5.0 / 7.0, 13.0 / 14.0, 1.5);
    // Root: A = 12, N1 = 1 (b), N2 = 2 (d, </s>), N3+ = 2 (c 3, a 4).
    let g0 = (a1 * 1.0 + a2 * 2.0 + a3 * 2.0) / 12.0;
    close(g0, 2.0 / 3.0, "γ(root)");
    let p1 = |adj: f64, d: f64| (adj - d) / 12.0 + g0 / v;
    let p1_a = p1(4.0, a3); // a: N1+(•a) = 4
    let p1_b = p1(1.0, a1); // b: N1+(•b) = 1
    close(p1_a, 47.0 / 180.0, "P1(a)");
    close(p(&e, "a"), p1_a, "P(a)");

    // P(a | a a): trigram a a a 2 (D2 of order 3); a a has A = 5, N2 = 1
    // (a a a), N3+ = 1 (a a </s> 3). Bigram a a: left-type 4 (not its raw
    // 5), D3+ of order 2; a has A = 6 (a a 4, a </s> 2), N2 = 1, N3+ = 1.
    let g_a = (b2 * 1.0 + b3 * 1.0) / 6.0;
    let p2 = (4.0 - b3) / 6.0 + g_a * p1_a;
    close(p2, 271.0 / 405.0, "P2(a | a)");
    close(p(&e, "a a"), p2, "P(a | a)");
    let g_aa = (c2 * 1.0 + c3 * 1.0) / 5.0;
    close(p(&e, "a a a"), (2.0 - c2) / 5.0 + g_aa * p2, "P(a | a a)");

    // P(a | <s> b): trigram <s> b a 2 (D2 of order 3); <s> b has A = 3,
    // N1 = 1 (<s> b c), N2 = 1. Bigram b a: left-type N1+(•b a) = 1 (only
    // <s> b a; raw 2), D1 of order 2; b has A = 2 (b a 1, b c 1), N1 = 2.
    let g_b = b1 * 2.0 / 2.0;
    let p2_ab = (1.0 - b1) / 2.0 + g_b * p1_a;
    close(p2_ab, 46.0 / 135.0, "P2(a | b)");
    let g_sb = (c1 * 1.0 + c2 * 1.0) / 3.0;
    close(
        p(&e, "<s> b a"),
        (2.0 - c2) / 3.0 + g_sb * p2_ab,
        "P(a | <s> b)",
    );

    // P(b | <s>): the bigram <s> b keeps its raw count 3 (it starts with
    // <s>; its continuation count is 0), D3+ of order 2; <s> has A = 6
    // (<s> a 1, <s> b 3, <s> c 1, <s> d 1), N1 = 3, N3+ = 1.
    let g_s = (b1 * 3.0 + b3 * 1.0) / 6.0;
    close(p1_b, 8.0 / 45.0, "P1(b)");
    close(p(&e, "<s> b"), (3.0 - b3) / 6.0 + g_s * p1_b, "P(b | <s>)");

    // P(b | d c): neither d c b nor c b was seen, so two back-off weights:
    // d c has A = 1, N1 = 1 (d c </s>): γ = D1 of order 3; c has A = 3
    // (c d 1, c </s> 2), N1 = 1, N2 = 1: γ = (D1 + D2)/3 of order 2.
    let g_dc = c1 * 1.0 / 1.0;
    let g_c = (b1 * 1.0 + b2 * 1.0) / 3.0;
    close(g_c, 5.0 / 9.0, "γ(c)");
    close(p(&e, "d c b"), g_dc * g_c * p1_b, "P(b | d c)");
    // Only the last two words of a longer context count.
    close(p(&e, "a b d c b"), g_dc * g_c * p1_b, "P(b | a b d c)");
}

/// Katz back-off at order 3, by hand from Katz (1987), "Estimation of
/// probabilities from sparse data for the language model component of a
/// speech recognizer", IEEE Trans. ASSP 35(3), eq. for d_r with Good-Turing
/// r* = (r+1) n_{r+1}/n_r (Good 1953), and the back-off weight that gives
/// the lower order's distribution, renormalised over the words unseen
/// after h, the mass F(h) freed by discounting:
/// P(w|h) = F(h) P(w|h') / (1 − Σ_{v seen after h} P(v|h')).
#[test]
fn katz_by_hand_at_order_3() {
    let s = Store::open(tiny3()).unwrap();
    let e = est(&s, Method::Katz, Params::default());
    // Order 1, raw n1 = 0: no K ≥ 1 is usable, K = 0 (no discount).
    // Order 2, raw n1..n6 = 7, 2, 1, 1, 1, 0: K = 5 gives d5 = 6 n6/n5/5 = 0;
    // K = 4: x = 5 n5/n1 = 5/7, d1 = (2·2/7 − 5/7)/(2/7) < 0; K = 3:
    // x = 4/7, d1 = (4/7 − 4/7)/(3/7) = 0; K = 2: x = 3 n3/n1 = 3/7,
    // d1 = (4/7 − 3/7)/(4/7) = 1/4, d2 = (3·1/2/2 − 3/7)/(4/7) = 9/16.
    // Order 3, n1..n4 = 10, 2, 1, 0: K ≥ 4 needs n4; K = 3 gives
    // d3 = 4 n4/n3/3 = 0; K = 2: x = 3/10, d1 = (2·2/10 − 3/10)/(7/10) = 1/7,
    // d2 = (3·1/2/2 − 3/10)/(7/10) = 9/14.
    assert_eq!(e.notes().len(), 3, "{:?}", e.notes());
    for (note, k) in e.notes().iter().zip([0, 2, 2]) {
        assert!(note.contains(&format!("K lowered to {k}")), "{note}");
    }
    let (d1_2, d2_2) = (1.0 / 4.0, 9.0 / 16.0);
    let (d1_3, d2_3) = (1.0 / 7.0, 9.0 / 14.0);
    // Unigrams undiscounted: P(w) = c(w)/23; <unk> gets the freed mass, 0.
    let u = |c: f64| c / 23.0;
    close(p(&e, "c"), u(3.0), "P(c)");
    close(p(&e, "<unk>"), 0.0, "P(<unk>)");
    // Seen trigrams: a a </s> 3 is above K (undiscounted), a a a 2 and
    // <s> b a 2 take d2 of order 3.
    close(p(&e, "a a </s>"), 3.0 / 5.0, "P(</s> | a a)");
    close(p(&e, "a a a"), d2_3 * 2.0 / 5.0, "P(a | a a)");
    close(p(&e, "<s> b a"), d2_3 * 2.0 / 3.0, "P(a | <s> b)");
    close(p(&e, "<s> b a"), 3.0 / 7.0, "P(a | <s> b) = 3/7");

    // P(</s> | <s> b), two levels down. After b (C = 3): P(a|b) =
    // d2 2/3 = 3/8, P(c|b) = d1 1/3 = 1/12, so F(b) = 13/24; </s> is unseen
    // after b: P(</s>|b) = F(b) P(</s>) / (1 − P(a) − P(c))
    // = (13/24)(6/23)/(11/23) = 13/44.
    let (pab, pcb) = (d2_2 * 2.0 / 3.0, d1_2 / 3.0);
    let f_b = 1.0 - pab - pcb;
    let p_eos_b = f_b * u(6.0) / (1.0 - u(9.0) - u(3.0));
    close(p_eos_b, 13.0 / 44.0, "P(</s> | b)");
    close(p(&e, "b </s>"), p_eos_b, "P(</s> | b), queried");
    // After <s> b (C = 3): P*(a) = d2 2/3 = 3/7, P*(c) = d1 1/3 = 1/21,
    // F = 11/21, renormalised over the lower order's mass of the words
    // unseen after <s> b: 1 − P(a|b) − P(c|b) = 13/24. (As <s> b and b have
    // the same children, this equals backing off to the unigrams directly;
    // P(a | b c) below tells the two apart.)
    let f_sb = 1.0 - d2_3 * 2.0 / 3.0 - d1_3 / 3.0;
    close(f_sb, 11.0 / 21.0, "F(<s> b)");
    let want = f_sb * p_eos_b / (1.0 - pab - pcb);
    close(want, 2.0 / 7.0, "P(</s> | <s> b) = 2/7");
    close(p(&e, "<s> b </s>"), want, "P(</s> | <s> b)");

    // P(a | b c): b c a and c a unseen. After c (C = 3: c d 1, c </s> 2):
    // F(c) = (1 − 1/4)·1/3 + (1 − 9/16)·2/3 = 13/24; P(a|c) = F(c) P(a) /
    // (1 − P(d) − P(</s>)) = (13/24)(9/23)/(15/23) = 13/40. After b c
    // (C = 1: b c d 1): F = 1 − 1/7 = 6/7, over 1 − P(d|c) = 1 − d1/3
    // = 11/12: P(a | b c) = (6/7)(13/40)/(11/12) = 117/385.
    let f_c = (1.0 - d1_2) / 3.0 + (1.0 - d2_2) * 2.0 / 3.0;
    let p_a_c = f_c * u(9.0) / (1.0 - u(2.0) - u(6.0));
    close(p_a_c, 13.0 / 40.0, "P(a | c)");
    close(p(&e, "c a"), p_a_c, "P(a | c), queried");
    let want = (1.0 - d1_3) * p_a_c / (1.0 - d1_2 / 3.0);
    close(want, 117.0 / 385.0, "P(a | b c) = 117/385");
    close(p(&e, "b c a"), want, "P(a | b c)");
}
