//! Finding, opening and chunking the input, and reading it line by line.
//!
//! Inputs are files or directories (walked recursively in sorted order,
//! following symbolic links but refusing a link loop); `.gz` and `.zst`
//! files are decompressed as they stream; `-` is standard input. A plain
//! file is cut into chunks at line boundaries so that several readers can
//! share it; a compressed file or standard input is one chunk. Positions are
//! byte offsets in the (decompressed) stream; a chunk covers whole lines.

pub mod count_table;
pub mod docs;
mod lines;

pub use docs::{read_document, sentences, BadLine, Document, Format};
pub use lines::{CoverDigest, Line, LineReader};

use std::fs::File;
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::error::{Error, IoContext, Result};

/// How an input is compressed, from its file name.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Compression {
    /// Plain text.
    None,
    /// gzip (`.gz`), possibly several members.
    Gzip,
    /// Zstandard (`.zst`).
    Zstd,
}

/// One input file as found when the ingest was planned.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct InputFile {
    /// Path as given or found by walking a directory; `-` for standard input.
    pub path: PathBuf,
    /// Compression, from the extension.
    pub compression: Compression,
    /// Size on disk in bytes (0 for standard input).
    pub size: u64,
    /// Modification time, nanoseconds since the Unix epoch.
    pub mtime_ns: u64,
}

impl InputFile {
    /// True for standard input.
    pub fn is_stdin(&self) -> bool {
        self.path.as_os_str() == "-"
    }
}

/// A byte range `[start, end)` of one input's stream, covering whole lines.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Span {
    /// Index into the input list.
    pub file: u32,
    /// First byte.
    pub start: u64,
    /// One past the last byte (`u64::MAX`: to the end of the stream).
    pub end: u64,
}

/// Expands `paths` into the sorted list of input files.
pub fn discover(paths: &[PathBuf]) -> Result<Vec<InputFile>> {
    let mut out = Vec::new();
    for p in paths {
        if p.as_os_str() == "-" {
            out.push(InputFile {
                path: p.clone(),
                compression: Compression::None,
                size: 0,
                mtime_ns: 0,
            });
            continue;
        }
        let meta = std::fs::metadata(p).map_err(|e| Error::Input {
            path: p.clone(),
            detail: format!("cannot use this input: {e}"),
        })?;
        if meta.is_dir() {
            let mut seen = Vec::new();
            walk(p, &mut seen, &mut out)?;
        } else {
            out.push(describe(p, &meta)?);
        }
    }
    Ok(out)
}

fn walk(dir: &Path, ancestors: &mut Vec<PathBuf>, out: &mut Vec<InputFile>) -> Result<()> {
    let canon = dir.canonicalize().at(dir, "resolve")?;
    if ancestors.contains(&canon) {
        return Err(Error::Input {
            path: dir.to_path_buf(),
            detail: "symbolic link loop: this directory contains itself".into(),
        });
    }
    ancestors.push(canon);
    let mut entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .at(dir, "read directory")?
        .map(|e| e.map(|e| e.path()))
        .collect::<std::io::Result<_>>()
        .at(dir, "read directory")?;
    entries.sort();
    for e in entries {
        let meta = std::fs::metadata(&e).map_err(|err| Error::Input {
            path: e.clone(),
            detail: format!("cannot use this input: {err}"),
        })?;
        if meta.is_dir() {
            walk(&e, ancestors, out)?;
        } else if meta.is_file() {
            out.push(describe(&e, &meta)?);
        }
    }
    ancestors.pop();
    Ok(())
}

fn describe(p: &Path, meta: &std::fs::Metadata) -> Result<InputFile> {
    // Fail early on an unreadable file, naming it.
    File::open(p).map_err(|e| Error::Input {
        path: p.to_path_buf(),
        detail: format!("cannot read this input: {e}"),
    })?;
    let name = p.to_string_lossy();
    let compression = if name.ends_with(".gz") {
        Compression::Gzip
    } else if name.ends_with(".zst") {
        Compression::Zstd
    } else {
        Compression::None
    };
    let mtime_ns = meta
        .modified()
        .ok()
        .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
        .map_or(0, |d| d.as_nanos() as u64);
    Ok(InputFile {
        path: p.to_path_buf(),
        compression,
        size: meta.len(),
        mtime_ns,
    })
}

/// The test setting that overrides every chunk size: `QUERN_CHUNK_BYTES=<n>`
/// (bytes, at least 1) in the environment makes [`plan_chunks`] cut plain
/// files into chunks of about n bytes, whatever size its caller asked for,
/// so that tests cut small fixtures into many chunks (the ingest's default
/// is 16 MiB, less for small inputs; a staged plan's at least 1 MiB). Not
/// for users: it is documented in DEVELOPERS.md only.
pub const CHUNK_BYTES_VAR: &str = "QUERN_CHUNK_BYTES";

pub(crate) fn chunk_bytes_setting(requested: u64) -> Result<u64> {
    match std::env::var_os(CHUNK_BYTES_VAR) {
        None => Ok(requested),
        Some(v) => match v.to_str().and_then(|s| s.parse::<u64>().ok()) {
            Some(n) if n >= 1 => Ok(n),
            _ => Err(Error::Config(format!(
                "{CHUNK_BYTES_VAR}={} is not a chunk size (a number of bytes, at least 1)",
                v.to_string_lossy()
            ))),
        },
    }
}

/// Cuts the inputs into chunks of about `chunk_bytes` (or the size set by
/// [`CHUNK_BYTES_VAR`]), at line boundaries.
pub fn plan_chunks(files: &[InputFile], chunk_bytes: u64) -> Result<Vec<Span>> {
    let chunk_bytes = chunk_bytes_setting(chunk_bytes)?;
    let mut chunks = Vec::new();
    for (i, f) in files.iter().enumerate() {
        let file = i as u32;
        if f.compression != Compression::None || f.is_stdin() || f.size <= chunk_bytes {
            chunks.push(Span {
                file,
                start: 0,
                end: u64::MAX,
            });
            continue;
        }
        let mut fh = File::open(&f.path).at(&f.path, "open")?;
        let mut start = 0;
        while start < f.size {
            let nominal = start + chunk_bytes;
            let end = if nominal >= f.size {
                u64::MAX
            } else {
                fh.seek(SeekFrom::Start(nominal - 1)).at(&f.path, "seek")?;
                let mut r = BufReader::new(&mut fh);
                let mut skipped = Vec::new();
                let mut n = 0u64;
                loop {
                    skipped.clear();
                    let got = (&mut r)
                        .take(1 << 20)
                        .read_until(b'\n', &mut skipped)
                        .at(&f.path, "read")?;
                    n += got as u64;
                    if got == 0 || skipped.last() == Some(&b'\n') {
                        break;
                    }
                }
                let e = nominal - 1 + n;
                if e >= f.size {
                    u64::MAX
                } else {
                    e
                }
            };
            chunks.push(Span { file, start, end });
            if end == u64::MAX {
                break;
            }
            start = end;
        }
    }
    Ok(chunks)
}

/// Opens an input's stream positioned at `start` (decompressing and
/// discarding up to it for compressed inputs).
pub fn open_at(f: &InputFile, start: u64) -> Result<Box<dyn BufRead + Send>> {
    const BUF: usize = 1 << 20;
    if f.is_stdin() {
        return Ok(Box::new(BufReader::with_capacity(BUF, std::io::stdin())));
    }
    let mut file = File::open(&f.path).at(&f.path, "open")?;
    let mut r: Box<dyn BufRead + Send> = match f.compression {
        Compression::None => {
            file.seek(SeekFrom::Start(start)).at(&f.path, "seek")?;
            return Ok(Box::new(BufReader::with_capacity(BUF, file)));
        }
        Compression::Gzip => Box::new(BufReader::with_capacity(
            BUF,
            flate2::read::MultiGzDecoder::new(BufReader::new(file)),
        )),
        Compression::Zstd => Box::new(BufReader::with_capacity(
            BUF,
            zstd::Decoder::new(file).at(&f.path, "decompress")?,
        )),
    };
    let skipped = std::io::copy(&mut (&mut r).take(start), &mut std::io::sink()).map_err(|e| {
        Error::BadInput {
            path: f.path.clone(),
            offset: 0,
            detail: e.to_string(),
        }
    })?;
    if skipped != start {
        return Err(Error::Input {
            path: f.path.clone(),
            detail: format!(
                "the input is shorter than when it was first read ({skipped} < {start} bytes)"
            ),
        });
    }
    Ok(r)
}

/// The [`CoverDigest`] of `[start, end)` of input `f`, read as an ingest
/// reads it.
pub fn digest_range(f: &InputFile, start: u64, end: u64, max_line: usize) -> Result<u64> {
    let mut lines = LineReader::new(open_at(f, start)?, f.path.clone(), start, end, max_line);
    let mut d = CoverDigest::default();
    let mut line = Vec::new();
    loop {
        let kind = lines.next_line(&mut line)?;
        if kind == Line::End {
            return Ok(d.take());
        }
        d.add(kind, &line, lines.position());
    }
}

/// The line number (1-based) of the line starting at each of `offsets`
/// (ascending) in input `f`: one plus the line ends before it, counted by
/// reading the input up to the last offset.
pub fn line_numbers(f: &InputFile, offsets: &[u64]) -> Result<Vec<u64>> {
    let mut r = open_at(f, 0)?;
    let mut pos = 0u64;
    let mut ends = 0u64;
    let mut out = Vec::with_capacity(offsets.len());
    for &at in offsets {
        while pos < at {
            let buf = r.fill_buf().map_err(|e| Error::BadInput {
                path: f.path.clone(),
                offset: pos,
                detail: e.to_string(),
            })?;
            if buf.is_empty() {
                break;
            }
            let take = buf.len().min((at - pos) as usize);
            ends += memchr::memchr_iter(b'\n', &buf[..take]).count() as u64;
            r.consume(take);
            pos += take as u64;
        }
        out.push(ends + 1);
    }
    Ok(out)
}
