"""quern.Store against the command line on the same store: the statistics
report (`quern stats --json`), counts (`quern dump`), pages of n-grams
(`quern ngrams --json`)."""

import quern
import pytest


@pytest.fixture(scope="module")
def store(built):
    return quern.Store(str(built["store"]))


def test_stats_equal_stats_json(store, built, cli):
    assert store.stats() == cli.json("stats", "--store", built["store"], "--json")
    assert store.stats(order=2, max_count=7, katz_k=3) == cli.json(
        "stats", "--store", built["store"], "--json",
        "--order", 2, "--max-count", 7, "--katz-k", 3,
    )


def test_totals_and_settings(store, built, cli):
    report = cli.json("stats", "--store", built["store"], "--json")
    assert store.order == 3 == report["settings"]["order"]
    for k, v in report["settings"].items():
        if k == "word_list":
            # The report gives the list's size; the store's settings hold
            # its size and checksum, and leave it out when there is none.
            kept = store.settings.get("word_list")
            assert v == (None if kept is None else {"words": kept["words"]}), v
        else:
            assert store.settings[k] == v, k
    shared = [k for k in report["totals"] if k in store.totals]
    assert {"sentences", "tokens", "types", "vocabulary"} <= set(shared)
    for k in shared:
        assert store.totals[k] == report["totals"][k], k
    assert str(store.path) == str(built["store"])


def test_count_equals_dump(store, built, cli):
    checked = 0
    for order in (1, 2, 3):
        lines = cli.run("dump", "--store", built["store"], "--order", order).stdout.splitlines()
        assert lines[0].startswith("ngram\tcount")
        rows = lines[1:]
        for row in rows[:: max(1, len(rows) // 150)]:
            words, count = row.split("\t")[:2]
            assert store.count(words) == int(count), words
            assert store.count(words.split(" ")) == int(count), words
            checked += 1
    assert checked > 400
    # Not stored: 0, and `quern ngrams` at that order has no such line.
    absent = "the the the"
    assert store.count(absent) == 0
    page = cli.json("ngrams", "--store", built["store"], "--json", "--order", 3, "the", "the")
    assert absent not in [x["words"] for x in page["ngrams"]]


@pytest.mark.parametrize("prefix,order,limit", [("it was", None, 50), ("", 1, 400), (["of"], 2, 97)])
def test_ngrams_pages_equal_the_cli(store, built, cli, prefix, order, limit):
    words = prefix.split() if isinstance(prefix, str) else prefix
    flags = ["--limit", limit] + (["--order", order] if order else [])
    after, pages = None, 0
    while True:
        ours = store.ngrams(prefix, order=order, limit=limit, after=after)
        theirs = cli.json("ngrams", "--store", built["store"], "--json", *flags,
                          *(["--after", after] if after else []), *words)
        assert ours == theirs
        pages += 1
        after = ours["next"]
        if after is None or pages == 6:
            break
    assert pages >= 2
