"""The store is the lowest layer: no module of tracker/store imports the layers above it (the
importer in tracker/io, the services, the outputs, the command line or the web), not even inside a
function. Partial dates in their stored form live in tracker/domain/dates.py; corrections, which use
the importer's parsers, are a service (tracker/services/edits.py)."""

from __future__ import annotations

import ast
from pathlib import Path

import tracker.store

STORE = Path(tracker.store.__file__).resolve().parent
ABOVE = ("tracker.io", "tracker.services", "tracker.outputs", "tracker.cli", "tracker.web", "tracker.engines")


def _upward(source: str, name: str) -> list[str]:
    out = []
    for node in ast.walk(ast.parse(source)):
        modules = []
        if isinstance(node, ast.ImportFrom) and node.module:
            modules = [node.module] + [f"{node.module}.{a.name}" for a in node.names]
            if node.module == "tracker":
                modules += [f"tracker.{a.name}" for a in node.names]
        elif isinstance(node, ast.Import):
            modules = [a.name for a in node.names]
        for m in modules:
            if any(m == up or m.startswith(up + ".") for up in ABOVE):
                out.append(f"{name}:{node.lineno} imports {m}")
                break
    return out


def test_store_modules_import_nothing_above_the_store():
    problems = [p for f in sorted(STORE.glob("*.py")) for p in _upward(f.read_text(encoding="utf-8"), f.name)]
    assert problems == []


def test_the_check_sees_an_upward_import():
    # The shape the repository had: a storage helper taken from the importer, inside a function too.
    old = ("from tracker.io.columns import partial_from_storage\n"
           "def f():\n    from tracker.services import proposals\n")  # fmt: skip
    assert len(_upward(old, "old.py")) == 2
