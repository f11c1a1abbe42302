//! The plan of a staged ingest: the inputs listed, cut into line-aligned
//! chunks and packed into map tasks of about equal bytes, written once to
//! `DIR/job.json` (with the word list, if any, beside it in
//! `DIR/word-list.txt`).

use std::path::PathBuf;

use serde::{Deserialize, Serialize};

use super::commit::{unique, Outcome};
use super::{JOB_FILE, STAGE_VERSION};
use crate::corpus::{self, Format, InputFile, Span};
use crate::error::{Error, Result};
use crate::fsutil;
use crate::key::MAX_ORDER;
use crate::records::Settings;
use crate::wordlist::{self, WordList};
use std::path::Path;

/// The plan of a staged ingest, written once to `DIR/job.json`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Job {
    /// [`STAGE_VERSION`].
    pub format_version: u32,
    /// Counting settings.
    pub settings: Settings,
    /// How the input lines hold documents (absent: plain lines).
    #[serde(default, skip_serializing_if = "Format::is_lines")]
    pub format: Format,
    /// Number of hash partitions (merge and join tasks).
    pub partitions: u32,
    /// The inputs, as found when planned.
    pub inputs: Vec<InputFile>,
    /// Per map task, the input spans it counts.
    pub map_tasks: Vec<Vec<Span>>,
}

impl Job {
    /// Reads and verifies `DIR/job.json`.
    pub fn load(dir: &Path) -> Result<Job> {
        let path = dir.join(JOB_FILE);
        fsutil::read_checked_json_upgraded(
            &path,
            STAGE_VERSION,
            crate::records::upgrade_partition_records,
        )?
        .ok_or_else(|| {
            Error::state(
                dir,
                format!(
                    "no plan here ({} is missing): run `quern stage plan --dir {}` first",
                    path.display(),
                    dir.display()
                ),
            )
        })
    }

    /// A short identity of the plan, recorded in every output so that
    /// outputs of another plan in the same directory are never mixed in.
    pub fn id(&self) -> String {
        let body = serde_json::to_vec(self).expect("job serialises");
        format!("{:016x}", xxhash_rust::xxh3::xxh3_64(&body))
    }

    /// The fixed word list of the plan in `dir` (kept in
    /// `DIR/word-list.txt` and checked against the settings), or `None`
    /// when every token counts.
    pub fn word_list(&self, dir: &Path) -> Result<Option<WordList>> {
        self.settings
            .word_list
            .as_ref()
            .map(|info| wordlist::load_kept(dir, info))
            .transpose()
    }

    /// Every span of every map task, in input order: the chunks that
    /// `--unique` files its duplicate positions by.
    pub fn chunks(&self) -> Vec<Span> {
        let mut all: Vec<Span> = self.map_tasks.iter().flatten().copied().collect();
        all.sort_by_key(|s| (s.file, s.start));
        all
    }

    /// Input bytes of map task `t` (a span to the end counts the whole file).
    pub fn task_bytes(&self, t: usize) -> u64 {
        self.map_tasks[t]
            .iter()
            .map(|s| span_bytes(s, &self.inputs))
            .sum()
    }
}

pub(super) fn span_bytes(s: &Span, inputs: &[InputFile]) -> u64 {
    s.end
        .min(inputs[s.file as usize].size)
        .saturating_sub(s.start)
}

/// What [`plan`] needs.
#[derive(Clone, Debug)]
pub struct PlanOptions {
    /// The shared directory.
    pub dir: PathBuf,
    /// Files or directories (walked recursively, sorted).
    pub inputs: Vec<PathBuf>,
    /// Counting settings (their `word_list` is set from [`Self::word_list`]).
    pub settings: Settings,
    /// A fixed vocabulary, as `quern ingest --word-list` takes it: every
    /// token outside it is counted as `<unk>`. The plan keeps a copy, so
    /// the tasks need not see this file.
    pub word_list: Option<PathBuf>,
    /// How the input lines hold documents.
    pub format: Format,
    /// Number of partitions.
    pub partitions: u32,
    /// Number of map tasks wanted (fewer when there are fewer chunks).
    pub map_tasks: usize,
}

/// Plans a staged ingest: writes `DIR/job.json`, or checks that the one
/// there is the same plan (a second run of the same command is a no-op).
pub fn plan(o: &PlanOptions) -> Result<(Job, Outcome)> {
    let order = o.settings.order;
    if order == 0 || order > MAX_ORDER {
        return Err(Error::Config(format!(
            "--order {order} is outside 1..={MAX_ORDER}"
        )));
    }
    if o.partitions == 0 {
        return Err(Error::Config("--partitions must be at least 1".into()));
    }
    if o.map_tasks == 0 {
        return Err(Error::Config("--map-tasks must be at least 1".into()));
    }
    if o.inputs.is_empty() {
        return Err(Error::Config("no inputs given".into()));
    }
    let list = match &o.word_list {
        Some(p) => Some(wordlist::load(p, &o.settings.preparation)?),
        None => None,
    };
    let settings = Settings {
        word_list: list.as_ref().map(|l| l.info),
        ..o.settings
    };
    let inputs = corpus::discover(&o.inputs)?;
    if let Some(f) = inputs.iter().find(|f| f.is_stdin()) {
        return Err(Error::Input {
            path: f.path.clone(),
            detail: "a staged ingest cannot read standard input (its tasks run elsewhere)".into(),
        });
    }
    let total: u64 = inputs.iter().map(|f| f.size).sum();
    // About four chunks per task, so that the packing can even them out;
    // compressed files cannot be cut and stay one chunk each.
    let chunk = (total / (o.map_tasks as u64 * 4)).clamp(1 << 20, 1 << 30);
    let mut spans = corpus::plan_chunks(&inputs, chunk)?;
    // Largest first, each to the task with the fewest bytes so far (ties:
    // the lowest task); deterministic for a given input list.
    spans.sort_by(|a, b| {
        span_bytes(b, &inputs)
            .cmp(&span_bytes(a, &inputs))
            .then((a.file, a.start).cmp(&(b.file, b.start)))
    });
    let n = o.map_tasks.min(spans.len()).max(1);
    let mut tasks: Vec<(u64, Vec<Span>)> = vec![(0, Vec::new()); n];
    for s in spans {
        let t = (0..n).min_by_key(|&i| (tasks[i].0, i)).expect("n ≥ 1");
        tasks[t].0 += span_bytes(&s, &inputs);
        tasks[t].1.push(s);
    }
    let map_tasks = tasks
        .into_iter()
        .map(|(_, mut v)| {
            v.sort_by_key(|s| (s.file, s.start));
            v
        })
        .filter(|v| !v.is_empty())
        .collect();
    let job = Job {
        format_version: STAGE_VERSION,
        settings,
        format: o.format.clone(),
        partitions: o.partitions,
        inputs,
        map_tasks,
    };
    fsutil::create_dir(&o.dir)?;
    let path = o.dir.join(JOB_FILE);
    if path.exists() {
        let old = Job::load(&o.dir)?;
        if old.settings.unique != job.settings.unique {
            return Err(Error::state(
                &o.dir,
                format!(
                    "{} holds a plan with {}, not {}: give another --dir, or delete this one",
                    path.display(),
                    crate::records::Unique::describe(old.settings.unique),
                    crate::records::Unique::describe(job.settings.unique)
                ),
            ));
        }
        if old != job {
            return Err(Error::state(
                &o.dir,
                format!(
                    "{} holds another plan (other settings, input format, word list, partitions, map tasks or inputs, or an input changed since): give another --dir, or delete this one",
                    path.display()
                ),
            ));
        }
        // The list kept beside it must be there and whole.
        old.word_list(&o.dir)?;
        return Ok((old, Outcome::Skipped));
    }
    // The list first: a plan in place always has its list beside it.
    if let Some(l) = &list {
        l.keep(&o.dir)?;
    }
    // Unique temporary name, then rename: two planners at once write the
    // same plan, so whichever rename lands last is as good as the first.
    let tmp = o.dir.join(format!(".{JOB_FILE}.{}.tmp", unique()));
    fsutil::write_checked_json(&tmp, &job)?;
    fsutil::rename_durable(&tmp, &path)?;
    Ok((job, Outcome::Written))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::records::Settings;

    /// The packing covers every chunk exactly once, in line-aligned spans,
    /// and no task exceeds the mean by more than the largest chunk (the
    /// bound of greedy largest-first packing, common practice).
    #[test]
    fn plan_packs_chunks_into_even_tasks() {
        let tmp = tempfile::tempdir().unwrap();
        let mut paths = Vec::new();
        for (i, lines) in [30_000usize, 9_000, 4_000, 700, 50].iter().enumerate() {
            let p = tmp.path().join(format!("in{i}.txt"));
            let text: String = (0..*lines)
                .map(|n| format!("line {n} of file {i} with some words\n"))
                .collect();
            std::fs::write(&p, text).unwrap();
            paths.push(p);
        }
        let o = PlanOptions {
            dir: tmp.path().join("job"),
            inputs: paths,
            settings: Settings {
                order: 3,
                preparation: Default::default(),
                max_line_bytes: 1 << 20,
                word_list: None,
                from_counts: false,
                unique: None,
                document_counts: false,
            },
            word_list: None,
            format: Format::Lines,
            partitions: 5,
            map_tasks: 3,
        };
        let (job, outcome) = plan(&o).unwrap();
        assert_eq!(outcome, Outcome::Written);
        assert_eq!(plan(&o).unwrap(), (job.clone(), Outcome::Skipped));
        let total: u64 = job.inputs.iter().map(|f| f.size).sum();
        let bytes: Vec<u64> = (0..job.map_tasks.len())
            .map(|t| job.task_bytes(t))
            .collect();
        assert_eq!(bytes.iter().sum::<u64>(), total);
        let largest = job
            .map_tasks
            .iter()
            .flatten()
            .map(|s| span_bytes(s, &job.inputs))
            .max()
            .unwrap();
        let mean = total / job.map_tasks.len() as u64;
        assert!(
            bytes.iter().all(|&b| b <= mean + largest),
            "{bytes:?}, mean {mean}, largest chunk {largest}"
        );
        // Spans of one file tile it: sorted, contiguous, from 0 to the end.
        for (i, f) in job.inputs.iter().enumerate() {
            let mut spans: Vec<Span> = job
                .map_tasks
                .iter()
                .flatten()
                .filter(|s| s.file as usize == i)
                .copied()
                .collect();
            spans.sort_by_key(|s| s.start);
            assert_eq!(spans[0].start, 0);
            assert_eq!(spans.last().unwrap().end, u64::MAX);
            for w in spans.windows(2) {
                assert_eq!(w[0].end, w[1].start);
                let text = std::fs::read(&f.path).unwrap();
                assert_eq!(text[w[1].start as usize - 1], b'\n', "cut inside a line");
            }
        }
    }
}
