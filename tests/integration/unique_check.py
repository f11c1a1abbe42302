#!/usr/bin/env python3
"""The first occurrences of each sentence or document, computed the plain
way with a Python set, to check `quern ingest --unique`.

    unique_check.py --unit lines|documents [--jsonl] [--lowercase] OUT INPUT...

The inputs are read in the order given, lines in order, by the reading
functions of scripts/reference_ngrams.py (the project's reference counter:
lines split at b"\\n", one trailing b"\\r" dropped, UTF-8 decoded with
replacement, tokens between the 25 White_Space code points, str.lower per
token, literal markers as <unk>). Under --jsonl a line is a JSON object
whose "text" string is the document (other lines are skipped); else the
line is the document. A document's sentences are its pieces between "\\n",
each without one trailing "\\r"; a sentence without tokens is none.

lines: a sentence is a unit, known by its tuple of tokens. documents: a
document is a unit, known by the tuple of its sentences' token tuples; a
document without sentences is none. A unit whose key is in the set of keys
seen is dropped; else its key is added and it is kept.

OUT gets the kept sentences, one a line, their tokens as read (not
lowercased) joined by one space, in input order. Standard output gets one
JSON object: {"units": kept and dropped, "duplicates": dropped,
"duplicate_tokens": tokens of the dropped sentences, each with one </s>}.
Standard library only, but for scripts/reference_ngrams.py.
"""

import argparse
import json
import os
import sys

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "scripts"))
import reference_ngrams as ref  # noqa: E402


def documents(files, jsonl):
    """The text of every document, in input order."""
    for name in files:
        with open(name, "rb") as f:
            for raw in ref.raw_lines(f):
                if len(raw) > ref.DEFAULT_MAX_LINE_BYTES:
                    continue
                if raw.endswith(b"\r"):
                    raw = raw[:-1]
                if not jsonl:
                    yield raw.decode("utf-8", errors="replace")
                    continue
                try:
                    doc = json.loads(raw)
                except ValueError:
                    continue
                if isinstance(doc, dict) and isinstance(doc.get("text"), str):
                    yield doc["text"]


def sentences(text, lowercase):
    """(tokens as read, key) of every sentence with tokens."""
    out = []
    for piece in text.split("\n"):
        if piece.endswith("\r"):
            piece = piece[:-1]
        shown = ref.tokenize(piece, False)
        if not shown:
            continue
        key = tuple(ref.UNK if t in ref.MARKERS else t for t in ref.tokenize(piece, lowercase))
        out.append((shown, key))
    return out


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--unit", choices=["lines", "documents"], required=True)
    ap.add_argument("--jsonl", action="store_true")
    ap.add_argument("--lowercase", action="store_true")
    ap.add_argument("out")
    ap.add_argument("inputs", nargs="+")
    a = ap.parse_args()
    seen = set()
    units = duplicates = duplicate_tokens = 0
    kept = []
    for text in documents(a.inputs, a.jsonl):
        sents = sentences(text, a.lowercase)
        if a.unit == "documents":
            if not sents:
                continue
            groups = [(tuple(k for _, k in sents), sents)]
        else:
            groups = [(k, [(s, k)]) for s, k in sents]
        for key, part in groups:
            units += 1
            if key in seen:
                duplicates += 1
                duplicate_tokens += sum(len(k) + 1 for _, k in part)
            else:
                seen.add(key)
                kept.extend(" ".join(s) for s, _ in part)
    with open(a.out, "w", encoding="utf-8", newline="\n") as f:
        for line in kept:
            f.write(line + "\n")
    json.dump(
        {"units": units, "duplicates": duplicates, "duplicate_tokens": duplicate_tokens},
        sys.stdout,
    )
    print()


if __name__ == "__main__":
    main()
