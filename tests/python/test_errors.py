"""Bad paths and bad input: Python exceptions with the command line's
messages."""

import shutil

import pytest
import quern


def test_missing_store(cli, tmp_path):
    missing = tmp_path / "nothing-here"
    with pytest.raises(quern.QuernError) as e:
        quern.Store(str(missing))
    assert str(e.value) == cli.error("stats", "--store", missing)


def test_missing_model(cli, tmp_path):
    missing = tmp_path / "nothing.qm"
    with pytest.raises(FileNotFoundError) as e:
        quern.Model(str(missing))
    # The command line adds the I/O error's cause once more after the message.
    msg = cli.error("next", "--model", missing, "a")
    assert msg == str(e.value) or msg.startswith(str(e.value) + ": ")


def test_damaged_model(built, cli, tmp_path):
    bad = tmp_path / "cut.qm"
    data = built["models"]["mkn"].read_bytes()
    bad.write_bytes(data[: len(data) // 2])
    with pytest.raises(quern.QuernError) as e:
        quern.Model(str(bad))
    assert str(e.value) == cli.error("next", "--model", bad, "a")
    assert str(bad) in str(e.value)


def test_not_a_store(built, cli, tmp_path):
    with pytest.raises(quern.QuernError) as e:
        quern.Store(str(tmp_path))
    assert str(e.value) == cli.error("stats", "--store", tmp_path)


def test_bad_methods_and_parameters(built, cli):
    store = quern.Store(str(built["store"]))
    s = built["store"]
    cases = [
        (dict(method="nope"), ["--method", "nope"]),
        (dict(method="stupid", alpha=-1.0), ["--method", "stupid", "--alpha=-1"]),
        (dict(method="add-k", k=0.0), ["--method", "add-k", "--k", "0"]),
        (dict(method="interp", lambdas=[0.5, 2.0, 0.5]), ["--method", "interp", "--lambdas", "0.5,2,0.5"]),
        (dict(method="mkn", discounts="sometimes"), ["--method", "mkn", "--discounts", "sometimes"]),
    ]
    for kwargs, flags in cases:
        method = kwargs.pop("method")
        with pytest.raises(ValueError) as e:
            store.estimator(method, **kwargs)
        assert str(e.value) == cli.error("prob", "--store", s, *flags, "it", "was"), flags


def test_bad_queries(built, cli):
    store = quern.Store(str(built["store"]))
    with pytest.raises(ValueError) as e:
        store.ngrams("it", order=9)
    assert str(e.value) == cli.error("ngrams", "--store", built["store"], "--order", 9, "it")
    with pytest.raises(ValueError):
        store.ngrams("it", limit=0)
    with pytest.raises(ValueError):
        store.ngrams("it was", after="not a cursor")
    with pytest.raises(ValueError):
        store.count("")
    with pytest.raises(ValueError):
        store.count("one two three four")
    est = store.estimator()
    with pytest.raises(ValueError):
        est.prob("it", "was a")
    with pytest.raises(ValueError):
        est.prob("it", "")
    with pytest.raises(TypeError):
        est.prob(42, "was")
    with pytest.raises(TypeError):
        est.next(["it", 7])
    with pytest.raises(TypeError):
        est.score_many("one string, not a list")
    with pytest.raises(TypeError):
        est.score_many(["a", None])
    with pytest.raises(ValueError):
        quern.Store(str(built["store"]), memory="lots")


def test_unfinished_store_is_refused(built, cli, tmp_path):
    copy = tmp_path / "copy"
    shutil.copytree(built["store"], copy)
    (copy / "work").mkdir()
    with pytest.raises(quern.QuernError) as e:
        quern.Store(str(copy))
    assert "unfinished" in str(e.value)
