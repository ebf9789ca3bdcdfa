"""A levelling run started from the overview page and followed to its end, in
a real browser against a live server, with a real Celery worker on Redis and
PostgreSQL (the worker is another process and reads committed rows).

Skipped with a reason without Chromium, PostgreSQL or Redis, except in CI
(SITEPACE_REQUIRE_SERVICES=1), where that fails.
"""

from __future__ import annotations

import pytest

from scheduling.models import Membership, Run, RunState, ScheduleVersion
from tests.worker.conftest import (  # noqa: F401 (fixtures)
    broker,
    postgres,
    redis_url,
    start_worker,
)

from .conftest import PASSWORD
from .test_browser import ARTIFACTS, browser, signed_in_page  # noqa: F401

pytestmark = pytest.mark.django_db(transaction=True)

#: Collects every value the bar shows, in order, as the page sets them.
RECORD_BAR = """() => {
    const bar = document.querySelector('[data-run-bar]');
    window.__bar = [+bar.getAttribute('aria-valuenow')];
    new MutationObserver(() => window.__bar.push(+bar.getAttribute('aria-valuenow')))
        .observe(bar, {attributes: true, attributeFilter: ['aria-valuenow']});
}"""


def test_a_scheduler_starts_a_levelling_and_watches_it_to_the_end(
    browser,  # noqa: F811
    live_server,
    demo,
    postgres,  # noqa: F811
    redis_url,  # noqa: F811
    broker,  # noqa: F811
    start_worker,  # noqa: F811
):
    broker(redis_url)
    start_worker(redis_url)
    path = f"/app/projects/{demo.pk}/"
    page = signed_in_page(browser, live_server, path)
    assert page.locator("[data-run-status]").is_hidden()
    page.evaluate(RECORD_BAR)
    page.select_option("select[name=goal]", "shortest")
    page.fill("input[name=time_limit]", "5")
    page.click("[data-run-start]")

    page.wait_for_selector("[data-run-bar][data-state=published]", timeout=60_000)
    run = Run.objects.get(project=demo)
    assert run.state == RunState.PUBLISHED and run.kind == "level"
    assert run.requested_by.username == "demo-scheduler"
    assert page.get_attribute("[data-run-bar]", "aria-valuenow") == "100"
    values = page.evaluate("window.__bar")
    assert values[0] == 0 and values[-1] == 100, values
    assert values == sorted(values), f"the bar went back: {values}"
    assert len(set(values)) >= 2, values
    # The figures the page shows are the run's own.
    assert page.inner_text("[data-run-field=state]") == "published"
    assert (
        page.inner_text("[data-run-field=best_finish]") == run.best_finish.isoformat()
    )
    assert "Published as version 1" in page.inner_text("[data-run-moved]")
    assert "The first published version" in page.inner_text("[data-run-changes]")
    page.screenshot(path=str(ARTIFACTS / "overview-run-finished.png"), full_page=False)

    # The levelled schedule is what the pages show now: the overview gives
    # the levelled finish, and no crew is over capacity after levelling.
    version = ScheduleVersion.objects.get(project=demo, number=1)
    page.click("text=Show the new dates")
    page.wait_for_selector("[data-figure=finish]")
    assert version.finish.isoformat() in page.inner_text("[data-figure=finish]")
    assert "levelled" in page.inner_text("[data-figure=finish]")
    page.goto(f"{live_server.url}/app/projects/{demo.pk}/crews")
    assert page.locator("g.col[data-plan=levelled]").count() > 0
    assert page.locator("g.col[data-plan=levelled][data-over=true]").count() == 0
    over = page.eval_on_selector_all(
        "g.col[data-plan=levelled]",
        "els => els.filter(e => +e.dataset.demand > +e.dataset.capacity).length",
    )
    assert over == 0

    # A second run against the first: the page lists what moved.
    page.goto(f"{live_server.url}{path}")
    page.select_option("select[name=goal]", "smooth")
    page.fill("input[name=time_limit]", "4")
    page.click("[data-run-start]")
    page.wait_for_selector("[data-run-bar][data-state=published]", timeout=60_000)
    changes = page.inner_text("[data-run-changes]")
    assert "Finish" in changes and (
        "moved" in changes or "No activity moved" in changes
    )
    second = ScheduleVersion.objects.get(project=demo, number=2)
    moved = second.changes["moved"]
    assert page.locator("[data-moved]").count() == min(len(moved), 15)
    page.screenshot(path=str(ARTIFACTS / "overview-run-moved.png"), full_page=True)
    # The overview's "last run" card says the same, from the stored summary.
    page.reload()
    card = page.inner_text("[data-last-run]")
    assert "Published as schedule version 2" in card
    assert f"{len(moved)} activities moved" in card if moved else "unchanged" in card
    assert f"to {second.finish.isoformat()}" in card or "unchanged" in card
    page.close()


def test_owners_follow_a_run_but_cannot_start_one(
    browser,  # noqa: F811
    live_server,
    demo,
):
    from scheduling import runs

    run = runs.run_queue(
        project=demo,
        user=Membership.objects.get(project=demo, role="scheduler").user,
        kind="level",
        time_limit=5,
        dispatch=False,
    )
    page = browser.new_page(viewport={"width": 1024, "height": 768})
    page.set_default_timeout(15_000)
    path = f"/app/projects/{demo.pk}/"
    page.goto(f"{live_server.url}/app/login?next={path}")
    page.fill("#id_username", "demo-owner")
    page.fill("#id_password", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(f"**{path}")
    assert page.locator("[data-run-form]").count() == 0
    assert page.locator("[data-run-readonly]").is_visible()
    # The waiting run is followed at once, without a worker it stays queued.
    page.wait_for_selector("[data-run-field=state]:has-text('waiting')")
    assert page.inner_text("[data-run-field=id]").startswith(str(run.pk))
    assert page.get_attribute("[data-run-bar]", "aria-valuenow") == "0"
    page.close()


def test_the_page_says_in_words_why_a_run_was_not_started(
    browser,  # noqa: F811
    live_server,
    demo,
    broker,  # noqa: F811
):
    from scheduling import runs
    from tests.worker.conftest import free_port

    page = signed_in_page(browser, live_server, f"/app/projects/{demo.pk}/")
    # Another scheduler's run starts after this page was loaded: 409.
    other = runs.run_queue(
        project=demo,
        user=Membership.objects.get(project=demo, role="scheduler").user,
        kind="cpm",
        dispatch=False,
    )
    page.click("[data-run-start]")
    page.wait_for_selector("[data-run-message][data-kind=error]")
    said = page.inner_text("[data-run-message]")
    assert said.startswith("Not started:"), said
    assert f"run {other.pk} of this project is waiting" in said
    assert Run.objects.filter(project=demo).count() == 1
    runs.run_cancel(run=other)

    # The work queue cannot be reached: 503, and the page says when to retry.
    broker(f"redis://127.0.0.1:{free_port()}/0")  # nothing listens there
    page.click("[data-run-start]")
    page.wait_for_function(
        "document.querySelector('[data-run-message]').textContent"
        ".includes('work queue is down')"
    )
    said = page.inner_text("[data-run-message]")
    assert "nothing was started" in said and "Try again in 30 seconds" in said
    assert page.locator("[data-run-bar][data-state=working]").count() == 0
    page.close()
