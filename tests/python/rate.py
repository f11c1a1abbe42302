"""Measures Model/Estimator.score_many against `quern score --lines` on the
same texts and threads (issue 17's target: at least two thirds of the
command line's rate). Not a test: run by hand with the module installed,

    python tests/python/rate.py STORE MODEL TEXTFILE [--repeat R] [--threads 1,2] [--runs 3]

TEXTFILE's non-blank lines, repeated R times, are the documents. The
command line's time is its whole run (open, read, score, write JSON lines
to /dev/null); the module's is the score_many call on texts already in a
list. Prints predictions a second, medians of the runs, interleaved.
"""

import argparse
import os
import pathlib
import statistics
import subprocess
import sys
import tempfile
import time

import quern


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("store")
    ap.add_argument("model")
    ap.add_argument("textfile")
    ap.add_argument("--repeat", type=int, default=10)
    ap.add_argument("--threads", default="1,2")
    ap.add_argument("--runs", type=int, default=3)
    ap.add_argument("--bin", default=None)
    a = ap.parse_args()
    root = pathlib.Path(__file__).resolve().parents[2]
    target = os.environ.get("CARGO_TARGET_DIR") or str(root / "target")
    binary = a.bin or str(pathlib.Path(target) / "release" / "quern")
    lines = [l for l in pathlib.Path(a.textfile).read_text(encoding="utf-8").splitlines() if l.strip()]
    texts = lines * a.repeat
    with tempfile.NamedTemporaryFile("w", suffix=".txt", delete=False, encoding="utf-8") as f:
        f.write("".join(t + "\n" for t in texts))
        path = f.name
    store = quern.Store(a.store)
    sources = [
        ("model", quern.Model(a.model), ["--model", a.model]),
        ("store mkn", store.estimator("mkn"), ["--store", a.store, "--method", "mkn"]),
    ]
    print(f"{len(texts)} texts; load average {os.getloadavg()[0]:.1f}", flush=True)
    try:
        for name, p, flags in sources:
            predictions = None
            for threads in map(int, a.threads.split(",")):
                cli, mod = [], []
                for _ in range(a.runs):
                    t0 = time.perf_counter()
                    subprocess.run([binary, "score", *flags, "--lines", "--threads", str(threads), path],
                                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
                    cli.append(time.perf_counter() - t0)
                    t0 = time.perf_counter()
                    r = p.score_many(texts, threads=threads)
                    mod.append(time.perf_counter() - t0)
                    predictions = sum(x["predictions"] for x in r)
                c, m = statistics.median(cli), statistics.median(mod)
                print(f"{name:10} threads {threads}: quern score --lines {predictions / c:12,.0f}/s ({c:.3f} s)"
                      f"   score_many {predictions / m:12,.0f}/s ({m:.3f} s)   ratio {c / m:.2f}", flush=True)
    finally:
        os.unlink(path)
    print(f"load average {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    sys.exit(main())
