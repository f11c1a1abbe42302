//! The files `ingest --unique` reads back: arbitrary bytes as a run of
//! sightings, as the store's hash set, or as a chunk's duplicate positions.
//! They must yield records or an error, never a panic, a hang or an
//! allocation the size of a claimed count; what a reader returns must be in
//! the order its format promises (sightings ascending, hashes strictly
//! ascending, positions sorted).
//!
//! Random bytes rarely carry a right magic and count, so the first byte's
//! low bits choose a reader and whether the bytes get a valid header (magic
//! and the count that fits their length) before them.
#![no_main]

use libfuzzer_sys::fuzz_target;

#[path = "scratch.rs"]
mod scratch;
use quern::unique::runs::{RunReader, SetReader, RECORD_BYTES};
use quern::unique::Skips;

fuzz_target!(|data: &[u8]| {
    let Some((&mode, body)) = data.split_first() else {
        return;
    };
    let path = scratch::dir().join("file");
    let which = mode % 3;
    let bytes = if mode & 4 != 0 && which < 2 {
        let (magic, width): (&[u8; 8], usize) = if which == 0 {
            (b"QUERNHR1", RECORD_BYTES)
        } else {
            (b"QUERNUS1", 16)
        };
        let mut b = magic.to_vec();
        b.extend_from_slice(&((body.len() / width) as u64).to_le_bytes());
        b.extend_from_slice(&body[..body.len() / width * width]);
        b
    } else {
        body.to_vec()
    };
    std::fs::write(&path, &bytes).unwrap();
    match which {
        0 => {
            let Ok(mut r) = RunReader::open(&path) else {
                return;
            };
            let mut prev = None;
            while let Ok(Some(s)) = r.next_record() {
                if let Some(p) = prev {
                    assert!(s > p, "sightings out of order were returned");
                }
                prev = Some(s);
            }
        }
        1 => {
            let Ok(mut r) = SetReader::open(&path) else {
                return;
            };
            let mut prev = None;
            while let Ok(Some(h)) = r.next_hash() {
                if let Some(p) = prev {
                    assert!(h > p, "hashes out of order were returned");
                }
                prev = Some(h);
            }
        }
        _ => {
            let Ok(mut s) = Skips::load(&path) else {
                return;
            };
            assert_eq!(bytes.len() % 12, 0, "a torn positions file was read");
            s.seek(0);
        }
    }
});
