"""Modules loaded on first use, so that starting the command line (``tracker --help``) does not
import the numerical and document libraries that only some commands need."""

from __future__ import annotations

import importlib.util
import sys
from types import ModuleType


def lazy_module(name: str) -> ModuleType:
    """The module ``name``, executed only when one of its attributes is first read."""
    if name in sys.modules:
        return sys.modules[name]
    spec = importlib.util.find_spec(name)
    if spec is None or spec.loader is None:
        raise ModuleNotFoundError(name)
    loader = importlib.util.LazyLoader(spec.loader)
    spec.loader = loader
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    loader.exec_module(module)
    return module


def load_now(module: ModuleType) -> ModuleType:
    """Execute a module made by :func:`lazy_module` now (before a write lock is taken, say)."""
    module.__dict__  # noqa: B018  (any attribute read runs the module)
    return module
