"""Recall rule sets shipped with the package, one TOML file per guideline.

Each guideline is its own rule set; rule sets are never blended.  Use::

    from tracker.rules import load_rule_set, list_rule_sets
    rs = load_rule_set("esc_2023")

The files live beside this module (``<id>.toml``) and are read with
:mod:`tomllib`.  A clinic's own copy (a local protocol) can be read with
:func:`load_rule_set_file`; it is validated the same way.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

from tracker.regular_file import NotReadable, read_regular
from tracker.rules.model import (
    ACTIONS,
    FAMILY_FEATURES,
    GENOTYPES,
    GROUPS,
    MODIFIERS,
    NEEDS,
    PHENOTYPES,
    TAGS,
    TRIGGERS,
    Advice,
    Conditions,
    Modifier,
    Rule,
    RuleSet,
    RuleSetError,
    Source,
    Trigger,
    build_rule_set,
    check_age_bands,
    check_phenotype_states,
    check_single_guideline,
)

__all__ = [
    "ACTIONS",
    "FAMILY_FEATURES",
    "GENOTYPES",
    "GROUPS",
    "MODIFIERS",
    "NEEDS",
    "PHENOTYPES",
    "TAGS",
    "TRIGGERS",
    "Advice",
    "Conditions",
    "Modifier",
    "Rule",
    "RuleSet",
    "RuleSetError",
    "RuleSetSummary",
    "Source",
    "Trigger",
    "available_rule_sets",
    "build_rule_set",
    "check_age_bands",
    "check_phenotype_states",
    "check_single_guideline",
    "list_rule_sets",
    "load_rule_set",
    "load_rule_set_file",
]


@dataclass(frozen=True)
class RuleSetSummary:
    """One line of :func:`list_rule_sets`; ``tags`` counts rules per confidence tag."""

    id: str
    title: str
    year: int
    citation: str
    verification: str
    tags: dict[str, int]


def _files():
    return resources.files(__name__)


def available_rule_sets() -> tuple[str, ...]:
    """Ids of the shipped rule sets (file names without ``.toml``), sorted."""
    return tuple(sorted(p.name[:-5] for p in _files().iterdir() if p.name.endswith(".toml")))


def load_rule_set(rule_set_id: str) -> RuleSet:
    """Load and validate a shipped rule set by id, e.g. ``"esc_2023"``.

    Raises ``KeyError`` for an unknown id and :class:`RuleSetError` for an
    invalid file (including a file whose ``id`` differs from its name).
    """
    if rule_set_id not in available_rule_sets():
        raise KeyError(f"unknown rule set {rule_set_id!r}; available: {', '.join(available_rule_sets())}")
    res = _files() / f"{rule_set_id}.toml"
    data = tomllib.loads(res.read_text(encoding="utf-8"))
    rs = build_rule_set(data, origin=f"{rule_set_id}.toml")
    if rs.id != rule_set_id:
        raise RuleSetError(f"{rule_set_id}.toml", [f"id {rs.id!r} does not match the file name"])
    return rs


def load_rule_set_file(path: str | Path) -> RuleSet:
    """Load and validate a rule set from a TOML file (e.g. a local protocol)."""
    p = Path(path)
    try:
        text = read_regular(p, 16 * 1024**2).decode("utf-8")  # a rule set is small (engineering default)
    except NotReadable as exc:
        raise RuleSetError(str(p), [exc.reason]) from None
    except UnicodeDecodeError:
        raise RuleSetError(str(p), ["is not UTF-8 text"]) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise RuleSetError(str(p), [f"is not valid TOML ({exc})"]) from None
    return build_rule_set(data, origin=str(p))


def list_rule_sets() -> tuple[RuleSetSummary, ...]:
    """Every shipped rule set with its title, citation and tag counts."""
    out = []
    for rid in available_rule_sets():
        rs = load_rule_set(rid)
        out.append(RuleSetSummary(rs.id, rs.title, rs.year, rs.citation, rs.verification, rs.tag_counts()))
    return tuple(out)
