"""The command line only parses, calls a service and renders: no module of tracker/cli imports the
store's table models or builds SQL, and none runs a statement on a connection itself."""

from __future__ import annotations

import ast
from pathlib import Path

import tracker.cli

CLI = Path(tracker.cli.__file__).resolve().parent
# What a CLI module may take from SQLAlchemy: type names for annotations and the error classes.
ALLOWED_SQLALCHEMY = {"Engine", "Connection"}


def _problems(source: str, name: str) -> list[str]:
    out = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.ImportFrom) and node.module:
            if node.module == "tracker.store.models" or node.module.startswith("tracker.store.models."):
                out.append(f"{name}:{node.lineno} imports tracker.store.models")
            if node.module == "sqlalchemy":
                extra = {a.name for a in node.names} - ALLOWED_SQLALCHEMY
                if extra:
                    out.append(f"{name}:{node.lineno} imports {sorted(extra)} from sqlalchemy")
            if node.module == "tracker.store" and any(a.name == "models" for a in node.names):
                out.append(f"{name}:{node.lineno} imports tracker.store.models")
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name == "tracker.store.models" or a.name == "sqlalchemy":
                    out.append(f"{name}:{node.lineno} imports {a.name}")
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
            if node.func.attr in ("execute", "exec_driver_sql", "scalar", "scalars"):
                out.append(f"{name}:{node.lineno} runs a statement (.{node.func.attr})")
    return out


def test_cli_modules_leave_sql_to_the_services():
    problems = [p for f in sorted(CLI.glob("*.py")) for p in _problems(f.read_text(encoding="utf-8"), f.name)]
    assert problems == []


def test_the_check_sees_sql_in_a_cli_module():
    # The check itself must be able to fail: the shape of the old task list code.
    old = (
        "from sqlalchemy import select, update\n"
        "from tracker.store.models import Family\n"
        "def f(conn):\n    return conn.execute(select(Family.id)).first()\n"
    )
    assert len(_problems(old, "old.py")) == 3
