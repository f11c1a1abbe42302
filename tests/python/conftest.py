"""Fixtures of the Python module's tests: a store and a frozen model built
from fixtures/gutenberg by the `quern` binary of the same build, and a
helper that runs that binary.

Every test compares the module with the command line on the same store
and model (scripts/test builds both from one target folder). The binary is
$CARGO_TARGET_DIR/release/quern, or target/release/quern in the clone.
"""

import json
import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
GUTENBERG = ROOT / "fixtures" / "gutenberg"
# Five novels make the store; the sixth is the held-out text.
HELD_OUT = GUTENBERG / "persuasion.txt"


def binary() -> pathlib.Path:
    target = os.environ.get("CARGO_TARGET_DIR") or str(ROOT / "target")
    path = pathlib.Path(target) / "release" / "quern"
    if not path.exists():
        pytest.fail(f"{path} is missing: build it with cargo build --release first")
    return path


class Cli:
    """Runs `quern` and returns its standard output."""

    def __init__(self):
        self.path = str(binary())

    def run(self, *args, input=None, check=True):
        p = subprocess.run(
            [self.path, *map(str, args)],
            input=input,
            capture_output=True,
            text=True,
        )
        if check and p.returncode != 0:
            raise AssertionError(f"quern {' '.join(map(str, args))} failed: {p.stderr}")
        return p

    def json(self, *args, input=None):
        return json.loads(self.run(*args, input=input).stdout)

    def json_lines(self, *args, input=None):
        return [json.loads(l) for l in self.run(*args, input=input).stdout.splitlines()]

    def error(self, *args, input=None):
        """The error message of a failing command (its `quern: error: ` line)."""
        p = self.run(*args, input=input, check=False)
        assert p.returncode == 2, (args, p.returncode, p.stderr)
        lines = [l for l in p.stderr.splitlines() if l.startswith("quern: error: ")]
        assert len(lines) == 1, p.stderr
        return lines[0][len("quern: error: "):]


@pytest.fixture(scope="session")
def cli():
    return Cli()


@pytest.fixture(scope="session")
def built(tmp_path_factory, cli):
    """An order-3 store of five novels, an mkn model frozen from it, and a
    Witten-Bell model."""
    d = tmp_path_factory.mktemp("quern")
    novels = sorted(p for p in GUTENBERG.glob("*.txt") if p != HELD_OUT)
    assert len(novels) == 5
    store = d / "novels-3"
    cli.run("ingest", "--store", store, "--order", 3, "--quiet", *novels)
    models = {}
    for method in ("mkn", "witten-bell"):
        m = d / f"novels-3-{method}.qm"
        cli.run("freeze", "--store", store, "--method", method, "--out", m)
        models[method] = m
    return {"dir": d, "store": store, "models": models}


@pytest.fixture(scope="session")
def held_out_lines():
    """The non-blank lines of the held-out novel."""
    return [l for l in HELD_OUT.read_text(encoding="utf-8").splitlines() if l.strip()]


@pytest.fixture(scope="session")
def paragraphs():
    """The held-out novel's paragraphs (lines between blank lines, joined by
    newlines: one sentence a line), and two documents without a token."""
    paras, cur = [], []
    for line in HELD_OUT.read_text(encoding="utf-8").splitlines():
        if line.strip():
            cur.append(line)
        elif cur:
            paras.append("\n".join(cur))
            cur = []
    if cur:
        paras.append("\n".join(cur))
    return paras + ["", " \n\t"]
