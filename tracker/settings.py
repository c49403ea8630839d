"""Clinic settings: who the clinic is, which guideline rule set it follows, and its policies.

Settings live in a TOML file: ``--settings PATH``, else ``$TRACKER_SETTINGS``,
else ``./tracker.toml`` if present, else the defaults below.  Example
(``demo_family/clinic.toml`` is a complete one)::

    [clinic]
    name = "..."
    address = "..."
    phone = "..."
    email = "..."
    signatory = "..."
    signatory_role = "..."

    [schedule]
    guideline = "esc_2023"      # a rule set id: tracker/rules/*.toml
    policy = "shortest"         # point in each interval range: shortest, midpoint, longest
    slots_per_week = 10

    [repeatability]             # the clinic's own within-subject SD, in the measure's unit
    mwt_echo = 1.2

Unknown sections or keys are errors, so that a typing mistake in a setting
that changes recall intervals cannot pass unnoticed.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from tracker.errors import UserError

ENV_VAR = "TRACKER_SETTINGS"
DEFAULT_FILE = "tracker.toml"

# The defaults are choices of this project, not guideline values: the clinic sets its own.
DEFAULT_GUIDELINE = "esc_2023"
DEFAULT_POLICY = "shortest"
POLICIES = ("shortest", "midpoint", "longest")


@dataclass(frozen=True)
class Clinic:
    name: str = "Cardiac genetics clinic"
    address: str = ""
    phone: str = ""
    email: str = ""
    signatory: str = ""
    signatory_role: str = ""


@dataclass(frozen=True)
class Settings:
    clinic: Clinic = field(default_factory=Clinic)
    guideline: str = DEFAULT_GUIDELINE
    policy: str = DEFAULT_POLICY
    slots_per_week: int | None = None
    repeatability: dict[str, float] = field(default_factory=dict)
    source: str = "built-in defaults"


_SECTIONS = {
    "clinic": set(Clinic.__dataclass_fields__),
    "schedule": {"guideline", "policy", "slots_per_week"},
    "repeatability": None,  # any measure code
}


def load_settings(path: str | Path | None = None) -> Settings:
    """Read the settings file (see the module docstring for where it is looked for)."""
    chosen = path or os.environ.get(ENV_VAR)
    if chosen is None:
        if not Path(DEFAULT_FILE).exists():
            return Settings()
        chosen = DEFAULT_FILE
    p = Path(chosen)
    if not p.is_file():
        raise UserError(f"settings file {p} not found")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise UserError(f"{p.name}: not valid TOML ({exc})") from None
    return parse_settings(data, p.name)


def parse_settings(data: dict, name: str = "settings") -> Settings:
    for section, value in data.items():
        if section not in _SECTIONS:
            raise UserError(f"{name}: unknown section [{section}] (known: {', '.join(_SECTIONS)})")
        if not isinstance(value, dict):
            raise UserError(f"{name}: [{section}] must be a table")
        allowed = _SECTIONS[section]
        for key in value:
            if allowed is not None and key not in allowed:
                raise UserError(f"{name}: [{section}] unknown key {key!r} (known: {', '.join(sorted(allowed))})")
    clinic = Clinic(**{k: str(v) for k, v in data.get("clinic", {}).items()})
    schedule = data.get("schedule", {})
    guideline = str(schedule.get("guideline", DEFAULT_GUIDELINE))
    from tracker.rules import available_rule_sets

    if guideline not in available_rule_sets():
        raise UserError(
            f"{name}: [schedule] guideline {guideline!r} is not a rule set "
            f"(available: {', '.join(available_rule_sets())})"
        )
    policy = str(schedule.get("policy", DEFAULT_POLICY))
    if policy not in POLICIES:
        raise UserError(f"{name}: [schedule] policy {policy!r} is not one of {', '.join(POLICIES)}")
    slots = schedule.get("slots_per_week")
    if slots is not None and (not isinstance(slots, int) or slots < 1):
        raise UserError(f"{name}: [schedule] slots_per_week must be a positive whole number")
    rep = {}
    for code, v in data.get("repeatability", {}).items():
        if not isinstance(v, (int, float)) or v <= 0:
            raise UserError(f"{name}: [repeatability] {code} must be a positive number (within-subject SD)")
        rep[code] = float(v)
    return Settings(clinic, guideline, policy, slots, rep, name)
