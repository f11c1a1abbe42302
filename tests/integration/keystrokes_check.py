#!/usr/bin/env python3
"""An independent implementation of the keystroke-savings simulation that
README ("Keystroke savings") defines, in Python's standard library only.

It does not call `quern keystrokes`. It tokenizes the held-out text itself
(str.split, the sentence a line), writes every completion query the
definition can ask (each word, each number of characters typed before it,
from none to all but one) as lines of batch `quern next` (the context,
a tab, the prefix), reads the answers (`--json`, one object a line), and
plays the definition over them. V (for the count of words outside it) is
read from `quern dump --order 1` of the store.

usage: keystrokes_check.py QUERN STORE_DIR TOPS HELDOUT [SOURCE_ARGS...]
  TOPS: comma-separated K; SOURCE_ARGS: how `quern next` reads the model,
  e.g. --store DIR --method mkn, or --model FILE.
Prints one JSON object: words, outside_vocabulary, keystrokes_without and
results (top, savings, before_first_char, chars_per_word, keystrokes).

With KEYSTROKES_LOWERCASE=1 in the environment (a store counted with
--lowercase) the held-out tokens are lowercased by str.lower() first.
Lengths are Python's len(), in Unicode code points (scalar values), and
the prefixes typed are slices of code points. A token spelled like a
marker counts as <unk>: it is never chosen, whatever `next` shows.
"""

import json
import os
import subprocess
import sys

MARKERS = ("<s>", "</s>", "<unk>")


def unk(w):
    """A context word as a query writes it: a marker spelling is <unk>."""
    return "<unk>" if w in MARKERS else w


def main():
    quern, store, tops, heldout = sys.argv[1:5]
    source = sys.argv[5:]
    tops = [int(t) for t in tops.split(",")]
    kmax = max(tops)

    # V: the unigrams of the store (dump prints "ngram count continuation").
    dump = subprocess.run(
        [quern, "dump", "--store", store, "--order", "1", "--no-header"],
        check=True, capture_output=True, text=True).stdout
    vocab = {line.split("\t")[0] for line in dump.splitlines() if line}

    with open(heldout, encoding="utf-8") as f:
        text = f.read()
    # str.split and Rust's split_whitespace differ only on these.
    assert not any(c in text for c in "\x1c\x1d\x1e\x1f\x85"), "unusual whitespace"
    lower = os.environ.get("KEYSTROKES_LOWERCASE") == "1"
    sentences = [[w.lower() if lower else w for w in line.split()] for line in text.split("\n")]
    sentences = [s for s in sentences if s]

    queries = []
    for s in sentences:
        for i, w in enumerate(s):
            context = " ".join(["<s>"] + [unk(x) for x in s[:i]])
            for typed in range(len(w)):
                queries.append(context + "\t" + w[:typed])
    out = subprocess.run(
        [quern, "next", "--json", "--top", str(kmax)] + source,
        input="\n".join(queries) + "\n",
        check=True, capture_output=True, text=True).stdout
    answers = [json.loads(line) for line in out.splitlines()]
    assert len(answers) == len(queries), (len(answers), len(queries))
    shown = {}
    for q, a in zip(queries, answers):
        assert a["prefix"] == q.split("\t")[1]
        shown[q] = [x["word"] for x in a["words"]]

    words = outside = without = 0
    with_ = [0] * len(tops)
    before = [0] * len(tops)
    typed_chars = [0] * len(tops)
    for s in sentences:
        for i, w in enumerate(s):
            words += 1
            without += len(w) + 1
            known = w in vocab and w not in MARKERS
            if not known:
                outside += 1
            context = " ".join(["<s>"] + [unk(x) for x in s[:i]])
            for t, k in enumerate(tops):
                cost = len(w) + 1
                chars = len(w)
                for typed in range(len(w)):
                    if known and w in shown[context + "\t" + w[:typed]][:k]:
                        cost = typed + 1
                        chars = typed
                        break
                with_[t] += cost
                typed_chars[t] += chars
                if chars == 0 and cost == 1:
                    before[t] += 1
    results = [{
        "top": k,
        "savings": 1 - with_[t] / without,
        "before_first_char": before[t] / words,
        "chars_per_word": typed_chars[t] / words,
        "keystrokes": with_[t],
    } for t, k in enumerate(tops)]
    print(json.dumps({"words": words, "outside_vocabulary": outside,
                      "keystrokes_without": without, "results": results}))


if __name__ == "__main__":
    main()
