"""Site-wide markup in a real browser: every date field shows the ISO format the server reads, and
person codes and ISO dates are not broken at their hyphens."""

from __future__ import annotations

from browser.steps import open_page, sign_in


def test_every_date_field_shows_the_iso_format(page, site):
    sign_in(page, site, "nurse")
    open_page(page, site, "/day", "the nurse's day")
    fields = page.evaluate("""() => Array.from(document.querySelectorAll('input[type="date"]')).map(i => {
        const help = i.nextElementSibling;
        const described = (i.getAttribute('aria-describedby') || '').split(' ');
        return [i.name, help && help.classList.contains('fmt') ? help.textContent : null,
                help ? described.includes(help.id) || !i.id : false];
    })""")
    assert fields, "the day page has no date field"
    for name, help_text, linked in fields:
        assert help_text == "YYYY-MM-DD" and linked, (name, help_text, linked)


def test_codes_and_dates_do_not_wrap(page, site):
    sign_in(page, site, "cardiologist")
    open_page(page, site, "/cohort", "the cohort")
    styles = page.evaluate("""() => Array.from(document.querySelectorAll('#cohort-list td.code, #cohort-list .date'))
        .map(e => getComputedStyle(e).whiteSpace)""")
    assert styles and set(styles) == {"nowrap"}, set(styles)
