//! Model files: arbitrary bytes opened as a frozen model and queried
//! (`prob`, `prob_batch`, `next`, `complete`, `distribution`, `verify`).
//! Any outcome but a panic, an out-of-bounds read, a hang or a huge
//! allocation is fine: a damaged file is refused on open or gives wrong
//! numbers or errors.
//!
//! Random bytes rarely pass the checksums that opening checks, so in one
//! mode (the first byte odd) the rest is sealed first: every section's
//! checksum in the directory and the directory's in the trailer are
//! recomputed (XXH3-64; layout in DEVELOPERS.md, "The model file, byte by
//! byte"), so a mutated seed model reaches the bounds checks, the
//! metadata, the vocabulary and the queries.
//!
//! The model reader is behind quern's `store` feature (which builds
//! RocksDB), so this target needs the fuzz crate's `model` feature:
//! `scripts/fuzz` passes it.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "scratch.rs"]
mod scratch;
use quern::model::Model;
use quern::words::{bos_id, word_id, WordId};

/// Recomputes the checksums of the sections and the directory where the
/// frame still holds a directory.
fn seal(b: &mut [u8]) {
    let n = b.len();
    if n < 48 {
        return;
    }
    let u64_at = |b: &[u8], i: usize| u64::from_le_bytes(b[i..i + 8].try_into().unwrap());
    let (d, c) = (u64_at(b, n - 32), u64_at(b, n - 24));
    let Some(end) = c.checked_mul(32).and_then(|x| x.checked_add(d)) else {
        return;
    };
    if d < 16 || end != (n - 32) as u64 {
        return;
    }
    let d = d as usize;
    for i in 0..c as usize {
        let e = d + 32 * i;
        let (off, len) = (u64_at(b, e + 8), u64_at(b, e + 16));
        if off.checked_add(len).is_some_and(|z| z <= d as u64) {
            let h = xxhash_rust::xxh3::xxh3_64(&b[off as usize..(off + len) as usize]);
            b[e + 24..e + 32].copy_from_slice(&h.to_le_bytes());
        }
    }
    let h = xxhash_rust::xxh3::xxh3_64(&b[d..n - 32]);
    b[n - 16..n - 8].copy_from_slice(&h.to_le_bytes());
}

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let mut body = body.to_vec();
    if mode & 1 == 1 {
        seal(&mut body);
    }
    let path = scratch::dir().join("fuzz.model");
    std::fs::write(&path, &body).unwrap();
    let Ok(m) = Model::open(&path) else {
        return;
    };
    let mut ids: Vec<WordId> = m.vocabulary().into_iter().take(5).collect();
    ids.extend([bos_id(), word_id(b"the"), word_id(b"qqzzx")]);
    for (i, &w) in ids.iter().enumerate() {
        let ctx: Vec<WordId> = ids[..i].iter().rev().take(4).copied().collect();
        let _ = m.prob(&ctx, w);
        let _ = m.next(&ctx, 5);
        for prefix in ["", "t", "<"] {
            let _ = m.complete(&ctx, prefix, 3);
        }
    }
    let queries: Vec<Vec<WordId>> = (1..ids.len()).map(|i| ids[..=i].to_vec()).collect();
    let refs: Vec<&[WordId]> = queries.iter().map(|q| &q[..]).collect();
    let _ = m.prob_batch(&refs);
    let _ = m.distribution(&ids[..2]);
    let _ = m.verify();
});
