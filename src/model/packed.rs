//! Compact integer sequences in a model file: fixed-width bit-packed
//! arrays (the n-gram words and quantized codes) and Elias–Fano coded
//! increasing sequences (the children index).
//!
//! Both are read in place from the memory map: a section is a run of
//! little-endian u64 words (sections start at multiples of 8 bytes) and
//! every read is a bounds-checked load of one or two words.
//!
//! Elias–Fano (Elias 1974, Fano 1971): an increasing sequence of m values
//! below u stores each value's low `l = ⌊log2(u / m)⌋` bits in a packed
//! array and its high part as a unary gap code in a bit vector (bit
//! `(x >> l) + i` set for the i-th value x), about 2 + log2(u / m) bits a
//! value. The i-th value is found by locating the i-th set bit: a sample
//! every [`EF_SAMPLE`] set bits says in which word to start counting.

use std::ops::Range;

/// Bits needed to store values up to `max` (at least 1).
pub fn width_for(max: u64) -> u32 {
    (64 - max.leading_zeros()).max(1)
}

/// The u64 words of `len` values of `width` bits, plus one spare word so
/// that any value can be read with a two-word load.
pub fn packed_words(len: u64, width: u32) -> u64 {
    (len * width as u64).div_ceil(64) + 1
}

#[inline(always)]
fn word(b: &[u8], i: usize) -> u64 {
    u64::from_le_bytes(b[8 * i..8 * i + 8].try_into().expect("8 bytes"))
}

/// Packs values of `width` bits into u64 words, streamed out as bytes.
pub struct BitPacker {
    width: u32,
    acc: u64,
    used: u32,
    /// Values packed so far.
    pub len: u64,
}

impl BitPacker {
    /// A packer of `width`-bit values (1..=64).
    pub fn new(width: u32) -> BitPacker {
        assert!((1..=64).contains(&width));
        BitPacker {
            width,
            acc: 0,
            used: 0,
            len: 0,
        }
    }

    /// Adds `x` (which must fit `width` bits); calls `out` with each
    /// finished word.
    #[inline]
    pub fn push<E>(&mut self, x: u64, out: &mut impl FnMut(u64) -> Result<(), E>) -> Result<(), E> {
        debug_assert!(self.width == 64 || x >> self.width == 0);
        self.len += 1;
        self.acc |= x << self.used;
        let end = self.used + self.width;
        if end >= 64 {
            out(self.acc)?;
            self.acc = if self.used == 0 {
                0
            } else {
                x >> (64 - self.used)
            };
            self.used = end - 64;
        } else {
            self.used = end;
        }
        Ok(())
    }

    /// Writes the last partial word and the spare word.
    pub fn finish<E>(self, out: &mut impl FnMut(u64) -> Result<(), E>) -> Result<(), E> {
        if self.used > 0 {
            out(self.acc)?;
        }
        out(0)
    }
}

/// A bit-packed array read from bytes (a section of the map).
#[derive(Clone, Debug, Default)]
pub struct Packed {
    /// Where its words are in the map.
    pub at: Range<usize>,
    /// Bits a value.
    pub width: u32,
    /// Values.
    pub len: usize,
}

impl Packed {
    /// The byte (in the map) where value `i` starts: what to prefetch
    /// before reading it.
    #[inline(always)]
    pub fn byte_of(&self, i: usize) -> usize {
        self.at.start + 8 * (i * self.width as usize / 64)
    }

    /// The bytes a packed array of `len` values of `width` bits takes.
    pub fn bytes(len: usize, width: u32) -> usize {
        8 * packed_words(len as u64, width) as usize
    }

    /// Value `i` (`b` is the whole map).
    #[inline(always)]
    pub fn get(&self, b: &[u8], i: usize) -> u64 {
        let s = &b[self.at.clone()];
        let bit = i * self.width as usize;
        let (w, sh) = (bit / 64, bit % 64);
        // Both words in one read (the array ends with a spare word).
        let two = u128::from_le_bytes(s[8 * w..8 * w + 16].try_into().expect("16 bytes"));
        let mask = if self.width == 64 {
            u64::MAX
        } else {
            (1u64 << self.width) - 1
        };
        (two >> sh) as u64 & mask
    }
}

/// The position of set bit `rest` (from 0) of `bits`, which has more than
/// `rest` set bits, without a loop (Vigna, "Broadword implementation of
/// rank/select queries", 2008): the bytes' counts summed in place give
/// the byte that holds it, and a table the bit within that byte.
#[inline(always)]
fn select_in_word(bits: u64, rest: usize) -> usize {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const HIGH: u64 = 0x8080_8080_8080_8080;
    let mut c = bits - ((bits >> 1) & 0x5555_5555_5555_5555);
    c = (c & 0x3333_3333_3333_3333) + ((c >> 2) & 0x3333_3333_3333_3333);
    c = (c + (c >> 4)) & 0x0f0f_0f0f_0f0f_0f0f;
    // Byte j of `upto`: the set bits in bytes 0..=j (at most 64).
    let upto = c.wrapping_mul(ONES);
    // The bytes whose running count is at most `rest` come first.
    let below = (((rest as u64 * ONES) | HIGH) - upto) & HIGH;
    let byte = below.count_ones() as usize;
    let before = ((upto << 8) >> (8 * byte)) & 0xff;
    let in_byte = ((bits >> (8 * byte)) & 0xff) as usize;
    8 * byte + SELECT_IN_BYTE[8 * in_byte + (rest - before as usize)] as usize
}

/// `SELECT_IN_BYTE[8 * b + r]`: the position of set bit r of byte b.
static SELECT_IN_BYTE: [u8; 2048] = {
    let mut t = [0u8; 2048];
    let mut b = 0;
    while b < 256 {
        let (mut bit, mut r) = (0, 0);
        while bit < 8 {
            if b >> bit & 1 == 1 {
                t[8 * b + r] = bit as u8;
                r += 1;
            }
            bit += 1;
        }
        b += 1;
    }
    t
};

/// Set bits between samples of the Elias–Fano upper bits.
pub const EF_SAMPLE: usize = 64;

/// The header of an Elias–Fano section: values (u64), low bits (u64),
/// upper words (u64), samples (u64); then the packed low bits, the upper
/// bit vector and the samples.
pub const EF_HEADER: usize = 32;

/// An increasing sequence coded Elias–Fano style, written into memory.
/// `values` must be increasing (equal neighbours allowed).
pub fn ef_encode(values: impl Iterator<Item = u64> + Clone) -> Vec<u8> {
    let (mut m, mut last) = (0u64, 0u64);
    for v in values.clone() {
        m += 1;
        last = v;
    }
    let l = if m == 0 || last / m.max(1) == 0 {
        0
    } else {
        63 - (last / m).leading_zeros()
    };
    let upper_bits = m + (last >> l) + 1;
    let upper_words = upper_bits.div_ceil(64) + 1;
    let samples = m.div_ceil(EF_SAMPLE as u64);
    let mut out = Vec::with_capacity(
        EF_HEADER + 8 * (packed_words(m, l.max(1)) + upper_words + samples) as usize,
    );
    for x in [m, l as u64, upper_words, samples] {
        out.extend_from_slice(&x.to_le_bytes());
    }
    let mut put = |w: u64| -> Result<(), ()> {
        out.extend_from_slice(&w.to_le_bytes());
        Ok(())
    };
    if l > 0 {
        let mut p = BitPacker::new(l);
        for v in values.clone() {
            p.push(v & ((1u64 << l) - 1), &mut put).expect("in memory");
        }
        p.finish(&mut put).expect("in memory");
    }
    let mut upper = vec![0u64; upper_words as usize];
    let mut sample = Vec::with_capacity(samples as usize);
    for (i, v) in values.enumerate() {
        let pos = (v >> l) + i as u64;
        upper[(pos / 64) as usize] |= 1 << (pos % 64);
        if i % EF_SAMPLE == 0 {
            sample.push(pos);
        }
    }
    for w in upper.into_iter().chain(sample) {
        out.extend_from_slice(&w.to_le_bytes());
    }
    out
}

/// An Elias–Fano sequence read from a section of the map.
#[derive(Clone, Debug, Default)]
pub struct EliasFano {
    /// Values.
    pub len: usize,
    low: Packed,
    upper: Range<usize>,
    samples: Range<usize>,
}

impl EliasFano {
    /// Reads the header of the section at `at` of `b`; `None` if it does
    /// not fit the section's length.
    pub fn open(b: &[u8], at: Range<usize>) -> Option<EliasFano> {
        let s = b.get(at.clone())?;
        if s.len() < EF_HEADER {
            return None;
        }
        let (m, l, uw, ns) = (word(s, 0), word(s, 1), word(s, 2), word(s, 3));
        if l > 63 || m > (1 << 40) || uw > (1 << 40) || ns != m.div_ceil(EF_SAMPLE as u64) {
            return None;
        }
        let low_bytes = if l == 0 {
            0
        } else {
            8 * packed_words(m, l as u32)
        };
        let need = EF_HEADER as u64 + low_bytes + 8 * (uw + ns);
        if need != s.len() as u64 || uw < (m + 1).div_ceil(64) + 1 {
            return None;
        }
        let a = at.start + EF_HEADER;
        let u = a + low_bytes as usize;
        let sm = u + 8 * uw as usize;
        Some(EliasFano {
            len: m as usize,
            low: Packed {
                at: a..u,
                width: l as u32,
                len: m as usize,
            },
            upper: u..sm,
            samples: sm..sm + 8 * ns as usize,
        })
    }

    /// The byte (in the map) of the sample that the search for value `i`
    /// starts from: the first read of [`EliasFano::pair`], to prefetch.
    #[inline(always)]
    pub fn sample_byte(&self, i: usize) -> usize {
        (self.samples.start + 8 * (i / EF_SAMPLE)).min(self.samples.end.saturating_sub(1))
    }

    /// The position in the upper bits of the sample that value `i`'s
    /// search starts from (`None` past a damaged section's samples).
    #[inline(always)]
    fn sample(&self, b: &[u8], i: usize) -> Option<usize> {
        let s = i / EF_SAMPLE;
        b[self.samples.clone()]
            .get(8 * s..8 * s + 8)
            .map(|x| u64::from_le_bytes(x.try_into().expect("8 bytes")) as usize)
    }

    /// The byte (in the map) of the upper bits where the search for value
    /// `i` starts: the second read of [`EliasFano::pair`], to prefetch
    /// once [`EliasFano::sample_byte`] is in the cache.
    #[inline(always)]
    pub fn scan_byte(&self, b: &[u8], i: usize) -> usize {
        let from = self.sample(b, i).unwrap_or(0);
        (self.upper.start + 8 * (from / 64)).min(self.upper.end.saturating_sub(1))
    }

    /// The byte (in the map) of value `i`'s low bits: the last read of
    /// [`EliasFano::pair`], to prefetch.
    #[inline(always)]
    pub fn low_byte(&self, i: usize) -> usize {
        self.low.byte_of(i)
    }

    /// The position in the upper bits of set bit `i` (past the end if a
    /// damaged section has fewer).
    #[inline]
    fn select(&self, b: &[u8], i: usize) -> usize {
        let up = &b[self.upper.clone()];
        let end = up.len() * 8;
        let s = i / EF_SAMPLE;
        let from = self.sample(b, i).unwrap_or(end);
        if from >= end {
            return end;
        }
        let mut rest = i - s * EF_SAMPLE;
        let mut w = from / 64;
        let mut bits = word(up, w) & (u64::MAX << (from % 64));
        loop {
            let c = bits.count_ones() as usize;
            if rest < c {
                return w * 64 + select_in_word(bits, rest);
            }
            rest -= c;
            w += 1;
            if 8 * w >= up.len() {
                return end;
            }
            bits = word(up, w);
        }
    }

    /// The position of the next set bit after `pos` (past the end if
    /// there is none).
    #[inline]
    fn next_one(&self, b: &[u8], pos: usize) -> usize {
        let up = &b[self.upper.clone()];
        let end = up.len() * 8;
        let p = pos + 1;
        if p >= end {
            return end;
        }
        let mut w = p / 64;
        let mut bits = word(up, w) & (u64::MAX << (p % 64));
        while bits == 0 {
            w += 1;
            if 8 * w >= up.len() {
                return end;
            }
            bits = word(up, w);
        }
        w * 64 + bits.trailing_zeros() as usize
    }

    #[inline(always)]
    fn value(&self, b: &[u8], i: usize, pos: usize) -> u64 {
        let high = pos.wrapping_sub(i) as u64;
        if self.low.width == 0 {
            high
        } else {
            high.wrapping_shl(self.low.width) | self.low.get(b, i)
        }
    }

    /// Value `i` (`b` is the whole map). `i < len`.
    #[inline]
    pub fn get(&self, b: &[u8], i: usize) -> u64 {
        let pos = self.select(b, i);
        self.value(b, i, pos)
    }

    /// Values `i` and `i + 1`. `i + 1 < len`.
    #[inline]
    pub fn pair(&self, b: &[u8], i: usize) -> (u64, u64) {
        let pos = self.select(b, i);
        let next = self.next_one(b, pos);
        (self.value(b, i, pos), self.value(b, i + 1, next))
    }

    /// Calls `f` with every value in order, decoded in one pass over the
    /// upper bits (not one select each). Where a damaged section has fewer
    /// set bits than values, the rest are read as [`EliasFano::get`] reads
    /// them, at the end of the upper bits.
    pub fn for_each(&self, b: &[u8], mut f: impl FnMut(u64)) {
        let up = &b[self.upper.clone()];
        let end = up.len() * 8;
        let mut i = 0;
        for w in 0..up.len() / 8 {
            if i == self.len {
                break;
            }
            let mut bits = word(up, w);
            while bits != 0 && i < self.len {
                f(self.value(b, i, w * 64 + bits.trailing_zeros() as usize));
                bits &= bits - 1;
                i += 1;
            }
        }
        for i in i..self.len {
            f(self.value(b, i, end));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pack(vals: &[u64], width: u32) -> Vec<u8> {
        let mut out = Vec::new();
        let mut put = |w: u64| -> Result<(), ()> {
            out.extend_from_slice(&w.to_le_bytes());
            Ok(())
        };
        let mut p = BitPacker::new(width);
        for &v in vals {
            p.push(v, &mut put).unwrap();
        }
        p.finish(&mut put).unwrap();
        out
    }

    /// The set bits of words dense, sparse and random, each found where a
    /// bit-by-bit count puts it.
    #[test]
    fn select_in_word_finds_every_set_bit() {
        let mut s = 5u64;
        let mut words = vec![u64::MAX, 1, 1 << 63, 0x8000_0000_0000_0001, 0xff00];
        for _ in 0..2000 {
            let x = crate::search::splitmix64(&mut s);
            words.push(x);
            words.push(x & (x >> 3) & (x >> 9));
        }
        for &x in &words {
            let ones: Vec<usize> = (0..64).filter(|&b| x >> b & 1 == 1).collect();
            for (r, &want) in ones.iter().enumerate() {
                assert_eq!(select_in_word(x, r), want, "{x:#x} bit {r}");
            }
        }
    }

    /// Every width, values at the edges of the width, read back.
    #[test]
    fn packed_values_read_back() {
        for width in 1..=64u32 {
            let max = if width == 64 {
                u64::MAX
            } else {
                (1 << width) - 1
            };
            let vals: Vec<u64> = (0..200u64)
                .map(|i| match i % 4 {
                    0 => 0,
                    1 => max,
                    2 => i.wrapping_mul(0x9E37_79B9_7F4A_7C15) & max,
                    _ => max / 2,
                })
                .collect();
            let b = pack(&vals, width);
            assert_eq!(b.len(), Packed::bytes(vals.len(), width));
            let p = Packed {
                at: 0..b.len(),
                width,
                len: vals.len(),
            };
            for (i, &v) in vals.iter().enumerate() {
                assert_eq!(p.get(&b, i), v, "width {width} value {i}");
            }
        }
    }

    /// Increasing sequences with runs of equal values, long gaps and
    /// dense stretches, read back one by one, in pairs and all at once.
    #[test]
    fn elias_fano_reads_back() {
        let mut seqs: Vec<Vec<u64>> = vec![vec![0], vec![0, 0, 0], vec![5], vec![0, 1, 2, 3]];
        let mut x = 0u64;
        let mut s = Vec::new();
        for i in 0..5000u64 {
            x += match i % 7 {
                0 => 0,
                1 => 1,
                2 => 3,
                3 => (i * 2654435761) % 1000,
                _ => 2,
            };
            s.push(x);
        }
        seqs.push(s);
        seqs.push((0..1000u64).map(|i| i * 1_000_000_007).collect());
        for vals in &seqs {
            let mut b = vec![0u8; 8];
            b.extend(ef_encode(vals.iter().copied()));
            let ef = EliasFano::open(&b, 8..b.len()).expect("opens");
            assert_eq!(ef.len, vals.len());
            let mut all = Vec::new();
            ef.for_each(&b, |v| all.push(v));
            assert_eq!(&all, vals, "decoded in one pass");
            for (i, &v) in vals.iter().enumerate() {
                assert_eq!(ef.get(&b, i), v, "value {i}");
                if i + 1 < vals.len() {
                    assert_eq!(ef.pair(&b, i), (v, vals[i + 1]), "pair {i}");
                }
            }
        }
    }

    /// A section of the wrong length is refused, not read out of range.
    #[test]
    fn elias_fano_refuses_a_wrong_length() {
        let b = ef_encode([1u64, 4, 9].into_iter());
        assert!(EliasFano::open(&b, 0..b.len() - 8).is_none());
        assert!(EliasFano::open(&b, 0..b.len()).is_some());
    }
}
