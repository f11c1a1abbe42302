"""The type stub src/python/quern/_quern.pyi names what the module has, and
the module has what it names: public classes, their methods and
properties, and their keyword arguments."""

import ast
import inspect
import pathlib

import quern
from quern import _quern

STUB = pathlib.Path(__file__).resolve().parents[2] / "src" / "python" / "quern" / "_quern.pyi"


def stub_classes():
    tree = ast.parse(STUB.read_text(encoding="utf-8"))
    classes = {}
    for node in tree.body:
        if isinstance(node, ast.ClassDef):
            members = {}
            for item in node.body:
                if isinstance(item, ast.FunctionDef):
                    args = [a.arg for a in item.args.args + item.args.kwonlyargs if a.arg != "self"]
                    members[item.name] = args
            bases = [b.id for b in node.bases if isinstance(b, ast.Name)]
            classes[node.name] = (bases, members)
    return classes


def test_stub_matches_the_module():
    classes = stub_classes()
    public = {n for n in dir(_quern) if not n.startswith("_") and inspect.isclass(getattr(_quern, n))}
    assert public == {n for n in classes if not n.startswith("_")}
    for name, (bases, members) in classes.items():
        if name.startswith("_"):
            continue
        for b in bases:
            if b in classes:
                members = {**classes[b][1], **members}
        cls = getattr(_quern, name)
        inherited = set().union(*(dir(b) for b in cls.__mro__[1:]))
        have = {n for n in dir(cls) if not n.startswith("_") and n not in inherited}
        assert have == {n for n in members if not n.startswith("_")}, name
        for m, args in members.items():
            if m == "__init__":
                continue
            attr = inspect.getattr_static(cls, m)
            if isinstance(attr, property) or type(attr).__name__ == "getset_descriptor":
                continue
            sig = inspect.signature(getattr(cls, m))
            assert [p for p in sig.parameters if p != "self"] == args, (name, m)
    assert set(quern.__all__) == public | {"__version__"}
