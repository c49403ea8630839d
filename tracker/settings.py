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

    [cascade]                   # counselling policies of the cascade (docs/recall-and-cascade.md)
    variant_rereview_months = 24        # re-review the variant's class after this long
    declined_reapproach_months = 24     # absent: relatives who declined are not re-approached

    [web]                       # the web interface (docs/operations.md)
    idle_minutes = 30                   # a session ends after this long unused
    absolute_hours = 12                 # and after this long in all
    trust_forwarded_proto = false       # true only behind your own TLS reverse proxy
    # secure_cookies = true             # default: Secure when the request came over TLS

    [display]                   # terminal tables (--json and --csv always hold every row)
    table_rows = 50                     # rows shown before "... and N more"; --all shows every row

    [privacy]                   # for `tracker export all --pseudonymise` (docs/privacy.md)
    pseudonym_key_file = "pseudonym.key"   # relative to this file; or pseudonym_key = "..."
    small_cell_threshold = 5

Unknown sections or keys are errors, so that a typing mistake in a setting
that changes recall intervals cannot pass unnoticed.
"""

from __future__ import annotations

import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from tracker.domain.genetics import DEFAULT_REREVIEW_MONTHS
from tracker.errors import UserError
from tracker.regular_file import NotReadable, read_regular_text

# Settings and key files are small; a larger file is refused unread (engineering default).
SMALL_FILE_BYTES = 16 * 1024**2

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


# Fewer than 5 per cell: common practice for small-cell suppression in health statistics
# (no single source).
DEFAULT_SMALL_CELL = 5
MIN_KEY_CHARS = 32  # RFC 2104 section 3: keys shorter than the hash output (32 bytes) are discouraged
KEY_HOWTO = (
    "set [privacy] pseudonym_key_file = \"PATH\" in the settings file (--settings), PATH a file "
    "(mode 0600, kept out of any export) holding a random key of at least 32 characters, e.g. "
    "from: python3 -c 'import secrets; print(secrets.token_hex(32))'"
)


@dataclass(frozen=True)
class Privacy:
    """The secret key of pseudonymised extracts and the small-cell threshold.

    The key never appears in a repr, a message or an extract.
    """

    pseudonym_key: str | None = field(default=None, repr=False)
    pseudonym_key_file: str | None = None  # absolute, or resolved against the settings file
    small_cell_threshold: int = DEFAULT_SMALL_CELL

    def key(self) -> str:
        """The key, from the setting or its file; a clear one-line error when there is none."""
        if self.pseudonym_key_file is not None:
            p = Path(self.pseudonym_key_file)
            try:
                text = read_regular_text(p, SMALL_FILE_BYTES).strip()
            except NotReadable as exc:
                raise UserError(f"[privacy] pseudonym_key_file {p} cannot be read: {exc.reason}") from None
            except UnicodeDecodeError:
                raise UserError(f"[privacy] pseudonym_key_file {p} cannot be read") from None
            where = f"the key file {p}"
        elif self.pseudonym_key is not None:
            text, where = self.pseudonym_key.strip(), "[privacy] pseudonym_key"
        else:
            raise UserError(f"no pseudonym key: {KEY_HOWTO}")
        if len(text) < MIN_KEY_CHARS:
            raise UserError(f"{where} is shorter than {MIN_KEY_CHARS} characters: {KEY_HOWTO}")
        return text


# Cascade policies.  Re-review: AHA 2024 (1 B-NR) asks for re-evaluation of the variant "at
# intervals" and ESC 2023 for systematic reclassification [V]; neither gives an interval, so the
# 24-month default is common practice.  Declined relatives: by default not re-approached (common
# practice: the decision is respected and the family passes on news; the clinic may choose to
# re-approach after a number of months).
@dataclass(frozen=True)
class CascadePolicy:
    variant_rereview_months: int = DEFAULT_REREVIEW_MONTHS
    declined_reapproach_months: int | None = None  # None: do not re-approach

    def declined_words(self) -> str:
        if self.declined_reapproach_months is None:
            return "clinic policy: relatives who declined are not re-approached (default)"
        return f"clinic policy: relatives who declined may be re-approached {self.declined_reapproach_months} months after"


# Rows a terminal table shows before "... and N more" (a display choice of this project).
DEFAULT_TABLE_ROWS = 50


@dataclass(frozen=True)
class Display:
    table_rows: int = DEFAULT_TABLE_ROWS


@dataclass(frozen=True)
class Settings:
    clinic: Clinic = field(default_factory=Clinic)
    guideline: str = DEFAULT_GUIDELINE
    policy: str = DEFAULT_POLICY
    slots_per_week: int | None = None
    repeatability: dict[str, float] = field(default_factory=dict)
    source: str = "built-in defaults"
    privacy: Privacy = field(default_factory=Privacy)
    cascade: CascadePolicy = field(default_factory=CascadePolicy)
    web: WebPolicy = field(default_factory=lambda: WebPolicy())
    display: Display = field(default_factory=lambda: Display())


# Web sessions: ended after this long without use, and after this long in all (engineering defaults
# of this project, common practice for clinical workstations; the clinic sets its own).
DEFAULT_IDLE_MINUTES = 30
DEFAULT_ABSOLUTE_HOURS = 12


@dataclass(frozen=True)
class WebPolicy:
    """``[web]``: session limits, and whether a reverse proxy in front says the request came over TLS."""

    idle_minutes: int = DEFAULT_IDLE_MINUTES
    absolute_hours: int = DEFAULT_ABSOLUTE_HOURS
    trust_forwarded_proto: bool = False  # believe X-Forwarded-Proto (only behind your own proxy)
    secure_cookies: bool | None = None  # None: Secure when the request came over TLS


_SECTIONS = {
    "clinic": set(Clinic.__dataclass_fields__),
    "schedule": {"guideline", "policy", "slots_per_week"},
    "repeatability": None,  # any measure code
    "privacy": {"pseudonym_key", "pseudonym_key_file", "small_cell_threshold"},
    "cascade": {"variant_rereview_months", "declined_reapproach_months"},
    "web": {"idle_minutes", "absolute_hours", "trust_forwarded_proto", "secure_cookies"},
    "display": {"table_rows"},
}


def load_settings(path: str | Path | None = None) -> Settings:
    """Read the settings file (see the module docstring for where it is looked for)."""
    chosen = path or os.environ.get(ENV_VAR)
    if chosen is None:
        if not Path(DEFAULT_FILE).exists():
            return Settings()
        chosen = DEFAULT_FILE
    p = Path(chosen)
    try:
        text = read_regular_text(p, SMALL_FILE_BYTES)
    except NotReadable as exc:
        raise UserError(f"settings file {p} " + ("not found" if exc.reason == "file not found" else exc.reason)) from None
    except UnicodeDecodeError:
        raise UserError(f"{p.name}: not valid TOML (not UTF-8 text)") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{p.name}: not valid TOML ({exc})") from None
    return parse_settings(data, p.name, base=p.parent)


def parse_settings(data: dict, name: str = "settings", base: Path | None = None) -> Settings:
    """Settings from parsed TOML; a relative key file is taken relative to ``base``."""
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
    return Settings(clinic, guideline, policy, slots, rep, name, _privacy(data.get("privacy", {}), name, base),
                    _cascade(data.get("cascade", {}), name), _web(data.get("web", {}), name),
                    _display(data.get("display", {}), name))


def _web(section: dict, name: str) -> WebPolicy:
    out = {}
    for key in ("idle_minutes", "absolute_hours"):
        if key in section:
            v = section[key]
            if not isinstance(v, int) or isinstance(v, bool) or v < 1:
                raise UserError(f"{name}: [web] {key} must be a whole number, at least 1")
            out[key] = v
    for key in ("trust_forwarded_proto", "secure_cookies"):
        if key in section:
            if not isinstance(section[key], bool):
                raise UserError(f"{name}: [web] {key} must be true or false")
            out[key] = section[key]
    return WebPolicy(**out)


def _display(section: dict, name: str) -> Display:
    rows = section.get("table_rows", DEFAULT_TABLE_ROWS)
    if not isinstance(rows, int) or isinstance(rows, bool) or rows < 1:
        raise UserError(f"{name}: [display] table_rows must be a whole number of at least 1")
    return Display(rows)


def _cascade(section: dict, name: str) -> CascadePolicy:
    out = {}
    for key in ("variant_rereview_months", "declined_reapproach_months"):
        if key not in section:
            continue
        v = section[key]
        if not isinstance(v, int) or isinstance(v, bool) or v < 1:
            raise UserError(f"{name}: [cascade] {key} must be a whole number of months, at least 1")
        out[key] = v
    return CascadePolicy(**out)


def _privacy(section: dict, name: str, base: Path | None) -> Privacy:
    key, key_file = section.get("pseudonym_key"), section.get("pseudonym_key_file")
    if key is not None and key_file is not None:
        raise UserError(f"{name}: [privacy] give pseudonym_key or pseudonym_key_file, not both")
    if key is not None and not isinstance(key, str):
        raise UserError(f"{name}: [privacy] pseudonym_key must be text")
    if key_file is not None:
        if not isinstance(key_file, str) or not key_file.strip():
            raise UserError(f"{name}: [privacy] pseudonym_key_file must be a file path")
        p = Path(key_file).expanduser()
        key_file = str(p if p.is_absolute() or base is None else base / p)
    threshold = section.get("small_cell_threshold", DEFAULT_SMALL_CELL)
    if not isinstance(threshold, int) or isinstance(threshold, bool) or threshold < 1:
        raise UserError(f"{name}: [privacy] small_cell_threshold must be a whole number of at least 1")
    return Privacy(key, key_file, threshold)
