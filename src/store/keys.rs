//! Column families and value encodings of the store.
//!
//! | column family | key                         | value                              |
//! |---------------|-----------------------------|------------------------------------|
//! | `meta`        | `store`                     | JSON [`StoreMeta`](super::StoreMeta) |
//! | `ids`         | chunk number, 4 B big-endian | up to [`IDS_PER_CHUNK`] word ids, 8 B little-endian each, increasing |
//! | `vocab`       | word rank                   | the word's UTF-8 bytes             |
//! | `ng<k>`       | k word ranks                | see [`encode_ngram`]               |
//! | `docs<k>`     | k word ranks                | varint: the documents it occurs in (only with `--document-counts`) |
//!
//! A word's rank is its position among the store's sorted word ids (the
//! `ids` family holds that list; [`Ranks`](super::Ranks) reads and writes
//! ranks). Ranks are big-endian in the fewest bytes that hold them, so the
//! byte order of keys is the lexicographic order of the ids and the
//! n-grams that begin with given words are one contiguous range of
//! `ng<k>`.
//!
//! Every context h with a continuation is itself a stored n-gram, so its
//! statistics ride in h's own value instead of a record of their own: one
//! key fewer for most n-grams below the top order.

pub use crate::records::ContextStats;

/// Name of the metadata column family.
pub const META_CF: &str = "meta";
/// Name of the vocabulary column family.
pub const VOCAB_CF: &str = "vocab";
/// Key of the metadata record.
pub const META_KEY: &[u8] = b"store";
/// Name of the column family of the sorted word ids.
pub const IDS_CF: &str = "ids";
/// Word ids in one record of [`IDS_CF`].
pub const IDS_PER_CHUNK: usize = 1 << 16;

/// The column family of n-grams of order `k`.
pub fn ngram_cf(k: usize) -> String {
    format!("ng{k}")
}

/// The column family of the document counts of order `k`'s n-grams
/// (`ingest --document-counts`): the same keys as [`ngram_cf`], each
/// value a varint, the number of documents the n-gram occurs in.
pub fn docs_cf(k: usize) -> String {
    format!("docs{k}")
}

/// Every column family of a store of order `order`.
pub fn all_cfs(order: usize) -> Vec<String> {
    let mut v = vec![
        META_CF.to_string(),
        IDS_CF.to_string(),
        VOCAB_CF.to_string(),
    ];
    v.extend((1..=order).map(ngram_cf));
    v
}

use crate::varint::{get as get_varint, put as put_varint};

/// The decoded value of one n-gram.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct NgramRecord {
    /// c(g): raw count.
    pub count: u64,
    /// N1+(•g), below the top order.
    pub continuation: Option<u64>,
    /// The statistics of g as a context, if g has a continuation.
    pub context: Option<ContextStats>,
    /// The documents g occurs in, when the store has them and the scan
    /// asked for them (`ingest --document-counts`).
    pub documents: Option<u64>,
}

fn zigzag(d: i128) -> u64 {
    let d = d.clamp(i64::MIN as i128, i64::MAX as i128) as i64;
    ((d << 1) ^ (d >> 63)) as u64
}

fn unzigzag(z: u64) -> i128 {
    ((z >> 1) as i64 ^ -((z & 1) as i64)) as i128
}

/// Encodes an n-gram value: varint count; below the top order the varint
/// continuation count; and, if the n-gram is a context with children, its
/// statistics as six varints: c − C and A − T (zigzag, as both are usually
/// 0 and small: every occurrence of h before a word is an occurrence of
/// h·w), T, N1, N2 and N3+.
pub fn encode_ngram(
    count: u64,
    continuation: Option<u64>,
    context: Option<&ContextStats>,
    out: &mut Vec<u8>,
) {
    put_varint(out, count);
    let Some(k) = continuation else { return };
    put_varint(out, k);
    if let Some(st) = context.filter(|s| s.types > 0) {
        put_varint(out, zigzag(count as i128 - st.count_sum as i128));
        put_varint(out, st.types);
        put_varint(out, zigzag(st.left_type_sum as i128 - st.types as i128));
        put_varint(out, st.n1);
        put_varint(out, st.n2);
        put_varint(out, st.n3plus);
    }
}

/// Decodes an n-gram value written by [`encode_ngram`].
pub fn decode_ngram(mut b: &[u8]) -> Option<NgramRecord> {
    let count = get_varint(&mut b)?;
    let mut r = NgramRecord {
        count,
        ..Default::default()
    };
    if b.is_empty() {
        return Some(r);
    }
    r.continuation = Some(get_varint(&mut b)?);
    if b.is_empty() {
        return Some(r);
    }
    let mut v = [0u64; 6];
    for x in &mut v {
        *x = get_varint(&mut b)?;
    }
    let count_sum = u64::try_from(count as i128 - unzigzag(v[0])).ok()?;
    let left_type_sum = u64::try_from(v[1] as i128 + unzigzag(v[2])).ok()?;
    r.context = Some(ContextStats {
        count_sum,
        types: v[1],
        left_type_sum,
        n1: v[3],
        n2: v[4],
        n3plus: v[5],
    });
    b.is_empty().then_some(r)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_read_back() {
        let st = ContextStats {
            count_sum: 7,
            types: 3,
            left_type_sum: 2,
            n1: 1,
            n2: 0,
            n3plus: 1,
        };
        let cases = [
            (5, None, None),
            (5, Some(2), None),
            (7, Some(2), Some(st)),
            (3, Some(0), Some(st)), // C above c and A below T: still exact
            (u64::MAX, Some(u64::MAX), None),
        ];
        for (c, k, ctx) in cases {
            let mut b = Vec::new();
            encode_ngram(c, k, ctx.as_ref(), &mut b);
            let r = decode_ngram(&b).unwrap();
            assert_eq!((r.count, r.continuation, r.context), (c, k, ctx));
            assert!(decode_ngram(&b[..b.len() - 1]).is_none_or(|x| x != r));
        }
        let mut b = Vec::new();
        encode_ngram(9, Some(1), Some(&ContextStats::default()), &mut b);
        assert_eq!(decode_ngram(&b).unwrap().context, None);
    }
}
