#!/usr/bin/env python3
"""EM for the weights of a linear mixture (Dempster, Laird & Rubin 1977;
Jelinek & Mercer 1980), in Python's standard library only, over the
probability each part gives each held-out prediction.

usage: blend_em_check.py PROBS.json
  PROBS.json: {"probs": [[p_1t ...], [p_2t ...], ...]} (part, prediction).
Prints {"weights": [...], "perplexities": [...] (the start, then each
iteration), "alone": [...] (each part's perplexity; null when infinite)}.

The start is uniform; an iteration sets w_i to the mean over predictions
of w_i p_it / sum_j w_j p_jt. It stops after the first iteration that
lowers the perplexity exp(-mean ln sum_i w_i p_it) by less than 1e-9 of
it, or after 500 iterations (the rule README states). Predictions that
every part gives 0 are left out.
"""

import json
import math
import sys


def main():
    probs = json.load(open(sys.argv[1]))["probs"]
    n = len(probs)
    kept = [t for t in range(len(probs[0])) if any(p[t] > 0 for p in probs)]
    cols = [[p[t] for p in probs] for t in kept]
    tn = len(cols)

    def perplexity(w):
        return math.exp(-sum(math.log(sum(wi * pi for wi, pi in zip(w, c))) for c in cols) / tn)

    w = [1.0 / n] * n
    ppls = [perplexity(w)]
    for _ in range(500):
        post = [0.0] * n
        for c in cols:
            m = sum(wi * pi for wi, pi in zip(w, c))
            for i in range(n):
                post[i] += w[i] * c[i] / m
        w = [x / tn for x in post]
        ppls.append(perplexity(w))
        if ppls[-2] - ppls[-1] < 1e-9 * ppls[-2]:
            break
    alone = []
    for i in range(n):
        if any(c[i] <= 0 for c in cols):
            alone.append(None)
        else:
            alone.append(math.exp(-sum(math.log(c[i]) for c in cols) / tn))
    json.dump({"weights": w, "perplexities": ppls, "alone": alone}, sys.stdout)


main()
