//! The pipeline: the calling thread reads batches and hands them to the
//! workers, and hands the results to the sink in input order.

use std::collections::BTreeMap;
use std::path::PathBuf;

use crossbeam::channel;

use super::read::{Batches, RawLine, Worker};
use super::{DocResult, Models, Options, Summary};
use crate::error::{Error, Result};

/// Batches in flight per worker thread (read, being scored, or waiting to
/// be written): the bound on memory.
const IN_FLIGHT_PER_THREAD: usize = 3;

type Done = (usize, Result<Vec<DocResult>>, Vec<RawLine>);

/// Scores every line of `inputs` with `models` on `opts.threads` threads
/// and hands each result, with the line's original bytes, to `sink` in
/// input order (`None` for a line too long to hold). Returns the
/// totals; stops at the first error of reading, of a model or of the sink
/// (a bad line is no error).
pub fn score_inputs(
    inputs: &[PathBuf],
    opts: &Options,
    models: &Models<'_>,
    mut sink: impl FnMut(&DocResult, Option<&[u8]>) -> Result<()>,
) -> Result<Summary> {
    let threads = opts.threads.max(1);
    let (work_tx, work_rx) = channel::unbounded::<(usize, Vec<RawLine>)>();
    let (done_tx, done_rx) = channel::unbounded::<Done>();
    let mut summary = Summary::new(inputs, models.general.is_some());
    // One sender per worker, so that the results channel closes when every
    // worker has ended, however it ended.
    let senders: Vec<std::sync::Mutex<Option<channel::Sender<Done>>>> = (0..threads)
        .map(|_| std::sync::Mutex::new(Some(done_tx.clone())))
        .collect();
    drop(done_tx);
    let worker = |i: usize| -> Result<()> {
        let Some(done_tx) = senders[i].lock().ok().and_then(|mut s| s.take()) else {
            return Ok(());
        };
        let (main, general) = match models.make() {
            Ok(m) => m,
            Err(e) => {
                let _ = done_tx.send((usize::MAX, Err(e), Vec::new()));
                return Ok(());
            }
        };
        let mut w = Worker::new(main.preparation());
        while let Ok((seq, batch)) = work_rx.recv() {
            let r = w.score(opts, &*main, general.as_deref(), &batch);
            let failed = r.is_err();
            if done_tx.send((seq, r, batch)).is_err() || failed {
                break;
            }
        }
        Ok(())
    };
    let main = || -> Result<()> {
        let work_tx = work_tx;
        let mut batches = Batches::new(inputs, opts.max_line_bytes);
        let mut next_seq = 0;
        let mut next_out = 0;
        let mut eof = false;
        let mut waiting: BTreeMap<usize, (Vec<DocResult>, Vec<RawLine>)> = BTreeMap::new();
        loop {
            while !eof && next_seq - next_out < IN_FLIGHT_PER_THREAD * threads {
                let b = batches.next_batch()?;
                if b.is_empty() {
                    eof = true;
                } else {
                    work_tx
                        .send((next_seq, b))
                        .map_err(|_| Error::Config("the scoring threads stopped".into()))?;
                    next_seq += 1;
                }
            }
            if next_out == next_seq {
                break;
            }
            let (seq, r, lines) = done_rx
                .recv()
                .map_err(|_| Error::Config("the scoring threads stopped".into()))?;
            waiting.insert(seq, (r?, lines));
            while let Some((rs, lines)) = waiting.remove(&next_out) {
                for (r, l) in rs.iter().zip(&lines) {
                    summary.add(r);
                    sink(r, (!l.too_long).then_some(&l.bytes[..]))?;
                }
                next_out += 1;
                crate::fault::point(crate::fault::Point::ScoreBatch);
            }
        }
        Ok(())
    };
    crate::pool::with_workers(threads, worker, main)?;
    Ok(summary)
}
