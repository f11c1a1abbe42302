//! The files an ingest reads back from its work folder: arbitrary bytes as
//! a run file or a dictionary file. They must yield records or an error,
//! never a panic, a hang or an allocation the size of a claimed length; a
//! section that reads to its end must hold keys in strictly rising order.
//!
//! Random bytes rarely pass a file's checksums, so a third mode seals the
//! bytes as the raw records of a valid one-partition run file (header,
//! zstd frame, entry with the right checksum, trailer; layout in
//! `src/shard/mod.rs`): that drives the record parser itself.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "scratch.rs"]
mod scratch;
use quern::shard::{DictReader, RunFile};

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let path = scratch::dir().join("file");
    let sealed;
    let body = if mode & 3 == 2 {
        sealed = seal_run(body, mode);
        &sealed[..]
    } else {
        body
    };
    std::fs::write(&path, body).unwrap();
    if mode & 1 == 0 {
        let Ok(run) = RunFile::open(&path) else {
            return;
        };
        // A corrupt header may claim many partitions; the entry table was
        // read from the file, so the count is bounded by the file's size.
        for p in 0..run.partitions() {
            let Ok(mut s) = run.section(p) else {
                continue;
            };
            let mut prev = None;
            let mut n = 0u64;
            loop {
                match s.next_record() {
                    Ok(Some((k, _))) => {
                        if let Some(q) = prev {
                            assert!(k > q, "keys out of order were returned");
                        }
                        prev = Some(k);
                        n += 1;
                    }
                    Ok(None) => {
                        assert_eq!(n, run.records(p), "a section ended early without an error");
                        break;
                    }
                    Err(_) => break,
                }
            }
        }
    } else {
        let Ok(mut d) = DictReader::open(&path) else {
            return;
        };
        let mut prev = None;
        while let Ok(Some((id, _))) = d.next_entry() {
            if let Some(q) = prev {
                assert!(id > q, "dictionary ids out of order were returned");
            }
            prev = Some(id);
        }
    }
});

/// A one-partition run file whose only section holds `raw` as its records:
/// value width and claimed record count from the first bytes.
fn seal_run(body: &[u8], mode: u8) -> Vec<u8> {
    let width = 1 + (mode >> 2) % 4;
    let (records, raw) = match body.split_first() {
        Some((&n, rest)) => (n as u64, rest),
        None => (0, body),
    };
    let mut f = Vec::new();
    f.extend_from_slice(b"QRUN");
    f.extend_from_slice(&1u32.to_le_bytes());
    f.extend_from_slice(&[width, 0, 0, 0]);
    f.extend_from_slice(&1u32.to_le_bytes());
    let header = f.clone();
    let frame = if raw.is_empty() {
        vec![]
    } else {
        zstd::encode_all(raw, 1).unwrap()
    };
    f.extend_from_slice(&frame);
    let mut entries = Vec::new();
    let hash = xxhash_rust::xxh3::xxh3_64(raw);
    for v in [16, frame.len() as u64, raw.len() as u64, records, hash] {
        entries.extend_from_slice(&v.to_le_bytes());
    }
    let mut h = xxhash_rust::xxh3::Xxh3::new();
    h.update(&header);
    h.update(&entries);
    f.extend_from_slice(&entries);
    f.extend_from_slice(&h.digest().to_le_bytes());
    f.extend_from_slice(&1u32.to_le_bytes());
    f.extend_from_slice(b"QEND");
    f
}
