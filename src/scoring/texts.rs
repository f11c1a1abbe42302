//! Documents held in memory (a program's strings, not input files): each
//! text is one document, scored as [`super::score_inputs`] scores a line
//! of `--lines` input (its sentences are its lines), on worker threads,
//! with the results in the order of the texts.

use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

use super::read::{RawLine, Worker, BATCH_BYTES, BATCH_LINES};
use super::{DocResult, Format, Models, Options};
use crate::error::{Error, Result};
use crate::predict::Predictor;

/// Scores `texts` with `models` on `threads` threads (at least 1; no more
/// than there are batches), one [`DocResult`] per text in their order;
/// `line` is the text's position counted from 1 and `id` the same number.
/// With `words`, each result keeps its predictions
/// ([`super::DocScore::words`]).
///
/// The texts are cut into the same batches as input lines (at most
/// [`BATCH_LINES`] texts or about [`BATCH_BYTES`] bytes each) whatever the
/// number of threads, and each worker thread makes its own model once, so
/// the results do not depend on the number of threads. Stops at the first
/// error of a model.
pub fn score_texts(
    texts: Vec<String>,
    threads: usize,
    words: bool,
    models: &Models<'_>,
) -> Result<Vec<DocResult>> {
    let opts = Options {
        format: Format::Lines,
        threads: threads.max(1),
        words,
        max_line_bytes: usize::MAX,
    };
    let mut batches: Vec<Vec<RawLine>> = Vec::new();
    let mut batch = Vec::new();
    let mut bytes = 0;
    for (i, text) in texts.into_iter().enumerate() {
        bytes += text.len() + 64;
        batch.push(RawLine {
            file: 0,
            line: i as u64 + 1,
            bytes: text.into_bytes(),
            too_long: false,
        });
        if batch.len() == BATCH_LINES || bytes >= BATCH_BYTES {
            batches.push(std::mem::take(&mut batch));
            bytes = 0;
        }
    }
    if !batch.is_empty() {
        batches.push(batch);
    }
    if batches.is_empty() {
        return Ok(Vec::new());
    }
    let done: Vec<Mutex<Option<Vec<DocResult>>>> =
        batches.iter().map(|_| Mutex::new(None)).collect();
    let next = AtomicUsize::new(0);
    let worker = || -> Result<()> {
        let (main, general) = models.make()?;
        let mut w = Worker::new(main.preparation());
        loop {
            let i = next.fetch_add(1, Ordering::Relaxed);
            let Some(b) = batches.get(i) else {
                return Ok(());
            };
            let r = w.score(&opts, &*main, general.as_deref(), b)?;
            *done[i].lock().unwrap_or_else(|p| p.into_inner()) = Some(r);
        }
    };
    crate::pool::on_each_thread(opts.threads.min(batches.len()), worker)?;
    let mut out = Vec::new();
    for d in done {
        let r = d.into_inner().unwrap_or_else(|p| p.into_inner());
        out.extend(r.ok_or_else(|| Error::Config("a scoring thread stopped".into()))?);
    }
    Ok(out)
}

/// Scores one text with `model` on the calling thread: what
/// [`score_texts`] gives for a list of that one text.
pub fn score_text<P: Predictor + ?Sized>(
    model: &P,
    text: String,
    words: bool,
) -> Result<DocResult> {
    let opts = Options {
        format: Format::Lines,
        threads: 1,
        words,
        max_line_bytes: usize::MAX,
    };
    let line = RawLine {
        file: 0,
        line: 1,
        bytes: text.into_bytes(),
        too_long: false,
    };
    let mut w = Worker::new(model.preparation());
    let mut r = w.score(&opts, &model, None, std::slice::from_ref(&line))?;
    r.pop()
        .ok_or_else(|| Error::Config("no result for the text".into()))
}
