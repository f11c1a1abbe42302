//! An independent implementation of the nine estimators, from the tables
//! of the reference counter (reference.rs: raw counts read from the text,
//! continuation counts, context statistics and count-of-counts derived from
//! them), by plain recursion over the context written from the published
//! formulas (the source is named beside each method) and the definitions
//! in README.md ("The estimators"): nothing of quern's query code is used.
//! estimators_independent.rs compares quern's estimators with it; the
//! freeze tests derive Katz's skipping contexts from it.

use std::cell::{OnceCell, RefCell};
use std::collections::HashMap;
use std::path::PathBuf;

use quern::query::{Method, Params};

use crate::reference::{ContextStats, Derived, Reference, Settings, BOS, UNK};

pub(crate) type Gram = Vec<String>;

/// The reference's tables of the training text, with the children of every
/// context listed (for Katz's sums over a context's children).
pub(crate) struct Tables {
    pub(crate) n: usize,
    r: Reference,
    d: Derived,
    /// |V|: the types but `<s>`, plus `<unk>` if the text never held it.
    pub(crate) v: f64,
    /// children[h] = (w, c(h w)) for every stored h·w; the empty context's
    /// children are the unigrams but `<s>`.
    children: HashMap<Gram, Vec<(String, u64)>>,
}

impl Tables {
    /// The tables of `files` at order `n`.
    pub(crate) fn new(n: usize, files: &[PathBuf]) -> Tables {
        let r = Reference::from_paths(Settings::order(n), files);
        let d = r.derive();
        let mut children: HashMap<Gram, Vec<(String, u64)>> = HashMap::new();
        for (k, table) in r.counts.iter().enumerate() {
            for (g, &c) in table {
                if k == 0 && g[0] == BOS {
                    continue;
                }
                children
                    .entry(g[..k].to_vec())
                    .or_default()
                    .push((g[k].clone(), c));
            }
        }
        let types = r.counts[0].keys().filter(|g| g[0] != BOS).count();
        let unk_seen = r.counts[0].contains_key(&vec![UNK.to_string()]);
        let v = (types + usize::from(!unk_seen)) as f64;
        Tables {
            n,
            r,
            d,
            v,
            children,
        }
    }

    /// Raw count c(g) (0 for the empty n-gram's use as a context: see
    /// `hc`).
    pub(crate) fn c(&self, g: &[String]) -> u64 {
        self.r
            .count(&g.iter().map(String::as_str).collect::<Vec<_>>())
    }

    /// Adjusted count (README "What is counted"): c(g) at the top order and
    /// for n-grams starting with `<s>`, else the continuation count
    /// N1+(•g).
    fn a(&self, g: &[String]) -> u64 {
        if g.len() == self.n || g[0] == BOS {
            self.c(g)
        } else {
            self.d.continuation[g.len() - 1]
                .get(g)
                .copied()
                .unwrap_or(0)
        }
    }

    /// Every context with a child (the empty one included).
    pub(crate) fn contexts(&self) -> Vec<Gram> {
        self.children.keys().cloned().collect()
    }

    /// The words seen after h with their counts, in the order counted.
    pub(crate) fn children_of(&self, h: &[String]) -> &[(String, u64)] {
        self.children.get(h).map_or(&[], Vec::as_slice)
    }

    /// Whether h is a seen context (C(h) > 0), as Katz asks.
    pub(crate) fn is_context(&self, h: &[String]) -> bool {
        self.ctx(h).is_some_and(|s| s.c > 0)
    }

    /// C, T, A, N1, N2, N3+ of context h (`None`: h has no continuation).
    fn ctx(&self, h: &[String]) -> Option<ContextStats> {
        self.d.contexts.get(h).copied()
    }

    /// A word of V, or `<s>` (a context word): what quern looks up.
    pub(crate) fn known(&self, w: &str) -> bool {
        w == UNK || self.r.counts[0].contains_key(&vec![w.to_string()])
    }

    /// The query as quern maps it (README "The estimators"): the context
    /// cut to its last N − 1 words, words outside V as `<unk>`; a predicted
    /// word outside V (or `<s>`) as `<unk>`.
    pub(crate) fn map(&self, ctx: &[String], w: &str) -> (Gram, String) {
        let start = ctx.len().saturating_sub(self.n - 1);
        let h = ctx[start..]
            .iter()
            .map(|x| {
                if self.known(x) {
                    x.clone()
                } else {
                    UNK.to_string()
                }
            })
            .collect();
        let w = if w != BOS && self.known(w) {
            w.to_string()
        } else {
            UNK.to_string()
        };
        (h, w)
    }

    pub(crate) fn hw(h: &[String], w: &str) -> Gram {
        let mut g = h.to_vec();
        g.push(w.to_string());
        g
    }

    fn left_type_coc(&self, k: usize, r: u64) -> f64 {
        self.d.left_type_coc[k - 1].get(&r).copied().unwrap_or(0) as f64
    }

    fn raw_coc(&self, k: usize, r: u64) -> f64 {
        self.d.raw_coc[k - 1].get(&r).copied().unwrap_or(0) as f64
    }
}

/// The constants and parameters of one method, derived here from the
/// reference's count-of-counts.
enum Model {
    /// Per order: D1, D2, D3+.
    Mkn(Vec<[f64; 3]>),
    Kn(Vec<f64>),
    Absolute(Vec<f64>),
    WittenBell,
    /// Per order: (K, d_1..d_K with d[0] unused).
    Katz(Vec<(usize, Vec<f64>)>),
    /// Per order: the weights of the buckets (one: no buckets).
    Interp(Vec<Vec<f64>>),
    AddK(f64),
    Mle,
    Stupid(f64),
}

pub(crate) const FALLBACK_MKN: [f64; 3] = [0.6, 1.1, 1.6];
pub(crate) const FALLBACK_ONE: f64 = 0.55;
const KATZ_EPS: f64 = 1e-12;

/// Modified Kneser-Ney discounts, Chen & Goodman (1998), eq. 26:
/// Y = n1/(n1 + 2 n2), D_r = r − (r + 1) Y n_{r+1}/n_r (r = 1, 2, 3 for
/// D3+), over the left-type count-of-counts of the order; undefined where
/// n1, n2, n_r or n_{r+1} is 0 and unusable outside (0, r] (README, "Discounts": then the
/// values of `--discounts estimate-or:...` are used).
fn mkn_discounts(t: &Tables, k: usize) -> [f64; 3] {
    let n = |r: u64| t.left_type_coc(k, r);
    let mut out = [0.0; 3];
    for r in 1..=3u64 {
        let rf = r as f64;
        let defined = n(1) > 0.0 && n(2) > 0.0 && n(r) > 0.0 && n(r + 1) > 0.0;
        let d = if defined {
            let y = n(1) / (n(1) + 2.0 * n(2));
            rf - (rf + 1.0) * y * n(r + 1) / n(r)
        } else {
            f64::NAN
        };
        out[r as usize - 1] = if d > 0.0 && d <= rf {
            d
        } else {
            FALLBACK_MKN[r as usize - 1]
        };
    }
    out
}

/// One discount per order, Ney, Essen & Kneser (1994): D = n1/(n1 + 2 n2).
fn single_discount(n1: f64, n2: f64) -> f64 {
    if n1 > 0.0 && n2 > 0.0 {
        n1 / (n1 + 2.0 * n2)
    } else {
        FALLBACK_ONE
    }
}

/// Katz (1987) with Good-Turing (Good 1953): r* = (r+1) n_{r+1}/n_r,
/// d_r = (r*/r − (K+1) n_{K+1}/n1) / (1 − (K+1) n_{K+1}/n1) for r ≤ K, over
/// the raw count-of-counts; K is lowered from the one asked for to the
/// largest value at which every d_r is defined and in (0, 1] (K = 0: no
/// discount), as README says.
fn katz_constants(t: &Tables, k: usize, k_req: usize) -> (usize, Vec<f64>) {
    let n = |r: usize| t.raw_coc(k, r as u64);
    'try_k: for big_k in (1..=k_req).rev() {
        if (1..=big_k).any(|r| n(r) == 0.0) {
            continue;
        }
        let x = (big_k as f64 + 1.0) * n(big_k + 1) / n(1);
        if 1.0 - x == 0.0 {
            continue;
        }
        let mut d = vec![1.0];
        for r in 1..=big_k {
            let rstar = (r as f64 + 1.0) * n(r + 1) / n(r);
            let dr = (rstar / r as f64 - x) / (1.0 - x);
            if !(dr > 0.0 && dr <= 1.0) {
                continue 'try_k;
            }
            d.push(dr);
        }
        return (big_k, d);
    }
    (0, vec![1.0])
}

/// Katz's facts about one context h: the freed mass F(h), the length of
/// the suffix of h whose distribution the unseen words follow (`None`: the
/// uniform one) and its denominator, or "spread" (every word of V seen).
#[derive(Clone, Copy)]
pub(crate) struct KatzCtx {
    pub(crate) f: f64,
    pub(crate) lower: Option<usize>,
    pub(crate) den: f64,
    pub(crate) spread: bool,
}

pub(crate) struct Independent<'t> {
    t: &'t Tables,
    model: Model,
    katz_memo: RefCell<HashMap<Gram, KatzCtx>>,
    /// Katz's freed unigram mass, a sum over V computed once.
    katz_free: OnceCell<f64>,
}

impl<'t> Independent<'t> {
    pub(crate) fn new(t: &'t Tables, method: Method, params: &Params) -> Independent<'t> {
        let n = t.n;
        let model = match method {
            Method::Mkn => Model::Mkn((1..=n).map(|k| mkn_discounts(t, k)).collect()),
            Method::Kn => Model::Kn(
                (1..=n)
                    .map(|k| single_discount(t.left_type_coc(k, 1), t.left_type_coc(k, 2)))
                    .collect(),
            ),
            Method::Absolute => Model::Absolute(
                (1..=n)
                    .map(|k| single_discount(t.raw_coc(k, 1), t.raw_coc(k, 2)))
                    .collect(),
            ),
            Method::WittenBell => Model::WittenBell,
            Method::Katz => Model::Katz(
                (1..=n)
                    .map(|k| katz_constants(t, k, params.katz_k))
                    .collect(),
            ),
            Method::Interp => Model::Interp(match (&params.bucket_lambdas, &params.lambdas) {
                (Some(b), _) => b.clone(),
                (None, Some(l)) => l.iter().map(|&x| vec![x]).collect(),
                (None, None) => vec![vec![0.5]; n],
            }),
            Method::AddK => Model::AddK(params.k),
            Method::Mle => Model::Mle,
            Method::Stupid => Model::Stupid(params.alpha),
            Method::Arpa => unreachable!("a model read from ARPA text has no store method"),
            Method::Blend => unreachable!("a blend has no store method"),
        };
        Independent {
            t,
            model,
            katz_memo: RefCell::new(HashMap::new()),
            katz_free: OnceCell::new(),
        }
    }

    /// P(w | h) for a mapped query.
    pub(crate) fn p(&self, h: &[String], w: &str) -> f64 {
        match &self.model {
            Model::Mkn(d) => self.mkn(d, h, w),
            Model::Kn(d) => self.kn(d, h, w, false),
            Model::Absolute(d) => self.kn(d, h, w, true),
            Model::WittenBell => self.witten_bell(h, w),
            Model::Katz(c) => self.katz(c, h, w),
            Model::Interp(l) => self.interp(l, h, w),
            Model::AddK(k) => self.add_k(*k, h, w),
            Model::Mle => self.mle(h, w),
            Model::Stupid(a) => self.stupid(*a, h, w),
        }
    }

    /// The lower-order estimate: P(w | h without its first word), or the
    /// uniform 1/|V| below the empty context.
    fn lower(&self, h: &[String], f: impl Fn(&[String]) -> f64) -> f64 {
        if h.is_empty() {
            1.0 / self.t.v
        } else {
            f(&h[1..])
        }
    }

    /// Interpolated modified Kneser-Ney, Chen & Goodman (1998), eq. 17 with
    /// the three discounts: P(w|h) = max(a(hw) − D(a), 0)/A(h) + γ(h) P(w|h'),
    /// γ(h) = (D1 N1(h) + D2 N2(h) + D3+ N3+(h))/A(h); a context without
    /// continuations passes P(w|h') on unchanged.
    fn mkn(&self, d: &[[f64; 3]], h: &[String], w: &str) -> f64 {
        let lower = self.lower(h, |s| self.mkn(d, s, w));
        let Some(s) = self.t.ctx(h).filter(|s| s.a > 0) else {
            return lower;
        };
        let [d1, d2, d3] = d[h.len()];
        let a = self.t.a(&Tables::hw(h, w));
        let disc = match a {
            0 => 0.0,
            1 => d1,
            2 => d2,
            _ => d3,
        };
        let big_a = s.a as f64;
        let gamma = (d1 * s.n1 as f64 + d2 * s.n2 as f64 + d3 * s.n3plus as f64) / big_a;
        (a as f64 - disc).max(0.0) / big_a + gamma * lower
    }

    /// Interpolated Kneser-Ney with one discount (Ney, Essen & Kneser 1994)
    /// over left-type counts: max(a − D, 0)/A + D·(N1 + N2 + N3+)/A·P(w|h');
    /// absolute discounting (the same paper) over raw counts:
    /// max(c − D, 0)/C + D·T/C·P(w|h').
    fn kn(&self, d: &[f64], h: &[String], w: &str, raw: bool) -> f64 {
        let lower = self.lower(h, |s| self.kn(d, s, w, raw));
        let Some(s) = self.t.ctx(h) else {
            return lower;
        };
        let g = Tables::hw(h, w);
        let (count, sum, distinct) = if raw {
            (self.t.c(&g), s.c, s.t)
        } else {
            (self.t.a(&g), s.a, s.n1 + s.n2 + s.n3plus)
        };
        if sum == 0 {
            return lower;
        }
        let dk = d[h.len()];
        let disc = if count > 0 { dk } else { 0.0 };
        (count as f64 - disc).max(0.0) / sum as f64 + dk * distinct as f64 / sum as f64 * lower
    }

    /// Witten & Bell (1991), method C, interpolated:
    /// (c(hw) + T(h) P(w|h')) / (C(h) + T(h)).
    fn witten_bell(&self, h: &[String], w: &str) -> f64 {
        let lower = self.lower(h, |s| self.witten_bell(s, w));
        match self.t.ctx(h) {
            Some(s) if s.c > 0 => {
                (self.t.c(&Tables::hw(h, w)) as f64 + s.t as f64 * lower) / (s.c + s.t) as f64
            }
            _ => lower,
        }
    }

    /// Jelinek & Mercer (1980): λ c(hw)/C(h) + (1 − λ) P(w|h'), λ of the
    /// order k = |h| + 1, or of its bucket ⌊log2 C(h)⌋ (the last bucket
    /// taking everything above).
    fn interp(&self, l: &[Vec<f64>], h: &[String], w: &str) -> f64 {
        let lower = self.lower(h, |s| self.interp(l, s, w));
        match self.t.ctx(h) {
            Some(s) if s.c > 0 => {
                let ws = &l[h.len()];
                let b = ((s.c as f64).log2().floor() as usize).min(ws.len() - 1);
                let lam = ws[b];
                lam * self.t.c(&Tables::hw(h, w)) as f64 / s.c as f64 + (1.0 - lam) * lower
            }
            _ => lower,
        }
    }

    /// Lidstone's additive smoothing at the full (cut) context only:
    /// (c(hw) + k)/(C(h) + k|V|); an unseen context gives 1/|V|.
    fn add_k(&self, k: f64, h: &[String], w: &str) -> f64 {
        let big_c = self.t.ctx(h).map_or(0, |s| s.c) as f64;
        (self.t.c(&Tables::hw(h, w)) as f64 + k) / (big_c + k * self.t.v)
    }

    /// Maximum likelihood c(hw)/C(h) at the longest suffix h of the context
    /// with C(h) > 0.
    fn mle(&self, h: &[String], w: &str) -> f64 {
        match self.t.ctx(h) {
            Some(s) if s.c > 0 => self.t.c(&Tables::hw(h, w)) as f64 / s.c as f64,
            _ if h.is_empty() => 0.0,
            _ => self.mle(&h[1..], w),
        }
    }

    /// Stupid back-off, Brants, Popat, Xu, Och & Dean (2007):
    /// S(w|h) = c(hw)/c(h) if c(hw) > 0, else α S(w|h'); S(w) = c(w)/T with
    /// T the tokens (the empty context's C).
    fn stupid(&self, alpha: f64, h: &[String], w: &str) -> f64 {
        let chw = self.t.c(&Tables::hw(h, w));
        let hc = if h.is_empty() {
            self.t.ctx(&[]).map_or(0, |s| s.c)
        } else {
            self.t.c(h)
        };
        if chw > 0 && hc > 0 {
            return chw as f64 / hc as f64;
        }
        if h.is_empty() {
            0.0
        } else {
            alpha * self.stupid(alpha, &h[1..], w)
        }
    }

    /// d_r of order k (1 above K).
    fn katz_d(c: &[(usize, Vec<f64>)], k: usize, r: u64) -> f64 {
        let (big_k, d) = &c[k - 1];
        if r >= 1 && r as usize <= *big_k {
            d[r as usize]
        } else {
            1.0
        }
    }

    /// Katz (1987) back-off, as README ("The estimators") states it: a seen
    /// word gets P*(w|h) = d_r r/C(h); the mass F(h) = 1 − Σ P*(v|h) over the
    /// children v of h goes to the unseen words in proportion to the lower
    /// order, P(w|h) = F(h) P(w|h') / (1 − Σ_{v child of h} P(v|h')), going
    /// to shorter contexts (and at last the uniform) while that denominator
    /// is at most 1e-12; an unseen context backs off unchanged. At the
    /// empty context the freed mass is shared equally by the words of V
    /// with count 0 (by all of V if there is none); after a context where
    /// every word of V was seen, F(h) P(w|h') is added to each word.
    fn katz(&self, c: &[(usize, Vec<f64>)], h: &[String], w: &str) -> f64 {
        let t = self.t;
        let root = t.ctx(&[]).expect("the empty context has children");
        if h.is_empty() {
            let tokens = root.c as f64;
            let zeros = t.v - root.t as f64;
            let free = *self.katz_free.get_or_init(|| {
                t.children[&Vec::new()]
                    .iter()
                    .map(|(_, cv)| (1.0 - Self::katz_d(c, 1, *cv)) * *cv as f64)
                    .sum::<f64>()
                    / tokens
            });
            let cw = t.c(&[w.to_string()]);
            return if cw > 0 {
                let pstar = Self::katz_d(c, 1, cw) * cw as f64 / tokens;
                if zeros > 0.0 {
                    pstar
                } else {
                    pstar + free / t.v
                }
            } else {
                free / zeros.max(1.0)
            };
        }
        let s = match t.ctx(h) {
            Some(s) if s.c > 0 => s,
            _ => return self.katz(c, &h[1..], w),
        };
        let k = h.len() + 1;
        let chw = t.c(&Tables::hw(h, w));
        if chw > 0 {
            let pstar = Self::katz_d(c, k, chw) * chw as f64 / s.c as f64;
            if (s.t as f64) < t.v {
                return pstar;
            }
            let kc = self.katz_ctx(c, h);
            return if kc.spread {
                pstar + kc.f * self.katz(c, &h[1..], w)
            } else {
                pstar
            };
        }
        let kc = self.katz_ctx(c, h);
        if kc.f <= KATZ_EPS {
            return 0.0;
        }
        let lower = match kc.lower {
            Some(i) => self.katz(c, &h[h.len() - i..], w),
            None => 1.0 / t.v,
        };
        kc.f * lower / kc.den
    }

    /// Katz's facts about the seen context h (`None` for another method).
    pub(crate) fn katz_context(&self, h: &[String]) -> Option<KatzCtx> {
        match &self.model {
            Model::Katz(c) => Some(self.katz_ctx(c, h)),
            _ => None,
        }
    }

    fn katz_ctx(&self, c: &[(usize, Vec<f64>)], h: &[String]) -> KatzCtx {
        if let Some(kc) = self.katz_memo.borrow().get(h) {
            return *kc;
        }
        let t = self.t;
        let s = t.ctx(h).expect("a seen context");
        let k = h.len() + 1;
        let kids = &t.children[h];
        let freed: f64 = kids
            .iter()
            .map(|(_, cv)| (1.0 - Self::katz_d(c, k, *cv)) * *cv as f64)
            .sum();
        let mut kc = KatzCtx {
            f: freed / s.c as f64,
            lower: None,
            den: 1.0,
            spread: false,
        };
        if kc.f > KATZ_EPS {
            if (s.t as f64) < t.v {
                let mut found = false;
                for i in (0..h.len()).rev() {
                    let hi = &h[h.len() - i..];
                    let sum: f64 = kids.iter().map(|(v, _)| self.katz(c, hi, v)).sum();
                    if 1.0 - sum > KATZ_EPS {
                        kc.lower = Some(i);
                        kc.den = 1.0 - sum;
                        found = true;
                        break;
                    }
                }
                if !found {
                    let den = 1.0 - s.t as f64 / t.v;
                    if den > KATZ_EPS {
                        kc.den = den;
                    } else {
                        kc.spread = true;
                    }
                }
            } else {
                kc.spread = true;
            }
        }
        self.katz_memo.borrow_mut().insert(h.to_vec(), kc);
        kc
    }
}
