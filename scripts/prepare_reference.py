#!/usr/bin/env python3
"""Independent reference of quern's text preparation (README, "Preparing
the text"), for the tests: Python's unicodedata for normalization and
general categories, and the uniseg package (a UAX #29 implementation from
the Python package index, pinned in scripts/setup) for word and sentence
boundaries.

    python3 scripts/prepare_reference.py [--normalize none|nfc|nfkc]
        [--sentences lines|split|document] [--tokens whitespace|words]
        [--lowercase] [--digits keep|zero] [--jsonl [--text-field NAME]]
        INPUT... > OUT

Each input line is a document (with --jsonl: the text field of each JSON
line; a line that is not a JSON object with a string there is skipped).
Every prepared sentence is written as one output line, its tokens joined
by one space, so that a plain `quern ingest` of OUT counts exactly what an
ingest of the inputs with these settings must count. The steps, in order:
normalize the document's text; cut it into sentences; cut each into
tokens; lowercase each token (str.lower); replace each character of
general category Nd by 0.

Prints the Unicode versions used (unicodedata, uniseg) on standard error.
"""

import argparse
import json
import sys
import unicodedata

try:
    import uniseg
    from uniseg.sentencebreak import SentenceBreak as SB
    from uniseg.sentencebreak import sentence_break
    from uniseg.sentencebreak import sentences as uax29_sentences
    from uniseg.wordbreak import words as uax29_words
except ImportError:  # pragma: no cover
    sys.exit("prepare_reference.py: the uniseg package is missing (run scripts/setup)")

# White_Space (Unicode PropList.txt): the separators of `--tokens whitespace`
# and what makes a word segment blank. Python's str.split() splits on more
# (U+001C..U+001F), so the set is spelled out.
WHITE_SPACE = set(
    "\u0009\u000a\u000b\u000c\u000d\u0020\u0085\u00a0\u1680"
    "\u2000\u2001\u2002\u2003\u2004\u2005\u2006\u2007\u2008\u2009\u200a"
    "\u2028\u2029\u202f\u205f\u3000"
)


def whitespace_tokens(s):
    out, cur = [], []
    for c in s:
        if c in WHITE_SPACE:
            if cur:
                out.append("".join(cur))
                cur = []
        else:
            cur.append(c)
    if cur:
        out.append("".join(cur))
    return out


# UAX #29 rule SB8: ATerm Close* Sp* × ( ¬(OLetter | Upper | Lower | ParaSep
# | SATerm) )* Lower. uniseg 0.10.1 skips only Extend, Format, Sp, Numeric,
# SContinue and Close before the Lower (uniseg/sentencebreak.py), so it
# breaks in "&c. &c" where the rule does not (`&` is Other). The reference
# applies the rule as written on top of uniseg: two of its sentences are
# joined where SB8 forbids the break between them. Extend and Format are
# passed over (SB5).
SB8_STOP = {SB.OLETTER, SB.UPPER, SB.LOWER, SB.SEP, SB.CR, SB.LF, SB.ATERM, SB.STERM}


def sb8_forbids(left, right):
    props = [sentence_break(c) for c in left if sentence_break(c) not in (SB.EXTEND, SB.FORMAT)]
    while props and props[-1] == SB.SP:
        props.pop()
    while props and props[-1] == SB.CLOSE:
        props.pop()
    if not props or props[-1] != SB.ATERM:
        return False
    for c in right:
        p = sentence_break(c)
        if p in (SB.EXTEND, SB.FORMAT):
            continue
        if p in SB8_STOP:
            return p == SB.LOWER
    return False


def sentences_uax29(text):
    out = []
    for s in uax29_sentences(text):
        if out and sb8_forbids(out[-1], s):
            out[-1] += s
        else:
            out.append(s)
    return out


def prepare(text, a):
    if a.normalize != "none":
        text = unicodedata.normalize(a.normalize.upper(), text)
    if a.sentences == "lines":
        sents = [s[:-1] if s.endswith("\r") else s for s in text.split("\n")]
    elif a.sentences == "split":
        sents = sentences_uax29(text)
    else:
        sents = [text]
    out = []
    for s in sents:
        if a.tokens == "whitespace":
            toks = whitespace_tokens(s)
        else:
            toks = [w for w in uax29_words(s) if not all(c in WHITE_SPACE for c in w)]
        if a.lowercase:
            toks = [t.lower() for t in toks]
        if a.digits == "zero":
            toks = ["".join("0" if unicodedata.category(c) == "Nd" else c for c in t) for t in toks]
        out.append(toks)
    return out


def documents(path, a):
    with open(path, "rb") as f:
        data = f.read()
    lines = data.split(b"\n")
    if lines and lines[-1] == b"":
        lines.pop()
    for raw in lines:
        if raw.endswith(b"\r"):
            raw = raw[:-1]
        if not a.jsonl:
            yield raw.decode("utf-8", errors="replace")
            continue
        try:
            v = json.loads(raw)
        except ValueError:
            continue
        if isinstance(v, dict) and isinstance(v.get(a.text_field), str):
            yield v[a.text_field]


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--normalize", choices=["none", "nfc", "nfkc"], default="none")
    p.add_argument("--sentences", choices=["lines", "split", "document"], default="lines")
    p.add_argument("--tokens", choices=["whitespace", "words"], default="whitespace")
    p.add_argument("--lowercase", action="store_true")
    p.add_argument("--digits", choices=["keep", "zero"], default="keep")
    p.add_argument("--jsonl", action="store_true")
    p.add_argument("--text-field", default="text")
    p.add_argument("inputs", nargs="+")
    a = p.parse_args()
    print(
        f"prepare_reference.py: unicodedata {unicodedata.unidata_version}, "
        f"uniseg {getattr(uniseg, '__version__', '?')} (Unicode {getattr(uniseg, 'unidata_version', '?')})",
        file=sys.stderr,
    )
    out = sys.stdout
    for path in a.inputs:
        for doc in documents(path, a):
            for toks in prepare(doc, a):
                out.write(" ".join(toks))
                out.write("\n")


if __name__ == "__main__":
    main()
