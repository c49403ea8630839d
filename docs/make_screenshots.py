"""Rebuild the pictures of the web interface in docs/images/web-*.png from the invented demo families.

Builds the demo database in a temporary folder (``python -m tracker demo``), adds
one invented account per role through the accounts service, serves the app
(``tracker.web.app.create_app``) with uvicorn on a free 127.0.0.1 port, signs in
as the role each page is for, and saves a screenshot of each page with Debian's
chromium (``apt-get install chromium``) driven by Playwright's Python package.

The app's clock is fixed at 2026-12-01 08:30 UTC so the pictures do not change
from day to day.  A page whose route is not in the app yet (404) is listed and
left out.  All data are invented.

Run from the repository root:  .venv/bin/python docs/make_screenshots.py
"""

from __future__ import annotations

import datetime as dt
import secrets
import socket
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
IMAGES = ROOT / "docs" / "images"
CHROMIUM = "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]  # fmt: skip
NOW = dt.datetime(2026, 12, 1, 8, 30)
WIDTH, MAX_HEIGHT = 1280, 2200
ROLES = ("nurse", "cardiologist", "counsellor", "admin")

# (file, role or None, path, what to do on the page before the picture)
SHOTS = [
    ("web-signin.png", None, "/signin", None),
    ("web-password.png", "first", "/password", None),
    ("web-day.png", "nurse", "/day", None),
    ("web-day-contact.png", "nurse", "/day", "open-contact"),
    ("web-cohort.png", "cardiologist", "/cohort", None),
    ("web-family.png", "counsellor", "/family/HV01", None),
    ("web-person.png", "cardiologist", "/person/HV01-III-1", None),
    ("web-import.png", "admin", "/import", None),
    ("web-accounts.png", "admin", "/admin/accounts", None),
    ("web-audit.png", "admin", "/admin/audit", None),
    ("web-refused.png", "nurse", "/admin/accounts", None),
]


def accounts(db: Path) -> dict[str, tuple[str, str]]:
    from tracker.services import accounts as AC
    from tracker.store.database import locate, make_engine, writing

    engine = make_engine(locate(str(db)))
    out = {}
    for role in ROLES:
        name = f"demo.{role}"
        with writing(engine) as conn:
            first = AC.add_account(conn, name, role, by="screenshots", now=NOW)
        password = "pw-" + secrets.token_urlsafe(15)
        with writing(engine) as conn:
            AC.change_password(conn, AC.authenticate(conn, name, first, now=NOW), first, password, now=NOW)
        out[role] = (name, password)
    with writing(engine) as conn:  # left with its one-time password: shows the change-password page
        out["first"] = ("new.counsellor", AC.add_account(conn, "new.counsellor", "counsellor", by="screenshots",
                                                         now=NOW))  # fmt: skip
    engine.dispose()
    return out


def serve(app):
    import uvicorn

    sock = socket.socket()
    sock.bind(("127.0.0.1", 0))
    server = uvicorn.Server(uvicorn.Config(app, log_level="warning", access_log=False))
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    while not server.started:
        if not thread.is_alive():
            raise SystemExit("the app did not start")
        time.sleep(0.02)
    return f"http://127.0.0.1:{sock.getsockname()[1]}", server, thread


def sign_in(page, url: str, name: str, password: str) -> None:
    page.goto(url + "/signin")
    page.get_by_label("Account name").fill(name)
    page.get_by_label("Password", exact=True).fill(password)
    with page.expect_navigation():
        page.get_by_role("button", name="Sign in").click()


def main() -> int:
    from playwright.sync_api import sync_playwright

    from tracker.web.app import create_app

    if not Path(CHROMIUM).exists():
        raise SystemExit(f"{CHROMIUM} is absent: apt-get install chromium")
    IMAGES.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        db = Path(tmp) / "demo.sqlite"
        subprocess.run([sys.executable, "-m", "tracker", "demo", "--db", str(db)], check=True, capture_output=True)
        creds = accounts(db)
        app = create_app(db=str(db), secure_cookies=False)
        app.state.clock = lambda: NOW
        url, server, thread = serve(app)
        made, absent = [], []
        try:
            with sync_playwright() as pw:
                browser = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS)
                for file, role, path, action in SHOTS:
                    context = browser.new_context(viewport={"width": WIDTH, "height": 900}, locale="en-GB")
                    page = context.new_page()
                    if role:
                        sign_in(page, url, *creds[role])
                    response = page.goto(url + path)
                    if response.status == 404:
                        absent.append(f"{file}: {path} returns 404")
                        context.close()
                        continue
                    if action == "open-contact":
                        page.locator("#day-list tbody tr summary").first.click()
                    page.wait_for_load_state("networkidle")
                    height = min(page.evaluate("document.documentElement.scrollHeight"), MAX_HEIGHT)
                    page.screenshot(path=str(IMAGES / file), full_page=True,
                                    clip={"x": 0, "y": 0, "width": WIDTH, "height": height})  # fmt: skip
                    made.append(f"{file}: {path} as {role or 'nobody'} ({response.status}, {height} px high)")
                    context.close()
                browser.close()
        finally:
            server.should_exit = True
            thread.join(timeout=15)
    for line in made:
        print("wrote docs/images/" + line)
    for line in absent:
        print("not in the app yet: " + line)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
