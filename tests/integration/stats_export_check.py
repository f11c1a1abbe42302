#!/usr/bin/env python3
"""Checks `quern stats` exports with Python's standard csv and json modules.

    python3 stats_export_check.py STATS.json STATS.csv STATS.tsv

Every row of the CSV and of the TSV (one header line; columns section,
order, x, name, value, note) must hold the value the JSON holds for the
same quantity; both must hold every count-of-count, growth point,
Good-Turing row and discount of the JSON. Exit status 0 on success.
"""

import csv
import json
import sys


def expected_rows(j):
    """(section, order, x, name) -> value (None: empty) from the JSON."""
    out = {}
    for k, v in j["totals"].items():
        out[("totals", "", "", k)] = v
    wl = j["settings"]["word_list"]
    out[("totals", "", "", "word_list_words")] = None if wl is None else wl["words"]
    for o in j["orders"]:
        k = str(o["order"])
        out[("order", k, "", "ngrams")] = o["ngrams"]
        out[("order", k, "", "singletons")] = o["singletons"]
        out[("order", k, "", "singleton_share")] = o["singleton_share"]
        for kind in ("raw", "left_type"):
            for r, n in o["count_of_counts"][kind]:
                out[("coc_" + kind, k, str(r), "n_r")] = n
        d = o["discounts"]
        for name, key in (("mkn_d1", "d1"), ("mkn_d2", "d2"), ("mkn_d3plus", "d3plus"), ("kn_d", "kn")):
            out[("discount", k, "", name)] = d[key]["value"]
        gt = o["good_turing"]
        out[("good_turing", k, "", "k_used")] = gt["k_used"]
        for row in gt["rows"]:
            for name in ("n_r", "n_next", "r_star", "katz_d"):
                out[("good_turing", k, str(row["r"]), name)] = row[name]
    if j["growth"] is not None:
        for t, v in j["growth"]["points"]:
            out[("growth", "", str(t), "types")] = v
    for r, f in j["rank_frequency"]["points"]:
        out[("rank_frequency", "", str(r), "frequency")] = f
    fits = [("heaps", (j["growth"] or {}).get("heaps")), ("zipf", j["rank_frequency"]["zipf"])]
    for prefix, fit in fits:
        for key in ("exponent", "scale", "r_squared", "points", "x_min", "x_max"):
            out[("fit", "", "", prefix + "_" + key)] = None if fit is None else fit[key]
    return out


def check(path, delimiter, want):
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f, delimiter=delimiter))
    header, body = rows[0], rows[1:]
    assert header == ["section", "order", "x", "name", "value", "note"], header
    got = {}
    for row in body:
        assert len(row) == 6, (path, row)
        key = tuple(row[:4])
        assert key not in got, ("duplicate row", path, key)
        got[key] = row[4]
    assert set(got) == set(want), (path, sorted(set(got) ^ set(want))[:10])
    for key, v in want.items():
        text = got[key]
        if v is None:
            assert text == "", (path, key, text)
        elif isinstance(v, bool):
            raise AssertionError(("unexpected boolean", key))
        else:
            assert float(text) == float(v), (path, key, text, v)
    return len(body)


def main():
    jpath, cpath, tpath = sys.argv[1:4]
    with open(jpath, encoding="utf-8") as f:
        j = json.load(f)
    want = expected_rows(j)
    n1 = check(cpath, ",", want)
    n2 = check(tpath, "\t", want)
    print("stats_export_check: %d CSV rows, %d TSV rows agree with the JSON" % (n1, n2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
