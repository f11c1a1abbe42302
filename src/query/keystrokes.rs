//! Keystroke savings: typing held-out text word by word with the top K
//! completions of [`Predictor::complete`] shown, against typing every
//! character.
//!
//! The simulation (README, "Keystroke savings", is the definition the tests
//! check): each sentence is a line's tokens, split and lowercased as at
//! ingest. Take each word w of the sentence (`</s>` is not typed); its
//! context is `<s>` and the sentence's words before it. Before each
//! character of w is typed (so first before any), the top K completions of
//! the characters typed so far are shown; if w is among them it is chosen
//! at a cost of one keystroke, else the next character is typed at a cost
//! of one. A word never shown costs its length in characters (Unicode
//! scalar values) plus one (the space); a word outside V is never shown.
//! Without prediction every word costs its length plus one. Savings =
//! 1 − with / without.
//!
//! One completion query of the largest K serves every K: the exact top K
//! of a smaller K is the start of that list (ties are broken by id in both).

use std::io::BufRead;
use std::path::PathBuf;

use crate::error::{Error, Result};
use crate::words::{bos_id, word_id, WordId, BOS, EOS, UNK};

use super::Predictor;

/// The figures for one K.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct TopResult {
    /// K: how many completions are shown.
    pub top: usize,
    /// 1 − keystrokes with prediction / keystrokes without.
    pub savings: f64,
    /// The share of words chosen before their first character was typed.
    pub before_first_char: f64,
    /// The mean number of characters typed per word (the choosing
    /// keystroke and the space not included).
    pub chars_per_word: f64,
    /// Keystrokes with prediction.
    pub keystrokes: u64,
}

/// The report of a simulation.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct KeystrokeReport {
    /// Words typed (every token of every sentence; `</s>` is not typed).
    pub words: u64,
    /// Of them, words outside V (never shown).
    pub outside_vocabulary: u64,
    /// Keystrokes without prediction: Σ (length + 1).
    pub keystrokes_without: u64,
    /// One entry per K, in the order asked.
    pub results: Vec<TopResult>,
    /// Completion queries made.
    pub queries: u64,
}

/// One word of held-out text: its id and its text (as counted).
struct Token {
    id: WordId,
    chars: Vec<char>,
    in_v: bool,
}

/// Simulates typing every sentence of `paths` (`-`: standard input) with
/// the top K completions of `pred` shown, for each K of `tops` (each ≥ 1).
pub fn keystrokes(
    pred: &dyn Predictor,
    paths: &[PathBuf],
    tops: &[usize],
) -> Result<KeystrokeReport> {
    if tops.is_empty() || tops.contains(&0) {
        return Err(Error::Config(
            "--top needs one or more numbers, each at least 1".into(),
        ));
    }
    let kmax = *tops.iter().max().expect("not empty");
    let prep = pred.preparation();
    let mut found_at: Vec<Option<usize>> = vec![None; tops.len()];
    let mut report = KeystrokeReport {
        words: 0,
        outside_vocabulary: 0,
        keystrokes_without: 0,
        results: Vec::new(),
        queries: 0,
    };
    let mut with = vec![0u64; tops.len()];
    let mut before = vec![0u64; tops.len()];
    let mut typed = vec![0u64; tops.len()];
    let mut in_v_cache: crate::words::IdMap<bool> = Default::default();
    for p in paths {
        let reader: Box<dyn BufRead> = if p.as_os_str() == "-" {
            Box::new(std::io::BufReader::new(std::io::stdin()))
        } else {
            Box::new(std::io::BufReader::new(
                std::fs::File::open(p).map_err(|e| Error::io(p, "open", e))?,
            ))
        };
        for line in reader.split(b'\n') {
            let line = line.map_err(|e| Error::io(p, "read", e))?;
            let line = line.strip_suffix(b"\r").unwrap_or(&line);
            let text = String::from_utf8_lossy(line);
            let text = prep.normalized(&text);
            let mut tokens = Vec::new();
            prep.each_token(&text, |t| tokens.push(t.into_owned()));
            let mut sentence = Vec::new();
            for t in tokens {
                // A token spelled like a marker is `<unk>` at ingest: it
                // can never be shown.
                let marker = t == BOS || t == EOS || t == UNK;
                let id = word_id(t.as_bytes());
                let in_v = !marker
                    && match in_v_cache.get(&id) {
                        Some(&b) => b,
                        None => {
                            let b = pred.word(id)?.is_some();
                            in_v_cache.insert(id, b);
                            b
                        }
                    };
                sentence.push(Token {
                    id,
                    chars: t.chars().collect(),
                    in_v,
                });
            }
            let mut ctx = vec![bos_id()];
            for tok in &sentence {
                let len = tok.chars.len();
                report.words += 1;
                report.keystrokes_without += len as u64 + 1;
                found_at.iter_mut().for_each(|f| *f = None);
                if tok.in_v {
                    let mut prefix = String::new();
                    for i in 0..len {
                        let shown = pred.complete(&ctx, &prefix, kmax)?;
                        report.queries += 1;
                        if let Some(r) = shown.items.iter().position(|x| x.0 == tok.id) {
                            for (f, &k) in found_at.iter_mut().zip(tops) {
                                if f.is_none() && r < k {
                                    *f = Some(i);
                                }
                            }
                        }
                        if found_at.iter().all(|f| f.is_some()) {
                            break;
                        }
                        prefix.push(tok.chars[i]);
                    }
                } else {
                    report.outside_vocabulary += 1;
                }
                for (t, f) in found_at.iter().enumerate() {
                    match *f {
                        Some(i) => {
                            with[t] += i as u64 + 1;
                            typed[t] += i as u64;
                            before[t] += u64::from(i == 0);
                        }
                        None => {
                            with[t] += len as u64 + 1;
                            typed[t] += len as u64;
                        }
                    }
                }
                ctx.push(tok.id);
            }
        }
    }
    let words = report.words.max(1) as f64;
    report.results = tops
        .iter()
        .enumerate()
        .map(|(t, &k)| TopResult {
            top: k,
            savings: if report.keystrokes_without == 0 {
                0.0
            } else {
                1.0 - with[t] as f64 / report.keystrokes_without as f64
            },
            before_first_char: before[t] as f64 / words,
            chars_per_word: typed[t] as f64 / words,
            keystrokes: with[t],
        })
        .collect();
    Ok(report)
}
