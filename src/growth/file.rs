//! The first-sighting side file of a spill.
//!
//! ```text
//! magic  "QFIRST01"                         8 bytes
//! covers u32 LE, then that many u64 LE      tokens of each cover, in the
//!                                           order the spill lists them
//! count  u64 LE, then that many entries:    sorted by id, ids distinct
//!        id u64 LE, cover u32 LE, pos u64 LE
//! xxh3   u64 LE of every byte before it
//! ```
//!
//! The reader streams the entries, checks that the ids increase and that
//! every cover index and position is in range, and checks the trailer at the
//! end; a damaged file is [`Error::Corrupt`] naming it.

use std::io::{BufReader, Read};
use std::path::{Path, PathBuf};

use xxhash_rust::xxh3::Xxh3;

use crate::error::{Error, IoContext, Result};
use crate::fsutil;
use crate::words::WordId;

const MAGIC: &[u8; 8] = b"QFIRST01";

/// Writes a side file durably (temporary name, fsync, rename); returns its
/// size.
pub fn write(path: &Path, covers: &[u64], entries: &[(WordId, u32, u64)]) -> Result<u64> {
    let mut b = Vec::with_capacity(24 + covers.len() * 8 + entries.len() * 20);
    b.extend_from_slice(MAGIC);
    b.extend_from_slice(&(covers.len() as u32).to_le_bytes());
    for c in covers {
        b.extend_from_slice(&c.to_le_bytes());
    }
    b.extend_from_slice(&(entries.len() as u64).to_le_bytes());
    for (id, c, p) in entries {
        b.extend_from_slice(&id.to_le_bytes());
        b.extend_from_slice(&c.to_le_bytes());
        b.extend_from_slice(&p.to_le_bytes());
    }
    let h = xxhash_rust::xxh3::xxh3_64(&b);
    b.extend_from_slice(&h.to_le_bytes());
    fsutil::write_atomic(path, &b)?;
    Ok(b.len() as u64)
}

/// A streaming reader of a side file.
pub struct Reader {
    path: PathBuf,
    r: BufReader<std::fs::File>,
    hash: Xxh3,
    covers: Vec<u64>,
    left: u64,
    last: Option<WordId>,
    done: bool,
}

impl Reader {
    /// Opens a side file and reads its header.
    pub fn open(path: &Path) -> Result<Reader> {
        let f = std::fs::File::open(path).at(path, "open")?;
        let mut r = Reader {
            path: path.to_path_buf(),
            r: BufReader::with_capacity(64 << 10, f),
            hash: Xxh3::new(),
            covers: Vec::new(),
            left: 0,
            last: None,
            done: false,
        };
        let mut magic = [0u8; 8];
        r.fill(&mut magic)?;
        if &magic != MAGIC {
            return Err(Error::corrupt(
                path,
                "not a first-sighting file (bad magic)",
            ));
        }
        let n = u32::from_le_bytes(r.array()?);
        for _ in 0..n {
            // Grows with the bytes actually read: a damaged count cannot
            // make a large allocation.
            let c = u64::from_le_bytes(r.array()?);
            r.covers.push(c);
        }
        r.left = u64::from_le_bytes(r.array()?);
        Ok(r)
    }

    /// Tokens of each cover.
    pub fn covers(&self) -> &[u64] {
        &self.covers
    }

    fn fill(&mut self, buf: &mut [u8]) -> Result<()> {
        self.r.read_exact(buf).map_err(|e| {
            if e.kind() == std::io::ErrorKind::UnexpectedEof {
                Error::corrupt(&self.path, "truncated first-sighting file")
            } else {
                Error::corrupt(&self.path, format!("read failed: {e}"))
            }
        })?;
        self.hash.update(buf);
        Ok(())
    }

    fn array<const N: usize>(&mut self) -> Result<[u8; N]> {
        let mut a = [0u8; N];
        self.fill(&mut a)?;
        Ok(a)
    }

    /// The next `(id, cover, position)`, or `None` after the last one (the
    /// trailer is checked then).
    pub fn next_entry(&mut self) -> Result<Option<(WordId, u32, u64)>> {
        if self.left == 0 {
            if !self.done {
                self.done = true;
                let want = self.hash.digest();
                let mut t = [0u8; 8];
                self.r.read_exact(&mut t).map_err(|_| {
                    Error::corrupt(&self.path, "first-sighting file has no trailer")
                })?;
                if u64::from_le_bytes(t) != want {
                    return Err(Error::corrupt(
                        &self.path,
                        "first-sighting file checksum mismatch",
                    ));
                }
                let mut extra = [0u8; 1];
                if self.r.read(&mut extra).at(&self.path, "read")? != 0 {
                    return Err(Error::corrupt(&self.path, "bytes after the trailer"));
                }
            }
            return Ok(None);
        }
        self.left -= 1;
        let id = u64::from_le_bytes(self.array()?);
        let cover = u32::from_le_bytes(self.array()?);
        let pos = u64::from_le_bytes(self.array()?);
        if self.last.is_some_and(|l| l >= id) {
            return Err(Error::corrupt(
                &self.path,
                format!("ids do not increase at id {id:016x}"),
            ));
        }
        match self.covers.get(cover as usize) {
            Some(&n) if pos < n => {}
            _ => {
                return Err(Error::corrupt(
                    &self.path,
                    format!("entry {id:016x} points at cover {cover} position {pos}, outside the file's covers"),
                ))
            }
        }
        self.last = Some(id);
        Ok(Some((id, cover, pos)))
    }
}

/// Reads a whole side file, checking everything (for resume).
pub fn check(path: &Path) -> Result<()> {
    let mut r = Reader::open(path)?;
    while r.next_entry()?.is_some() {}
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_every_flipped_byte_is_detected() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.first");
        let entries = vec![(3, 0, 0), (7, 1, 2), (9, 0, 4)];
        write(&p, &[5, 3], &entries).unwrap();
        let mut r = Reader::open(&p).unwrap();
        assert_eq!(r.covers(), &[5, 3]);
        let mut got = Vec::new();
        while let Some(e) = r.next_entry().unwrap() {
            got.push(e);
        }
        assert_eq!(got, entries);
        let good = std::fs::read(&p).unwrap();
        for i in 0..good.len() {
            let mut bad = good.clone();
            bad[i] ^= 0x10;
            std::fs::write(&p, &bad).unwrap();
            assert!(check(&p).is_err(), "flip at byte {i} went unnoticed");
        }
        for n in 0..good.len() {
            std::fs::write(&p, &good[..n]).unwrap();
            assert!(check(&p).is_err(), "truncation to {n} bytes went unnoticed");
        }
    }
}
