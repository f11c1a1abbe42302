#!/usr/bin/env python3
"""Run a quern ingest on Apache Spark, with the `quern stage` subcommands.

Spark is the scheduler, the retrier and the cluster manager; every task runs
the quern binary on an executor against a directory that all executors share
(a local path in local mode, NFS or another file system with atomic renames
on a cluster). The job:

  1. plan      one task: `quern stage plan` lists the inputs, fixes the number
               of partitions and packs the inputs into map tasks of about
               equal bytes (DIR/job.json);
     hash      with --unique: one task per map task, largest first (hashes
               its sentences or documents, cut into hash ranges);
     mark      with --unique: one task per partition (a hash range: keeps
               the first occurrence in input order of each unit, records
               every other one for the map task that reads it);
  2. map       one task per map task of the plan, largest first (with
               --unique, skipping the units the mark tasks recorded);
  3. merge     one task per partition (merges its section of every map output);
  4. join      one task per partition (the second shuffle: continuation
               counts, context statistics, store files);
  5. assemble  one task: builds the store from every partition.

Each quern task is idempotent: a finished output is recognised and skipped,
two copies at once leave one output (the first to finish), so Spark's retries
and speculative copies are safe, and running this script again after a
failure resumes the job. Progress shows in Spark's UI (one job per stage,
named after it) and in its logs; the summary is printed as one JSON line on
standard output (and written to --report).

Example (see README.md, "On a cluster"):

  spark-submit --master yarn --files /opt/quern/bin/quern \\
      --conf spark.task.maxFailures=4 \\
      scripts/spark_ingest.py --dir /mnt/shared/crawl-job \\
      --store /mnt/shared/stores/crawl-5 --order 5 --partitions 256 \\
      --map-tasks 800 --task-memory 3GiB /mnt/shared/crawl/

The options --fault-kill and --fault-twice are for tests: they inject a kill
into the first attempt of one task, or run two copies of one task at once.
"""

import argparse
import json
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time

STAGES = ("plan", "hash", "mark", "map", "merge", "join", "assemble")
FAILED = "quern task failed: "


def parse_args(argv):
    p = argparse.ArgumentParser(
        prog="spark_ingest.py",
        description="Count the n-grams of INPUTS into a quern store, with Spark running the tasks.",
    )
    p.add_argument("--dir", required=True, help="shared directory of the job, seen by every executor")
    p.add_argument("--store", required=True, help="store directory to build (on the shared storage)")
    p.add_argument("--order", type=int, default=5, help="highest n-gram order N (default 5)")
    p.add_argument("--lowercase", action="store_true", help="lowercase every token (default: off)")
    p.add_argument("--normalize", default="none", choices=("none", "nfc", "nfkc"),
                   help="Unicode normalization of the text, as quern ingest --normalize (default: none)")
    p.add_argument("--sentences", default="lines", choices=("lines", "split", "document"),
                   help="where sentences end, as quern ingest --sentences (default: lines)")
    p.add_argument("--tokens", default="whitespace", choices=("whitespace", "words"),
                   help="what a token is, as quern ingest --tokens (default: whitespace)")
    p.add_argument("--digits", default="keep", choices=("keep", "zero"),
                   help="decimal digits kept or each made 0, as quern ingest --digits (default: keep)")
    p.add_argument("--word-list", default=None, metavar="FILE",
                   help="a fixed vocabulary, one word a line, on the shared storage (the plan task "
                        "reads it and keeps a copy in --dir); every other token counts as <unk> "
                        "(default: every token counts)")
    p.add_argument("--jsonl", action="store_true",
                   help="the inputs are JSON lines, one document a line: the text field of each is "
                        "counted, its lines as sentences (default: plain text, a line a sentence)")
    p.add_argument("--text-field", default="text", metavar="NAME",
                   help="with --jsonl: the field holding the text (default: text)")
    p.add_argument("--unique", default=None, choices=("lines", "documents"),
                   help="count each distinct sentence (lines) or document (documents), judged on its "
                        "prepared tokens, only where it first occurs in input order, as quern ingest "
                        "--unique does; adds the hash and mark stages (default: every occurrence counts)")
    p.add_argument("--document-counts", action="store_true",
                   help="also store each n-gram's number of documents (default: counts only)")
    p.add_argument("--max-line-bytes", type=int, default=1 << 20, help="skip lines longer than this many bytes (default 1048576)")
    p.add_argument("--partitions", type=int, default=64,
                   help="partitions: one merge and one join task each (default 64)")
    p.add_argument("--map-tasks", type=int, default=0,
                   help="map tasks (default: 4 per core of the cluster, as Spark's default parallelism)")
    p.add_argument("--task-memory", default="1GiB",
                   help="memory budget of each quern task (default 1GiB; KiB/MiB/GiB are powers of 1024, "
                        "K/M/G powers of 1000); size executor memory overhead to it")
    p.add_argument("--map-threads", type=int, default=1,
                   help="counting threads per map task (default 1; match spark.task.cpus)")
    p.add_argument("--quern", default=None,
                   help="path of the quern binary on the executors (default: the file shipped with "
                        "--files, else `quern` on PATH)")
    p.add_argument("--clean", action="store_true",
                   help="remove the intermediate outputs once the store is built")
    p.add_argument("--report", default=None, help="also write the JSON summary to this file (default: none)")
    p.add_argument("--fault-kill", action="append", default=[], metavar="STAGE:TASK:POINT",
                   help="tests: SIGKILL the first attempt of this task at a fault point "
                        "(stage-written: output written, not committed; stage-done: committed)")
    p.add_argument("--fault-twice", action="append", default=[], metavar="STAGE:TASK",
                   help="tests: run two copies of this task at once in one attempt")
    p.add_argument("inputs", nargs="+", help="files or directories (on the shared storage)")
    a = p.parse_args(argv)
    for spec in a.fault_kill:
        if len(spec.split(":")) != 3 or spec.split(":")[0] not in STAGES:
            p.error(f"--fault-kill {spec!r}: expected STAGE:TASK:POINT")
    for spec in a.fault_twice:
        if len(spec.split(":")) != 2 or spec.split(":")[0] not in STAGES:
            p.error(f"--fault-twice {spec!r}: expected STAGE:TASK")
    return a


# ---------------------------------------------------------------- executors

def find_quern(explicit):
    """The quern binary on this executor."""
    if explicit:
        if not os.path.isfile(explicit):
            raise RuntimeError(FAILED + f"--quern {explicit}: no such file on this executor")
        return explicit
    try:
        from pyspark import SparkFiles
        shipped = SparkFiles.get("quern")
    except Exception:  # no SparkContext files here
        shipped = None
    if shipped and os.path.isfile(shipped):
        if os.access(shipped, os.X_OK):
            return shipped
        # Files shipped with --files may lose their mode: use an executable copy.
        copy = os.path.join(tempfile.gettempdir(), f"quern-{os.getpid()}")
        if not os.path.exists(copy):
            shutil.copyfile(shipped, copy)
            os.chmod(copy, 0o755)
        return copy
    found = shutil.which("quern")
    if found:
        return found
    raise RuntimeError(FAILED + "the quern binary was not found on this executor: ship it with "
                       "`spark-submit --files /path/to/quern`, install it on PATH, or give --quern")


def run_task(conf, stage, task, args):
    """Runs `quern stage STAGE ARGS` in a Spark task; returns its report."""
    from pyspark import TaskContext
    ctx = TaskContext.get()
    attempt = ctx.attemptNumber() if ctx is not None else 0
    quern = find_quern(conf["quern"])
    env = dict(os.environ)
    env.pop("QUERN_KILL_AT", None)
    key = f"{stage}:{task}"
    point = conf["kill"].get(key)
    if point and attempt == 0:
        env["QUERN_KILL_AT"] = f"{point}:1"
    copies = 2 if key in conf["twice"] else 1
    cmd = [quern, "stage", stage] + [str(x) for x in args]
    t0 = time.time()
    procs = [subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
                              text=True, stdin=subprocess.DEVNULL) for _ in range(copies)]
    outs = [p.communicate() for p in procs]
    reports = []
    for p, (out, err) in zip(procs, outs):
        if err:
            sys.stderr.write(err)  # lands in the executor's log
        if p.returncode != 0:
            how = (f"killed by signal {-p.returncode}" if p.returncode < 0
                   else f"exit status {p.returncode}")
            detail = " | ".join(line for line in err.strip().splitlines() if line) or "no message"
            raise RuntimeError(FAILED + f"{stage} task {task} (attempt {attempt}) {how}: {detail}")
        lines = [line for line in out.splitlines() if line.strip()]
        reports.append(json.loads(lines[-1]))
    sys.stderr.write(f"quern {stage} task {task} attempt {attempt}: "
                     f"{[r.get('outcome') for r in reports]} in {time.time() - t0:.1f} s\n")
    return {"stage": stage, "task": task, "attempt": attempt, "reports": reports}


# ------------------------------------------------------------------- driver

class Log:
    """Messages into Spark's own driver log (log4j), else to standard error."""

    def __init__(self, sc):
        self.jlog = None
        try:
            self.jlog = sc._jvm.org.apache.log4j.LogManager.getLogger("quern.spark_ingest")
        except Exception:
            pass

    def info(self, msg):
        if self.jlog is not None:
            try:
                self.jlog.info(msg)
                return
            except Exception:
                self.jlog = None
        print(f"spark_ingest: {msg}", file=sys.stderr, flush=True)


def task_failure(exc):
    """The quern message inside a Spark job failure, if there is one."""
    text = str(exc)
    m = re.search(re.escape(FAILED) + r"(.*)", text)
    return m.group(1).strip() if m else text.strip().splitlines()[0] if text.strip() else repr(exc)


class StageFailed(Exception):
    """A stage's job failed after Spark's retries."""


def main(argv):
    a = parse_args(argv)
    from pyspark import SparkConf, SparkContext

    sc = SparkContext(conf=SparkConf().setAppName(f"quern ingest into {a.store}"))
    log = Log(sc)
    conf = {
        "quern": a.quern,
        "kill": {":".join(s.split(":")[:2]): s.split(":")[2] for s in a.fault_kill},
        "twice": set(a.fault_twice),
    }
    shared = os.path.abspath(a.dir)
    store = os.path.abspath(a.store)
    seconds = {}
    results = {}

    def run_stage(name, tasks, make_args):
        tasks = list(tasks)
        desc = f"quern {name}: {len(tasks)} task(s)"
        sc.setJobDescription(desc)  # the job's name in Spark's UI
        log.info(f"{desc} starting")
        t0 = time.time()
        rdd = sc.parallelize([(t, make_args(t)) for t in tasks], max(1, len(tasks)))
        try:
            got = rdd.map(lambda ta: run_task(conf, name, ta[0], ta[1])).collect()
        except Exception as e:  # Py4JJavaError: the job failed after Spark's retries
            raise StageFailed(f"the {name} stage failed: {task_failure(e)}") from None
        seconds[name] = round(time.time() - t0, 3)
        outcomes = {}
        for r in got:
            for rep in r["reports"]:
                outcomes[rep["outcome"]] = outcomes.get(rep["outcome"], 0) + 1
        log.info(f"{desc} done in {seconds[name]:.1f} s: {outcomes}")
        results[name] = sorted(got, key=lambda r: r["task"])
        return results[name]

    t_all = time.time()
    map_tasks = a.map_tasks or 4 * sc.defaultParallelism
    plan_args = ["--dir", shared, "--order", a.order, "--max-line-bytes", a.max_line_bytes,
                 "--partitions", a.partitions, "--map-tasks", map_tasks]
    if a.lowercase:
        plan_args.append("--lowercase")
    plan_args += ["--normalize", a.normalize, "--sentences", a.sentences,
                  "--tokens", a.tokens, "--digits", a.digits]
    if a.document_counts:
        plan_args.append("--document-counts")
    if a.jsonl:
        plan_args += ["--jsonl", "--text-field", a.text_field]
    if a.word_list:
        plan_args += ["--word-list", os.path.abspath(a.word_list)]
    if a.unique:
        plan_args += ["--unique", a.unique]
    plan_args += [os.path.abspath(i) for i in a.inputs]
    plan = run_stage("plan", [0], lambda t: plan_args)[0]["reports"][0]
    log.info(f"plan {plan['job']}: {plan['inputs']} input file(s), {plan['input_bytes']} bytes, "
             f"{plan['map_tasks']} map tasks, {plan['partitions']} partitions")
    sizes = plan["map_task_bytes"]
    by_size = sorted(range(len(sizes)), key=lambda t: (-sizes[t], t))
    mem = a.task_memory
    parts = range(plan["partitions"])
    if a.unique:
        run_stage("hash", by_size, lambda t: ["--dir", shared, "--task", t, "--memory", mem])
        run_stage("mark", parts, lambda p: ["--dir", shared, "--partition", p, "--memory", mem])
    run_stage("map", by_size, lambda t: ["--dir", shared, "--task", t, "--memory", mem,
                                         "--threads", a.map_threads])
    run_stage("merge", parts, lambda p: ["--dir", shared, "--partition", p, "--memory", mem])
    run_stage("join", parts, lambda p: ["--dir", shared, "--partition", p, "--memory", mem])
    run_stage("assemble", [0], lambda t: ["--dir", shared, "--store", store, "--memory", mem])
    if a.clean:
        run_stage("clean", [0], lambda t: ["--dir", shared])
    summary = {
        "store": store,
        "dir": shared,
        "job": plan["job"],
        "seconds": round(time.time() - t_all, 3),
        "stage_seconds": seconds,
        "tasks": {k: len(v) for k, v in results.items()},
        "map_task_bytes": sizes,
        "results": results,
    }
    line = json.dumps(summary, sort_keys=True)
    if a.report:
        with open(a.report, "w", encoding="utf-8") as f:
            f.write(line + "\n")
    print(line, flush=True)
    log.info(f"store {store} built in {summary['seconds']:.1f} s")
    sc.stop()


if __name__ == "__main__":
    try:
        main(sys.argv[1:])
    except StageFailed as e:
        print(f"spark_ingest: error: {e}", file=sys.stderr, flush=True)
        sys.exit(1)
