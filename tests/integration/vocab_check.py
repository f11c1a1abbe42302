#!/usr/bin/env python3
"""An independent count for `quern vocab`, for quern's tests.

Python standard library only, written from the definitions in
src/vocab.rs. Usage:

    vocab_check.py SIZES TOP HELDOUT TRAIN...

Tokens are the whitespace-separated runs of each line (str.split), as
quern's tokenizer splits on Unicode White_Space; a token spelled <s>,
</s> or <unk> counts as <unk>. The words are ranked by count, most
frequent first, ties by their UTF-8 bytes; training tokens are all tokens
(<unk> included, never covered); held-out tokens outside a size are those
whose word is not among its most frequent words. Prints one JSON object:
the words, training and held-out tokens, per size the words taken, the
covered training tokens and the held-out tokens outside, and the top TOP
words.
"""

import collections
import json
import sys

MARKERS = {"<s>", "</s>", "<unk>"}


def tokens(path):
    with open(path, encoding="utf-8", errors="replace", newline="\n") as f:
        for line in f:
            for t in line.split():
                yield "<unk>" if t in MARKERS else t


def main():
    sizes = [int(s) for s in sys.argv[1].split(",")]
    top = int(sys.argv[2])
    heldout = sys.argv[3]
    counts = collections.Counter()
    for p in sys.argv[4:]:
        counts.update(tokens(p))
    total = sum(counts.values())
    ranked = sorted(
        (w for w in counts if w != "<unk>"),
        key=lambda w: (-counts[w], w.encode("utf-8")),
    )
    rank = {w: i for i, w in enumerate(ranked)}
    held = [rank.get(t, len(ranked) + 1) if t != "<unk>" else len(ranked) + 1
            for t in tokens(heldout)]
    rows = []
    for s in sizes:
        words = min(s, len(ranked))
        rows.append({
            "size": s,
            "words": words,
            "covered_tokens": sum(counts[w] for w in ranked[:words]),
            "heldout_outside": sum(1 for r in held if r >= words),
        })
    print(json.dumps({
        "words": len(ranked),
        "training_tokens": total,
        "heldout_tokens": len(held),
        "sizes": rows,
        "top": ranked[:top],
    }))


if __name__ == "__main__":
    main()
