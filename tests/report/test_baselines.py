"""Baselines through the API: capture, one current, immutable, compare."""

from __future__ import annotations

import numpy as np
import pytest

from scheduling.models import Activity, Baseline
from tests.api.conftest import error_of, token_client

from .conftest import demo_document, publish

pytestmark = pytest.mark.django_db


def url(project, tail: str = "") -> str:
    return f"/api/v1/projects/{project.pk}/baselines/{tail}"


@pytest.fixture
def planner(users):
    return token_client(users["scheduler"])


def test_nothing_published_means_no_baseline_and_nothing_stored(demo, planner):
    answer = planner.post(url(demo), {"name": "Contract"}, format="json")
    assert answer.status_code == 400
    assert error_of(answer)["problems"][0]["pointer"] == "/version"
    assert not Baseline.objects.exists()


def test_a_scheduler_captures_the_latest_published_version(demo, planner, users):
    version = publish(demo)
    answer = planner.post(url(demo), {"name": "Contract"}, format="json")
    assert answer.status_code == 201, answer.content[:300]
    body = answer.json()
    assert body["version"] == version.number
    assert body["captured_by"] == users["scheduler"].username
    assert body["current"] is True
    assert body["finish"] == version.finish.isoformat()
    first = version.document["activities"][0]
    assert body["activities"][first["key"]]["start"] == first["early_start"]
    assert len(body["activities"]) == len(version.document["activities"])
    assert answer["Location"].endswith(f"/baselines/{body['id']}")


@pytest.mark.parametrize("role", ["owner", "site_manager"])
def test_only_a_scheduler_captures(role, demo, users):
    publish(demo)
    client = token_client(users[role])
    answer = client.post(url(demo), {"name": "Mine"}, format="json")
    assert answer.status_code == 403
    assert not Baseline.objects.exists()
    assert client.get(url(demo)).status_code == 200


@pytest.mark.parametrize(
    "body, pointer",
    [
        ({}, "/name"),
        ({"name": ""}, "/name"),
        ({"name": "x" * 101}, "/name"),
        ({"name": "Old", "version": 99}, "/version"),
        ({"name": "Old", "version": "two"}, "/version"),
        ({"name": "Old", "make_current": "perhaps"}, "/make_current"),
    ],
)
def test_bad_capture_requests_name_the_field(body, pointer, demo, planner):
    publish(demo)
    answer = planner.post(url(demo), body, format="json")
    assert answer.status_code == 400, answer.content[:300]
    assert pointer in [p["pointer"] for p in error_of(answer)["problems"]]
    assert not Baseline.objects.exists()


def test_one_current_baseline_and_names_are_unique(demo, planner):
    publish(demo)
    first = planner.post(url(demo), {"name": "Contract"}, format="json").json()
    publish(demo)
    second = planner.post(
        url(demo), {"name": "Re-plan", "make_current": False}, format="json"
    ).json()
    assert second["version"] == 2 and second["current"] is False
    third = planner.post(url(demo), {"name": "Recovery"}, format="json").json()
    assert [b.name for b in Baseline.objects.filter(current=True)] == ["Recovery"]
    made = planner.post(url(demo, f"{first['id']}/current"))
    assert made.status_code == 200 and made.json()["current"] is True
    current = Baseline.objects.filter(project=demo, current=True)
    assert [b.pk for b in current] == [first["id"]]
    assert third["id"] != first["id"]
    again = planner.post(url(demo), {"name": "Contract"}, format="json")
    assert again.status_code == 409
    assert error_of(again)["problems"][0]["pointer"] == "/name"
    listed = planner.get(url(demo)).json()["results"]
    assert [b["name"] for b in listed] == ["Recovery", "Re-plan", "Contract"]


def test_a_baseline_never_changes(demo, planner):
    publish(demo)
    made = planner.post(url(demo), {"name": "Contract"}, format="json").json()
    stored = Baseline.objects.get(pk=made["id"])
    item = url(demo, f"{made['id']}/")
    assert planner.put(item, {"name": "Renamed"}, format="json").status_code == 405
    assert planner.patch(item, {"name": "Renamed"}, format="json").status_code == 405
    assert planner.delete(item).status_code == 405
    # A change of the network afterwards leaves the baseline as it was.
    Activity.objects.filter(project=demo, key="SITE-SETUP").update(duration=30)
    again = Baseline.objects.get(pk=made["id"])
    assert (again.name, again.activities) == (stored.name, stored.activities)
    assert planner.get(item).json()["activities"] == made["activities"]


def test_compare_gives_working_day_variances_per_activity(demo, planner):
    """A longer site set-up pushes its successors; the variance of each is
    counted with numpy's busday_count (a reference library)."""
    from scheduling import services

    publish(demo)
    made = planner.post(url(demo), {"name": "Contract"}, format="json").json()
    document = demo_document()
    for a in document["activities"]:
        if a["key"] == "SITE-SETUP":
            a["duration"] += 4
    demo.refresh_from_db()
    services.network_replace(
        project=demo, document=document, expected_revision=demo.revision
    )
    publish(demo)
    answer = planner.get(url(demo, f"{made['id']}/compare"))
    assert answer.status_code == 200
    body = answer.json()
    assert body["version"] == 2
    cal = next(c for c in document["calendars"] if c["key"] == "weekdays")
    for row in body["activities"]:
        want = int(
            np.busday_count(
                row["baseline_finish"], row["finish"], holidays=cal["holidays"]
            )
        )
        assert row["finish_variance"] == want, row
    moved = [r for r in body["activities"] if r["finish_variance"]]
    assert moved and all(r["finish_variance"] > 0 for r in moved)
    assert body["finish_variance"] == int(
        np.busday_count(
            body["baseline_finish"], body["finish"], holidays=cal["holidays"]
        )
    )
    older = planner.get(url(demo, f"{made['id']}/compare?version=1")).json()
    assert all(r["finish_variance"] == 0 for r in older["activities"])


@pytest.mark.parametrize("version, status", [("x", 400), ("9", 404)])
def test_compare_with_a_bad_version(version, status, demo, planner):
    publish(demo)
    made = planner.post(url(demo), {"name": "Contract"}, format="json").json()
    answer = planner.get(url(demo, f"{made['id']}/compare?version={version}"))
    assert answer.status_code == status
    err = error_of(answer)
    assert "version" in err["message"]


def test_another_projects_baseline_is_hidden(demo, planner, other_project, clients):
    publish(demo)
    made = planner.post(url(demo), {"name": "Contract"}, format="json").json()
    rival = clients["rival"]
    theirs = f"/api/v1/projects/{other_project['id']}/baselines/{made['id']}/"
    assert rival.get(theirs).status_code == 404
    assert clients["outsider"].get(url(demo)).status_code == 404
