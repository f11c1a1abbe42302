#!/usr/bin/env python3
"""Corpus statistics of plain text, computed the plain way, to check quern's
`top`, `ngrams --pattern`, `collocations`, `keyness` and `lines`.

    corpus_check.py top --order K --limit N [--lowercase] FILE...
    corpus_check.py pattern --pattern P --limit N [--lowercase] FILE...
    corpus_check.py lines --pattern P --context K [--lowercase]
                    [--max-line-bytes B] FILE...
    corpus_check.py colloc --node W --window L,R [--lowercase] FILE...
    corpus_check.py keyness --order K --study F... --reference F...
                    [--lowercase]

Each prints one JSON object a line. The text is read line by line and
tokenized by the reading functions of scripts/reference_ngrams.py (the
project's reference counter: the 25 White_Space code points, str.lower,
literal markers as <unk>); everything else is counted here with
collections.Counter over the padded sentences, nothing taken from quern.

The statistics are the published formulas, written out below with their
sources; `colloc` and `keyness` also give G² from SciPy's log-likelihood
test (scipy.stats.power_divergence with lambda_="log-likelihood") as
`g2_scipy`. Standard library only, but for that.
"""

import argparse
import json
import math
import os
import sys
from collections import Counter

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "scripts"))
import reference_ngrams as ref  # noqa: E402

BOS, EOS, UNK = ref.BOS, ref.EOS, ref.UNK


def sentences(files, lowercase, max_line_bytes=ref.DEFAULT_MAX_LINE_BYTES):
    """(file, line number, padded sentence) of every counted line."""
    for name in files:
        with open(name, "rb") as f:
            for lineno, raw in enumerate(ref.raw_lines(f), 1):
                if len(raw) > max_line_bytes:
                    continue
                if raw.endswith(b"\r"):
                    raw = raw[:-1]
                text = raw.decode("utf-8", errors="replace")
                toks = ref.tokenize(text, lowercase)
                if not toks:
                    continue
                sent = [BOS] + [UNK if t in ref.MARKERS else t for t in toks] + [EOS]
                yield name, lineno, sent


def parse_pattern(p, lowercase):
    out = []
    for w in ref.TOKEN_RE.findall(p):
        if w == "*":
            out.append(None)
        elif w == "\\*":
            out.append("*")
        else:
            out.append(w.lower() if lowercase else w)
    return out


def fits(pat, gram):
    for p, w in zip(pat, gram):
        if p is None:
            if w in (BOS, EOS):
                return False
        elif p != w:
            return False
    return True


def grams(sent, k):
    return [tuple(sent[i:i + k]) for i in range(len(sent) - k + 1)]


def ranked(counter, words, limit):
    items = sorted(counter.items(), key=lambda kv: (-kv[1], " ".join(kv[0])))
    for rank, (g, c) in enumerate(items[:limit], 1):
        yield {"rank": rank, "ngram": " ".join(g), "count": c,
               "per_million": c * 1e6 / words}


def cmd_top(a):
    counts, words = Counter(), 0
    for _, _, sent in sentences(a.files, a.lowercase):
        words += len(sent) - 2
        # The n-grams of the text itself: no sentence marker in them.
        counts.update(grams(sent[1:-1], a.order))
    return ranked(counts, words, a.limit)


def cmd_pattern(a):
    pat = parse_pattern(a.pattern, a.lowercase)
    counts, words = Counter(), 0
    for _, _, sent in sentences(a.files, a.lowercase):
        words += len(sent) - 2
        counts.update(g for g in grams(sent, len(pat)) if fits(pat, g))
    return ranked(counts, words, a.limit)


def cmd_lines(a):
    pat = parse_pattern(a.pattern, a.lowercase)
    k, c = len(pat), a.context
    for name, lineno, sent in sentences(a.files, a.lowercase, a.max_line_bytes):
        for i in range(len(sent) - k + 1):
            if fits(pat, sent[i:i + k]):
                yield {"file": name, "line": lineno,
                       "left": " ".join(sent[max(1, i - c):i]),
                       "match": " ".join(sent[i:i + k]),
                       "right": " ".join(sent[i + k:min(len(sent) - 1, i + k + c)])}


def g2_scipy(observed, expected):
    from scipy.stats import power_divergence
    return float(power_divergence(observed, f_exp=expected, lambda_="log-likelihood")[0])


def cmd_colloc(a):
    node = tuple(parse_pattern(a.node, a.lowercase))
    m = len(node)
    left, right = (int(x) for x in a.window.split(","))
    uni, co, n = Counter(), Counter(), 0
    node_count = 0
    for _, _, sent in sentences(a.files, a.lowercase):
        uni.update(sent)
        n += len(sent) - 1  # positions: words and </s>, not <s>
        for i in range(len(sent) - m + 1):
            if tuple(sent[i:i + m]) != node:
                continue
            node_count += 1
            for d in range(1, right + 1):
                j = i + m - 1 + d
                if j < len(sent):
                    co[sent[j]] += 1
            for d in range(1, left + 1):
                if i - d >= 0:
                    co[sent[i - d]] += 1
    span = left + right
    for w, o in co.items():
        if w in (BOS, EOS):
            continue
        fc = uni[w]
        # The 2x2 table: rows window / elsewhere (R1 = S f(n)), columns
        # collocate / other (C1 = f(c)), cells clamped at 0.
        r1 = span * node_count
        cells = [o, r1 - o, fc - o, n - r1 - fc + o]
        obs = [max(x, 0) for x in cells]
        r = [r1, n - r1]
        col = [fc, n - fc]
        exp = [r[0] * col[0] / n, r[0] * col[1] / n, r[1] * col[0] / n, r[1] * col[1] / n]
        e11 = exp[0]
        yield {
            "collocate": w, "observed": o, "expected": e11,
            # Church & Hanks 1990: PMI = log2(O11 / E11).
            "pmi": math.log2(o / e11),
            # Church, Gale, Hanks & Hindle 1991: t = (O11 - E11) / sqrt(O11).
            "t_score": (o - e11) / math.sqrt(o),
            # Dunning 1993: G2 = 2 sum O ln(O/E), 0 ln 0 = 0.
            "g2": 2 * sum(x * math.log(x / e) for x, e in zip(obs, exp) if x > 0),
            # A clamped cell: no table of counts, which SciPy refuses.
            "g2_scipy": g2_scipy(obs, exp) if obs == cells else None,
            # Dice 1945: 2 O11 / (f(n) + f(c)); Rychly 2008: 14 + log2 Dice.
            "dice": 2 * o / (node_count + fc),
            "log_dice": 14 + math.log2(2 * o / (node_count + fc)),
        }


def cmd_keyness(a):
    def count(files):
        c, words = Counter(), 0
        for _, _, sent in sentences(files, a.lowercase):
            words += len(sent) - 2
            c.update(grams(sent[1:-1], a.order))
        return c, words
    s, n1 = count(a.study)
    r, n2 = count(a.reference)
    rows, obs, exp = [], [], []
    for g in sorted(set(s) | set(r)):
        x, y = s[g], r[g]
        # Rayson & Garside 2000: E1 = n1 (a+b) / (n1+n2), E2 = n2 (a+b) / (n1+n2),
        # G2 = 2 (a ln(a/E1) + b ln(b/E2)).
        e1, e2 = n1 * (x + y) / (n1 + n2), n2 * (x + y) / (n1 + n2)
        g2 = 2 * sum(o * math.log(o / e) for o, e in ((x, e1), (y, e2)) if o > 0)
        # Hardie 2014: log2 of the ratio of relative frequencies, 0.5 for a zero.
        lr = math.log2(((x or 0.5) / n1) / ((y or 0.5) / n2))
        # Gabrielatos & Marchi 2012: %DIFF = 100 (NF1 - NF2) / NF2.
        pd = None if y == 0 else 100 * (x / n1 - y / n2) / (y / n2)
        rows.append({"ngram": " ".join(g), "study_count": x, "reference_count": y,
                     "g2": g2, "log_ratio": lr, "percent_diff": pd,
                     "study_words": n1, "reference_words": n2})
        obs.append([x, y])
        exp.append([e1, e2])
    # SciPy's test over every 2-cell table at once (axis 1: one table a row).
    from scipy.stats import power_divergence
    scipy_g2 = power_divergence(obs, f_exp=exp, lambda_="log-likelihood", axis=1)[0]
    for row, g in zip(rows, scipy_g2):
        row["g2_scipy"] = float(g)
        yield row


def main():
    p = argparse.ArgumentParser()
    sub = p.add_subparsers(dest="cmd", required=True)
    for name in ("top", "pattern", "lines", "colloc", "keyness"):
        q = sub.add_parser(name)
        q.add_argument("--lowercase", action="store_true")
        q.add_argument("--order", type=int, default=1)
        q.add_argument("--limit", type=int, default=10**9)
        q.add_argument("--pattern")
        q.add_argument("--context", type=int, default=5)
        q.add_argument("--max-line-bytes", type=int, default=ref.DEFAULT_MAX_LINE_BYTES)
        q.add_argument("--node")
        q.add_argument("--window", default="1,1")
        q.add_argument("--study", nargs="*", default=[])
        q.add_argument("--reference", nargs="*", default=[])
        q.add_argument("files", nargs="*")
    a = p.parse_args()
    run = {"top": cmd_top, "pattern": cmd_pattern, "lines": cmd_lines,
           "colloc": cmd_colloc, "keyness": cmd_keyness}[a.cmd]
    out = sys.stdout
    for obj in run(a):
        out.write(json.dumps(obj, ensure_ascii=False) + "\n")


if __name__ == "__main__":
    main()
