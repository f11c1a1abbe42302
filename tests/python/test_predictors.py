"""quern.Estimator (a method over the store) and quern.Model (a frozen
model) against the command line on the same store and models: `quern prob
--json`, `quern next --json`, `quern score --jsonl`; score_many with many
threads against one thread."""

import json
import threading
import time
import unicodedata

import pytest
import quern


def sources(built):
    """(name, Python predictor, the CLI flags naming the same one)."""
    store = quern.Store(str(built["store"]))
    out = []
    for method in ("mkn", "witten-bell", "katz", "stupid"):
        out.append((f"store {method}", store.estimator(method),
                    ["--store", built["store"], "--method", method]))
    for method, path in built["models"].items():
        out.append((f"model {method}", quern.Model(str(path)), ["--model", path]))
    # Read into memory (huge pages) instead of mapped: the same answers.
    path = built["models"]["mkn"]
    out.append(("model mkn loaded", quern.Model(str(path), load=True), ["--model", path]))
    return out


@pytest.fixture(scope="module")
def preds(built):
    return sources(built)


@pytest.fixture(scope="module")
def queries(held_out_lines):
    """Word sequences (the context, then the word) from the held-out novel:
    every length from 1 to 5 words, `<s>` starts, words outside V."""
    qs = []
    for i, line in enumerate(held_out_lines[::40]):
        words = ["<s>"] + line.split() + ["</s>"]
        n = 1 + i % 5
        for j in range(1, len(words), 3):
            qs.append(words[max(0, j + 1 - n): j + 1])
    return qs


def test_prob_and_log10_equal_quern_prob(preds, queries, cli):
    assert len(queries) > 300
    stdin = "".join(" ".join(q) + "\n" for q in queries)
    for name, p, flags in preds:
        rows = cli.json_lines("prob", *flags, "--json", input=stdin)
        assert len(rows) == len(queries)
        key = "probability" if p.is_probability else "score"
        for q, row in zip(queries, rows):
            assert p.prob(q[:-1], q[-1]) == row[key], (name, q)
            lg = p.log10(" ".join(q[:-1]), q[-1])
            assert (lg if lg != float("-inf") else None) == row["log10"], (name, q)


def test_next_equals_quern_next(preds, cli):
    contexts = ["", "it was", "<s> she", "Mr.", "the whole of the", "xyzzy unknown"]
    for name, p, flags in preds:
        for ctx in contexts:
            got = p.next(ctx, top=12)
            if ctx.split():
                want = cli.json("next", *flags, "--json", "--top", 12, *ctx.split())
            else:
                # No context words: `quern next` reads queries from standard
                # input, and an empty line asks after the empty context.
                want = cli.json_lines("next", *flags, "--json", "--top", 12, input="\n")[0]
            # The same items, field for field (word, probability or score,
            # log10), in the same order.
            assert got == want["words"], (name, ctx)
            assert [list(x) for x in got] == [list(x) for x in want["words"]], (name, ctx)
            assert len(got) == 12


def test_next_with_prefix_is_the_full_ranking_filtered(preds, cli):
    # The words beginning with a prefix, best first: `quern next` over all of
    # V, kept where the word begins with it (never <s>, <unk> or </s>).
    for name, p, flags in preds[:1] + preds[-2:-1]:
        for ctx, prefix in [("it was", "th"), ("<s>", "A"), ("of", "zz")]:
            full = cli.json("next", *flags, "--json", "--top", 10 ** 6, *ctx.split())["words"]
            want = [(x["word"], x["probability"]) for x in full
                    if x["word"].startswith(prefix) and x["word"] not in ("<s>", "<unk>", "</s>")][:7]
            got = [(x["word"], x["probability"]) for x in p.next(ctx.split(), top=7, prefix=prefix)]
            assert [w for w, _ in got] == [w for w, _ in want], (name, ctx, prefix)
            for (_, a), (_, b) in zip(got, want):
                assert a == pytest.approx(b, rel=1e-12, abs=0), (name, ctx, prefix)


def folded(s):
    """Case folding, NFD, combining marks (category Mn) dropped: Python's
    standard library, the definition of `match="folded"`."""
    return "".join(c for c in unicodedata.normalize("NFD", s.casefold())
                   if unicodedata.category(c) != "Mn")


def test_next_folded_and_never_suggest(preds, cli, tmp_path):
    # match="folded": the full ranking filtered by the folded prefix; with
    # never_suggest, the same less the listed words, as `quern next`
    # --match folded --never-suggest FILE gives them.
    never = ["Elizabeth", "Emma", "every"]
    listing = tmp_path / "never.txt"
    listing.write_text("\n".join(never) + "\n", encoding="utf-8")
    for name, p, flags in preds[:1] + preds[-2:-1]:
        for ctx, prefix in [("<s>", "E"), ("it was", "TH"), ("of", "é")]:
            full = cli.json("next", *flags, "--json", "--top", 10 ** 6, *ctx.split())["words"]
            want = [x["word"] for x in full
                    if folded(x["word"]).startswith(folded(prefix))
                    and x["word"] not in ("<s>", "<unk>", "</s>")]
            got = [x["word"] for x in p.next(ctx.split(), top=7, prefix=prefix, match="folded")]
            assert got == want[:7], (name, ctx, prefix)
            got = p.next(ctx.split(), top=7, prefix=prefix, match="folded", never_suggest=never)
            assert [x["word"] for x in got] == [w for w in want if w not in never][:7]
            line = cli.json("next", *flags, "--json", "--top", 7, "--prefix", prefix,
                            "--match", "folded", "--never-suggest", listing, *ctx.split())
            assert got == line["words"], (name, ctx, prefix)
    with pytest.raises(ValueError):
        preds[0][1].next("<s>", prefix="e", match="loose")


def cli_documents(cli, flags, texts, tmp_path):
    f = tmp_path / "docs.jsonl"
    f.write_text("".join(json.dumps({"text": t}) + "\n" for t in texts), encoding="utf-8")
    rows = cli.json_lines("score", *flags, "--jsonl", "--threads", 2, f)
    for r in rows:
        del r["id"], r["line"]
    return rows


def test_score_and_score_many_equal_quern_score_jsonl(preds, paragraphs, cli, tmp_path):
    assert len(paragraphs) > 1000
    for name, p, flags in preds:
        want = cli_documents(cli, flags, paragraphs, tmp_path)
        assert p.score_many(paragraphs, threads=2) == want, name
        for i in list(range(0, len(paragraphs), 97)) + [len(paragraphs) - 2, len(paragraphs) - 1]:
            assert p.score(paragraphs[i]) == want[i], (name, i)
    # The documents without a token: no perplexity.
    assert want[-1]["predictions"] == 0 and want[-1]["perplexity"] is None


def test_score_many_threads_give_the_same_results(preds, held_out_lines):
    # More texts than one batch (2,048), so the threads share the work.
    texts = held_out_lines + held_out_lines[:500]
    assert len(texts) > 3 * 2048
    for name, p, _ in preds[:1] + preds[-2:-1]:
        one = p.score_many(texts, threads=1)
        assert len(one) == len(texts)
        for t in (2, 3, 0):
            assert p.score_many(iter(texts), threads=t) == one, (name, t)


def test_score_many_releases_the_gil(built, held_out_lines):
    model = quern.Model(str(built["models"]["mkn"]))
    texts = held_out_lines * 3
    ticks = [0]
    stop = threading.Event()

    def tick():
        while not stop.is_set():
            ticks[0] += 1

    def rate_while(work):
        """The other thread's ticks per second while this one runs `work`."""
        before, t0 = ticks[0], time.perf_counter()
        work()
        return ticks[0] - before, (ticks[0] - before) / (time.perf_counter() - t0)

    t = threading.Thread(target=tick)
    t.start()
    try:
        # Baselines before and after: the ticks per second while this
        # thread sleeps (time.sleep releases the GIL: Python's documentation
        # of the time module), on a machine whose load varies.
        _, base1 = rate_while(lambda: time.sleep(0.3))
        during, rate = rate_while(lambda: model.score_many(texts, threads=1))
        _, base2 = rate_while(lambda: time.sleep(0.3))
    finally:
        stop.set()
        t.join()
    # Holding the GIL for the whole call would leave the other thread at
    # (nearly) no ticks.
    assert during > 10_000, during
    # Released, the other thread ticks about as fast as while this one
    # sleeps (it only shares the CPU with the worker); held, even for part
    # of the call, it loses that part. A quarter of the slower baseline
    # leaves room for a loaded machine.
    assert rate >= 0.25 * min(base1, base2), (rate, base1, base2)


def test_a_model_is_shared_by_threads_an_estimator_is_not(built):
    model = quern.Model(str(built["models"]["mkn"]))
    est = quern.Store(str(built["store"])).estimator("mkn")
    results, errors = [], []

    def use(p):
        try:
            results.append(p.prob("it was", "a"))
        except BaseException as e:  # noqa: BLE001 (PyO3's PanicException)
            errors.append(e)

    for p in (model, est):
        t = threading.Thread(target=use, args=(p,))
        t.start()
        t.join()
    assert results == [model.prob("it was", "a")]
    # PyO3 refuses an `unsendable` object on another thread with its
    # PanicException (a BaseException), before any of quern's code runs.
    assert len(errors) == 1 and "unsendable" in str(errors[0]), errors


def test_a_model_is_used_by_threads_at_once(built, held_out_lines):
    # Three threads start together (a barrier) and score with one model
    # (score_many releases the GIL, so their calls run side by side): each
    # gets what one thread alone gets.
    model = quern.Model(str(built["models"]["mkn"]))
    texts = held_out_lines[:3000]
    want = model.score_many(texts, threads=1)
    start = threading.Barrier(3)
    results, spans, errors = {}, {}, []

    def use(i):
        try:
            start.wait()
            t0 = time.perf_counter()
            results[i] = model.score_many(texts, threads=1)
            spans[i] = (t0, time.perf_counter())
        except BaseException as e:  # noqa: BLE001 (PyO3's PanicException)
            errors.append(e)

    threads = [threading.Thread(target=use, args=(i,)) for i in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors, errors
    assert len(results) == 3
    for i in range(3):
        assert results[i] == want, i
    # Issued together: the last to start started before the first to end
    # ended.
    assert max(s[0] for s in spans.values()) < min(s[1] for s in spans.values()), spans


def test_constants_and_notes_equal_quern_score_json(preds, held_out_lines, cli, tmp_path):
    f = tmp_path / "held.txt"
    f.write_text("\n".join(held_out_lines[:50]) + "\n", encoding="utf-8")
    for name, p, flags in preds:
        report = cli.json("score", *flags, "--json", f)
        assert p.constants == report["constants"], name
        # The command line adds one note of its own for stupid back-off.
        extra = [n for n in report["notes"] if n not in p.notes]
        assert all(n in report["notes"] for n in p.notes), name
        assert extra == ([] if p.is_probability else
                         ["stupid back-off scores are not probabilities: no perplexity"]), name
        assert p.method == report["method"]
