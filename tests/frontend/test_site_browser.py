"""The site page in a real browser: Playwright driving Debian's Chromium
against a live server. Record progress; lose the signal (the browser context
goes offline), record two entries, get it back: the server holds each entry
exactly once, even when the device sends its whole outbox again; an entry
that clashes with one from another device shows as a conflict on the page.

The project's calendar works every day of the week, so the dates are plain
day counts from today: project start 14 days ago, data date today.
"""

from __future__ import annotations

import datetime as dt

import pytest
from rest_framework.test import APIClient

from scheduling.models import ProgressEntry, Role
from scheduling.progress_entries import site_today

from .conftest import PASSWORD
from .test_browser import ARTIFACTS, browser  # noqa: F401 (the fixture)

pytestmark = pytest.mark.django_db(transaction=True)

EVERY_DAY = ["mon", "tue", "wed", "thu", "fri", "sat", "sun"]


@pytest.fixture
def site_project(django_user_model):
    from scheduling import services

    planner = django_user_model.objects.create_user("pia.plan", password=PASSWORD)
    site = django_user_model.objects.create_user("sana.site", password=PASSWORD)
    today = dt.date.today()
    project = services.project_create(
        user=planner, name="Quayside flats, block C", start=today
    )
    today = site_today(project)
    start = today - dt.timedelta(days=14)
    document = {
        "format": "sitepace.network/1",
        "project": {
            "name": "Quayside flats, block C",
            "start": start.isoformat(),
            "calendar": "all",
            "data_date": today.isoformat(),
        },
        "calendars": [{"key": "all", "name": "Every day", "workdays": EVERY_DAY}],
        "crews": [
            {"key": "masonry", "name": "Masonry crew", "capacity": 2},
            {"key": "plumbing", "name": "Plumbing crew", "capacity": 1},
        ],
        "activities": [
            {
                "key": "W1",
                "name": "Set out ground floor walls",
                "duration": 2,
                "demands": {"masonry": 1},
            },
            {
                "key": "W2",
                "name": "Ground floor blockwork",
                "duration": 6,
                "demands": {"masonry": 2},
            },
            {
                "key": "P1",
                "name": "Drainage rough-in",
                "duration": 3,
                "demands": {"plumbing": 1},
            },
            {
                "key": "P2",
                "name": "Water main tie-in",
                "duration": 1,
                "demands": {"plumbing": 1},
            },
            {
                "key": "R1",
                "name": "First floor slab",
                "duration": 4,
                "demands": {"masonry": 1},
            },
        ],
        "relations": [
            {"pred": "W1", "succ": "R1", "type": "FS"},
            {"pred": "P1", "succ": "R1", "type": "FS"},
        ],
    }
    project = services.network_replace(
        project=project, document=document, expected_revision=project.revision
    )
    services.member_add(project=project, username=site.username, role=Role.SITE_MANAGER)
    return project, planner, today


def entries(project, key: str | None = None) -> int:
    qs = ProgressEntry.objects.filter(project=project)
    return (qs.filter(activity_key=key) if key else qs).count()


def job(page, key: str):
    return page.locator(f'article.job[data-activity="{key}"]').first


def test_record_offline_sync_once_and_conflict_on_the_tablet(
    browser,  # noqa: F811
    live_server,
    site_project,
):
    project, planner, today = site_project
    path = f"/app/site/{project.pk}/"
    context = browser.new_context(viewport={"width": 1280, "height": 800})
    page = context.new_page()
    page.set_default_timeout(15_000)
    # The page's own errors end up in the test's output.
    page.on("console", lambda m: print("console:", m.type, m.text))
    page.on("pageerror", lambda e: print("page error:", e))
    page.goto(f"{live_server.url}/app/login?next={path}")
    page.fill("#id_username", "sana.site")
    page.fill("#id_password", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(f"**{path}")

    # The caution and the sync state are on screen, and stay there.
    caution = page.locator(".site-caution")
    assert caution.is_visible() and "planning estimates" in caution.inner_text()
    assert page.locator("[data-sync-count=device]").is_visible()
    assert page.locator("[data-forecast-finish]").inner_text()
    # Big touch targets.
    box = job(page, "W1").locator("button.save").bounding_box()
    assert box["height"] >= 48 and box["width"] >= 48

    # 1. Online: W1 started today, 20 % done.
    w1 = job(page, "W1")
    w1.locator("[data-mark=started]").click()
    w1.locator("input[name=percent_complete]").fill("20")
    w1.locator("button.save").click()
    page.wait_for_selector(
        'article.job[data-activity="W1"] [data-sync-state][data-state="sent"]'
    )
    assert entries(project, "W1") == 1
    first = ProgressEntry.objects.get(project=project, activity_key="W1")
    assert first.actual_start == today and first.percent_complete == 20

    # 2. The signal goes: two entries wait on the device.
    context.set_offline(True)
    p1 = job(page, "P1")
    p1.locator("[data-mark=started]").click()
    p1.locator("input[name=crew_count]").fill("2")
    p1.locator("button.save").click()
    p2 = job(page, "P2")
    p2.locator("details.more summary").click()
    p2.locator("textarea[name=note]").fill("main valve not yet delivered")
    p2.locator("select[name=delay_reason]").select_option("material")
    p2.locator("button.save").click()
    page.wait_for_selector('[data-sync-count="device"] b:text-is("2")')
    assert p1.locator("[data-sync-state]").inner_text() == "saved on device"
    assert entries(project) == 1
    page.screenshot(path=str(ARTIFACTS / "site-tablet-offline.png"))

    # 3. The signal is back: both go, each exactly once.
    context.set_offline(False)
    page.wait_for_selector('[data-sync-count="sent"] b:text-is("3")')
    assert page.locator('[data-sync-count="device"] b').inner_text() == "0"
    assert (entries(project, "P1"), entries(project, "P2"), entries(project)) == (
        1,
        1,
        3,
    )
    # The device sends its whole outbox again (as after a lost answer): the
    # server answers from the keys and stores nothing new.
    page.evaluate(
        """() => {
          const k = Object.keys(localStorage)
            .find(k => k.startsWith('sitepace.outbox.'));
          const list = JSON.parse(localStorage.getItem(k));
          list.forEach(e => { e.state = 'device'; });
          localStorage.setItem(k, JSON.stringify(list));
          window.dispatchEvent(new Event('online'));
        }"""
    )
    page.wait_for_function(
        """() => {
          const k = Object.keys(localStorage)
            .find(k => k.startsWith('sitepace.outbox.'));
          return JSON.parse(localStorage.getItem(k)).every(e => e.state === 'sent');
        }"""
    )
    assert entries(project) == 3

    # 4. Another device records W2's start as yesterday; this tablet, which
    # has not seen it, says it started today: a conflict, shown on the page.
    other = APIClient()
    other.force_authenticate(planner)
    yesterday = (today - dt.timedelta(days=1)).isoformat()
    made = other.post(
        f"/api/v1/projects/{project.pk}/progress/",
        {"activity": "W2", "actual_start": yesterday},
        format="json",
    )
    assert made.status_code == 201, made.content
    w2 = job(page, "W2")
    w2.locator("[data-mark=started]").click()
    w2.locator("button.save").click()
    page.wait_for_selector(
        'article.job[data-activity="W2"] [data-sync-state][data-state="conflict"]'
    )
    panel = w2.locator("[data-conflict]")
    assert panel.is_visible()
    assert f"started {yesterday}" in panel.inner_text()
    assert entries(project, "W2") == 1
    assert page.locator('[data-sync-count="conflict"] b').inner_text() == "1"
    page.evaluate("window.scrollTo(0, 0)")
    page.screenshot(path=str(ARTIFACTS / "site-tablet.png"))

    # Portrait, one column.
    page.set_viewport_size({"width": 800, "height": 1280})
    page.screenshot(path=str(ARTIFACTS / "site-tablet-portrait.png"))
    context.close()
