//! Run files: sorted, compressed, checksummed n-gram records.
//!
//! A run file holds one section per partition; each section is a sorted
//! stream of `(key, values)` records, compressed as one zstd frame. The
//! counting stage spills its tables as run files, the merge stages read
//! sections of many run files at once and write new ones.
//!
//! # Byte layout (version 1)
//!
//! ```text
//! header   16 B  "QRUN" | version u32 | value width u8 | 0 0 0 | partitions u32
//! sections       zstd frame per partition (empty partitions take 0 bytes)
//! entries  40 B  per partition: offset u64 | compressed len u64 |
//!                raw len u64 | records u64 | xxh3-64 of raw bytes u64
//! trailer  16 B  xxh3-64 of header+entries u64 | partitions u32 | "QEND"
//! ```
//! All integers little-endian. Raw records: `order u8 | shared u8 |
//! (order - shared) ids u64 | values as LEB128 varints`, where `shared` is
//! the number of leading ids equal to the previous record's. Keys are
//! strictly increasing within a section.
//!
//! # Failure modes
//! A truncated, zero-length or altered file fails [`RunFile::open`] (trailer
//! or entry checksum) or, for damage inside a section, the section reader
//! (raw length, record count or checksum at the section's end, or a broken
//! record). Nothing is read as data that did not pass its check by the end
//! of the section, and claimed lengths are never used to size allocations.

mod dict;
mod reader;
mod writer;

pub use dict::{DictReader, DictWriter};
pub use reader::{RunFile, SectionReader};
pub use writer::{RunSummary, RunWriter};

/// Format version of run and dictionary files.
pub const RUN_VERSION: u32 = 1;
/// Most values a record can carry.
pub const MAX_VALUES: usize = 4;
/// zstd level used for every run (fast; the data is short-lived).
pub const ZSTD_LEVEL: i32 = 1;
/// zstd window (log2 bytes): small, so a merge can hold many readers open.
pub const ZSTD_WINDOW_LOG: u32 = 17;

const MAGIC: &[u8; 4] = b"QRUN";
const END: &[u8; 4] = b"QEND";
const HEADER_LEN: u64 = 16;
const ENTRY_LEN: u64 = 40;
const TRAILER_LEN: u64 = 16;

/// Values of one record.
pub type Values = [u64; MAX_VALUES];

#[derive(Clone, Copy, Debug, Default)]
struct Entry {
    offset: u64,
    clen: u64,
    ulen: u64,
    records: u64,
    hash: u64,
}

fn header_bytes(value_width: u8, parts: u32) -> [u8; 16] {
    let mut h = [0u8; 16];
    h[..4].copy_from_slice(MAGIC);
    h[4..8].copy_from_slice(&RUN_VERSION.to_le_bytes());
    h[8] = value_width;
    h[12..16].copy_from_slice(&parts.to_le_bytes());
    h
}

#[cfg(test)]
mod tests;
