#!/usr/bin/env python3
"""An independent check of relative-entropy pruning, for quern's tests.

Written from the paper (Stolcke 1998, "Entropy-based pruning of backoff
language models", the relative entropy of the model with one n-gram
removed) and the ARPA format only, with Python's standard library. Usage:

    prune_check.py FULL.arpa[.gz] PRUNED.arpa[.gz] THETA

FULL is the unpruned model, PRUNED the model pruned at THETA (nats). For
every n-gram h w of order >= 2 in FULL it computes, from FULL's numbers,

    D = -p(h) { p(w|h) [ln p(w|h') + ln b'(h) - ln p(w|h)]
                + [ln b'(h) - ln b(h)] * sum_{v backed off} p(v|h) }

with b'(h) = (1 - sum_v p(v|h) + p(w|h)) / (1 - sum_v p(v|h') + p(w|h')),
sums over the listed children v of h, sum over the backed-off words
1 - sum_v p(v|h), and p(h) the model's own probability of the context by
the chain rule (the first word <s>, never predicted, given the unigram
probability of </s>: one sentence start per sentence end). The n-grams
that must stay are those with D >= THETA and, from the top order down,
the context (all words but the last) and the suffix (all words but the
first) of every n-gram that stays. It checks that PRUNED lists exactly
those n-grams (but for ones whose D lies within the precision of the
file's 7-decimal numbers of THETA, which it counts) and that every n-gram
PRUNED lists has the probability FULL gives it. Prints one JSON object;
exits 1 when a check fails. The contexts listed in the file named by
ARPA_SKIP_CONTEXTS (as arpa_check.py reads it: Katz contexts that back
off past h') are not judged: their children are taken as PRUNED has them.

The precision of D: every number of the file is within half a unit of its
7th decimal of log10 (R = 5e-8 ln 10 relative, the same in ln), and that
error is carried through the formula to first order, term by term (num
and den are sums of such values; b'(h) their ratio), doubled for the
second-order terms and the 32-bit values behind the text. An n-gram whose
D lies within that bound of THETA is borderline: the bound is relative to
the numbers of its own context, not one width for all.
"""

import json
import math
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from arpa_check import SKIP, read  # noqa: E402  (the same directory)

NEG = -99.0
R = 5e-8 * math.log(10)


def p10(x):
    return 0.0 if x <= NEG else 10.0 ** x


def main():
    _, full, bow = read(sys.argv[1])
    _, pruned, _ = read(sys.argv[2])
    theta = float(sys.argv[3])
    n = max(full)
    kids = {}
    for k in range(2, n + 1):
        for g in full[k]:
            kids.setdefault(g[:-1], []).append(g)
    marg = {}

    def marginal(h):
        if h in marg:
            return marg[h]
        if len(h) == 1:
            w = "</s>" if h[0] == "<s>" else h[0]
            m = p10(full[1][(w,)])
        else:
            m = marginal(h[:-1]) * p10(full[len(h)][h])
        marg[h] = m
        return m

    d = {}
    not_judged = 0
    for h, gs in kids.items():
        k = len(h) + 1
        if h in SKIP:
            # A Katz context that backs off past h': its weight in the
            # text is not the method, so D cannot be recomputed from the
            # text. Its children are taken as PRUNED has them (the closure
            # below still applies), and counted.
            for g in gs:
                d[g] = math.inf if g in pruned[k] else (-math.inf, 0.0)
                not_judged += 1
            continue
        qs = [p10(full[k][g]) for g in gs]
        lows = [p10(full[k - 1][g[1:]]) for g in gs]
        num = 1.0 - sum(qs)
        den = 1.0 - sum(lows)
        # Their errors: the sums of the values' errors.
        e_num = sum(qs) * R
        e_den = sum(lows) * R
        b = p10(bow.get(h, 0.0))
        ph = marginal(h)
        for g, qh, ql in zip(gs, qs, lows):
            if qh > 0 and ql <= 0:
                d[g] = math.inf
                continue
            bp = (num + qh) / (den + ql)
            lbp = math.log(bp) if bp > 0 else 0.0
            t1 = qh * (math.log(ql) + lbp - math.log(qh)) if qh > 0 else 0.0
            t2 = num * (lbp - math.log(b)) if num > 0 and b > 0 else 0.0
            dg = -ph * (t1 + t2)
            # The error of D from the file's rounding, term by term.
            e_bp = (e_num + qh * R) / max(num + qh, 1e-300) + (e_den + ql * R) / max(den + ql, 1e-300)
            e_t1 = qh * (2 * R + e_bp) + abs(t1) * R
            e_t2 = (max(num, 0.0) * (e_bp + R) + abs(lbp - math.log(b)) * e_num) if b > 0 else 0.0
            err = 2 * (ph * (e_t1 + e_t2) + abs(dg) * k * R)
            d[g] = (dg, err)
    keep = {k: set() for k in range(2, n + 1)}
    for k in range(2, n + 1):
        for g in full[k]:
            x = d[g]
            if x == math.inf or x[0] >= theta:
                keep[k].add(g)
    for k in range(n, 2, -1):
        for g in keep[k]:
            keep[k - 1].add(g[:-1])
            keep[k - 1].add(g[1:])
    wrong = 0
    borderline = 0
    # The widest bound of a borderline n-gram, relative to THETA.
    widest = 0.0
    examples = []
    for k in range(2, n + 1):
        listed = set(pruned[k])
        for g in keep[k] ^ listed:
            x = d.get(g)
            if x is None:
                wrong += 1
                examples.append(f"{' '.join(g)!r} is not in the full model")
                continue
            if x != math.inf and x[0] != -math.inf and abs(x[0] - theta) <= x[1]:
                borderline += 1
                widest = max(widest, x[1] / theta)
                continue
            wrong += 1
            if len(examples) < 10:
                examples.append(
                    f"{' '.join(g)!r}: D = {x if x == math.inf else x[0]!r}, "
                    + ("kept" if g in listed else "dropped")
                    + " by quern"
                )
    changed = 0
    for k in range(1, n + 1):
        for g, lp in pruned[k].items():
            if abs(lp - full[k].get(g, math.inf)) > 2e-7:
                changed += 1
    dropped = [len(full[k]) - len(pruned[k]) for k in range(1, n + 1)]
    fail = []
    if wrong:
        fail.append(f"{wrong} n-grams kept or dropped against Stolcke's criterion")
    if changed:
        fail.append(f"{changed} kept n-grams changed their probability")
    print(json.dumps({
        "theta": theta,
        "ngrams_full": [len(full[k]) for k in range(1, n + 1)],
        "ngrams_expected": [len(full[1])] + [len(keep[k]) for k in range(2, n + 1)],
        "ngrams_pruned": [len(pruned[k]) for k in range(1, n + 1)],
        "dropped": dropped,
        "borderline": borderline,
        "widest_borderline_bound": widest,
        "not_judged": not_judged,
        "wrong": wrong,
        "changed": changed,
        "examples": examples,
        "failures": fail,
    }))
    sys.exit(1 if fail else 0)


if __name__ == "__main__":
    main()
