#!/usr/bin/env python3
"""An independent reader of quern model files, written from the
specification in DEVELOPERS.md ("The model file, byte by byte") alone,
with Python's standard library only.

    model_reader.py MODEL < queries > answers

Each query line is words separated by spaces (the context, then the
predicted word), already prepared as the model's text preparation says;
each answer is one JSON object a line: {"words", "probability" (or
"score" for a model of scores), "log10" (null for 0), "matched"}, as
`quern prob --json` writes them. At the end, one JSON object on standard
error counts the queries and those whose back-off walk took a skip of more
than one level. The reader refuses a file whose frame, version or section
lengths do not match the specification.
"""

import json
import math
import struct
import sys

MAGIC = b"qrnmodl\x1a"
END_MAGIC = b"\x1aldomnrq"
VERSION = 2

META, IDS, WORD_OFFSETS, WORD_TEXT, RANKING = 1, 2, 3, 4, 5
WORDS, PROBS, WEIGHTS, CHILDREN, SKIPS = 16, 17, 18, 19, 20
PROB_CODES, PROB_BINS, WEIGHT_CODES, WEIGHT_BINS = 21, 22, 23, 24


class Bad(Exception):
    pass


def u64(b, at):
    return struct.unpack_from("<Q", b, at)[0]


class Packed:
    """n values of width w bit-packed into u64 words (spec: Bit packing)."""

    def __init__(self, b, start, length, n, width, what):
        need = 8 * (-(-n * width // 64) + 1)
        if length != need:
            raise Bad(f"{what}: {length} bytes, {need} expected")
        self.b, self.start, self.width = b, start, width
        self.mask = (1 << width) - 1

    def get(self, i):
        bit = i * self.width
        w, sh = bit // 64, bit % 64
        two = u64(self.b, self.start + 8 * w) | (u64(self.b, self.start + 8 * w + 8) << 64)
        return (two >> sh) & self.mask


class EliasFano:
    """An Elias-Fano coded increasing sequence (spec: Elias-Fano)."""

    def __init__(self, b, start, length, what):
        if length < 32:
            raise Bad(f"{what}: shorter than its header")
        m, l, uw, ns = struct.unpack_from("<QQQQ", b, start)
        if ns != -(-m // 64):
            raise Bad(f"{what}: {ns} samples for {m} values")
        low_bytes = 0 if l == 0 else 8 * (-(-m * l // 64) + 1)
        if 32 + low_bytes + 8 * (uw + ns) != length:
            raise Bad(f"{what}: the section's length does not match its header")
        self.b, self.m, self.l = b, m, l
        self.low = Packed(b, start + 32, low_bytes, m, l, what) if l > 0 else None
        self.upper = start + 32 + low_bytes
        self.uw = uw
        self.samples = self.upper + 8 * uw

    def get(self, i):
        s = i // 64
        pos = u64(self.b, self.samples + 8 * s)  # set bit 64*s
        rest = i - 64 * s
        w = pos // 64
        word = u64(self.b, self.upper + 8 * w) & (~((1 << (pos % 64)) - 1) & (2**64 - 1))
        while True:
            c = bin(word).count("1")
            if rest < c:
                for _ in range(rest):
                    word &= word - 1
                p = 64 * w + (word & -word).bit_length() - 1
                break
            rest -= c
            w += 1
            if w >= self.uw:
                raise Bad("Elias-Fano: fewer set bits than values")
            word = u64(self.b, self.upper + 8 * w)
        high = p - i
        return (high << self.l) | (self.low.get(i) if self.low else 0)


class Values:
    """q or beta of one order: f32, or codes into bins."""

    def __init__(self, b, dirs, kinds, k, bits, n, what):
        plain, codes, bins = kinds
        if bits >= 32:
            off, length = dirs.find(plain, k)
            if length != 4 * n:
                raise Bad(f"{what} of order {k}: {length} bytes, {4 * n} expected")
            self.f32 = (off, n)
            self.codes = None
        else:
            off, length = dirs.find(codes, k)
            self.codes = Packed(b, off, length, n, bits, f"{what} codes of order {k}")
            boff, blen = dirs.find(bins, k)
            if blen == 0 or blen % 4 or blen // 4 > 2**bits:
                raise Bad(f"{what} bins of order {k}: {blen} bytes")
            self.bins = struct.unpack_from(f"<{blen // 4}f", b, boff)
        self.b = b

    def get(self, i):
        if self.codes is None:
            return struct.unpack_from("<f", self.b, self.f32[0] + 4 * i)[0]
        return self.bins[min(self.codes.get(i), len(self.bins) - 1)]


class Directory:
    def __init__(self, b):
        if len(b) < 16 + 32:
            raise Bad("shorter than a header and a trailer")
        if b[:8] != MAGIC or b[-8:] != END_MAGIC:
            raise Bad("magic missing")
        version = struct.unpack_from("<I", b, 8)[0]
        if version != VERSION:
            raise Bad(f"version {version}, this reader reads {VERSION}")
        d, c, _hash = struct.unpack_from("<QQQ", b, len(b) - 32)
        if d < 16 or d + 32 * c != len(b) - 32:
            raise Bad("the directory does not fit the file")
        self.entries = {}
        for i in range(c):
            kind, order, off, length, _h = struct.unpack_from("<IIQQQ", b, d + 32 * i)
            if off < 16 or off + length > d:
                raise Bad(f"section {kind} of order {order} outside the data")
            self.entries[(kind, order)] = (off, length)

    def find(self, kind, order):
        if (kind, order) not in self.entries:
            raise Bad(f"no section {kind} of order {order}")
        return self.entries[(kind, order)]

    def has(self, kind, order):
        return (kind, order) in self.entries


class Model:
    def __init__(self, path):
        with open(path, "rb") as f:
            b = f.read()
        self.b = b
        dirs = Directory(b)
        off, length = dirs.find(META, 0)
        self.meta = json.loads(b[off : off + length].decode("utf-8"))
        n = self.meta["order"]
        ngrams = self.meta["ngrams"]
        self.n = n
        self.skipped = 0  # predictions whose walk took a skip of more than 1
        w_count = ngrams[0]
        off, length = dirs.find(WORD_OFFSETS, 0)
        if length != 8 * (w_count + 1):
            raise Bad("word offsets: wrong length")
        offsets = struct.unpack_from(f"<{w_count + 1}Q", b, off)
        toff, _tlen = dirs.find(WORD_TEXT, 0)
        self.index = {}
        for i in range(w_count):
            word = b[toff + offsets[i] : toff + offsets[i + 1]].decode("utf-8")
            self.index[word] = i
        width = max(1, (w_count - 1).bit_length())
        self.words, self.q, self.beta, self.children, self.skips = {}, {}, {}, {}, {}
        for k in range(1, n + 1):
            nk = ngrams[k - 1]
            pbits = 32 if k == 1 else self.meta["value_bits"]
            self.q[k] = Values(b, dirs, (PROBS, PROB_CODES, PROB_BINS), k, pbits, nk, "q")
            if k >= 2:
                off, length = dirs.find(WORDS, k)
                self.words[k] = Packed(b, off, length, nk, width, f"words of order {k}")
            if k < n:
                wbits = self.meta["weight_bits"]
                kinds = (WEIGHTS, WEIGHT_CODES, WEIGHT_BINS)
                self.beta[k] = Values(b, dirs, kinds, k, wbits, nk, "beta")
                off, length = dirs.find(CHILDREN, k)
                ef = EliasFano(b, off, length, f"children of order {k}")
                if ef.m != nk + 1:
                    raise Bad(f"children of order {k}: {ef.m} starts, {nk + 1} expected")
                self.children[k] = ef
                if dirs.has(SKIPS, k):
                    off, length = dirs.find(SKIPS, k)
                    if length != nk:
                        raise Bad(f"skips of order {k}: wrong length")
                    self.skips[k] = b[off : off + length]

    def skip(self, k, e):
        s = self.skips.get(k)
        return 1 if s is None else max(1, s[e])

    def child(self, k, e, x):
        """The entry of order k+1 among the children of entry e of order k
        whose word is x, or None (binary search: the words increase)."""
        lo, hi = self.children[k].get(e), self.children[k].get(e + 1)
        words = self.words[k + 1]
        while lo < hi:
            mid = (lo + hi) // 2
            v = words.get(mid)
            if v == x:
                return mid
            if v < x:
                lo = mid + 1
            else:
                hi = mid
        return None

    def prob(self, context, w):
        n = self.n
        unk = self.index["<unk>"]
        h = context[max(0, len(context) - (n - 1)) :] if n > 1 else []
        big_l = len(h)
        xs = [self.index.get(s, unk) for s in h]
        x = self.index.get(w)
        oov = x is None or w == "<s>"
        if oov:
            x = unk
        node = {}
        big_m = 0
        for j in range(1, big_l + 1):
            e = xs[big_l - j]
            ok = True
            for i in range(1, j):
                e = self.child(i, e, xs[big_l - j + i])
                if e is None:
                    ok = False
                    break
            if not ok:
                break
            node[j] = e
            big_m = j
        found = {0: x}
        matched = 0
        for j in range(1, min(big_m, n - 1) + 1):
            f = self.child(j, node[j], x)
            if f is None:
                break
            found[j] = f
            matched = j
        j = big_m
        factor = self.meta["default_backoff"] ** (big_l - big_m)
        skipped = False
        while j > matched:
            factor = factor * self.beta[j].get(node[j])
            skipped |= self.skip(j, node[j]) > 1
            j = max(0, j - self.skip(j, node[j]))
        self.skipped += skipped
        p = factor * self.q[j + 1].get(found[j])
        log10 = math.log10(p) if p > 0 else -math.inf
        if oov:
            m = 0
        elif matched == 0 and x == unk and not self.meta["unk_seen"]:
            m = 0
        else:
            m = matched + 1
        return p, log10, m


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: model_reader.py MODEL < queries")
    try:
        model = Model(sys.argv[1])
    except (Bad, OSError, ValueError, KeyError, struct.error) as e:
        sys.exit(f"model_reader.py: {sys.argv[1]}: not a usable model: {e}")
    out = sys.stdout
    value = "probability" if model.meta["probabilities"] else "score"
    answered = 0
    for line in sys.stdin:
        words = line.split()
        if not words:
            continue
        p, log10, m = model.prob(words[:-1], words[-1])
        # The CLI's JSON shape: log10 of 0 is null.
        rec = {"words": " ".join(words), value: p, "log10": log10 if p > 0 else None, "matched": m}
        out.write(json.dumps(rec) + "\n")
        answered += 1
    stats = {"queries": answered, "skipped": model.skipped, "value_bits": model.meta["value_bits"]}
    sys.stderr.write(json.dumps(stats) + "\n")


if __name__ == "__main__":
    main()
