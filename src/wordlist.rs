//! `--word-list FILE`: a fixed vocabulary. Every token outside the list is
//! counted as `<unk>`; the store keeps the list (`word-list.txt` in its
//! folder) and its size and checksum in its settings, so that `--append`
//! and a resume can insist on the same list. A staged plan keeps it the
//! same way in its shared directory, for the map tasks on other machines.

use std::path::Path;

use crate::error::{Error, Result};
use crate::fsutil;
use crate::layout;
use crate::records::WordListInfo;
use crate::tokenize::{Preparation, WordSet};
use crate::words::{BOS, EOS, UNK};

/// A word list read from its file: the set, its record, and its canonical
/// text (the words as counted, sorted by bytes, one a line).
pub struct WordList {
    /// The words.
    pub set: WordSet,
    /// Size and checksum, as the store's settings keep them.
    pub info: WordListInfo,
    /// The canonical text, written into the store.
    pub text: String,
}

impl WordList {
    /// Writes the canonical list into folder `dir` (a store, or a staged
    /// plan's shared directory) as `word-list.txt`, atomically.
    pub fn keep(&self, dir: &Path) -> Result<()> {
        fsutil::write_atomic(&layout::word_list(dir), self.text.as_bytes())
    }
}

/// Reads the list kept in folder `dir` by [`WordList::keep`] and checks it
/// against `info` (the settings that name it): a missing file, or one whose
/// size or checksum differ, is an error naming the file.
pub fn load_kept(dir: &Path, info: &WordListInfo) -> Result<WordList> {
    let path = layout::word_list(dir);
    let bytes = std::fs::read(&path).map_err(|e| Error::io(&path, "read", e))?;
    let sum = xxhash_rust::xxh3::xxh3_64(&bytes);
    let text = String::from_utf8(bytes).ok().filter(|_| sum == info.xxh3);
    let words: Option<Vec<String>> = text
        .as_ref()
        .map(|t| t.lines().map(str::to_owned).collect())
        .filter(|w: &Vec<String>| w.len() as u64 == info.words);
    match (text, words) {
        (Some(text), Some(words)) => Ok(WordList {
            set: WordSet::new(words),
            info: *info,
            text,
        }),
        _ => Err(Error::corrupt(
            &path,
            format!(
                "this is not the word list recorded in the settings ({} words, xxh3 {:016x})",
                info.words, info.xxh3
            ),
        )),
    }
}

/// Reads `path`: one word a line (surrounding whitespace ignored, empty
/// lines skipped; the markers `<s>`, `</s>` and `<unk>` are skipped, as
/// they are always in V). A line holding whitespace inside it cannot be a
/// token: an error names the file and line. Words are prepared as tokens
/// are at ingest (normalized, lowercased, digits: [`Preparation::prefix`]).
pub fn load(path: &Path, prep: &Preparation) -> Result<WordList> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, "read", e))?;
    let text = std::str::from_utf8(&bytes).map_err(|e| Error::Input {
        path: path.to_path_buf(),
        detail: format!("the word list is not UTF-8 (at byte {})", e.valid_up_to()),
    })?;
    let mut words: Vec<String> = Vec::new();
    for (i, line) in text.lines().enumerate() {
        let w = line.trim();
        if w.is_empty() || w == BOS || w == EOS || w == UNK {
            continue;
        }
        if w.chars().any(char::is_whitespace) {
            return Err(Error::Input {
                path: path.to_path_buf(),
                detail: format!(
                    "line {}: {w:?} holds whitespace, so it is no single token",
                    i + 1
                ),
            });
        }
        words.push(prep.prefix(w));
    }
    words.sort_unstable();
    words.dedup();
    if words.is_empty() {
        return Err(Error::Input {
            path: path.to_path_buf(),
            detail: "the word list holds no words".into(),
        });
    }
    let mut canon = String::new();
    for w in &words {
        canon.push_str(w);
        canon.push('\n');
    }
    Ok(WordList {
        info: WordListInfo {
            words: words.len() as u64,
            xxh3: xxhash_rust::xxh3::xxh3_64(canon.as_bytes()),
        },
        set: WordSet::new(words),
        text: canon,
    })
}
