"""The cascade uptake figures as CSV: one row per group and figure, counts with their denominators.

Columns: ``scope`` (clinic / family), ``family``, ``degree_group`` (all, first, second,
more_distant, unknown), ``figure`` (informed, counselled, tested, screened, declined,
not_reachable, tested_elsewhere, via_family, direct, route_not_recorded, time_to_first_contact,
time_to_test), ``count``, ``of``, ``percent`` (empty when ``of`` is 0 or the figure is not
recorded), ``recorded`` (yes/no), ``median_days`` (Kaplan-Meier; empty: not reached or no
relatives), ``relatives``, ``events``, ``censored`` (time figures only).  Dates ISO 8601; time in days.
"""

from __future__ import annotations

import csv
import io

COLUMNS = ["scope", "family", "degree_group", "figure", "count", "of", "percent", "recorded", "median_days",
           "relatives", "events", "censored"]  # fmt: skip


def _rows(scope: str, family: str, group: str, g: dict) -> list[dict]:
    out = []
    base = {"scope": scope, "family": family, "degree_group": group}

    def prop(name: str, p: dict) -> dict:
        return {**base, "figure": name, "count": p["count"], "of": p["of"], "percent": p["percent"],
                "recorded": "yes" if p["recorded"] else "no"}  # fmt: skip

    out.append({**base, "figure": "at_risk", "count": g["at_risk"], "recorded": "yes"})
    out += [prop(k, p) for k, p in g["counts"].items()]
    out.append(prop("tested_elsewhere", g["tested_elsewhere"]))
    out += [prop("route_not_recorded" if k == "not_recorded" else k, p) for k, p in g["informed_route"].items()]
    for k in ("time_to_first_contact", "time_to_test"):
        t = g[k]
        out.append({**base, "figure": k, "recorded": "yes", "median_days": t["median_days"],
                    "relatives": t["relatives"], "events": t["events"], "censored": t["censored"]})  # fmt: skip
    return out


def uptake_csv(data: dict) -> str:
    """CSV text of the figures printed by ``tracker uptake --json`` (``data``)."""
    rows = _rows("clinic", "", "all", data["clinic"])
    for grp, g in data["by_degree"].items():
        rows += _rows("clinic", "", grp, g)
    for f in data["families"]:
        rows += _rows("family", f["family"], "all", f["figures"])
        for grp, g in f["by_degree"].items():
            rows += _rows("family", f["family"], grp, g)
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=COLUMNS, lineterminator="\n")
    w.writeheader()
    for r in rows:
        w.writerow({c: "" if r.get(c) is None else r.get(c) for c in COLUMNS})
    return buf.getvalue()
