"""Browser-test helpers: launching Debian's chromium, accessibility checks with axe-core, keyboard checks.

Chromium is the system package (``apt-get install chromium``), driven by
Playwright's Python package; Playwright's own browser downloads are never used.

axe-core (tests/browser/vendor/axe.min.js, see VENDORED.md) is evaluated in the
page through the DevTools protocol (``page.evaluate`` of its source).  The app
sends ``Content-Security-Policy: script-src 'self'``, which rightly blocks an
injected inline ``<script>`` (``page.add_script_tag`` would fail); code run by
the DevTools protocol is not governed by the page's policy, so the policy stays
in force for the page under test the whole time and is never weakened or
bypassed.  ``tests/browser/test_helpers.py`` checks both facts.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import pytest

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
VENDOR = Path(__file__).parent / "vendor"
AXE_JS = VENDOR / "axe.min.js"
BLOCKING_IMPACTS = ("serious", "critical")


def in_ci() -> bool:
    return os.environ.get("CI", "").lower() == "true"


def require_chromium() -> None:
    """Skip (outside CI) or fail (in CI: ``CI=true``) when the browser or Playwright is missing."""
    missing = None
    if not CHROMIUM.exists():
        missing = f"{CHROMIUM} is absent (install it: apt-get install chromium)"
    else:
        try:
            import playwright.sync_api  # noqa: F401
        except ImportError:
            missing = "the playwright package is absent (pip install -e '.[test]')"
    if missing is None:
        return
    if in_ci():
        pytest.fail(f"browser tests must run in CI (CI=true) but {missing}", pytrace=False)
    pytest.skip(f"browser tests skipped: {missing}")


def launch(playwright):
    """Debian's chromium, headless, without network side traffic."""
    return playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)


# --------------------------------------------------------------------------- axe-core

_AXE_RUN = """async (options) => {
  const r = await axe.run(document, options);
  return r.violations.map(v => ({
    id: v.id, impact: v.impact, help: v.help,
    nodes: v.nodes.slice(0, 5).map(n => n.target.join(' ') + ' :: ' + (n.failureSummary || '').split('\\n').slice(1, 2).join(''))
  }));
}"""


def axe_violations(page, *, options: dict | None = None) -> list[dict]:
    """Run axe-core on the page as it is now; every violation (id, impact, help, up to 5 nodes)."""
    if not page.evaluate("typeof window.axe === 'object'"):
        page.evaluate(AXE_JS.read_text(encoding="utf-8"))
    return page.evaluate(_AXE_RUN, options or {"resultTypes": ["violations"]})


def format_violations(violations: list[dict]) -> str:
    lines = []
    for v in violations:
        lines.append(f"[{v['impact']}] {v['id']}: {v['help']}")
        lines += [f"    {n}" for n in v["nodes"]]
    return "\n".join(lines)


def assert_accessible(page, where: str | None = None) -> None:
    """No serious or critical axe-core violation on the page as it is now."""
    bad = [v for v in axe_violations(page) if v["impact"] in BLOCKING_IMPACTS]
    assert not bad, f"accessibility ({where or page.url}):\n{format_violations(bad)}"


# --------------------------------------------------------------------------- keyboard

_MARK = """() => {
  // shown now: laid out, not hidden, not inside a closed <details> (its summary excepted)
  const closed = el => { const d = el.closest('details:not([open])'); return !!d && !el.closest('summary'); };
  const visible = el => !!(el.offsetWidth || el.offsetHeight || el.getClientRects().length)
                        && el.checkVisibility({visibilityProperty: true}) && !closed(el);
  const usable = el => visible(el) && !el.disabled && el.type !== 'hidden' && !el.closest('[inert]');
  let n = 0;
  document.querySelectorAll('a[href], button, input, select, textarea, summary, iframe, [tabindex], [contenteditable]')
    .forEach(el => { if (!el.dataset.kbd) el.dataset.kbd = 'k' + (n++); });
  const forms = [], hidden = [];
  document.querySelectorAll('form').forEach((form, fi) => {
    const controls = [];
    Array.from(form.elements).filter(el => ['INPUT', 'SELECT', 'TEXTAREA', 'BUTTON'].includes(el.tagName)).filter(usable).forEach(el => {
      if (!el.dataset.kbd) el.dataset.kbd = 'k' + (n++);
      const submit = (el.tagName === 'BUTTON' && (el.type || 'submit') === 'submit')
                     || (el.tagName === 'INPUT' && (el.type === 'submit' || el.type === 'image'));
      controls.push({id: el.dataset.kbd, submit, radio: el.type === 'radio' ? (el.name || el.dataset.kbd) : null,
                     label: (el.getAttribute('aria-label') || el.name || el.id || el.textContent || el.value || el.tagName).trim().slice(0, 40)});
    });
    form.dataset.kbdForm = 'f' + fi;
    if (!controls.length) {  // not shown now: inside a closed <details>, its summary must be reachable
      const d = form.closest('details:not([open])');
      const s = d && d.querySelector(':scope > summary');
      if (s) hidden.push({summary: s.dataset.kbd, label: s.textContent.trim().slice(0, 40)});
      return;
    }
    forms.push({form: 'f' + fi, label: (form.getAttribute('aria-label') || form.getAttribute('action')
                || form.getAttribute('hx-post') || form.id || ('form ' + (fi + 1))), controls});
  });
  return {forms, hidden};
}"""

_ACTIVE = "() => { const a = document.activeElement; return a && a.dataset && a.dataset.kbd || null; }"

# Tab starts from a focus point at the very top of the page (tabindex -1: never itself in the order).
_TO_TOP = """() => {
  let s = document.getElementById('kbd-start');
  if (!s) { s = document.createElement('span'); s.id = 'kbd-start'; s.tabIndex = -1; document.body.prepend(s); }
  s.focus(); window.scrollTo(0, 0);
}"""

_CATCH_SUBMIT = """() => {
  window.__kbdSubmitted = [];
  window.__kbdNoValidate = Array.from(document.forms).map(f => f.noValidate);
  Array.from(document.forms).forEach(f => { f.noValidate = true; });
  window.__kbdCatch = e => { window.__kbdSubmitted.push(e.target.dataset.kbdForm); e.preventDefault(); e.stopImmediatePropagation(); };
  window.addEventListener('submit', window.__kbdCatch, true);
}"""

# Leaves the page as it was: the submit catcher removed, validation and the markers restored.
_RELEASE = """() => {
  if (window.__kbdCatch) {
    window.removeEventListener('submit', window.__kbdCatch, true);
    Array.from(document.forms).forEach((f, i) => { f.noValidate = window.__kbdNoValidate[i]; });
    delete window.__kbdCatch;
  }
  const s = document.getElementById('kbd-start'); if (s) s.remove();
  document.querySelectorAll('[data-kbd]').forEach(el => { delete el.dataset.kbd; });
  document.querySelectorAll('[data-kbd-form]').forEach(el => { delete el.dataset.kbdForm; });
}"""


@dataclass
class KeyboardReport:
    forms: list[dict]
    order: list[str] = field(default_factory=list)  # the data-kbd ids in the order Tab reached them
    unreached: list[str] = field(default_factory=list)  # "form label: control label"
    not_submitted: list[str] = field(default_factory=list)  # forms Enter did not submit

    @property
    def ok(self) -> bool:
        return bool(self.forms) and not self.unreached and not self.not_submitted


def _tab_order(page, limit: int) -> list[str]:
    page.evaluate(_TO_TOP)
    seen: list[str] = []
    for _ in range(limit):
        page.keyboard.press("Tab")
        current = page.evaluate(_ACTIVE)
        if current and seen and current == seen[0]:
            break  # wrapped round
        if current:
            seen.append(current)
    return seen


def keyboard_check(page) -> KeyboardReport:
    """Whether every form on the page can be reached and submitted with Tab and Enter alone.

    Every usable control of every form must receive focus by pressing Tab from the
    top of the page (a radio group counts once: arrow keys move within it); a form
    folded in a closed ``<details>`` needs its ``<summary>`` reachable (Enter opens
    it; open it and check again to check the form itself).  Then, for each form,
    focus moves by Tab alone to its first submit button and Enter is pressed; the
    form must fire its ``submit`` event.  That event is caught before the page or
    htmx sees it and native validation is off during the check, so nothing is sent
    and an empty required field does not hide a keyboard problem.  Afterwards the
    page is as it was (forms submit normally again).
    """
    marks = page.evaluate(_MARK)
    try:
        return _keyboard_check(page, marks)
    finally:
        page.evaluate(_RELEASE)


def _keyboard_check(page, marks: dict) -> KeyboardReport:
    forms = marks["forms"]
    marked = page.evaluate("() => document.querySelectorAll('[data-kbd]').length")
    order = _tab_order(page, limit=2 * marked + 20)
    reached = set(order)
    report = KeyboardReport(forms=forms, order=order)
    report.unreached += sorted({f"closed form behind '{h['label']}': its summary" for h in marks["hidden"]
                                if h["summary"] not in reached})
    for f in forms:
        groups: dict[str, bool] = {}
        for c in f["controls"]:
            if c["radio"]:
                groups[c["radio"]] = groups.get(c["radio"], False) or c["id"] in reached
            elif c["id"] not in reached:
                report.unreached.append(f"{f['label']}: {c['label']}")
        report.unreached += [f"{f['label']}: radio group {g}" for g, ok in groups.items() if not ok]
    page.evaluate(_CATCH_SUBMIT)
    for f in forms:
        submits = [c["id"] for c in f["controls"] if c["submit"]]
        target = next((s for s in submits if s in reached), None)
        if target is None:
            report.not_submitted.append(f"{f['label']}: no submit button reachable by Tab")
            continue
        page.evaluate(_TO_TOP)
        for _ in range(order.index(target) + 1):
            page.keyboard.press("Tab")
        if page.evaluate(_ACTIVE) != target:
            report.not_submitted.append(f"{f['label']}: Tab order changed on the second pass")
            continue
        page.keyboard.press("Enter")
        if f["form"] not in page.evaluate("() => window.__kbdSubmitted"):
            report.not_submitted.append(f"{f['label']}: Enter on its submit button did not submit it")
    return report


def assert_keyboard_forms(page, where: str | None = None) -> KeyboardReport:
    report = keyboard_check(page)
    assert report.forms, f"keyboard ({where or page.url}): no form on the page"
    problems = report.unreached + report.not_submitted
    assert not problems, f"keyboard ({where or page.url}):\n  " + "\n  ".join(problems)
    return report
