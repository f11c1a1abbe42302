//! Column families and value encodings of the store.
//!
//! | column family | key                         | value                              |
//! |---------------|-----------------------------|------------------------------------|
//! | `meta`        | `store`                     | JSON [`StoreMeta`](super::StoreMeta) |
//! | `ids`         | chunk number, 4 B big-endian | up to [`IDS_PER_CHUNK`] word ids, 8 B little-endian each, increasing |
//! | `vocab`       | word rank                   | the word's UTF-8 bytes             |
//! | `ng<k>`       | k word ranks                | see [`encode_ngram`]               |
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
    /// The documents g occurs in, in a store that has them (`ingest
    /// --document-counts`).
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
/// continuation count; if the n-gram is a context with children, its
/// statistics as six varints: c − C and A − T (zigzag, as both are usually
/// 0 and small: every occurrence of h before a word is an occurrence of
/// h·w), T, N1, N2 and N3+; and last, in a store with document counts
/// (`ingest --document-counts`), the varint number of documents.
pub fn encode_ngram(
    count: u64,
    continuation: Option<u64>,
    context: Option<&ContextStats>,
    documents: Option<u64>,
    out: &mut Vec<u8>,
) {
    put_varint(out, count);
    if let Some(k) = continuation {
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
    if let Some(d) = documents {
        put_varint(out, d);
    }
}

/// Decodes an n-gram value written by [`encode_ngram`]; `documents`: the
/// store has document counts, so the last varint is one. The layout is
/// told by the number of varints: 1 (a top-order n-gram), 2 (with its
/// continuation) or 8 (and context statistics), one more with documents.
pub fn decode_ngram(mut b: &[u8], documents: bool) -> Option<NgramRecord> {
    let mut v = [0u64; 9];
    let mut n = 0;
    while !b.is_empty() {
        *v.get_mut(n)? = get_varint(&mut b)?;
        n += 1;
    }
    let mut r = NgramRecord::default();
    if documents {
        n = n.checked_sub(1)?;
        r.documents = Some(v[n]);
    }
    match n {
        1 | 2 | 8 => {}
        _ => return None,
    }
    r.count = v[0];
    if n >= 2 {
        r.continuation = Some(v[1]);
    }
    if n == 8 {
        let count_sum = u64::try_from(r.count as i128 - unzigzag(v[2])).ok()?;
        let left_type_sum = u64::try_from(v[3] as i128 + unzigzag(v[4])).ok()?;
        r.context = Some(ContextStats {
            count_sum,
            types: v[3],
            left_type_sum,
            n1: v[5],
            n2: v[6],
            n3plus: v[7],
        });
    }
    Some(r)
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
        for docs in [None, Some(1), Some(u64::MAX)] {
            for (c, k, ctx) in cases {
                let mut b = Vec::new();
                encode_ngram(c, k, ctx.as_ref(), docs, &mut b);
                let r = decode_ngram(&b, docs.is_some()).unwrap();
                assert_eq!(
                    (r.count, r.continuation, r.context, r.documents),
                    (c, k, ctx, docs)
                );
                assert!(decode_ngram(&b[..b.len() - 1], docs.is_some()).is_none_or(|x| x != r));
            }
        }
        let mut b = Vec::new();
        encode_ngram(9, Some(1), Some(&ContextStats::default()), None, &mut b);
        assert_eq!(decode_ngram(&b, false).unwrap().context, None);
        // Three varints are no layout without documents.
        b.clear();
        encode_ngram(9, Some(1), None, Some(4), &mut b);
        assert!(decode_ngram(&b, false).is_none());
    }
}
