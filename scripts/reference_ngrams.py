#!/usr/bin/env python3
"""Independent reference n-gram counter for checking quern.

A deliberately simple, single-pass, in-memory implementation of the counting
contract shared by the project (text to tokens, what is counted), written with
collections.Counter and nothing clever, so that its results can be trusted as
check values for quern's bounded-memory, on-disk pipeline.

    python3 scripts/reference_ngrams.py [--order N] [--lowercase]
        [--max-line-bytes N] [--dump OUT.tsv] [--dump-order K]
        [--contexts OUT.tsv] [--stats OUT.json] [--growth OUT.json] INPUT...
    python3 scripts/reference_ngrams.py --self-test

INPUT is a file, a directory (walked recursively, entries sorted), a .gz file
(read with the gzip module) or `-` for stdin. An OUT of `-` means stdout.

Outputs (every TSV output is sorted by Python's default string order on whole
lines, i.e. code point order, which equals byte order of UTF-8 and so equals
`LC_ALL=C sort` of quern's output):

  --dump      lines `words<TAB>count<TAB>continuation`, continuation `-` at
              the highest order N (like `quern dump`); --dump-order K keeps
              only order K (like `quern dump --order K`).
  --contexts  lines `context<TAB>C<TAB>T<TAB>A<TAB>N1<TAB>N2<TAB>N3+`, the
              empty context with an empty first field (like
              `quern dump --contexts`).
  --stats     one JSON object of the same shape as `quern stats --json`.
  --growth    vocabulary growth in reading order (inputs in the order above,
              lines in file order): {"tokens": T, "first_positions": [...]}
              with, for every type (every token but <s>, </s> included), the
              0-based position of its first occurrence among the tokens read,
              ascending; types(t) is the number of positions below t.

Standard library only.
"""

import argparse
import gzip
import json
import os
import re
import sys
import tempfile
from collections import Counter

BOS = "<s>"
EOS = "</s>"
UNK = "<unk>"
MARKERS = frozenset((BOS, EOS, UNK))
DEFAULT_ORDER = 5
DEFAULT_MAX_LINE_BYTES = 1048576  # 1 MiB

# The 25 code points with the Unicode White_Space property: exactly what Rust's
# char::is_whitespace tests. Python's str.split() / str.isspace() are NOT the
# same: they also treat U+001C..U+001F (the ASCII "information separators") as
# whitespace, which Unicode does not. So tokens are found with an explicit set.
WHITE_SPACE = (
    [chr(c) for c in range(0x0009, 0x000D + 1)]
    + ["\u0020", "\u0085", "\u00a0", "\u1680"]
    + [chr(c) for c in range(0x2000, 0x200A + 1)]
    + ["\u2028", "\u2029", "\u202f", "\u205f", "\u3000"]
)
assert len(WHITE_SPACE) == 25
TOKEN_RE = re.compile("[^%s]+" % "".join(re.escape(c) for c in WHITE_SPACE))


# ---------------------------------------------------------------- input


def walk_inputs(inputs):
    """Yield (name, opener) for every input; directories recursively, sorted."""
    for inp in inputs:
        if inp == "-":
            yield "-", None
        elif os.path.isdir(inp):
            for root, dirs, files in os.walk(inp):
                dirs.sort()
                for name in sorted(files):
                    yield os.path.join(root, name), True
        else:
            yield inp, True


def open_input(name):
    if name == "-":
        return sys.stdin.buffer
    if name.endswith(".gz"):
        return gzip.open(name, "rb")
    if name.endswith(".zst"):
        try:  # Python 3.14+ has zstd in the standard library
            from compression import zstd  # type: ignore
        except ImportError:
            sys.exit("reference_ngrams: %s: .zst input needs Python 3.14+ (compression.zstd)" % name)
        return zstd.open(name, "rb")
    return open(name, "rb")


def raw_lines(f):
    """Lines of a binary stream, split on b"\\n" only, without the b"\\n"."""
    for raw in f:  # binary-mode iteration splits on b"\n" and nothing else
        if raw.endswith(b"\n"):
            raw = raw[:-1]
        yield raw


# ---------------------------------------------------------------- counting


class Model:
    """Raw counts and totals of one run."""

    def __init__(self, order, lowercase):
        self.order = order
        self.lowercase = lowercase
        self.counts = [None] + [Counter() for _ in range(order)]  # counts[k][tuple]
        self.sentences = 0
        self.marker_tokens = 0  # literal input tokens <s>, </s>, <unk> mapped to <unk>
        self.skipped_lines = 0  # lines longer than max_line_bytes
        self.invalid_utf8_lines = 0  # counted lines that held invalid UTF-8
        self.first_seen = {}  # type -> position of its first token (<s> excluded)
        self.tokens_read = 0


def tokenize(text, lowercase):
    toks = TOKEN_RE.findall(text)
    if lowercase:
        # Python's str.lower() stands in for Rust's str::to_lowercase. They
        # agree (full case mapping, final-sigma rule included) except where the
        # two use different Unicode versions, i.e. only for rare, recently
        # assigned characters. Applied per token, as the contract says; a token
        # that lowercases to a marker spelling (e.g. "<S>") then maps to <unk>.
        toks = [t.lower() for t in toks]
    return toks


def count(inputs, order=DEFAULT_ORDER, lowercase=False, max_line_bytes=DEFAULT_MAX_LINE_BYTES,
          report=None):
    if order < 1:
        raise ValueError("order must be >= 1")
    m = Model(order, lowercase)
    counts = m.counts
    intern = {}
    for name, _ in walk_inputs(inputs):
        f = open_input(name)
        try:
            for lineno, raw in enumerate(raw_lines(f), 1):
                # The length limit is taken on the line without its b"\n" but
                # before a trailing b"\r" is dropped.
                if len(raw) > max_line_bytes:
                    m.skipped_lines += 1
                    if report:
                        report("%s:%d: line of %d bytes skipped (over %d)"
                               % (name, lineno, len(raw), max_line_bytes))
                    continue
                if raw.endswith(b"\r"):
                    raw = raw[:-1]
                try:
                    text = raw.decode("utf-8")
                    bad = False
                except UnicodeDecodeError:
                    text = raw.decode("utf-8", errors="replace")
                    bad = True
                toks = tokenize(text, lowercase)
                if not toks:
                    continue  # no tokens: not a sentence
                if bad:
                    m.invalid_utf8_lines += 1
                m.sentences += 1
                sent = [BOS]
                for t in toks:
                    if t in MARKERS:
                        m.marker_tokens += 1
                        t = UNK
                    sent.append(intern.setdefault(t, t))
                sent.append(EOS)
                for t in sent[1:]:
                    if t not in m.first_seen:
                        m.first_seen[t] = m.tokens_read
                    m.tokens_read += 1
                for k in range(1, order + 1):
                    if k == 1:
                        counts[1].update((t,) for t in sent)
                    else:
                        counts[k].update(zip(*[sent[j:] for j in range(k)]))
        finally:
            if f is not sys.stdin.buffer:
                f.close()
    return m


# ---------------------------------------------------------------- derived values


class Derived:
    """Continuation counts, left-type counts, contexts, totals of a Model."""

    def __init__(self, m):
        self.m = m
        n = m.order
        # cont[k][g] = N1+(. g) for g of order k < n: the number of distinct
        # (k+1)-grams v g, one per distinct v. Grams starting with <s> never
        # occur as a suffix (nothing precedes <s>), so they stay at 0.
        self.cont = [None] + [Counter() for _ in range(n)]
        for k in range(2, n + 1):
            ck = self.cont[k - 1]
            for g in m.counts[k]:
                ck[g[1:]] += 1

    def left_type(self, g):
        k = len(g)
        if k == self.m.order or g[0] == BOS:
            return self.m.counts[k][g]
        return self.cont[k][g]

    def continuation(self, g):
        """The dump's third field: N1+(. g), or None at the highest order."""
        if len(g) == self.m.order:
            return None
        return self.cont[len(g)][g]

    def contexts(self):
        """{context tuple: [C, T, A, N1, N2, N3+]} for every context with children."""
        ctx = {}
        for k in range(1, self.m.order + 1):
            for g, c in self.m.counts[k].items():
                if g[-1] == BOS:  # only the unigram <s>; never a child
                    continue
                a = self.left_type(g)
                s = ctx.get(g[:-1])
                if s is None:
                    s = ctx[g[:-1]] = [0, 0, 0, 0, 0, 0]
                s[0] += c
                s[1] += 1
                s[2] += a
                if a == 1:
                    s[3] += 1
                elif a == 2:
                    s[4] += 1
                elif a >= 3:
                    s[5] += 1
        return ctx

    def count_of_counts(self, k):
        raw, adj = Counter(), Counter()
        for g, c in self.m.counts[k].items():
            if g == (BOS,):
                continue
            raw[c] += 1
            adj[self.left_type(g)] += 1
        return sorted(raw.items()), sorted(adj.items())

    def stats(self):
        m = self.m
        uni = m.counts[1]
        types = sum(1 for g in uni if g != (BOS,))
        tokens = sum(c for g, c in uni.items() if g != (BOS,))
        vocabulary = types + (0 if (UNK,) in uni else 1)
        orders = []
        for k in range(1, m.order + 1):
            raw, adj = self.count_of_counts(k)
            orders.append({
                "order": k,
                "ngrams": len(m.counts[k]),
                "count_of_counts": {
                    "raw": [[r, n] for r, n in raw],
                    "left_type": [[r, n] for r, n in adj],
                },
                "discounts": discounts(dict(adj)),
            })
        return {
            "format_version": 3,
            "settings": {"order": m.order, "lowercase": m.lowercase},
            "totals": {
                "sentences": m.sentences,
                "tokens": tokens,
                "vocabulary": vocabulary,
                "types": types,
                "marker_tokens": m.marker_tokens,
                "skipped_lines": m.skipped_lines,
                "invalid_utf8_lines": m.invalid_utf8_lines,
            },
            "orders": orders,
        }


def discounts(n):
    """The Kneser-Ney discounts of one order from its LEFT-TYPE
    count-of-counts n = {r: n_r}, each {"value": number or None}:
    modified Kneser-Ney (Chen & Goodman 1998) with Y = n1/(n1+2 n2),
    D1 = 1 - 2Y n2/n1, D2 = 2 - 3Y n3/n2, D3+ = 3 - 4Y n4/n3, and the single
    discount D = n1/(n1 + 2 n2) (Ney, Essen & Kneser 1994).
    D_r is None where n1, n2, n_r or n_(r+1) is 0 or where it falls outside
    (0, r]; D is None where n1 or n2 is 0."""
    n1, n2 = n.get(1, 0), n.get(2, 0)

    def modified(r):
        if any(n.get(i, 0) == 0 for i in (1, 2, r, r + 1)):
            return None
        y = n1 / (n1 + 2 * n2)
        d = r - (r + 1) * y * n[r + 1] / n[r]
        return d if 0 < d <= r else None

    single = n1 / (n1 + 2 * n2) if n1 and n2 else None
    return {"d1": {"value": modified(1)}, "d2": {"value": modified(2)},
            "d3plus": {"value": modified(3)}, "kn": {"value": single}}


# ---------------------------------------------------------------- output


def growth(m):
    """Tokens read and the sorted first positions of every type."""
    return {"tokens": m.tokens_read, "first_positions": sorted(m.first_seen.values())}


def dump_lines(d, only_order=None):
    out = []
    for k in range(1, d.m.order + 1):
        if only_order is not None and k != only_order:
            continue
        for g, c in d.m.counts[k].items():
            cont = d.continuation(g)
            out.append("%s\t%d\t%s" % (" ".join(g), c, "-" if cont is None else cont))
    out.sort()
    return out


def context_lines(d):
    out = ["\t".join([" ".join(h)] + [str(x) for x in s]) for h, s in d.contexts().items()]
    out.sort()
    return out


def write_text(path, text):
    if path == "-":
        sys.stdout.buffer.write(text.encode("utf-8"))
        sys.stdout.flush()
    else:
        with open(path, "w", encoding="utf-8", newline="\n") as f:
            f.write(text)


def lines_text(lines):
    return "".join(line + "\n" for line in lines)


# ---------------------------------------------------------------- self-test


def _run_bytes(data, name="in.txt", **kw):
    with tempfile.TemporaryDirectory() as tmp:
        p = os.path.join(tmp, name)
        opener = gzip.open if name.endswith(".gz") else open
        with opener(p, "wb") as f:
            f.write(data)
        return Derived(count([p], **kw))


def self_test():
    # Tokenization: exactly the 25 White_Space code points separate tokens.
    assert TOKEN_RE.findall("a\x1cb c\u00a0d\u200be\u3000f\x85g\x00h") == \
        ["a\x1cb", "c", "d\u200be", "f", "g\x00h"]
    python_space = {chr(c) for c in range(0x110000) if chr(c).isspace()}
    assert python_space - set(WHITE_SPACE) == {"\x1c", "\x1d", "\x1e", "\x1f"}
    assert set(WHITE_SPACE) <= python_space

    # ---- Case A, order 3, worked out by hand:
    #   "a b a" -> <s> a b a </s>        "b a" -> <s> b a </s>
    d = _run_bytes(b"a b a\nb a\n", order=3)
    assert d.m.sentences == 2
    assert dump_lines(d) == [
        # words      count continuation (N1+ of left neighbours)
        "</s>\t2\t1",        # a
        "<s>\t2\t0",
        "<s> a\t1\t0",
        "<s> a b\t1\t-",
        "<s> b\t1\t0",
        "<s> b a\t1\t-",
        "a\t3\t2",           # <s>, b
        "a </s>\t2\t1",      # b
        "a b\t1\t1",         # <s>
        "a b a\t1\t-",
        "b\t2\t2",           # a, <s>
        "b a\t2\t2",         # a, <s>
        "b a </s>\t2\t-",
    ], dump_lines(d)
    assert dump_lines(d, only_order=2) == [
        "<s> a\t1\t0", "<s> b\t1\t0", "a </s>\t2\t1", "a b\t1\t1", "b a\t2\t2"]
    assert context_lines(d) == [
        # context  C  T  A  N1 N2 N3+   (children's left-type counts)
        "\t7\t3\t5\t1\t2\t0",          # a:2 b:2 </s>:1
        "<s>\t2\t2\t2\t2\t0\t0",       # <s> a:1 (raw), <s> b:1 (raw)
        "<s> a\t1\t1\t1\t1\t0\t0",     # <s> a b:1
        "<s> b\t1\t1\t1\t1\t0\t0",     # <s> b a:1
        "a\t3\t2\t2\t2\t0\t0",         # a b: c1 a1, a </s>: c2 a1
        "a b\t1\t1\t1\t1\t0\t0",       # a b a:1
        "b\t2\t1\t2\t0\t1\t0",         # b a: c2 a2
        "b a\t2\t1\t2\t0\t1\t0",       # b a </s>:2
    ], context_lines(d)
    # Growth, by hand: tokens a b a </s> b a </s>; first sightings of a, b,
    # </s> at positions 0, 1, 3.
    assert growth(d.m) == {"tokens": 7, "first_positions": [0, 1, 3]}, growth(d.m)
    st = d.stats()
    assert st["format_version"] == 3
    assert st["settings"] == {"order": 3, "lowercase": False}
    assert st["totals"] == {"sentences": 2, "tokens": 7, "vocabulary": 4, "types": 3,
                            "marker_tokens": 0, "skipped_lines": 0,
                            "invalid_utf8_lines": 0}, st["totals"]
    o1, o2, o3 = st["orders"]
    assert (o1["order"], o1["ngrams"]) == (1, 4)
    assert o1["count_of_counts"] == {"raw": [[2, 2], [3, 1]], "left_type": [[1, 1], [2, 2]]}
    assert (o2["order"], o2["ngrams"]) == (2, 5)
    assert o2["count_of_counts"] == {"raw": [[1, 3], [2, 2]], "left_type": [[1, 4], [2, 1]]}
    assert (o3["order"], o3["ngrams"]) == (3, 4)
    assert o3["count_of_counts"] == {"raw": [[1, 3], [2, 1]], "left_type": [[1, 3], [2, 1]]}

    def close(x, y):
        return abs(x - y) < 1e-12

    # n3 = 0 at every order here, so D2 and D3+ are undefined (null); D1 and
    # D need only n1 and n2. Order 1: n1 = 1, n2 = 2: Y = 1/5,
    # D1 = 1 - 2(1/5)(2/1) = 0.2, D = 1/5. Order 2: n1 = 4, n2 = 1: Y = 4/6,
    # D1 = 1 - 2(2/3)(1/4) = 2/3, D = 2/3.
    for o, d1 in ((o1, 0.2), (o2, 2 / 3)):
        ds = o["discounts"]
        assert close(ds["d1"]["value"], d1) and close(ds["kn"]["value"], d1), ds
        assert ds["d2"]["value"] is None and ds["d3plus"]["value"] is None, ds
    json.dumps(st)

    # ---- Case B, order 1 (left-type = raw): all three discounts defined.
    #   x:4 y:3 z:2 w:1 </s>:4 -> n1=1 n2=1 n3=1 n4=2; Y=1/3
    #   D1 = 1-2(1/3) = 1/3; D2 = 2-3(1/3) = 1; D3+ = 3-4(1/3)(2) = 1/3
    d = _run_bytes(b"x x x x\ny y y\nz z\nw", order=1)  # last line has no \n
    assert dump_lines(d) == ["</s>\t4\t-", "<s>\t4\t-", "w\t1\t-", "x\t4\t-", "y\t3\t-", "z\t2\t-"]
    assert context_lines(d) == ["\t14\t5\t14\t1\t1\t3"]
    st = d.stats()
    assert st["totals"]["tokens"] == 14 and st["totals"]["types"] == 5
    assert st["totals"]["vocabulary"] == 6 and st["totals"]["sentences"] == 4
    mk = st["orders"][0]["discounts"]
    assert close(mk["d1"]["value"], 1 / 3) and close(mk["d2"]["value"], 1.0), mk
    assert close(mk["d3plus"]["value"], 1 / 3) and close(mk["kn"]["value"], 1 / 3), mk
    assert st["orders"][0]["ngrams"] == 6
    assert st["orders"][0]["count_of_counts"]["raw"] == [[1, 1], [2, 1], [3, 1], [4, 2]]
    def values(n):
        return [v["value"] for v in discounts(n).values()]
    # n2 = 0: nothing is defined
    assert values({1: 5, 3: 2}) == [None] * 4
    assert values({}) == [None] * 4
    # n4 = 0: only D3+ is undefined. n1=2 n2=1 n3=1: Y = 1/2,
    # D1 = 1-2(1/2)(1/2) = 1/2, D2 = 2-3(1/2)(1/1) = 1/2, D = 1/2.
    assert values({1: 2, 2: 1, 3: 1}) == [0.5, 0.5, None, 0.5]
    # n1=2 n2=1 n3=1 n4=1: D3+ = 3-4(1/2)(1/1) = 1
    assert close(values({1: 2, 2: 1, 3: 1, 4: 1})[2], 1.0)
    # n1=2050 n2=243 n3=95 n4=96 (the demo corpus, order 2): Y = 2050/2536,
    # D3+ = 3 - 4Y(96/95) = -0.267475..., outside (0, 3]: None.
    assert values({1: 2050, 2: 243, 3: 95, 4: 96})[2] is None

    # ---- Case C, order 1: lines, markers, whitespace, bad UTF-8, long lines.
    data = (b"<s> </s> <unk> q\r\n"     # 3 markers -> <unk>; \r dropped
            b"\r\n"                      # empty: not a sentence, not "skipped"
            b"  \t \x0b\x0c\n"           # whitespace only: not a sentence
            b"p\x1cq r\xc2\xa0s\n"       # U+001C is not whitespace, U+00A0 is
            b"bad\xff byte\n"            # invalid UTF-8 -> U+FFFD
            b"n\x00ul\n"                 # NUL is part of a token
            b"u\xe2\x80\x8bv\n"          # U+200B is not White_Space
            b"e\xe3\x80\x80f\xc2\x85g\n"  # U+3000 and U+0085 are
            b"toolong toolong toolong\n"  # 23 bytes > 20: skipped
            b"exactly-twenty-bytes\n"    # 20 bytes: kept
            b"\xff\xfe too long, too long\n"  # 21: skipped before decoding
            b"last")                     # no final newline
    d = _run_bytes(data, order=1, max_line_bytes=20)
    uni = d.m.counts[1]
    assert uni == Counter({
        ("<s>",): 8, ("</s>",): 8, ("<unk>",): 3, ("q",): 1, ("p\x1cq",): 1, ("r",): 1,
        ("s",): 1, ("bad\ufffd",): 1, ("byte",): 1, ("n\x00ul",): 1, ("u\u200bv",): 1,
        ("e",): 1, ("f",): 1, ("g",): 1, ("exactly-twenty-bytes",): 1, ("last",): 1}), uni
    st = d.stats()
    assert st["totals"] == {"sentences": 8, "tokens": 24, "vocabulary": 15, "types": 15,
                            "marker_tokens": 3, "skipped_lines": 2,
                            "invalid_utf8_lines": 1}, st["totals"]

    # ---- Case D: --lowercase, per token (Python str.lower()).
    d = _run_bytes("The the THE\nÜnïcode ÜNÏCODE ΟΔΟΣ\n<S> <UNK>\n".encode(), order=1,
                   lowercase=True)
    uni = d.m.counts[1]
    assert uni[("the",)] == 3 and uni[("ünïcode",)] == 2 and uni[("οδος",)] == 1, uni
    assert uni[("<unk>",)] == 2 and d.m.marker_tokens == 2
    assert d.stats()["settings"] == {"order": 1, "lowercase": True}

    # ---- Case E: directories (recursive, sorted), .gz, and several files
    # give the same counts as one file holding the same lines.
    with tempfile.TemporaryDirectory() as tmp:
        os.makedirs(os.path.join(tmp, "sub", "deeper"))
        with open(os.path.join(tmp, "one.txt"), "wb") as f:
            f.write(b"a b a\n")
        with gzip.open(os.path.join(tmp, "sub", "deeper", "two.txt.gz"), "wb") as f:
            f.write(b"b a\n")
        d2 = Derived(count([tmp], order=3))
        one = os.path.join(tmp, "one.txt")
        d3 = Derived(count([one, one], order=3))
    da = _run_bytes(b"a b a\nb a\n", order=3)
    assert dump_lines(d2) == dump_lines(da) and context_lines(d2) == context_lines(da)
    assert d2.stats() == da.stats()
    assert d3.m.counts[3][("a", "b", "a")] == 2
    dg = _run_bytes(b"a b a\nb a\n", name="x.gz", order=3)
    assert dump_lines(dg) == dump_lines(da)

    # ---- Case F: empty input.
    d = _run_bytes(b"", order=2)
    st = d.stats()
    assert st["totals"]["sentences"] == 0 and st["totals"]["vocabulary"] == 1
    assert [o["ngrams"] for o in st["orders"]] == [0, 0]
    assert all(v["value"] is None for o in st["orders"] for v in o["discounts"].values())
    assert dump_lines(d) == [] and context_lines(d) == []

    print("reference_ngrams self-test: 6 passed, 0 failed")
    return 0


# ---------------------------------------------------------------- main


def main(argv=None):
    ap = argparse.ArgumentParser(
        description="Independent in-memory reference n-gram counter for checking quern.")
    ap.add_argument("inputs", nargs="*", metavar="INPUT",
                    help="file, directory (recursive, sorted), .gz file, or - for stdin")
    ap.add_argument("--order", type=int, default=DEFAULT_ORDER, help="highest order N (default 5)")
    ap.add_argument("--lowercase", action="store_true", help="lowercase every token")
    ap.add_argument("--max-line-bytes", type=int, default=DEFAULT_MAX_LINE_BYTES,
                    help="skip longer lines (default 1048576)")
    ap.add_argument("--dump", metavar="OUT.tsv", help="write n-grams: words, count, continuation")
    ap.add_argument("--dump-order", type=int, metavar="K", help="with --dump: only order K")
    ap.add_argument("--contexts", metavar="OUT.tsv", help="write context statistics")
    ap.add_argument("--stats", metavar="OUT.json", help="write totals and count-of-counts as JSON")
    ap.add_argument("--growth", metavar="OUT.json",
                    help="write the first position of every type in reading order, as JSON")
    ap.add_argument("--quiet", action="store_true", help="do not report skipped lines")
    ap.add_argument("--self-test", action="store_true", help="run the built-in hand-checked cases")
    args = ap.parse_args(argv)

    if args.self_test:
        return self_test()
    if not args.inputs:
        ap.error("no INPUT given")
    if args.order < 1:
        ap.error("--order must be at least 1")
    if args.dump_order is not None and not 1 <= args.dump_order <= args.order:
        ap.error("--dump-order must be between 1 and --order")

    def report(msg):
        if not args.quiet:
            print("reference_ngrams: " + msg, file=sys.stderr)

    m = count(args.inputs, order=args.order, lowercase=args.lowercase,
              max_line_bytes=args.max_line_bytes, report=report)
    d = Derived(m)
    if args.dump:
        write_text(args.dump, lines_text(dump_lines(d, args.dump_order)))
    if args.contexts:
        write_text(args.contexts, lines_text(context_lines(d)))
    if args.growth:
        write_text(args.growth, json.dumps(growth(m)) + "\n")
    st = d.stats() if (args.stats or not (args.dump or args.contexts or args.growth)) else None
    if args.stats:
        write_text(args.stats, json.dumps(st, ensure_ascii=False) + "\n")
    if st is not None and not args.stats:
        t = st["totals"]
        print("sentences %d, tokens %d, vocabulary %d, n-grams per order %s"
              % (t["sentences"], t["tokens"], t["vocabulary"],
                 [o["ngrams"] for o in st["orders"]]), file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
