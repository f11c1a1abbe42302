#!/usr/bin/env python3
"""Counts of a text as count tables, for quern's `ingest --counts` tests.

Python standard library only (collections.Counter, random). Usage:

    counts_check.py ORDER TEXT TABLE_A TABLE_B EXPECTED

Reads TEXT as quern counts plain text by default: a line is a sentence,
its tokens are the runs of characters outside Unicode White_Space, a token
spelled <s>, </s> or <unk> is <unk>, and a sentence with tokens is padded
with <s> and </s>. Counts every k-gram, k = 1..ORDER, with
collections.Counter and writes them as a count table cut in two: each
n-gram's count is split into parts (duplicated lines, which must add up),
some in TABLE_A and some in TABLE_B, the lines of each file shuffled; TABLE_A
starts with the header `quern dump` writes, TABLE_B has none. EXPECTED gets
what `quern dump --no-header` must print for a store of those counts:
`ngram<TAB>count<TAB>continuation`, the continuation of an n-gram g below
ORDER being the number of distinct words v such that v g was counted, `-`
at ORDER; sorted by code point.
"""

import collections
import random
import re
import sys

MARKERS = {"<s>", "</s>", "<unk>"}
# The 25 code points with the Unicode White_Space property (str.split also
# splits at U+001C..U+001F, which are not White_Space).
WHITE_SPACE = (
    [chr(c) for c in range(0x09, 0x0D + 1)]
    + ["\u0020", "\u0085", "\u00a0", "\u1680"]
    + [chr(c) for c in range(0x2000, 0x200A + 1)]
    + ["\u2028", "\u2029", "\u202f", "\u205f", "\u3000"]
)
TOKEN = re.compile("[^%s]+" % "".join(re.escape(c) for c in WHITE_SPACE))


def sentences(path):
    with open(path, "rb") as f:
        data = f.read()
    for raw in data.split(b"\n"):
        if raw.endswith(b"\r"):
            raw = raw[:-1]
        toks = TOKEN.findall(raw.decode("utf-8", errors="replace"))
        if toks:
            yield ["<s>"] + ["<unk>" if t in MARKERS else t for t in toks] + ["</s>"]


def main():
    order = int(sys.argv[1])
    text, table_a, table_b, expected = sys.argv[2:6]
    counts = collections.Counter()
    for s in sentences(text):
        for i in range(len(s)):
            for k in range(1, order + 1):
                if i + k <= len(s):
                    counts[tuple(s[i : i + k])] += 1
    # Distinct left extensions of each n-gram below the top order.
    left = collections.Counter(g[1:] for g in counts if len(g) >= 2)

    rng = random.Random(30)
    a, b = ["ngram\tcount\tcontinuation"], []
    for g, c in counts.items():
        words = " ".join(g)
        # A count of 2 or more is cut into two parts, the second of 3 or
        # more into 1 and the rest; each part goes to either file at
        # random (two in one file are duplicates within it), with dump's
        # third column on about half the lines.
        parts = [c] if c == 1 else [c // 2, c - c // 2]
        if len(parts) == 2 and parts[1] >= 3:
            parts = [parts[0], 1, parts[1] - 1]
        for p in parts:
            line = "%s\t%d" % (words, p) if rng.random() < 0.5 else "%s\t%d\t-" % (words, p)
            (a if rng.random() < 0.5 else b).append(line)
    body_a = a[1:]
    rng.shuffle(body_a)
    rng.shuffle(b)
    with open(table_a, "w", encoding="utf-8", newline="\n") as f:
        f.write("\n".join([a[0]] + body_a) + "\n")
    with open(table_b, "w", encoding="utf-8", newline="\n") as f:
        f.write("\n".join(b) + "\n")

    lines = []
    for g, c in counts.items():
        cont = "-" if len(g) == order else str(left[g])
        lines.append("%s\t%d\t%s" % (" ".join(g), c, cont))
    lines.sort()
    with open(expected, "w", encoding="utf-8", newline="\n") as f:
        f.write("".join(line + "\n" for line in lines))


if __name__ == "__main__":
    main()
