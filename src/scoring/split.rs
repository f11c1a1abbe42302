//! Splitting the input into kept and dropped documents by score.
//!
//! A cut keeps a document when its score ([`super::DocResult::value`]) is
//! below a threshold; bad lines, empty documents and documents with an
//! infinite score are dropped. Every input line goes to exactly one of the
//! two outputs, unchanged but for its line end (`\n`; a `\r` before it is
//! dropped); a line too long to hold is not written.
//!
//! `--keep-fraction F` keeps the k = round(F · n) documents with the lowest
//! scores, n being the documents with a finite score: it needs every score
//! first, so the scores go to a side file in a first pass and the inputs
//! are read again in a second. While the distribution is exact (see
//! [`super::dist`]) exactly k are kept, ties at the k-th score going to the
//! earliest lines; beyond, every document up to the upper edge of the k-th
//! score's histogram bin is kept, which may keep a few more than k.

use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};

use super::read::Batches;
use super::Distribution;
use crate::error::{Error, IoContext, Result};

/// Where a document goes.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Cut {
    /// Keep scores below this value.
    Below(f64),
    /// Keep this fraction (0..=1) of the documents with a finite score, the
    /// lowest.
    Fraction(f64),
}

/// The two output files (a name ending in `.gz` is gzip-compressed).
pub struct Split {
    kept: Box<dyn Write>,
    dropped: Box<dyn Write>,
    paths: [PathBuf; 2],
    /// Lines written to each.
    pub counts: [u64; 2],
}

fn create(p: &Path) -> Result<Box<dyn Write>> {
    let f = BufWriter::with_capacity(1 << 20, File::create(p).at(p, "create")?);
    Ok(if p.extension().is_some_and(|e| e == "gz") {
        // The encoder takes its input in large pieces: each write to it
        // clears its whole output buffer, so a line at a time costs more
        // than the compression (as in the ARPA export).
        Box::new(BufWriter::with_capacity(
            1 << 16,
            flate2::write::GzEncoder::new(f, flate2::Compression::default()),
        ))
    } else {
        Box::new(f)
    })
}

impl Split {
    /// Creates (or replaces) both files.
    pub fn create(kept: &Path, dropped: &Path) -> Result<Split> {
        Ok(Split {
            kept: create(kept)?,
            dropped: create(dropped)?,
            paths: [kept.to_path_buf(), dropped.to_path_buf()],
            counts: [0, 0],
        })
    }

    /// Writes one line to the kept file (`keep`) or the dropped one.
    pub fn write(&mut self, keep: bool, line: &[u8]) -> Result<()> {
        let i = if keep { 0 } else { 1 };
        let w = if keep {
            &mut self.kept
        } else {
            &mut self.dropped
        };
        w.write_all(line)
            .and_then(|_| w.write_all(b"\n"))
            .at(&self.paths[i], "write")?;
        self.counts[i] += 1;
        Ok(())
    }

    /// Flushes both files (and ends a gzip stream).
    pub fn finish(mut self) -> Result<[u64; 2]> {
        self.kept.flush().at(&self.paths[0], "write")?;
        self.dropped.flush().at(&self.paths[1], "write")?;
        drop(self.kept);
        drop(self.dropped);
        Ok(self.counts)
    }
}

/// The scores of a first pass, one a line (NaN for a line without a
/// finite score), in a side file.
pub struct ScoreFile {
    path: PathBuf,
    out: Option<BufWriter<File>>,
}

impl ScoreFile {
    /// Creates the side file `path`.
    pub fn create(path: &Path) -> Result<ScoreFile> {
        Ok(ScoreFile {
            path: path.to_path_buf(),
            out: Some(BufWriter::new(File::create(path).at(path, "create")?)),
        })
    }

    /// Appends one line's score.
    pub fn push(&mut self, v: Option<f64>) -> Result<()> {
        let v = v.unwrap_or(f64::NAN);
        self.out
            .as_mut()
            .expect("open")
            .write_all(&v.to_le_bytes())
            .at(&self.path, "write")
    }

    /// The second pass: reads `inputs` again and writes each line where the
    /// cut keeping the `fraction` lowest of `dist` puts it.
    pub fn split(
        mut self,
        inputs: &[PathBuf],
        max_line: usize,
        dist: &Distribution,
        fraction: f64,
        out: &mut Split,
    ) -> Result<f64> {
        if let Some(o) = self.out.take() {
            o.into_inner()
                .map_err(|e| Error::io(&self.path, "write", e.into_error()))?;
        }
        let k = (fraction * dist.count as f64).round() as u64;
        let (threshold, mut ties) = match dist.kth(k) {
            Some((t, Some(below))) => (t, k - below),
            Some((t, None)) => (t, u64::MAX),
            None => (f64::NEG_INFINITY, 0),
        };
        let mut scores = BufReader::new(File::open(&self.path).at(&self.path, "open")?);
        let mut lines = Batches::new(inputs, max_line);
        while let Some(l) = lines.next_line()? {
            let mut b = [0u8; 8];
            scores.read_exact(&mut b).at(&self.path, "read")?;
            let v = f64::from_le_bytes(b);
            let keep = if v < threshold {
                true
            } else if v == threshold && ties > 0 {
                ties -= 1;
                true
            } else {
                false
            };
            if !l.too_long {
                out.write(keep, &l.bytes)?;
            }
        }
        let _ = std::fs::remove_file(&self.path);
        Ok(threshold)
    }
}

impl Drop for ScoreFile {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}
