"""quern.Blend (a blend file's mixture) against its parts opened alone
(quern.Estimator, quern.Model): prob is the sum of weight_i * P_i (the
definition of a linear mixture, Jelinek & Mercer 1980); next and
score_many equal `quern next --blend` and `quern score --blend --jsonl`;
a part that moved is refused by name."""

import json
import shutil

import pytest
import quern

from conftest import HELD_OUT


@pytest.fixture(scope="module")
def blend(built, cli, tmp_path_factory):
    """Three parts: the five-novel store read with mkn, the Witten-Bell
    model frozen from it, and a store of the held-out novel's first 2,000
    lines read with kn (another vocabulary: its words outside the others'
    get their <unk> probability)."""
    d = tmp_path_factory.mktemp("blend")
    part = d / "part.txt"
    part.write_text("\n".join(HELD_OUT.read_text(encoding="utf-8").splitlines()[:2000]) + "\n",
                    encoding="utf-8")
    small = d / "small"
    cli.run("ingest", "--store", small, "--order", 3, "--quiet", part)
    model = d / "wb.qm"
    shutil.copy(built["models"]["witten-bell"], model)
    out = d / "blend.json"
    cli.run("blend", "--part", built["store"], "--part", model, "--part", small,
            "--method", "mkn", "--method", "witten-bell", "--method", "kn",
            "--weights", "0.5,0.3,0.2", "--out", out)
    alone = [quern.Store(str(built["store"])).estimator("mkn"), quern.Model(str(model)),
             quern.Store(str(small)).estimator("kn")]
    return {"path": out, "dir": d, "model": model, "alone": alone}


def test_prob_is_the_weighted_sum_of_the_parts(blend, held_out_lines):
    b = quern.Blend(str(blend["path"]))
    assert b.method == "blend" and b.weights == [0.5, 0.3, 0.2]
    assert [p["kind"] for p in b.parts] == ["store", "model", "store"]
    n = 0
    for line in held_out_lines[1500:2600:7]:
        words = ["<s>"] + line.split() + ["</s>"]
        for j in range(1, len(words)):
            ctx, w = words[max(0, j - 2):j], words[j]
            want = 0.0
            for weight, p in zip(b.weights, blend["alone"]):
                want += weight * p.prob(ctx, w)
            assert b.prob(ctx, w) == pytest.approx(want, rel=1e-12, abs=0), (ctx, w)
            n += 1
    assert n > 1000


def test_next_and_score_many_equal_the_command_line(blend, cli, paragraphs, tmp_path):
    b = quern.Blend(str(blend["path"]))
    flags = ["--blend", blend["path"]]
    for ctx in ["it was", "<s> she", "Captain", "xyzzy unknown"]:
        want = cli.json("next", *flags, "--json", "--top", 10, *ctx.split())
        assert b.next(ctx, top=10) == want["words"], ctx
        want = cli.json("next", *flags, "--json", "--top", 5, "--prefix", "th", *ctx.split())
        assert b.next(ctx, top=5, prefix="th") == want["words"], ctx
    texts = paragraphs[:300]
    f = tmp_path / "docs.jsonl"
    f.write_text("".join(json.dumps({"text": t}) + "\n" for t in texts), encoding="utf-8")
    rows = cli.json_lines("score", *flags, "--jsonl", "--threads", 2, f)
    for r in rows:
        del r["id"], r["line"]
    assert b.score_many(texts, threads=2) == rows


def test_a_moved_part_is_refused_by_name(blend):
    moved = blend["dir"] / "wb-moved.qm"
    blend["model"].rename(moved)
    try:
        with pytest.raises(quern.QuernError, match=r"part 2 \(.*wb\.qm\): not found: it moved"):
            quern.Blend(str(blend["path"]))
    finally:
        moved.rename(blend["model"])
