#!/usr/bin/env python3
"""Counts and document counts of every n-gram, computed the plain way, to
check `quern ingest --document-counts`.

    documents_check.py --order N [--jsonl] FILE...

A document is one input line, or with --jsonl the "text" field of one JSON
line; its sentences are its text's lines (split on "\\n", a "\\r" before it
dropped). Each sentence is tokenized by scripts/reference_ngrams.py (the
project's reference counter: the 25 White_Space code points, literal
markers as <unk>) and padded with <s> and </s>. Prints one line per n-gram
of orders 1..N, `ngram<TAB>count<TAB>documents`, sorted by the n-gram's
text: the count is the number of occurrences (collections.Counter), the
documents the number of documents whose set of n-grams holds it. The last
line is `#documents<TAB>D`: the documents with at least one sentence.
Standard library only; nothing is taken from quern.
"""

import argparse
import json
import os
import sys
from collections import Counter

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "scripts"))
import reference_ngrams as ref  # noqa: E402


def documents(files, jsonl):
    """The text of every document, in input order."""
    for name in files:
        with open(name, "rb") as f:
            for raw in ref.raw_lines(f):
                if jsonl:
                    yield json.loads(raw)["text"]
                else:
                    yield raw.decode("utf-8", errors="replace")


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--order", type=int, required=True)
    p.add_argument("--jsonl", action="store_true")
    p.add_argument("files", nargs="+")
    a = p.parse_args()
    counts = Counter()
    docs = Counter()
    with_sentences = 0
    for text in documents(a.files, a.jsonl):
        seen = set()
        for line in text.split("\n"):
            if line.endswith("\r"):
                line = line[:-1]
            toks = ref.tokenize(line, False)
            if not toks:
                continue
            sent = [ref.BOS] + [ref.UNK if t in ref.MARKERS else t for t in toks] + [ref.EOS]
            for k in range(1, a.order + 1):
                for i in range(len(sent) - k + 1):
                    g = " ".join(sent[i:i + k])
                    counts[g] += 1
                    seen.add(g)
        if seen:
            with_sentences += 1
        docs.update(seen)
    out = sys.stdout
    for g in sorted(counts):
        out.write(f"{g}\t{counts[g]}\t{docs[g]}\n")
    out.write(f"#documents\t{with_sentences}\n")


if __name__ == "__main__":
    main()
