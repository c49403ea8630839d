"""Load benchmark of the web interface: signed-in clients against a synthetic store (a benchmark, never a test).

Run by hand::

    .venv/bin/python benchmarks/web_load.py --families 100 --compare 1000
    .venv/bin/python benchmarks/web_load.py --families 100 --compare 10000 --seconds 60 --clients 20
    .venv/bin/python benchmarks/web_load.py --families 100 --seconds 10 --json web.json   # a quick look

For each store size it writes a synthetic cohort (``tracker synth --families N
--seed S``, invented families only), imports it into a new SQLite store in a
work folder, adds one account per role through the accounts service, starts the
app (``tracker.web.app.create_app``) under uvicorn in a separate process on a
free 127.0.0.1 port, and then:

1. alone: one signed-in client requests each page ``--alone`` times in turn
   (no other traffic), and the service call behind the page is timed the same
   number of times in this process; the ratio of the two p95 is the cost of the
   web layer (target: at most 3x);
2. under load: ``--clients`` signed-in clients (threads with their own
   ``httpx.Client`` and session) request a weighted mix of pages and writes for
   ``--seconds`` seconds after ``--warmup`` seconds; p50 and p95 per page and every
   error (any exception or unexpected status; none is allowed: the exit code is
   1 when any occurs).

With ``--compare M`` the same is done on a store of M families and each page's
p95 at M is divided by its p95 at N (target at 10,000 vs 100 families: at most
1.5x).  Pages whose route answers 404 (not in the app yet) are listed as absent
and left out of the mix; a write whose service answers 501 likewise.

Every figure printed is measured in the one run; nothing is asserted about speed
in the test suite.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import random
import re
import secrets
import socket
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path

ROLES = ("nurse", "cardiologist", "counsellor", "admin")
SCALE_TARGET = 1.5  # p95 at 10,000 families / p95 at 100 families (this project's goal)
SERVICE_TARGET = 3.0  # p95 of the page / p95 of its service call alone (this project's goal)

SERVER = r"""
import sys, uvicorn
from tracker.web.app import create_app
app = create_app(db=sys.argv[1], secure_cookies=False)
uvicorn.run(app, host="127.0.0.1", port=int(sys.argv[2]), log_level="warning", access_log=False)
"""


# --------------------------------------------------------------------------- the store


def tracker_cli(*args: str) -> None:
    cmd = [sys.executable, "-m", "tracker", *args]
    done = subprocess.run(cmd, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(cmd[2:])} failed: {done.stderr.strip()[:400]}")


def build_store(folder: Path, families: int, seed: int) -> Path:
    """A store of ``families`` synthetic families (kept in ``folder`` and reused when already built)."""
    db = folder / f"web-load-{families}-s{seed}.sqlite"
    if db.exists():
        return db
    cohort = folder / f"synth-{families}-s{seed}"
    tracker_cli("synth", "--families", str(families), "--seed", str(seed), "--out", str(cohort), "--force", "--json")
    part = db.with_suffix(".partial")
    part.unlink(missing_ok=True)
    tracker_cli("init", "--db", str(part))
    tracker_cli("import", "all", str(cohort), "--db", str(part), "--json")
    part.rename(db)
    return db


def add_accounts(db: Path) -> dict[str, tuple[str, str]]:
    """One invented account per role on a working copy; role -> (name, password)."""
    from tracker.services import accounts
    from tracker.store.database import locate, make_engine, writing

    engine = make_engine(locate(str(db)))
    out = {}
    for role in ROLES:
        name = f"load.{role}"
        with writing(engine) as conn:
            first = accounts.add_account(conn, name, role, by="benchmark")
        password = "pw-" + secrets.token_urlsafe(15)
        with writing(engine) as conn:
            accounts.change_password(conn, accounts.authenticate(conn, name, first), first, password)
        out[role] = (name, password)
    engine.dispose()
    return out


def codes(db: Path) -> tuple[list[str], list[str]]:
    """Family codes, and person codes of living people (not placeholders, not removed), from the store:
    the contact and booking writes go to them (a deceased person or a placeholder is rightly refused)."""
    with sqlite3.connect(f"file:{db}?mode=ro", uri=True) as conn:
        fams = [r[0] for r in conn.execute("SELECT code FROM family ORDER BY code")]
        people = [r[0] for r in conn.execute(
            "SELECT code FROM person WHERE NOT is_placeholder AND removed_at IS NULL "
            "AND (vital_status IS NULL OR vital_status <> 'deceased') ORDER BY code")]  # fmt: skip
    return fams, people


# --------------------------------------------------------------------------- the app


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class App:
    """The app under uvicorn in its own process (the clients' threads do not share its interpreter)."""

    def __init__(self, db: Path):
        self.port = free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        self.log = Path(f"{db}.server.log")  # the app's own messages (tracebacks of any error), kept beside the store
        self._log = self.log.open("w")
        self.proc = subprocess.Popen([sys.executable, "-c", SERVER, str(db), str(self.port)],
                                     stdout=subprocess.DEVNULL, stderr=self._log, text=True)  # fmt: skip
        deadline = time.monotonic() + 60
        while True:
            if self.proc.poll() is not None:
                raise SystemExit(f"the app did not start: {self.log.read_text()[-800:]}")
            try:
                socket.create_connection(("127.0.0.1", self.port), timeout=0.5).close()
                return
            except OSError:
                if time.monotonic() > deadline:
                    self.stop()
                    raise SystemExit("the app did not start within 60 s") from None
                time.sleep(0.1)

    def stop(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(timeout=15)
        except subprocess.TimeoutExpired:
            self.proc.kill()
        self._log.close()


CSRF_FIELD = re.compile(r'name="csrf_token" value="([^"]+)"')
CSRF_META = re.compile(r'<meta name="csrf-token" content="([^"]+)"')


class Client:
    """A signed-in browser stand-in: its own cookies, the page's CSRF token sent with writes."""

    def __init__(self, url: str, name: str, password: str):
        import httpx

        self.http = httpx.Client(base_url=url, follow_redirects=False, timeout=60)
        form = self.http.get("/signin")
        token = CSRF_FIELD.search(form.text)
        r = self.http.post("/signin", data={"name": name, "password": password, "next": "/day",
                                            "csrf_token": token.group(1) if token else ""})  # fmt: skip
        if r.status_code != 303 or "/signin" in r.headers.get("location", ""):
            raise SystemExit(f"sign-in as {name} failed: {r.status_code} {r.headers.get('location')}")
        self.csrf = ""

    def get(self, path: str):
        r = self.http.get(path)
        m = CSRF_META.search(r.text) if r.status_code == 200 else None
        if m:
            self.csrf = m.group(1)
        return r

    def post(self, path: str, data: dict):
        if not self.csrf:
            self.get("/day")
        return self.http.post(path, data={**data, "csrf_token": self.csrf},
                              headers={"HX-Request": "true", "X-CSRF-Token": self.csrf})  # fmt: skip

    def close(self) -> None:
        self.http.close()


# --------------------------------------------------------------------------- what the clients do


@dataclass
class Page:
    name: str  # as reported
    weight: int  # share of the mix under load
    role: str  # who does it
    write: bool = False


PAGES = [
    Page("day", 30, "nurse"),
    Page("cohort", 10, "cardiologist"),
    Page("family", 20, "counsellor"),
    Page("person", 25, "cardiologist"),
    Page("contact (write)", 10, "nurse", write=True),
    Page("booking (write)", 5, "nurse", write=True),
]


def request(client: Client, page: str, rng: random.Random, fams: list[str], people: list[str], today: dt.date):
    """Send one request of ``page``; (response, path)."""
    if page == "day":
        return client.get("/day"), "/day"
    if page == "cohort":
        return client.get("/cohort"), "/cohort"
    if page == "family":
        path = f"/family/{rng.choice(fams)}"
        return client.get(path), path
    if page == "person":
        path = f"/person/{rng.choice(people)}"
        return client.get(path), path
    who = rng.choice(people)
    if page == "contact (write)":
        path = f"/day/contact/{who}"
        return client.post(path, {"on": today.isoformat(), "channel": "phone", "outcome": "no_answer",
                                  "notes": "load benchmark (invented)"}), path  # fmt: skip
    if page == "booking (write)":
        path = f"/day/booking/{who}"
        on = today + dt.timedelta(days=rng.randint(7, 90))
        return client.post(path, {"on": on.isoformat(), "purpose": "screening echo", "notes": "load benchmark"}), path
    raise ValueError(page)


def service_call(page: str, db: Path, fams: list[str], people: list[str], rng: random.Random):
    """The service calls behind ``page`` (as the page makes them), as a zero-argument function; None when
    not known here.  Keep in step with the pages: /day is ``tracker.web.pages.day.day_data``, /cohort is
    ``tracker.web.pages.cohort._read`` (page 1), /family and /person the views service as their pages call it."""
    from tracker.settings import load_settings
    from tracker.store.database import locate, make_engine, reading

    engine = make_engine(locate(str(db)))
    try:
        if page == "day":
            from tracker.services import contact_view as CV
            from tracker.services import day_list as DL
            from tracker.services import recall as SV
            from tracker.services import tasks as TS
            from tracker.web.pages.day import DEFAULT_WEEKS, PAGE_ROWS, SECTION_ROWS

            def day():  # as tracker.web.pages.day.day_data makes them
                conf, rule_set, policy = SV.recall_rules(None, None)
                on = dt.date.today()
                page = DL.day_list(engine, on, on + dt.timedelta(weeks=DEFAULT_WEEKS), on, conf, rule_set, policy,
                                   "", "", PAGE_ROWS, today=on, section_limit=SECTION_ROWS)  # fmt: skip
                with reading(engine) as conn:
                    TS.list_tasks(conn, None)
                    CV.open_bookings(conn, [r["family"] for r in page.rows + page.must_not], on)

            return day
        if page == "cohort":
            from tracker.services import cohort_view as CV
            from tracker.services import review as SR
            from tracker.web.pages.cohort import _read

            settings = load_settings(None)
            first_page = {"family": "", "measure": "", "flag": "", "page": "1"}

            def cohort():  # the page's reads: page 1 of the families, with the flagged rows first
                with reading(engine) as conn:
                    _read(conn, CV, SR, first_page, 1, settings)

            return cohort
        if page in ("family", "person"):
            from tracker.services import recall as SV
            from tracker.services import views as VW

            conf, rule_set, policy = SV.recall_rules(None, None)
            view = VW.family_view if page == "family" else VW.person_view
            codes = fams if page == "family" else people

            def one():
                with reading(engine) as conn:
                    view(conn, rng.choice(codes), dt.date.today(), conf, rule_set, policy)

            return one
    except (ImportError, AttributeError) as exc:  # the page or service changed: say so, measure the page alone
        print(f"   (service call of {page} not measured: {exc})")
    return None


def quantiles(xs: list[float]) -> dict:
    if not xs:
        return {"n": 0, "p50_ms": None, "p95_ms": None}
    xs = sorted(xs)
    p95 = xs[min(len(xs) - 1, int(round(0.95 * (len(xs) - 1))))]
    return {"n": len(xs), "p50_ms": round(statistics.median(xs) * 1000, 1), "p95_ms": round(p95 * 1000, 1)}


def run_size(args, folder: Path, families: int) -> dict:
    template = build_store(folder, families, args.seed)
    db = folder / f"run-{families}-{secrets.token_hex(3)}.sqlite"
    db.write_bytes(template.read_bytes())
    tracker_cli("init", "--db", str(db))  # a kept store from an earlier schema revision is upgraded
    # Every proposal stored for today before the clients come, as a clinic's nightly refresh leaves it
    # (a bulk import of this many families leaves them to the first read).
    tracker_cli("recall", "--refresh", "--db", str(db))
    accounts = add_accounts(db)
    fams, people = codes(db)
    today = dt.date.today()
    out: dict = {"families": families, "people": len(people), "absent": [], "alone": {}, "load": {}, "errors": []}
    app = App(db)
    try:
        clients = {role: Client(app.url, *accounts[role]) for role in ROLES}
        rng = random.Random(args.seed)
        present = []
        for p in PAGES:  # which pages are in the app (404: not yet), which writes have their service (501: not yet)
            r, path = request(clients[p.role], p.name, rng, fams, people, today)
            if r.status_code in (404, 501):
                out["absent"].append(f"{p.name} ({path} answered {r.status_code})")
            else:
                present.append(p)

        # 1. alone: one client, one page at a time, and the page's service call in this process
        for p in present:
            times = []
            request(clients[p.role], p.name, rng, fams, people, today)  # warm (first use: imports, caches)
            for _ in range(args.alone):
                t = time.perf_counter()
                r, path = request(clients[p.role], p.name, rng, fams, people, today)
                times.append(time.perf_counter() - t)
                if r.status_code not in (200, 303):
                    out["errors"].append(f"alone {p.name} {path}: {r.status_code}")
            row = {"web": quantiles(times)}
            call = service_call(p.name, db, fams, people, rng)
            if call is not None:
                call()  # warm, as the page was
                st = []
                for _ in range(args.alone):
                    t = time.perf_counter()
                    call()
                    st.append(time.perf_counter() - t)
                row["service"] = quantiles(st)
                row["web_over_service_p95"] = round(row["web"]["p95_ms"] / max(row["service"]["p95_ms"], 0.01), 2)
            out["alone"][p.name] = row
        for c in clients.values():
            c.close()

        # 2. under load
        out["load"] = load(args, app.url, accounts, present, fams, people, today, out["errors"])
    finally:
        app.stop()
        if out["errors"]:  # the app's account of them
            out["server_log"] = str(app.log)
            print(f"   the app's messages: {app.log}\n" + app.log.read_text()[-3000:])
        else:
            app.log.unlink(missing_ok=True)
        if not args.keep:
            for suffix in ("", "-wal", "-shm"):
                Path(str(db) + suffix).unlink(missing_ok=True)
    return out


def load(args, url, accounts, present, fams, people, today, errors: list) -> dict:
    """``args.clients`` clients, each signed in as one role (round robin over the roles the pages need) before
    the clock starts, each requesting its role's pages in their weights; latency per page after the warm-up."""
    times: dict[str, list[float]] = defaultdict(list)
    lock = threading.Lock()
    roles = sorted({p.role for p in present})
    sign_in = []
    clients = []
    for i in range(args.clients):  # one at a time: sign-in is not what is measured here
        t = time.perf_counter()
        clients.append(Client(url, *accounts[roles[i % len(roles)]]))
        sign_in.append(time.perf_counter() - t)
    start_at = time.monotonic() + 0.5
    measure_from = start_at + args.warmup
    stop_at = measure_from + args.seconds

    def worker(i: int):
        rng = random.Random(args.seed * 1000 + i)
        role = roles[i % len(roles)]
        mine = [p for p in present if p.role == role]
        weights = [p.weight for p in mine]
        while time.monotonic() < start_at:
            time.sleep(0.01)
        while True:
            now = time.monotonic()
            if now >= stop_at:
                break
            p = rng.choices(mine, weights=weights)[0]
            t = time.perf_counter()
            try:
                r, path = request(clients[i], p.name, rng, fams, people, today)
                bad = None if r.status_code in (200, 303) else f"{r.status_code}"
            except Exception as exc:  # every failure is counted and reported
                path, bad = p.name, f"{type(exc).__name__}: {exc}"
            took = time.perf_counter() - t
            with lock:
                if bad:
                    errors.append(f"load {p.name} {path}: {bad}")
                elif now >= measure_from:
                    times[p.name].append(took)

    threads = [threading.Thread(target=worker, args=(i,)) for i in range(args.clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for c in clients:
        c.close()
    total = sum(len(v) for v in times.values())
    res = {p.name: quantiles(times[p.name]) for p in present}
    res["all"] = {**quantiles([x for v in times.values() for x in v]),
                  "requests_per_s": round(total / args.seconds, 1)}  # fmt: skip
    res["sign-in (one at a time)"] = quantiles(sign_in)
    return res


# --------------------------------------------------------------------------- report


def show(run: dict) -> None:
    print(f"\n== {run['families']} families, {run['people']} people")
    for a in run["absent"]:
        print(f"   absent: {a}")
    print(f"   {'page':<18} {'alone p50':>10} {'alone p95':>10} {'service p95':>12} {'web/svc':>8}"
          f"   {'load n':>7} {'load p50':>9} {'load p95':>9}")  # fmt: skip
    for name, row in run["alone"].items():
        svc = row.get("service", {}).get("p95_ms")
        ratio = row.get("web_over_service_p95")
        lo = run["load"].get(name, {})
        flag = "" if ratio is None or ratio <= SERVICE_TARGET else "  (over 3x)"
        print(f"   {name:<18} {row['web']['p50_ms']:>10} {row['web']['p95_ms']:>10} {svc if svc is not None else 'n/a':>12}"
              f" {ratio if ratio is not None else 'n/a':>8}   {lo.get('n', 0):>7} {lo.get('p50_ms')!s:>9}"
              f" {lo.get('p95_ms')!s:>9}{flag}")  # fmt: skip
    si = run["load"].get("sign-in (one at a time)", {})
    print(f"   sign-in of the {si.get('n')} clients, one at a time: p50 {si.get('p50_ms')} ms, p95 {si.get('p95_ms')} ms")
    a = run["load"].get("all", {})
    print(f"   all under load: {a.get('n')} requests, {a.get('requests_per_s')} per s, p50 {a.get('p50_ms')} ms,"
          f" p95 {a.get('p95_ms')} ms; errors: {len(run['errors'])}")  # fmt: skip
    for e in run["errors"][:10]:
        print(f"     {e}")


def compare(small: dict, big: dict) -> dict:
    """Each page's p95 on the bigger store over its p95 on the smaller, alone and under load."""
    out = {}
    for name in small["alone"]:
        if name not in big["alone"]:
            continue
        pairs = {"alone": (small["alone"][name]["web"], big["alone"][name]["web"]),
                 "load": (small["load"].get(name, {}), big["load"].get(name, {}))}  # fmt: skip
        out[name] = {kind: round(b["p95_ms"] / s["p95_ms"], 2) for kind, (s, b) in pairs.items()
                     if s.get("p95_ms") and b.get("p95_ms")}  # fmt: skip
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                 formatter_class=argparse.RawDescriptionHelpFormatter)  # fmt: skip
    ap.add_argument("--families", type=int, default=100, help="store size (synthetic families), default 100")
    ap.add_argument("--compare", type=int, help="a second store size, compared with the first (e.g. 10000)")
    ap.add_argument("--clients", type=int, default=20, help="concurrent signed-in clients, default 20")
    ap.add_argument("--seconds", type=float, default=60, help="measured seconds under load, default 60")
    ap.add_argument("--warmup", type=float, default=5, help="seconds under load before measuring, default 5")
    ap.add_argument("--alone", type=int, default=30, help="requests per page with no other traffic, default 30")
    ap.add_argument("--seed", type=int, default=1, help="synthetic cohort seed, default 1")
    ap.add_argument("--work", type=Path, help="folder for the stores (kept and reused); default: a temporary one")
    ap.add_argument("--keep", action="store_true", help="keep each run's working copy of the store")
    ap.add_argument("--json", type=Path, help="also write every figure to this JSON file")
    args = ap.parse_args(argv)
    sizes = [args.families] + ([args.compare] if args.compare else [])
    with tempfile.TemporaryDirectory(prefix="web-load-") as tmp:
        folder = args.work or Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        print(f"web load: {args.clients} clients, {args.seconds:g} s (+{args.warmup:g} s warm-up), seed {args.seed},"
              f" python {sys.version.split()[0]}, {os.cpu_count()} CPUs")  # fmt: skip
        runs = []
        for n in sizes:
            run = run_size(args, folder, n)
            show(run)
            runs.append(run)
    result = {"args": {k: str(v) if isinstance(v, Path) else v for k, v in vars(args).items()}, "runs": runs}
    if len(runs) == 2:
        result["scale"] = compare(runs[0], runs[1])
        print(f"\n== p95 at {runs[1]['families']} / p95 at {runs[0]['families']} families "
              f"(target at 10,000 vs 100: <= {SCALE_TARGET}x)")  # fmt: skip
        for name, r in result["scale"].items():
            print(f"   {name:<18} alone {r.get('alone', 'n/a')}x   under load {r.get('load', 'n/a')}x")
    if args.json:
        args.json.write_text(json.dumps(result, indent=2))
    errors = sum(len(r["errors"]) for r in runs)
    if errors:
        print(f"\n{errors} errors: none is allowed")
    return 1 if errors else 0


if __name__ == "__main__":
    raise SystemExit(main())
