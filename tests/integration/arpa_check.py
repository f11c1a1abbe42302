#!/usr/bin/env python3
"""An independent reader of ARPA back-off files, for quern's tests.

Written from the format's definition only (Python standard library, no
code shared with quern). Usage:

    arpa_check.py MODEL.arpa[.gz] [QUERIES]

It reads the file and checks:
  * the header's count of every order equals the n-grams listed;
  * closure: every listed n-gram's context (all words but the last) and
    suffix (all words but the first) are listed, as decoders expect;
  * normalisation: the unigrams but <s> sum to 1, and for every listed
    n-gram h below the top order, as a context,
        sum_{w: h w listed} P(h w) + b(h) * (1 - sum_{w: h w listed} P(w | h'))
    equals 1, where P(w | h') is this reader's own back-off probability.
    Together with the unigrams this is, by induction over the order, the
    statement that P(. | h) sums to 1 over the vocabulary for every h.
If QUERIES is given (one n-gram a line: the context and the word), it
prints log10 P(word | context) for each, by the back-off rule: the longest
listed n-gram that ends the query, plus the back-off weights of the
longer contexts that are listed (words not listed count as <unk>).
Prints one JSON object with what it found on the last line; exits 1 when
a check fails.
"""

import gzip
import json
import os
import sys

NEG = -99.0  # the file's spelling of log10 0
TOL = float(sys.argv[3]) if len(sys.argv) > 3 else 2e-6
# Relative precision of one value in the file: 32-bit floats (2^-24 each,
# a product of up to N of them) and 7-decimal log10 text (5e-8 in log10,
# 1.2e-7 relative). A context's sum is checked within TOL plus this times
# the magnitude of its terms, sum of q + b * (sum of lower probabilities):
# where b is large (the children take almost all of h''s mass) the sum
# is ill-conditioned and the bound says so.
REL = float(os.environ.get("ARPA_CHECK_REL", "4e-7"))
# Contexts (one a line, words separated by spaces) not to check for sums:
# those the model marks as backing off past h' (Katz), which the format
# cannot express.
SKIP = set()
if os.environ.get("ARPA_SKIP_CONTEXTS"):
    with open(os.environ["ARPA_SKIP_CONTEXTS"], encoding="utf-8") as f:
        SKIP = {tuple(l.rstrip("\n").split(" ")) for l in f if l.strip()}


def read(path):
    opener = gzip.open if path.endswith(".gz") else open
    counts = {}
    prob = {}  # order -> {tuple: log10 p}
    bow = {}  # tuple -> log10 b
    order = 0
    grams = None  # prob[order]
    in_data = False
    with opener(path, "rt", encoding="utf-8") as f:
        for line in f:
            line = line.rstrip("\n")
            if not in_data:
                in_data = line == "\\data\\"
                continue
            if not line:
                continue
            if line[0] == "\\" or line.startswith("ngram "):
                if line == "\\data\\":
                    continue
                if line.startswith("ngram "):
                    k, c = line[len("ngram "):].split("=")
                    counts[int(k)] = int(c)
                    continue
                if line.startswith("\\") and line.endswith("-grams:"):
                    order = int(line[1:-len("-grams:")])
                    prob[order] = grams = {}
                    continue
                if line == "\\end\\":
                    break
            # An n-gram line: log10 p, the words, perhaps log10 b.
            parts = line.split("\t")
            words = tuple(parts[1].split(" "))
            if len(words) != order:
                raise SystemExit(f"line {line!r}: {len(words)} words in the {order}-grams")
            grams[words] = float(parts[0])
            if len(parts) > 2:
                bow[words] = float(parts[2])
    return counts, prob, bow


def p10(x):
    return 0.0 if x <= NEG else 10.0 ** x


def main():
    counts, prob, bow = read(sys.argv[1])
    n = max(prob)
    vocab = {w[0] for w in prob[1]}
    fail = []
    for k in range(1, n + 1):
        if counts.get(k) != len(prob[k]):
            fail.append(f"order {k}: header says {counts.get(k)}, {len(prob[k])} listed")
    # Closure under prefixes and suffixes.
    closure_bad = 0
    for k in range(2, n + 1):
        for g in prob[k]:
            if g[:-1] not in prob[k - 1] or g[1:] not in prob[k - 1]:
                closure_bad += 1
    if closure_bad:
        fail.append(f"{closure_bad} n-grams whose context or suffix is not listed")

    def logp(ctx, w):
        """log10 P(w | ctx) by the back-off rule (ctx a tuple)."""
        ctx = tuple(c if c in vocab else "<unk>" for c in ctx)[-(n - 1):] if n > 1 else ()
        if w not in vocab or w == "<s>":
            w = "<unk>"
        acc = 0.0
        for s in range(0, len(ctx) + 1):
            g = ctx[s:] + (w,)
            lp = prob[len(g)].get(g)
            if lp is not None:
                if lp <= NEG:
                    return NEG
                return lp + acc
            b = bow.get(ctx[s:])
            if b is not None:
                if b <= NEG:
                    return NEG
                acc += b
        raise SystemExit(f"no unigram for {w!r}")

    uni = sum(p10(lp) for (w,), lp in prob[1].items() if w != "<s>")
    worst = abs(uni - 1.0)
    if abs(uni - 1.0) > TOL:
        fail.append(f"the unigrams sum to {uni!r}")
    kids = {}  # h -> [(w, log10 P(w | h))] for every listed h w
    for k in range(2, n + 1):
        for g, lp in prob[k].items():
            kids.setdefault(g[:-1], []).append((g[-1], lp))

    def lower_p(h1, ok, w, shorter):
        """P(w | h1) for a word listed after h (so h1 w should be listed):
        read from the file where logp would take it from the first step
        (every word of h1 w in V, w not <s>, h1 w listed), else logp."""
        if ok and w in vocab and w != "<s>":
            lp = shorter.get(h1 + (w,))
            if lp is not None:
                return p10(lp)
        return p10(logp(h1, w))

    contexts = 0
    unnormalised = 0
    for k in range(1, n):
        for h in prob[k]:
            if h in SKIP:
                continue
            ws = kids.get(h, [])
            seen = sum(p10(lp) for _, lp in ws)
            h1 = h[1:]
            ok = all(x in vocab for x in h1)
            lower = sum(lower_p(h1, ok, w, prob[k]) for w, _ in ws)
            b = p10(bow.get(h, 0.0))
            total = seen + b * (1.0 - lower)
            contexts += 1
            err = abs(total - 1.0)
            worst = max(worst, err)
            if err > TOL + REL * (seen + b * lower):
                unnormalised += 1
                if len(fail) < 20:
                    fail.append(f"context {' '.join(h)!r} sums to {total!r}")
    answers = []
    if len(sys.argv) > 2 and sys.argv[2] != "-":
        with open(sys.argv[2], encoding="utf-8") as f:
            for line in f:
                ws = line.rstrip("\n").split(" ")
                answers.append(logp(tuple(ws[:-1]), ws[-1]))
    for a in answers:
        print(repr(a))
    print(json.dumps({
        "orders": n,
        "counts": [len(prob[k]) for k in range(1, n + 1)],
        "contexts_checked": contexts,
        "largest_error": worst,
        "closure_violations": closure_bad,
        "unnormalised": unnormalised,
        "skipped_contexts": len(SKIP),
        "failures": fail,
    }))
    sys.exit(1 if fail else 0)


if __name__ == "__main__":
    main()
