"""Signing in and out in a real browser: keyboard alone, refusals shown beside the form, the page policy in force."""

from __future__ import annotations

import re

from browser.browsing import assert_accessible, assert_keyboard_forms


def test_the_app_sends_the_script_policy_the_axe_runs_keep(page, site):
    response = page.goto(site.at("/signin"))
    policy = response.headers.get("content-security-policy", "")
    assert "script-src 'self'" in policy and "unsafe-inline" not in policy, policy
    assert page.evaluate("typeof htmx") == "object"  # the app's own scripts load under it
    assert_accessible(page, "sign-in page")


def test_sign_in_with_the_keyboard_alone_and_sign_out(page, site):
    nurse = site.accounts["nurse"]
    page.goto(site.at("/signin"))
    assert_keyboard_forms(page, "sign-in page")
    page.evaluate("document.activeElement && document.activeElement.blur()")
    page.keyboard.press("Tab")
    while page.evaluate("document.activeElement.id") != "name":  # past any skip link or header link
        page.keyboard.press("Tab")
    page.keyboard.type(nurse.name)
    page.keyboard.press("Tab")
    page.keyboard.type(nurse.password)
    with page.expect_navigation():
        page.keyboard.press("Enter")
    assert page.url.endswith("/day"), page.url
    assert_accessible(page, "the nurse's day")
    with page.expect_navigation():
        page.get_by_role("button", name=re.compile("sign out", re.I)).click()
    assert "/signin" in page.url
    page.goto(site.at("/day"))
    assert "/signin" in page.url, "the day list is still shown after signing out"


def test_a_wrong_password_is_refused_on_the_page_itself(page, site):
    page.goto(site.at("/signin"))
    page.get_by_label("Account name").fill(site.accounts["nurse"].name)
    page.get_by_label("Password", exact=True).fill("not-the-password")
    with page.expect_navigation():
        page.get_by_label("Password", exact=True).press("Enter")
    assert "/signin" in page.url
    assert page.get_by_text(re.compile("not recognised", re.I)).count() >= 1
    assert page.get_by_label("Account name").input_value() == site.accounts["nurse"].name  # kept
    assert page.get_by_label("Password", exact=True).input_value() == ""  # never sent back
    assert_accessible(page, "the sign-in page with a refusal")
