//! Line reading with a hard limit on line length.

use std::io::BufRead;
use std::path::PathBuf;

use crate::error::{Error, Result};

/// What [`LineReader::next_line`] found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Line {
    /// A line (without `\n` and one trailing `\r`) is in the buffer.
    Text,
    /// A line longer than the limit was read past and skipped.
    TooLong,
    /// End of stream (or of the chunk).
    End,
}

/// Reads `\n`-terminated lines from a stream, never holding more than
/// `max_line` bytes of one line in memory.
pub struct LineReader {
    inner: Box<dyn BufRead + Send>,
    path: PathBuf,
    pos: u64,
    end: u64,
    max_line: usize,
}

impl LineReader {
    /// A reader over `inner`, which is positioned at `start`, stopping at
    /// the first line that starts at or after `end`.
    pub fn new(
        inner: Box<dyn BufRead + Send>,
        path: PathBuf,
        start: u64,
        end: u64,
        max_line: usize,
    ) -> Self {
        LineReader {
            inner,
            path,
            pos: start,
            end,
            max_line,
        }
    }

    /// Stream offset of the next unread byte (a line boundary between calls).
    pub fn position(&self) -> u64 {
        self.pos
    }

    /// Reads the next line into `line`.
    pub fn next_line(&mut self, line: &mut Vec<u8>) -> Result<Line> {
        line.clear();
        if self.pos >= self.end {
            return Ok(Line::End);
        }
        let mut too_long = false;
        let mut any = false;
        loop {
            let buf = match self.inner.fill_buf() {
                Ok(b) => b,
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => continue,
                Err(e) => {
                    return Err(Error::BadInput {
                        path: self.path.clone(),
                        offset: self.pos,
                        detail: e.to_string(),
                    })
                }
            };
            if buf.is_empty() {
                if !any {
                    return Ok(Line::End);
                }
                break;
            }
            any = true;
            let (take, used, done) = match memchr::memchr(b'\n', buf) {
                Some(i) => (i, i + 1, true),
                None => (buf.len(), buf.len(), false),
            };
            if !too_long {
                if line.len() + take > self.max_line {
                    too_long = true;
                    line.clear();
                } else {
                    line.extend_from_slice(&buf[..take]);
                }
            }
            self.inner.consume(used);
            self.pos += used as u64;
            if done {
                break;
            }
        }
        if too_long {
            return Ok(Line::TooLong);
        }
        if line.last() == Some(&b'\r') {
            line.pop();
        }
        Ok(Line::Text)
    }
}

/// A checksum of what a [`LineReader`] returned over a range: each line's
/// kind, its text and the position after it. Recorded with every counted
/// range and recomputed on resume, it detects any change of the input that
/// could change the counts of that range (the text of a line too long to be
/// counted is not part of it: only its length is).
#[derive(Clone, Default)]
pub struct CoverDigest(xxhash_rust::xxh3::Xxh3);

impl CoverDigest {
    /// Adds one result of [`LineReader::next_line`].
    pub fn add(&mut self, kind: Line, line: &[u8], position: u64) {
        let tag: u8 = match kind {
            Line::Text => 1,
            Line::TooLong => 2,
            Line::End => return,
        };
        self.0.update(&[tag]);
        if kind == Line::Text {
            self.0.update(&(line.len() as u64).to_le_bytes());
            self.0.update(line);
        }
        self.0.update(&position.to_le_bytes());
    }

    /// The checksum so far; starts a new range.
    pub fn take(&mut self) -> u64 {
        let d = self.0.digest();
        self.0.reset();
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(data: &'static [u8], max: usize) -> Vec<(Line, Vec<u8>, u64)> {
        let mut r = LineReader::new(Box::new(data), "t".into(), 0, u64::MAX, max);
        let mut out = Vec::new();
        let mut buf = Vec::new();
        loop {
            let l = r.next_line(&mut buf).unwrap();
            if l == Line::End {
                return out;
            }
            out.push((l, buf.clone(), r.position()));
        }
    }

    #[test]
    fn crlf_lone_cr_and_last_line_without_newline() {
        let got = lines(b"a b\r\nc\rd\n\nlast", 100);
        assert_eq!(
            got,
            vec![
                (Line::Text, b"a b".to_vec(), 5),
                (Line::Text, b"c\rd".to_vec(), 9),
                (Line::Text, b"".to_vec(), 10),
                (Line::Text, b"last".to_vec(), 14),
            ]
        );
    }

    #[test]
    fn overlong_line_is_skipped_and_reading_goes_on() {
        let got = lines(b"short\n0123456789\nok\n", 5);
        assert_eq!(got[0].0, Line::Text);
        assert_eq!(got[1], (Line::TooLong, vec![], 17));
        assert_eq!(got[2], (Line::Text, b"ok".to_vec(), 20));
    }
}
