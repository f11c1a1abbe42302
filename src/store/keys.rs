//! Column families and value encodings of the store.
//!
//! | column family | key                         | value                              |
//! |---------------|-----------------------------|------------------------------------|
//! | `meta`        | `store`                     | JSON [`StoreMeta`](super::StoreMeta) |
//! | `vocab`       | word id, 8 B big-endian     | the word's UTF-8 bytes             |
//! | `ng<k>`       | k word ids, big-endian      | varint count, varint continuation (k < N) |
//! | `cx<k>`       | k word ids, big-endian      | varints C, T, A, N1, N2, N3+       |
//!
//! Big-endian ids make the byte order the lexicographic id order, so the
//! n-grams that begin with given words are one contiguous range of `ng<k>`.

use serde::{Deserialize, Serialize};

/// Name of the metadata column family.
pub const META_CF: &str = "meta";
/// Name of the vocabulary column family.
pub const VOCAB_CF: &str = "vocab";
/// Key of the metadata record.
pub const META_KEY: &[u8] = b"store";

/// The column family of n-grams of order `k`.
pub fn ngram_cf(k: usize) -> String {
    format!("ng{k}")
}

/// The column family of contexts of length `k`.
pub fn context_cf(k: usize) -> String {
    format!("cx{k}")
}

/// Every column family of a store of order `order`.
pub fn all_cfs(order: usize) -> Vec<String> {
    let mut v = vec![META_CF.to_string(), VOCAB_CF.to_string()];
    v.extend((1..=order).map(ngram_cf));
    v.extend((1..order).map(context_cf));
    v
}

/// Statistics of one context h over its children h·w.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ContextStats {
    /// C(h): sum of the children's raw counts.
    pub count_sum: u64,
    /// T(h): number of children.
    pub types: u64,
    /// A(h): sum of the children's adjusted counts.
    pub adjusted_sum: u64,
    /// N1(h): children with adjusted count 1.
    pub n1: u64,
    /// N2(h): children with adjusted count 2.
    pub n2: u64,
    /// N3+(h): children with adjusted count 3 or more.
    pub n3plus: u64,
}

impl ContextStats {
    /// Adds one child with raw count `c` and adjusted count `a`.
    #[inline]
    pub fn add_child(&mut self, c: u64, a: u64) {
        self.count_sum += c;
        self.types += 1;
        self.adjusted_sum += a;
        match a {
            0 => {}
            1 => self.n1 += 1,
            2 => self.n2 += 1,
            _ => self.n3plus += 1,
        }
    }

    /// Adds another partial statistic.
    pub fn merge(&mut self, o: &ContextStats) {
        self.count_sum += o.count_sum;
        self.types += o.types;
        self.adjusted_sum += o.adjusted_sum;
        self.n1 += o.n1;
        self.n2 += o.n2;
        self.n3plus += o.n3plus;
    }

    /// The stored value.
    pub fn encode(&self, out: &mut Vec<u8>) {
        for v in [
            self.count_sum,
            self.types,
            self.adjusted_sum,
            self.n1,
            self.n2,
            self.n3plus,
        ] {
            put_varint(out, v);
        }
    }

    /// Parses a stored value.
    pub fn decode(mut b: &[u8]) -> Option<ContextStats> {
        let mut v = [0u64; 6];
        for x in &mut v {
            *x = get_varint(&mut b)?;
        }
        b.is_empty().then_some(ContextStats {
            count_sum: v[0],
            types: v[1],
            adjusted_sum: v[2],
            n1: v[3],
            n2: v[4],
            n3plus: v[5],
        })
    }
}

use crate::varint::{get as get_varint, put as put_varint};

/// Encodes an n-gram value: count, and continuation below the top order.
pub fn encode_ngram(count: u64, continuation: Option<u64>, out: &mut Vec<u8>) {
    put_varint(out, count);
    if let Some(c) = continuation {
        put_varint(out, c);
    }
}

/// Decodes an n-gram value.
pub fn decode_ngram(mut b: &[u8]) -> Option<(u64, Option<u64>)> {
    let c = get_varint(&mut b)?;
    if b.is_empty() {
        return Some((c, None));
    }
    let k = get_varint(&mut b)?;
    b.is_empty().then_some((c, Some(k)))
}
