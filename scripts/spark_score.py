#!/usr/bin/env python3
"""Score a crawl's document files with quern, one Spark task per file.

Every input file (JSON lines, plain or .gz or .zst; directories are walked)
is one task: it runs `quern score --jsonl` on the executor and writes one
scored file per input, `OUT/<name>/scores.jsonl` (one JSON result per input
line, in input order, exactly what the single-machine command prints),
beside that run's `summary.json`.

The commit protocol is the one of the ingest stages (`quern stage`): a task
writes into a fresh temporary folder `OUT/.tmp-<name>-<unique>`, records
every file's size and SHA-256 in its `done.json`, and renames the folder to
`OUT/<name>` (atomic on one file system). An output whose `done.json`
matches its files is finished and skipped, so Spark's retries, speculative
copies and a second run of this script are safe; two copies at once leave
the output of the first to finish; a damaged output is moved aside and
redone.

The model: `--store DIR` on storage every executor sees (a RocksDB store,
opened read-only by each task), or `--model FILE` for a frozen model, which
is shipped to the executors with `spark-submit --files MODEL` (found with
SparkFiles and memory-mapped there) or read from the shared path.

The driver merges the tasks' summaries into `OUT/summary.json` (and prints
it as one JSON line): counts, totals, and the distribution of the
documents' scores with its percentiles, computed from the merged
histograms (nearest rank, each within the documented bound of the exact
value: 0.0115 % relative for a perplexity, see src/scoring/dist.rs).

The option --fault-kill NAME:POINT is for tests: it SIGKILLs the first
attempt of the task of input NAME at POINT, `scoring` (the quern process,
after its first batch of results) or `commit` (the task itself, after its
done.json is written and before the rename). Spark retries the task; the
retry starts afresh in a new temporary folder, and the driver removes the
temporary folders that killed attempts left once every task has ended,
naming them in the summary (`leftovers_removed`).

Example:

  spark-submit --master yarn --files /opt/quern/bin/quern,/models/ref.qm \\
      scripts/spark_score.py --model ref.qm --out /mnt/shared/scored \\
      /mnt/shared/crawl/
"""

import argparse
import hashlib
import json
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
import uuid

FAILED = "quern task failed: "
PERCENTILES = [1, 5, 10, 25, 50, 75, 90, 95, 99]
INPUT_RE = re.compile(r"\.jsonl(\.gz|\.zst)?$|\.json(\.gz|\.zst)?$")


def parse_args(argv):
    p = argparse.ArgumentParser(
        prog="spark_score.py",
        description="Score the documents of INPUTS with quern, one Spark task per input file.",
    )
    p.add_argument("--out", required=True, help="output directory, seen by every executor")
    m = p.add_mutually_exclusive_group(required=True)
    m.add_argument("--store", help="store directory (shared storage)")
    m.add_argument("--model", help="frozen model: a file shipped with --files, or a shared path")
    p.add_argument("--method", default="mkn", help="with --store: the method (default mkn)")
    p.add_argument("--minus-store", default=None,
                   help="with --store: a general store; score by the cross-entropy difference")
    p.add_argument("--text-field", default="text", help="the field holding the text (default text)")
    p.add_argument("--id-field", default="id", help="the field copied as the id (default id)")
    p.add_argument("--task-threads", type=int, default=1,
                   help="scoring threads per task (default 1; match spark.task.cpus)")
    p.add_argument("--memory", default="256MiB", help="cache memory of each task (default 256MiB)")
    p.add_argument("--quern", default=None,
                   help="path of the quern binary on the executors (default: the file shipped "
                        "with --files, else `quern` on PATH)")
    p.add_argument("--report", default=None, help="also write the merged summary to this file")
    p.add_argument("--fault-kill", action="append", default=[], metavar="NAME:POINT",
                   help="tests: SIGKILL the first attempt of the task of input NAME at POINT "
                        "(scoring or commit)")
    p.add_argument("inputs", nargs="+", help="files or directories of JSON lines")
    a = p.parse_args(argv)
    for spec in a.fault_kill:
        if spec.rpartition(":")[2] not in ("scoring", "commit"):
            p.error(f"--fault-kill {spec!r}: expected NAME:POINT with POINT scoring or commit")
    return a


# ---------------------------------------------------------------- executors

def shipped(name):
    """The path of a file shipped with --files, if any."""
    try:
        from pyspark import SparkFiles
        path = SparkFiles.get(name)
    except Exception:
        return None
    return path if path and os.path.isfile(path) else None


def find_quern(explicit):
    if explicit:
        if not os.path.isfile(explicit):
            raise RuntimeError(FAILED + f"--quern {explicit}: no such file on this executor")
        return explicit
    path = shipped("quern")
    if path:
        if os.access(path, os.X_OK):
            return path
        copy = os.path.join(tempfile.gettempdir(), f"quern-{os.getpid()}")
        if not os.path.exists(copy):
            shutil.copyfile(path, copy)
            os.chmod(copy, 0o755)
        return copy
    found = shutil.which("quern")
    if found:
        return found
    raise RuntimeError(FAILED + "the quern binary was not found on this executor: ship it with "
                       "`spark-submit --files /path/to/quern`, install it on PATH, or give --quern")


def sha256(path):
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def finished(out):
    """True if `out` holds a committed output whose files match its done.json."""
    done = os.path.join(out, "done.json")
    try:
        with open(done, encoding="utf-8") as f:
            d = json.load(f)
        for name, (size, digest) in d["files"].items():
            p = os.path.join(out, name)
            if os.path.getsize(p) != size or sha256(p) != digest:
                return False
        return True
    except (OSError, ValueError, KeyError, TypeError):
        return False


def score_one(conf, name, path):
    """One task: scores `path` into OUT/name unless that is finished."""
    out = os.path.join(conf["out"], name)
    if finished(out):
        return {"name": name, "input": path, "outcome": "skipped"}
    from pyspark import TaskContext
    ctx = TaskContext.get()
    attempt = ctx.attemptNumber() if ctx is not None else 0
    kill = conf["kill"].get(name) if attempt == 0 else None
    env = dict(os.environ)
    env.pop("QUERN_KILL_AT", None)
    if kill == "scoring":
        env["QUERN_KILL_AT"] = "score-batch:1"
    quern = find_quern(conf["quern"])
    tmp = os.path.join(conf["out"], f".tmp-{name}-{uuid.uuid4().hex}")
    os.makedirs(tmp)
    cmd = [quern, "score"]
    model_from = None
    if conf["model"]:
        model = conf["model"]
        local = shipped(os.path.basename(model))
        model_from = "shipped" if local else "path"
        cmd += ["--model", local or model]
    else:
        cmd += ["--store", conf["store"], "--method", conf["method"], "--memory", conf["memory"]]
        if conf["minus_store"]:
            cmd += ["--minus-store", conf["minus_store"]]
    cmd += ["--jsonl", "--text-field", conf["text_field"], "--id-field", conf["id_field"],
            "--threads", str(conf["threads"]), "--summary", os.path.join(tmp, "summary.json"),
            path]
    t0 = time.time()
    with open(os.path.join(tmp, "scores.jsonl"), "wb") as scores:
        p = subprocess.run(cmd, stdout=scores, stderr=subprocess.PIPE, stdin=subprocess.DEVNULL,
                           env=env)
    err = p.stderr.decode("utf-8", "replace")
    if err:
        sys.stderr.write(err)  # lands in the executor's log
    if p.returncode != 0:
        shutil.rmtree(tmp, ignore_errors=True)
        detail = " | ".join(l for l in err.strip().splitlines() if l) or "no message"
        how = (f"killed by signal {-p.returncode}" if p.returncode < 0
               else f"exit status {p.returncode}")
        raise RuntimeError(FAILED + f"{path} (attempt {attempt}): {how}: {detail}")
    files = {}
    for f in ("scores.jsonl", "summary.json"):
        fp = os.path.join(tmp, f)
        with open(fp, "rb") as fh:
            os.fsync(fh.fileno())
        files[f] = [os.path.getsize(fp), sha256(fp)]
    st = os.stat(path)
    done = {"input": path, "input_size": st.st_size, "input_mtime_ns": st.st_mtime_ns,
            "files": files}
    with open(os.path.join(tmp, "done.json"), "w", encoding="utf-8") as f:
        json.dump(done, f, sort_keys=True)
        f.flush()
        os.fsync(f.fileno())
    if kill == "commit":
        os.kill(os.getpid(), 9)
    # The commit: one rename. If a finished output is there already (another
    # copy won), ours is dropped; a damaged one is moved aside first.
    try:
        os.rename(tmp, out)
        outcome = "scored"
    except OSError:
        if finished(out):
            shutil.rmtree(tmp, ignore_errors=True)
            outcome = "existing"
        else:
            aside = f"{out}.damaged-{uuid.uuid4().hex}"
            os.rename(out, aside)
            os.rename(tmp, out)
            outcome = "scored (a damaged output moved aside)"
    return {"name": name, "input": path, "outcome": outcome, "attempt": attempt,
            "model": model_from, "seconds": round(time.time() - t0, 3)}


# ------------------------------------------------------------------- driver

def expand(inputs):
    """(name, absolute path) of every input file, sorted; names unique."""
    found = []
    for i in inputs:
        i = os.path.abspath(i)
        if os.path.isdir(i):
            for root, _, files in os.walk(i, followlinks=True):
                for f in files:
                    if INPUT_RE.search(f):
                        p = os.path.join(root, f)
                        found.append((os.path.relpath(p, i), p))
        elif os.path.isfile(i):
            found.append((os.path.basename(i), i))
        else:
            raise SystemExit(f"spark_score: error: {i}: no such file or directory")
    names = {}
    for rel, p in sorted(found, key=lambda x: x[1]):
        name = re.sub(r"[^A-Za-z0-9._-]", "_", rel)
        if name in names:
            raise SystemExit(f"spark_score: error: {p} and {names[name]} would both be "
                             f"scored into {name}")
        names[name] = p
    return sorted(names.items(), key=lambda x: x[1])


def merge(summaries):
    """The tasks' summaries merged: counts and totals added, histograms
    added, percentiles (nearest rank) from the merged histogram."""
    keys = ["lines", "documents", "bad_lines", "empty_documents", "infinite_scores"]
    m = {k: sum(s[k] for s in summaries) for k in keys}
    tot = {k: 0 for k in ("sentences", "predictions", "outside_vocabulary", "probability_zero")}
    tot["log10_sum_nonzero"] = 0.0
    for s in summaries:
        for k in tot:
            tot[k] += s["totals"][k]
    m["totals"] = tot
    m["score"] = summaries[0]["score"] if summaries else "perplexity"
    bins = {}
    count, total = 0, 0.0
    lo, hi = math.inf, -math.inf
    for s in summaries:
        d = s["distribution"]
        count += d["count"]
        if d["count"]:
            total += d["mean"] * d["count"]
            lo, hi = min(lo, d["min"]), max(hi, d["max"])
        for b, c in d["bins"]:
            bins[b] = bins.get(b, 0) + c
    width = summaries[0]["distribution"]["bin_width"] if summaries else 1e-4
    log = m["score"] == "perplexity"
    pct = {}
    if count:
        order = sorted(bins.items())
        for p in PERCENTILES:
            rank = min(max(math.ceil(p / 100 * count), 1), count)
            seen = 0
            for b, c in order:
                seen += c
                if seen >= rank:
                    x = (b + 0.5) * width
                    v = 10 ** x if log else x
                    pct[f"p{p}"] = min(max(v, lo), hi)
                    break
    n, z = tot["predictions"], tot["probability_zero"]
    m["perplexity"] = (10 ** (-tot["log10_sum_nonzero"] / n)) if n and not z else None
    m["distribution"] = {"count": count, "mean": total / count if count else None,
                         "min": lo if count else None, "max": hi if count else None,
                         "percentiles": pct, "exact": False, "bin_width": width,
                         "bins": [[b, c] for b, c in sorted(bins.items())]}
    return m


def main(argv):
    a = parse_args(argv)
    from pyspark import SparkConf, SparkContext

    files = expand(a.inputs)
    out = os.path.abspath(a.out)
    os.makedirs(out, exist_ok=True)
    conf = {
        "out": out,
        "quern": a.quern,
        "model": a.model,
        "store": os.path.abspath(a.store) if a.store else None,
        "method": a.method,
        "minus_store": os.path.abspath(a.minus_store) if a.minus_store else None,
        "memory": a.memory,
        "text_field": a.text_field,
        "id_field": a.id_field,
        "threads": a.task_threads,
        "kill": dict(spec.rsplit(":", 1) for spec in a.fault_kill),
    }
    sc = SparkContext(conf=SparkConf().setAppName(f"quern score into {out}"))
    sc.setJobDescription(f"quern score: {len(files)} file(s)")
    t0 = time.time()
    by_size = sorted(files, key=lambda f: -os.path.getsize(f[1]))
    rdd = sc.parallelize(by_size, max(1, len(by_size)))
    try:
        results = rdd.map(lambda f: score_one(conf, f[0], f[1])).collect()
    except Exception as e:  # the job failed after Spark's retries
        text = str(e)
        m = re.search(re.escape(FAILED) + r"(.*)", text)
        print(f"spark_score: error: {m.group(1).strip() if m else text.strip()[:2000]}",
              file=sys.stderr)
        sc.stop()
        return 1
    # Every task has ended: what is left of killed attempts goes (and is
    # named, so that a task that leaves its own folder behind shows).
    leftovers = sorted(e for e in os.listdir(out) if e.startswith(".tmp-"))
    for entry in leftovers:
        shutil.rmtree(os.path.join(out, entry), ignore_errors=True)
    summaries = []
    for name, _ in files:
        with open(os.path.join(out, name, "summary.json"), encoding="utf-8") as f:
            summaries.append(json.load(f))
    merged = merge(summaries)
    merged["inputs"] = [p for _, p in files]
    merged["outputs"] = [os.path.join(out, n, "scores.jsonl") for n, _ in files]
    merged["seconds"] = round(time.time() - t0, 3)
    merged["tasks"] = sorted(results, key=lambda r: r["name"])
    merged["leftovers_removed"] = leftovers
    line = json.dumps(merged, sort_keys=True)
    with open(os.path.join(out, "summary.json"), "w", encoding="utf-8") as f:
        f.write(line + "\n")
    if a.report:
        with open(a.report, "w", encoding="utf-8") as f:
            f.write(line + "\n")
    print(line, flush=True)
    sc.stop()
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
