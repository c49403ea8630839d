"""Steps the user-day tests share: sign in, open a page (skipped only when its route is not there yet), check it."""

from __future__ import annotations

import re

import pytest

from browser.browsing import assert_accessible


def sign_in(page, site, role: str, *, password: str | None = None) -> None:
    """Sign in through the sign-in page as the demo account of ``role``; ends on the page the app sends to."""
    account = site.accounts[role]
    response = page.goto(site.at("/signin"))
    assert response is not None and response.ok, f"/signin answered {response and response.status}"
    assert_accessible(page, "sign-in page")
    page.get_by_label("Account name").fill(account.name)
    page.get_by_label("Password", exact=True).fill(password or account.password)
    with page.expect_navigation():
        page.get_by_role("button", name="Sign in").click()
    assert "/signin" not in page.url, f"sign-in as {role} refused: {page.locator('main').inner_text()[:300]}"


def open_page(page, site, path: str, what: str, *, accessible: bool = True):
    """Go to ``path``; a 404 (page not merged yet) skips the test naming the page; any other failure fails it."""
    response = page.goto(site.at(path))
    assert response is not None
    if response.status == 404:
        pytest.skip(f"page not merged yet: {what} ({path} returns 404)")
    assert response.ok, f"{what} ({path}) answered {response.status}: {page.locator('body').inner_text()[:300]}"
    assert "/signin" not in page.url, f"{what} ({path}) sent back to the sign-in page"
    if accessible:
        assert_accessible(page, what)
    return response


def route_exists(page, site, path: str) -> bool:
    """Whether the app answers ``path`` with anything but 404 (read with the page's cookies, nothing shown)."""
    return page.request.get(site.at(path), max_redirects=0).status != 404


def words(text: str) -> re.Pattern:
    """A case-insensitive pattern for a visible label or name."""
    return re.compile(text, re.I)
