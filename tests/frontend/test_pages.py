"""The pages through Django's test client: sign-in, roles, bad input, content."""

from __future__ import annotations

import re

import pytest
from django.test import Client

from scheduling.engine import SITE_CAUTION
from scheduling.services import project_create

from .conftest import PASSWORD

pytestmark = pytest.mark.django_db

PAGES = ("", "bars", "crews")


def signed_in(username: str) -> Client:
    client = Client()
    assert client.login(username=username, password=PASSWORD)
    return client


def page(project, name: str) -> str:
    return f"/app/projects/{project.pk}/{name}"


def test_pages_need_sign_in(demo):
    for name in PAGES:
        answer = Client().get(page(demo, name))
        assert answer.status_code == 302
        assert answer["Location"].startswith("/app/login?next=/app/projects/")


def test_signing_in_without_a_next_page_lands_on_the_project_list(demo):
    client = Client()
    form = client.get("/app/login")
    assert form.status_code == 200
    answer = client.post(
        "/app/login", {"username": "demo-scheduler", "password": PASSWORD}
    )
    assert answer.status_code == 302
    assert answer["Location"] == "/app/projects/"
    listing = client.get(answer["Location"])
    assert listing.status_code == 200
    assert page(demo, "") in listing.content.decode()


@pytest.mark.parametrize("user", ["demo-scheduler", "demo-site-manager", "demo-owner"])
def test_every_member_sees_every_page_with_the_caution(demo, user):
    client = signed_in(user)
    for name in PAGES:
        answer = client.get(page(demo, name))
        assert answer.status_code == 200, (name, answer.content[:300])
        assert SITE_CAUTION in answer.content.decode()


def test_outsiders_and_unknown_projects_get_404_as_a_page(demo):
    client = signed_in("otto.outside")
    for path in (page(demo, "bars"), "/app/projects/99999/", "/app/projects/abc/crews"):
        answer = client.get(path)
        assert answer.status_code == 404, path
        assert answer["Content-Type"].startswith("text/html")
        assert "no such project" in answer.content.decode().lower()


@pytest.mark.parametrize(
    ("query", "message"),
    [
        ("bars?zoom=hours", "zoom must be one of days, weeks, months; got &#x27;hours"),
        ("bars?group=colour", "group must be one of zone, trade, crew, none"),
        ("bars?relations=maybe", "relations must be one of on, off"),
        ("crews?period=fortnight", "period must be one of day, week"),
    ],
)
def test_bad_parameters_get_a_clear_400(demo, query, message):
    answer = signed_in("demo-owner").get(page(demo, query))
    assert answer.status_code == 400
    assert message in answer.content.decode().lower()


def test_bar_chart_has_one_bar_per_activity_and_zooms(demo):
    client = signed_in("demo-scheduler")
    for zoom in ("days", "weeks", "months"):
        body = client.get(page(demo, f"bars?zoom={zoom}&group=trade")).content.decode()
        keys = re.findall(r'<g class="bar"[^>]*data-activity="([^"]+)"', body)
        assert len(keys) == len(set(keys)) == 151
        assert f'data-zoom="{zoom}"' in body
    assert "no baseline captured yet" in body
    assert "no levelled schedule published yet" in body


def test_crews_page_says_no_levelled_schedule_yet(demo):
    body = signed_in("demo-owner").get(page(demo, "crews")).content.decode()
    assert "No levelled schedule is published yet." in body
    assert 'data-plan="levelled"' not in body
    assert 'data-plan="early"' in body and 'data-over="true"' in body


def test_pages_show_a_levelled_schedule_when_one_is_served(
    demo, demo_levelled, monkeypatch
):
    monkeypatch.setattr(
        "frontend.selectors.schedule_get", lambda *, project: demo_levelled
    )
    client = signed_in("demo-scheduler")
    crews = client.get(page(demo, "crews?period=week")).content.decode()
    assert 'data-plan="levelled"' in crews
    assert "No levelled schedule is published yet." not in crews
    overview = client.get(page(demo, "")).content.decode()
    assert demo_levelled["levelling"]["finish"] in overview
    assert "levelled schedule (optimal)" in overview
    bars = client.get(page(demo, "bars")).content.decode()
    assert 'class="early-track"' in bars
    # The levelled bars' finish is the levelled one, not the critical path's.
    finish = demo_levelled["levelling"]["finish"]
    assert f"levelled dates; levelled finish {finish}" in bars


def test_overview_shows_finish_percent_complete_and_driving_path(demo):
    body = signed_in("demo-owner").get(page(demo, "")).content.decode()
    assert "2028-03-31" in body  # the demo's critical-path finish (README)
    assert "0.0 %" in body and "weighted by duration" in body
    assert "no baseline captured yet" in body
    assert 'data-last-run="none"' in body
    assert body.count('<tr><td class="num">') >= 10


def test_a_project_without_activities_gets_a_clear_answer(demo):
    from django.contrib.auth import get_user_model

    user = get_user_model().objects.get(username="demo-scheduler")
    empty = project_create(user=user, name="Empty plot", start="2027-03-01")
    answer = signed_in("demo-scheduler").get(page(empty, "bars"))
    assert answer.status_code == 400
    assert "The project has no activities yet" in answer.content.decode()


def test_project_list_shows_the_members_projects(demo):
    body = signed_in("demo-site-manager").get("/app/projects/").content.decode()
    assert demo.name in body and "Site manager" in body
    assert (
        "not a member of any project"
        in signed_in("otto.outside").get("/app/projects/").content.decode()
    )


def test_overview_and_bars_measure_against_the_current_baseline(
    demo, django_user_model
):
    """A baseline captured from version 1; a critical activity then takes three
    working days more and version 2 is published: the overview says +3 working
    days against the baseline, and every bar carries its baseline dates."""
    from rest_framework.test import APIClient

    from scheduling.baselines import baseline_capture
    from tests.report.conftest import publish

    publish(demo)
    scheduler = django_user_model.objects.get(username="demo-scheduler")
    base = baseline_capture(project=demo, user=scheduler, name="Contract")
    api = APIClient()
    api.force_authenticate(scheduler)
    where = f"/api/v1/projects/{demo.pk}/activities/"
    row = next(
        a
        for a in api.get(where, {"page_size": 500}).json()["results"]
        if a["key"] == "CLEAN"
    )
    patched = api.patch(
        f"{where}{row['id']}/",
        {"duration": row["duration"] + 3},
        format="json",
        HTTP_IF_MATCH=f'"{row["version"]}"',
    )
    assert patched.status_code == 200, patched.content
    publish(demo)

    client = signed_in("demo-owner")
    overview = client.get(page(demo, "")).content.decode()
    card = re.search(r'data-figure="baseline">(.*?)</div>\s*</div>', overview, re.S)
    assert card and "+3 working days" in card.group(1), overview
    assert "Contract" in card.group(1) and base.finish.isoformat() in card.group(1)
    bars = client.get(page(demo, "bars?group=none")).content.decode()
    starts = re.findall(r'data-baseline-start="([\d-]+)"', bars)
    assert len(starts) == len(base.activities)
    assert sorted(starts) == sorted(a["start"] for a in base.activities.values())
    assert "baseline dates" in bars
