"""The pages in a real browser: Playwright driving Debian's Chromium against a
live server with the demo project.

Skipped with a reason when /usr/bin/chromium (or the playwright package) is
missing, except in CI (SITEPACE_REQUIRE_SERVICES=1), where that fails.
Screenshots go to tests/artifacts/ for people to look at.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from django.conf import settings

from .conftest import PASSWORD

CHROMIUM = "/usr/bin/chromium"
ARTIFACTS = Path(settings.BASE_DIR) / "tests" / "artifacts"
LAUNCH_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]

pytestmark = pytest.mark.django_db(transaction=True)


def _missing() -> str | None:
    if not Path(CHROMIUM).exists():
        return f"{CHROMIUM} is not installed (apt-get install -y chromium)"
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "the playwright package is not installed (pip install -e '.[test]')"
    return None


@pytest.fixture(scope="module")
def browser():
    reason = _missing()
    if reason:
        if os.environ.get("SITEPACE_REQUIRE_SERVICES") == "1":
            pytest.fail(f"browser tests must run in CI: {reason}")
        pytest.skip(reason)
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    # Playwright's sync API keeps an event loop on this thread; Django would
    # then refuse the test's own database calls (the server runs on its own
    # thread either way).
    with pytest.MonkeyPatch.context() as mp, sync_playwright() as p:
        mp.setenv("DJANGO_ALLOW_ASYNC_UNSAFE", "true")
        b = p.chromium.launch(executable_path=CHROMIUM, args=LAUNCH_ARGS)
        yield b
        b.close()


def signed_in_page(browser, live_server, path: str, width=1440, height=900):
    page = browser.new_page(viewport={"width": width, "height": height})
    page.set_default_timeout(15_000)
    page.goto(f"{live_server.url}/app/login?next={path}")
    page.fill("#id_username", "demo-scheduler")
    page.fill("#id_password", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(f"**{path}")
    return page


def test_bar_chart_one_bar_per_activity_critical_marked_keyboard(
    browser, live_server, demo
):
    path = f"/app/projects/{demo.pk}/bars"
    page = signed_in_page(browser, live_server, path)
    bars = page.locator("g.bar")
    assert bars.count() == demo.activities.count() == 151
    keys = page.eval_on_selector_all("g.bar", "els => els.map(e => e.dataset.activity)")
    assert len(set(keys)) == 151
    unmarked = page.eval_on_selector_all(
        "g.bar[data-critical=true]",
        "els => els.filter(e => !e.querySelector('.mark-critical'))"
        ".map(e => e.dataset.activity)",
    )
    critical = page.locator("g.bar[data-critical=true]").count()
    assert critical > 0 and unmarked == []
    assert page.locator("g.bar[data-critical=false] .mark-critical").count() == 0
    # The critical stripes are painted from the page's shared pattern.
    assert page.locator("#sp-crit").count() == 1
    assert page.get_by_role("note").first.is_visible()
    page.screenshot(path=str(ARTIFACTS / "bars-desktop.png"))

    # Keyboard: focus a bar, arrow down to the next, the details follow.
    page.locator("g.bar").first.focus()
    details = page.locator("#sp-details")
    assert details.is_visible()
    first_key = keys[0]
    assert first_key in details.inner_text()
    page.keyboard.press("ArrowDown")
    assert keys[1] in details.inner_text()
    assert "Total float" in details.inner_text()
    assert "Driven by" in details.inner_text()
    page.keyboard.press("Escape")
    assert not details.is_visible()

    # Collapsible groups.
    group = page.locator("details.group").first
    inside = group.locator("g.bar").first
    assert inside.is_visible()
    group.locator("summary").click()
    assert not inside.is_visible()
    page.click("#sp-open-all")
    assert inside.is_visible()

    # Zoom from days to months: the axis scale follows.
    page.click("a[data-zoom=days]")
    page.wait_for_url("**zoom=days**")
    assert page.locator("#sp-chart").get_attribute("data-px-per-day") == "24"
    page.click("a[data-zoom=months]")
    page.wait_for_url("**zoom=months**")
    assert page.locator("#sp-chart").get_attribute("data-px-per-day") == "3"
    page.screenshot(path=str(ARTIFACTS / "bars-months.png"))

    # Print view: no navigation, the chart unclipped.
    page.emulate_media(media="print")
    assert not page.locator("header.top nav").is_visible()
    page.close()

    tablet = signed_in_page(browser, live_server, path, width=1024, height=768)
    assert tablet.locator("g.bar").count() == 151
    overflow = tablet.evaluate(
        "document.documentElement.scrollWidth - document.documentElement.clientWidth"
    )
    assert overflow <= 0, "the page itself scrolls sideways at tablet width"
    tablet.screenshot(path=str(ARTIFACTS / "bars-tablet.png"))
    tablet.close()


def test_crew_histogram_after_levelling_is_within_capacity(
    browser, live_server, demo, demo_levelled, monkeypatch
):
    path = f"/app/projects/{demo.pk}/crews"
    page = signed_in_page(browser, live_server, path)
    # Before any levelled schedule: early demand only, and it says so.
    assert page.locator("[data-not-levelled]").is_visible()
    assert page.locator("g.col[data-plan=early][data-over=true]").count() > 0
    page.screenshot(path=str(ARTIFACTS / "crews-early.png"))

    # No run publishes a levelled schedule yet: serve the engine's levelled
    # demo schedule to the pages directly.
    monkeypatch.setattr(
        "frontend.selectors.schedule_get", lambda *, project: demo_levelled
    )
    page.reload()
    peaks = page.eval_on_selector_all(
        "g.col[data-plan=levelled]",
        """els => {
            const out = {};
            for (const e of els) {
                const c = e.dataset.crew, d = +e.dataset.demand;
                const cap = +e.dataset.capacity;
                const worst = d - cap;
                if (!(c in out) || worst > out[c]) out[c] = worst;
            }
            return out;
        }""",
    )
    crews = set(
        page.eval_on_selector_all(
            "tr[data-crew-row]", "els => els.map(e => e.dataset.crewRow)"
        )
    )
    assert set(peaks) == crews
    assert all(worst <= 0 for worst in peaks.values()), peaks
    assert page.locator("g.col[data-plan=levelled][data-over=true]").count() == 0
    page.screenshot(path=str(ARTIFACTS / "crews-levelled.png"), full_page=False)

    page.click("a[data-period=week]")
    page.wait_for_url("**period=week")
    days = page.eval_on_selector_all(
        "g.col", "els => [...new Set(els.map(e => e.dataset.days))]"
    )
    assert days == ["7"]
    page.screenshot(path=str(ARTIFACTS / "crews-weekly.png"))
    page.close()


def test_overview_shows_finish_path_and_caution(browser, live_server, demo):
    path = f"/app/projects/{demo.pk}/"
    page = signed_in_page(browser, live_server, path)
    assert "2028-03-31" in page.locator("[data-figure=finish]").inner_text()
    assert "no baseline captured yet" in page.inner_text("[data-figure=baseline]")
    assert page.locator("[data-critical-path] tbody tr").count() > 10
    caution = page.locator("[data-caution]")
    assert caution.is_visible() and "competent person" in caution.inner_text()
    page.screenshot(path=str(ARTIFACTS / "overview.png"), full_page=True)
    page.close()
    tablet = signed_in_page(browser, live_server, path, width=1024, height=768)
    tablet.screenshot(path=str(ARTIFACTS / "overview-tablet.png"))
    tablet.close()
