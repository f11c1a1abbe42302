//! The sections of a model file as a reader finds them: the directory
//! (each entry found, bounds-checked and, for the small sections,
//! checksummed once) and the arrays of each order.

use std::ops::Range;

use crate::error::{Error, Result};

use super::bytes::{f32_at, u64_at};
use super::format::{Entry, ModelMeta, SectionKind, ENTRY_BYTES, HEADER_BYTES, TRAILER_BYTES};
use super::packed::{EliasFano, Packed};

/// Stored values (q or β) of one order: 32-bit floats, or codes into
/// bins.
#[derive(Clone, Debug, Default)]
pub(crate) enum Values {
    /// None stored (β at the top order).
    #[default]
    None,
    /// One f32 a value.
    F32(Range<usize>),
    /// One packed code a value, and the value of every code (f32).
    Coded { codes: Packed, bins: Range<usize> },
}

impl Values {
    /// Value `i` (`b` is the whole map); a code past the bins reads as the
    /// last bin.
    #[inline(always)]
    pub(crate) fn get(&self, b: &[u8], i: usize) -> f32 {
        match self {
            // Out of range only in a damaged file (a word index from an
            // unverified array): a wrong number, never a crash.
            Values::F32(r) => b[r.clone()]
                .get(4 * i..4 * i + 4)
                .map_or(0.0, |x| f32::from_le_bytes(x.try_into().expect("4 bytes"))),
            Values::Coded { codes, bins } => {
                let bins = &b[bins.clone()];
                let c = (codes.get(b, i) as usize).min(bins.len() / 4 - 1);
                f32_at(bins, c)
            }
            Values::None => 1.0,
        }
    }

    /// The byte (in the map) where value `i` lies, to prefetch.
    #[inline(always)]
    pub(crate) fn byte_of(&self, i: usize) -> usize {
        match self {
            Values::F32(r) => r.start + 4 * i,
            Values::Coded { codes, .. } => codes.byte_of(i),
            Values::None => 0,
        }
    }
}

/// The sections of one order.
#[derive(Clone, Debug, Default)]
pub(crate) struct OrderSections {
    /// Kept n-grams.
    pub len: usize,
    /// Last words (empty at order 1, where entry i is word i).
    pub words: Packed,
    /// q values.
    pub probs: Values,
    /// β values (none at the top order).
    pub weights: Values,
    /// Child starts, len + 1 of them (empty at the top order).
    pub children: EliasFano,
    /// Words dropped on backing off, one byte each (empty: 1 for all).
    pub skips: Range<usize>,
}

/// The section directory of an opened file: every entry bounds-checked
/// against the data once, when it is read.
#[derive(Clone, Debug)]
pub(super) struct Directory {
    entries: Vec<Entry>,
}

impl Directory {
    /// The directory at the end of `b` (header, trailer and magic already
    /// checked by the caller): its own checksum, and every entry within
    /// the data before it. `bad` makes the error that names the file.
    pub(super) fn read(b: &[u8], bad: &dyn Fn(String) -> Error) -> Result<Directory> {
        let t = &b[b.len() - TRAILER_BYTES..];
        let (dir_off, count, dir_hash) = (u64_at(t, 0), u64_at(t, 1), u64_at(t, 2));
        let dir_end = (b.len() - TRAILER_BYTES) as u64;
        if count > 4096
            || dir_off < HEADER_BYTES as u64
            || dir_off.checked_add(count * ENTRY_BYTES as u64) != Some(dir_end)
        {
            return Err(bad(format!(
                "the directory ({count} entries at byte {dir_off}) does not fit the file of {} bytes",
                b.len()
            )));
        }
        let d = &b[dir_off as usize..dir_end as usize];
        if xxhash_rust::xxh3::xxh3_64(d) != dir_hash {
            return Err(bad("the directory's checksum does not match".into()));
        }
        let entries: Vec<Entry> = d.chunks_exact(ENTRY_BYTES).map(Entry::decode).collect();
        for e in &entries {
            if e.offset < HEADER_BYTES as u64
                || e.offset.checked_add(e.len).is_none_or(|end| end > dir_off)
            {
                return Err(bad(format!(
                    "section {} of order {} (bytes {}..+{}) lies outside the data",
                    e.kind, e.order, e.offset, e.len
                )));
            }
        }
        Ok(Directory { entries })
    }

    /// Every entry, in file order.
    pub(super) fn entries(&self) -> &[Entry] {
        &self.entries
    }

    /// The entry of a section, if the file has it.
    fn entry(&self, kind: SectionKind, order: usize) -> Option<&Entry> {
        self.entries
            .iter()
            .find(|e| e.kind == kind as u32 && e.order as usize == order)
    }

    /// The bytes of a section (bounds checked on read).
    pub(super) fn find(
        &self,
        kind: SectionKind,
        order: usize,
        bad: &dyn Fn(String) -> Error,
    ) -> Result<Range<usize>> {
        self.entry(kind, order)
            .map(|e| e.offset as usize..(e.offset + e.len) as usize)
            .ok_or_else(|| bad(format!("no {} section of order {order}", kind.name())))
    }

    /// The bytes of a section whose checksum matches (`b`: the file).
    pub(super) fn checked(
        &self,
        b: &[u8],
        kind: SectionKind,
        order: usize,
        bad: &dyn Fn(String) -> Error,
    ) -> Result<Range<usize>> {
        let r = self.find(kind, order, bad)?;
        let e = self.entry(kind, order).expect("found above");
        if xxhash_rust::xxh3::xxh3_64(&b[r.clone()]) != e.hash {
            return Err(bad(format!(
                "the checksum of the {} section does not match",
                kind.name()
            )));
        }
        Ok(r)
    }
}

/// `r` holds exactly `bytes` bytes, or the error names `what`.
pub(super) fn want_len(
    r: &Range<usize>,
    bytes: u64,
    what: &str,
    bad: &dyn Fn(String) -> Error,
) -> Result<()> {
    if r.len() as u64 == bytes {
        Ok(())
    } else {
        Err(bad(format!(
            "the {what} section holds {} bytes, {bytes} expected",
            r.len()
        )))
    }
}

/// The values (q or β) of order `k`: `len` of them, 32-bit floats in
/// section `kind` when `bits` ≥ 32, else codes of `bits` bits in `codes`
/// with their bins in `bins`.
pub(super) fn read_values(
    b: &[u8],
    dir: &Directory,
    [kind, codes, bins]: [SectionKind; 3],
    k: usize,
    bits: u32,
    len: u64,
    bad: &dyn Fn(String) -> Error,
) -> Result<Values> {
    if bits >= 32 {
        let r = dir.find(kind, k, bad)?;
        want_len(&r, len * 4, kind.name(), bad)?;
        return Ok(Values::F32(r));
    }
    if !(1..=16).contains(&bits) {
        return Err(bad(format!("{bits} bits a value")));
    }
    let c = dir.find(codes, k, bad)?;
    want_len(
        &c,
        Packed::bytes(len as usize, bits) as u64,
        codes.name(),
        bad,
    )?;
    let bins_r = dir.checked(b, bins, k, bad)?;
    if bins_r.is_empty() || bins_r.len() % 4 != 0 || bins_r.len() / 4 > 1 << bits {
        return Err(bad(format!(
            "order {k}: {} bytes of {}",
            bins_r.len(),
            bins.name()
        )));
    }
    Ok(Values::Coded {
        codes: Packed {
            at: c,
            width: bits,
            len: len as usize,
        },
        bins: bins_r,
    })
}

/// The sections of every order 1..=`meta.order`, their lengths checked
/// against the kept counts (`width`: bits of a word index).
pub(super) fn read_orders(
    b: &[u8],
    dir: &Directory,
    meta: &ModelMeta,
    width: u32,
    bad: &dyn Fn(String) -> Error,
) -> Result<Vec<OrderSections>> {
    use SectionKind as S;
    let n = meta.order;
    let mut orders = Vec::with_capacity(n);
    for k in 1..=n {
        let len = meta.ngrams[k - 1];
        let pbits = if k == 1 { 32 } else { meta.value_bits };
        let probs = [S::Probs, S::ProbCodes, S::ProbBins];
        let mut o = OrderSections {
            len: len as usize,
            probs: read_values(b, dir, probs, k, pbits, len, bad)?,
            ..Default::default()
        };
        if k > 1 {
            let r = dir.find(S::Words, k, bad)?;
            want_len(
                &r,
                Packed::bytes(len as usize, width) as u64,
                "n-gram words",
                bad,
            )?;
            o.words = Packed {
                at: r,
                width,
                len: len as usize,
            };
        }
        if k < n {
            let weights = [S::Weights, S::WeightCodes, S::WeightBins];
            o.weights = read_values(b, dir, weights, k, meta.weight_bits, len, bad)?;
            let r = dir.find(S::Children, k, bad)?;
            o.children = match EliasFano::open(b, r) {
                Some(ef) if ef.len as u64 == len + 1 => ef,
                _ => {
                    return Err(bad(format!(
                        "order {k}: the children index does not hold {} starts",
                        len + 1
                    )))
                }
            };
            if let Ok(r) = dir.find(S::Skips, k, bad) {
                want_len(&r, len, "back-off skips", bad)?;
                o.skips = r;
            }
        }
        orders.push(o);
    }
    Ok(orders)
}
