//! `quern stage`: one task of a staged ingest, reported as one JSON line.

use std::io::Write;

use anyhow::Context;
use quern::stage::{self, PlanOptions};
use quern::store::Settings;

use crate::cli::args::StageCommand;

pub fn run(c: StageCommand) -> anyhow::Result<()> {
    let report = match c {
        StageCommand::Plan(a) => {
            let preparation = a.prep.preparation();
            let o = PlanOptions {
                dir: a.dir.clone(),
                inputs: a.inputs,
                settings: Settings {
                    order: a.order,
                    preparation,
                    word_list: None,
                    max_line_bytes: a.input.max_line_bytes,
                    from_counts: false,
                    unique: a.unique,
                    document_counts: a.document_counts,
                },
                word_list: a.word_list,
                format: a.input.format(),
                partitions: a.partitions,
                map_tasks: a.map_tasks,
            };
            let (job, outcome) =
                stage::plan(&o).with_context(|| format!("plan in {} failed", a.dir.display()))?;
            let bytes: Vec<u64> = (0..job.map_tasks.len())
                .map(|t| job.task_bytes(t))
                .collect();
            serde_json::json!({
                "stage": "plan",
                "outcome": outcome,
                "job": job.id(),
                "output": a.dir.join(stage::JOB_FILE),
                "inputs": job.inputs.len(),
                "input_bytes": job.inputs.iter().map(|f| f.size).sum::<u64>(),
                "partitions": job.partitions,
                "unique": job.settings.unique,
                "map_tasks": job.map_tasks.len(),
                "map_task_bytes": bytes,
            })
        }
        StageCommand::Hash(a) => {
            let r = stage::run_hash(&a.dir, a.task, a.memory.bytes.bytes())
                .with_context(|| format!("hash task {} in {} failed", a.task, a.dir.display()))?;
            serde_json::to_value(r)?
        }
        StageCommand::Mark(a) => {
            let r = stage::run_mark(&a.dir, a.partition, a.memory.bytes.bytes()).with_context(
                || {
                    format!(
                        "mark of hash range {} in {} failed",
                        a.partition,
                        a.dir.display()
                    )
                },
            )?;
            serde_json::to_value(r)?
        }
        StageCommand::Map(a) => {
            let r = stage::run_map(&a.dir, a.task, a.memory.bytes.bytes(), a.threads)
                .with_context(|| format!("map task {} in {} failed", a.task, a.dir.display()))?;
            serde_json::to_value(r)?
        }
        StageCommand::Merge(a) => {
            let r = stage::run_merge(&a.dir, a.partition, a.memory.bytes.bytes()).with_context(
                || {
                    format!(
                        "merge of partition {} in {} failed",
                        a.partition,
                        a.dir.display()
                    )
                },
            )?;
            serde_json::to_value(r)?
        }
        StageCommand::Join(a) => {
            let r = stage::run_join(&a.dir, a.partition, a.memory.bytes.bytes()).with_context(
                || {
                    format!(
                        "join of partition {} in {} failed",
                        a.partition,
                        a.dir.display()
                    )
                },
            )?;
            serde_json::to_value(r)?
        }
        StageCommand::Assemble(a) => {
            let r = stage::run_assemble(&a.dir, &a.store, a.memory.bytes.bytes())
                .with_context(|| format!("assemble into {} failed", a.store.display()))?;
            serde_json::to_value(r)?
        }
        StageCommand::Clean(a) => {
            stage::clean(&a.dir).with_context(|| format!("clean of {} failed", a.dir.display()))?;
            serde_json::json!({"stage": "clean", "output": a.dir})
        }
    };
    let mut out = std::io::stdout().lock();
    serde_json::to_writer(&mut out, &report)?;
    writeln!(out)?;
    Ok(())
}
