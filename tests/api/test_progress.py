"""Progress from site through the API: entries, derived state, validation,
idempotent retries, conflicts, corrections, roles, the data date, both
out-of-sequence treatments and the forecast after an entry.

The network (``RIDGE``) is a small job in the past, so that every actual date
lies before today on any machine running this: Monday-to-Friday working days,
no holidays, project start Monday 2 March 2026, data date Wednesday 11 March
2026. A (5 working days) → FS → B (4) → FS → C (2); D (3) on its own.
"""

from __future__ import annotations

import copy
import datetime as dt
import uuid
from typing import Any

import pytest

from scheduling.models import ProgressEntry, Project

from .conftest import create_project, error_of, url

pytestmark = pytest.mark.django_db

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]

RIDGE: dict[str, Any] = {
    "format": "sitepace.network/1",
    "project": {
        "name": "Ridge Street store",
        "start": "2026-03-02",
        "calendar": "weekdays",
        "data_date": "2026-03-11",
        "deadline": None,
    },
    "calendars": [
        {
            "key": "weekdays",
            "name": "Monday to Friday",
            "workdays": WEEKDAYS,
            "holidays": [],
            "extra_workdays": [],
        }
    ],
    "crews": [],
    "activities": [
        {"key": "A", "name": "Strip foundations", "duration": 5},
        {"key": "B", "name": "Blockwork", "duration": 4},
        {"key": "C", "name": "Roof timbers", "duration": 2},
        {"key": "D", "name": "Drainage run", "duration": 3},
    ],
    "relations": [
        {"pred": "A", "succ": "B", "type": "FS", "lag": 0},
        {"pred": "B", "succ": "C", "type": "FS", "lag": 0},
    ],
}


@pytest.fixture
def ridge(clients, users) -> dict[str, Any]:
    planner = clients["scheduler"]
    made = create_project(planner, "Ridge Street", copy.deepcopy(RIDGE))
    for role in ("owner", "site_manager"):
        added = planner.post(
            url(made, "members/"),
            {"username": users[role].username, "role": role},
            format="json",
        )
        assert added.status_code == 201, added.content
    return made


def post(client, project, body: dict[str, Any], key: str | None = "new"):
    headers = {}
    if key is not None:
        headers["HTTP_IDEMPOTENCY_KEY"] = str(uuid.uuid4()) if key == "new" else key
    return client.post(url(project, "progress/"), body, format="json", **headers)


def state_of(client, project, key: str) -> dict[str, Any]:
    rows = client.get(url(project, "activities/")).json()["results"]
    return next(a for a in rows if a["key"] == key)["progress"]


def counters(project) -> tuple[int, int, int]:
    row = Project.objects.get(pk=project["id"])
    return row.revision, row.progress_revision, ProgressEntry.objects.count()


# Recording and the derived state ---------------------------------------------


def test_an_entry_is_stored_and_the_activity_state_follows(clients, ridge):
    site = clients["site_manager"]
    revision, progress_revision, _ = counters(ridge)
    got = post(
        site,
        ridge,
        {
            "activity": "A",
            "actual_start": "2026-03-02",
            "percent_complete": 40,
            "crew_count": 4,
            "note": "footings dug, first pour done",
            "delay_reason": "weather",
            "delay_note": "rain on Tuesday morning",
            "device_time": "2026-03-11T07:42:00Z",
            "activity_version": 0,
        },
    )
    assert got.status_code == 201, got.content
    body = got.json()
    assert body["activity"] == "A" and body["kind"] == "record"
    assert body["recorded_by"] == "sami.site"
    assert body["device_time"].startswith("2026-03-11T07:42")
    assert body["state"]["status"] == "started"
    assert body["state"]["version"] == 1
    assert got["Location"].endswith(f"/progress/{body['id']}")
    # The network revision (the schedulers' ETags) stays; progress has its own.
    assert counters(ridge)[:2] == (revision, progress_revision + 1)
    state = state_of(site, ridge, "A")
    assert state["actual_start"] == "2026-03-02"
    assert state["percent_complete"] == 40
    assert state["crew_count"] == 4 and state["delay_reason"] == "weather"
    # The network document carries the derived progress (bridge).
    network = site.get(url(ridge, "network"))
    assert network["ETag"] == f'"r{revision}"'
    a = next(x for x in network.json()["activities"] if x["key"] == "A")
    assert a["actual_start"] == "2026-03-02" and a["percent_complete"] == 40
    b = next(x for x in network.json()["activities"] if x["key"] == "B")
    assert "actual_start" not in b


def test_later_entries_override_and_percent_and_remaining_replace_each_other(
    clients, ridge
):
    site = clients["site_manager"]
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02", "remaining": 4})
    post(site, ridge, {"activity": "A", "percent_complete": 60})
    state = state_of(site, ridge, "A")
    assert state["percent_complete"] == 60 and state["remaining"] is None
    post(site, ridge, {"activity": "A", "remaining": 1, "crew_count": 3})
    state = state_of(site, ridge, "A")
    assert (state["percent_complete"], state["remaining"]) == (None, 1)
    post(site, ridge, {"activity": "A", "actual_finish": "2026-03-10"})
    state = state_of(site, ridge, "A")
    assert state["status"] == "finished"
    assert (state["percent_complete"], state["remaining"]) == (100, None)
    assert state["crew_count"] == 3 and state["version"] == 4
    listed = site.get(url(ridge, "progress/") + "?activity=A").json()
    assert [e["state"]["version"] for e in listed["results"]] == [1, 2, 3, 4]
    assert site.get(url(ridge, "progress/") + "?activity=B").json()["count"] == 0


# Validation: a clear message naming the field and the activity ---------------


@pytest.mark.parametrize(
    ("body", "pointer", "words"),
    [
        pytest.param(
            {
                "activity": "A",
                "actual_start": "2026-03-05",
                "actual_finish": "2026-03-04",
            },
            "/actual_finish",
            "before actual_start",
            id="finish-before-start",
        ),
        pytest.param(
            {"activity": "A", "actual_start": "2026-03-02", "percent_complete": 120},
            "/percent_complete",
            "must be 0 to 100, got 120",
            id="percent-over-100",
        ),
        pytest.param(
            {"activity": "A", "actual_start": "2026-03-02", "remaining": -2},
            "/remaining",
            "must be 0 to 10000 working days, got -2",
            id="remaining-negative",
        ),
        pytest.param(
            {"activity": "A", "actual_start": "2026-03-12"},
            "/actual_start",
            "after the data date 2026-03-11",
            id="after-the-data-date",
        ),
        pytest.param(
            {"activity": "A", "actual_start": "2026-02-27"},
            "/actual_start",
            "before the project start",
            id="before-the-project-start",
        ),
        pytest.param(
            {"activity": "A", "percent_complete": 30},
            "/percent_complete",
            "needs an actual_start",
            id="percent-without-start",
        ),
        pytest.param(
            {"activity": "A", "actual_start": "2026-03-02", "crew_count": -1},
            "/crew_count",
            "crew_count must be 0 to 1000",
            id="crew-negative",
        ),
        pytest.param(
            {"activity": "A", "delay_reason": "other"},
            "/delay_note",
            "needs a delay_note",
            id="other-delay-without-note",
        ),
        pytest.param({"activity": "A"}, "/", "records nothing", id="empty-entry"),
    ],
)
def test_bad_entries_are_refused_naming_field_and_activity(
    clients, ridge, body, pointer, words
):
    site = clients["site_manager"]
    before = counters(ridge)
    got = post(site, ridge, body)
    assert got.status_code == 400, got.content
    err = error_of(got)
    assert err["problems"][0]["pointer"] == pointer
    assert words in err["problems"][0]["message"]
    assert "activity A" in err["problems"][0]["message"]
    assert "nothing was stored" in err["message"]
    assert counters(ridge) == before


def test_a_date_in_the_future_is_refused_even_with_a_late_data_date(clients, ridge):
    planner, site = clients["scheduler"], clients["site_manager"]
    far = (dt.date.today() + dt.timedelta(days=30)).isoformat()
    etag = planner.get(url(ridge, "")).headers["ETag"]
    moved = planner.patch(
        url(ridge, ""), {"data_date": far}, format="json", HTTP_IF_MATCH=etag
    )
    assert moved.status_code == 200, moved.content
    soon = (dt.date.today() + dt.timedelta(days=5)).isoformat()
    got = post(site, ridge, {"activity": "A", "actual_start": soon})
    assert got.status_code == 400
    problem = error_of(got)["problems"][0]
    assert problem["pointer"] == "/actual_start" and problem["code"] == "in_future"
    assert f"activity A: actual_start {soon} is in the future" in problem["message"]


def test_progress_on_a_finished_activity_needs_a_correction(clients, ridge):
    site = clients["site_manager"]
    done = post(
        site,
        ridge,
        {"activity": "D", "actual_start": "2026-03-02", "actual_finish": "2026-03-04"},
    ).json()
    before = counters(ridge)
    got = post(site, ridge, {"activity": "D", "percent_complete": 80})
    assert got.status_code == 400
    problem = error_of(got)["problems"][0]
    assert problem["code"] == "already_finished"
    assert "activity D: it finished on 2026-03-04" in problem["message"]
    assert f"corrects: {done['id']}" in problem["message"]
    assert counters(ridge) == before
    # A note after the finish adds nothing that clashes: accepted.
    assert post(site, ridge, {"activity": "D", "note": "area swept"}).status_code == 201
    # The correction reopens it: the finish was recorded by mistake.
    fixed = post(
        site,
        ridge,
        {
            "activity": "D",
            "corrects": done["id"],
            "cleared": ["actual_finish"],
            "percent_complete": 70,
        },
    )
    assert fixed.status_code == 201, fixed.content
    assert fixed.json()["kind"] == "correction"
    state = state_of(site, ridge, "D")
    assert state["status"] == "started" and state["percent_complete"] == 70
    # The history keeps every entry, the mistaken one too.
    assert site.get(url(ridge, "progress/") + "?activity=D").json()["count"] == 3


def test_a_record_may_not_change_a_recorded_date_but_a_correction_may(clients, ridge):
    site = clients["site_manager"]
    first = post(site, ridge, {"activity": "A", "actual_start": "2026-03-02"}).json()
    got = post(site, ridge, {"activity": "A", "actual_start": "2026-03-03"})
    assert got.status_code == 400
    problem = error_of(got)["problems"][0]
    assert problem["code"] == "recorded_date_differs"
    assert "activity A: actual_start is recorded as 2026-03-02" in problem["message"]
    fixed = post(
        site,
        ridge,
        {"activity": "A", "actual_start": "2026-03-03", "corrects": first["id"]},
    )
    assert fixed.status_code == 201
    assert state_of(site, ridge, "A")["actual_start"] == "2026-03-03"
    # A correction names an entry of the same activity.
    other = post(site, ridge, {"activity": "B", "corrects": first["id"], "note": "x"})
    assert other.status_code == 400
    assert error_of(other)["problems"][0]["pointer"] == "/corrects"
    # Only a correction clears.
    plain = post(site, ridge, {"activity": "A", "cleared": ["percent_complete"]})
    assert error_of(plain)["problems"][0]["code"] == "clear_needs_correction"


def test_an_unknown_activity_and_a_project_without_data_date(clients, ridge, project):
    site = clients["site_manager"]
    got = post(site, ridge, {"activity": "NOPE", "note": "hello"})
    assert got.status_code == 400
    assert error_of(got)["problems"][0]["pointer"] == "/activity"
    # The workshop project has no data date: progress needs one.
    got = post(site, project, {"activity": "DIG", "actual_start": "2027-03-01"})
    assert got.status_code == 400
    problem = error_of(got)["problems"][0]
    assert problem["code"] in {"progress_without_data_date", "in_future"}


# Idempotent retries ---------------------------------------------------------


def test_a_retry_with_the_same_key_gets_the_first_answer_and_stores_nothing(
    clients, ridge
):
    site = clients["site_manager"]
    body = {"activity": "A", "actual_start": "2026-03-02", "crew_count": 5}
    key = str(uuid.uuid4())
    first = post(site, ridge, body, key=key)
    assert first.status_code == 201 and first["Idempotent-Replay"] == "false"
    before = counters(ridge)
    again = post(site, ridge, body, key=key)
    assert again.status_code == 201 and again["Idempotent-Replay"] == "true"
    assert again.json() == first.json()
    assert counters(ridge) == before
    # The same key with another body is a client's mistake, said clearly.
    reused = post(site, ridge, {**body, "crew_count": 6}, key=key)
    assert reused.status_code == 422
    err = error_of(reused)
    assert err["code"] == "idempotency_key_reused"
    assert f"entry {first.json()['id']}" in err["message"]
    assert counters(ridge) == before
    # Keys are per user: another user's same key is another entry.
    other = post(clients["scheduler"], ridge, {**body, "note": "seen"}, key=key)
    assert other.status_code == 201 and other.json()["id"] != first.json()["id"]


def test_without_a_key_each_request_is_a_new_entry(clients, ridge):
    site = clients["site_manager"]
    body = {"activity": "A", "actual_start": "2026-03-02"}
    assert post(site, ridge, body, key=None).status_code == 201
    assert post(site, ridge, body, key=None).status_code == 201
    assert ProgressEntry.objects.filter(activity_key="A").count() == 2
    bad = post(site, ridge, body, key="no spaces allowed")
    assert bad.status_code == 400
    assert error_of(bad)["problems"][0]["pointer"] == "/idempotency_key"


# Conflicts: an older version of the activity --------------------------------


def test_a_clashing_entry_from_an_older_version_is_409_with_the_current_state(
    clients, ridge
):
    site, planner = clients["site_manager"], clients["scheduler"]
    # Another tablet records the start while this one (version 0) is offline.
    post(planner, ridge, {"activity": "A", "actual_start": "2026-03-03"})
    before = counters(ridge)
    got = post(
        site,
        ridge,
        {"activity": "A", "actual_start": "2026-03-02", "activity_version": 0},
    )
    assert got.status_code == 409
    body = got.json()
    assert body["error"]["code"] == "progress_conflict"
    assert body["error"]["problems"][0]["pointer"] == "/actual_start"
    assert "2026-03-03 on the server" in body["error"]["problems"][0]["message"]
    assert body["current"]["activity"] == "A"
    assert body["current"]["actual_start"] == "2026-03-03"
    assert body["current"]["version"] == 1
    assert counters(ridge) == before


@pytest.mark.parametrize(
    "body",
    [
        pytest.param({"note": "scaffold up"}, id="note"),
        pytest.param({"crew_count": 3}, id="crew-count"),
        pytest.param({"percent_complete": 50}, id="percent-on-started-work"),
        pytest.param({"remaining": 2}, id="remaining-on-started-work"),
        pytest.param({"actual_start": "2026-03-03"}, id="the-same-start"),
    ],
)
def test_an_older_entry_that_cannot_clash_is_accepted(clients, ridge, body):
    site, planner = clients["site_manager"], clients["scheduler"]
    post(planner, ridge, {"activity": "A", "actual_start": "2026-03-03"})
    got = post(site, ridge, {"activity": "A", "activity_version": 0, **body})
    assert got.status_code == 201, got.content
    assert got.json()["state"]["actual_start"] == "2026-03-03"


def test_finished_since_the_device_read_it_is_a_conflict(clients, ridge):
    site, planner = clients["site_manager"], clients["scheduler"]
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02"})
    post(planner, ridge, {"activity": "A", "actual_finish": "2026-03-06"})
    got = post(
        site, ridge, {"activity": "A", "percent_complete": 80, "activity_version": 1}
    )
    assert got.status_code == 409
    assert got.json()["current"]["status"] == "finished"
    # A version the server never had is a client error.
    got = post(site, ridge, {"activity": "A", "note": "x", "activity_version": 9})
    assert got.status_code == 400
    assert error_of(got)["problems"][0]["pointer"] == "/activity_version"


# Append-only, roles -----------------------------------------------------------


def test_entries_cannot_be_changed_or_deleted(clients, ridge):
    site, planner = clients["site_manager"], clients["scheduler"]
    entry = post(site, ridge, {"activity": "A", "actual_start": "2026-03-02"}).json()
    item = url(ridge, f"progress/{entry['id']}/")
    assert planner.get(item).json() == entry
    for verb in ("put", "patch", "delete"):
        answer = getattr(planner, verb)(item, {"note": "rewritten"}, format="json")
        assert answer.status_code == 405, verb
    assert planner.get(item).json() == entry

    from django.contrib import admin

    entry_admin = admin.site._registry[ProgressEntry]
    assert not entry_admin.has_change_permission(None)
    assert not entry_admin.has_delete_permission(None)
    assert not entry_admin.has_add_permission(None)


@pytest.mark.parametrize(
    ("who", "write", "read"),
    [
        ("owner", 403, 200),
        ("site_manager", 201, 200),
        ("scheduler", 201, 200),
        ("outsider", 404, 404),
        ("rival", 404, 404),
    ],
)
def test_roles_for_progress(clients, ridge, who, write, read):
    from api.v1.access import ACCESS

    readers, writers = ACCESS["progress"]
    assert ("site_manager" in writers, "owner" in writers) == (True, False)
    client = clients[who]
    got = post(client, ridge, {"activity": "A", "actual_start": "2026-03-02"})
    assert got.status_code == write
    assert client.get(url(ridge, "progress/")).status_code == read
    entry = ProgressEntry.objects.first()
    if entry is not None:
        assert client.get(url(ridge, f"progress/{entry.pk}")).status_code == read


# Data date and the network ----------------------------------------------------


def test_the_data_date_cannot_move_before_recorded_progress(clients, ridge):
    site, planner = clients["site_manager"], clients["scheduler"]
    post(site, ridge, {"activity": "B", "actual_start": "2026-03-10"})
    etag = planner.get(url(ridge, "")).headers["ETag"]
    got = planner.patch(
        url(ridge, ""), {"data_date": "2026-03-09"}, format="json", HTTP_IF_MATCH=etag
    )
    assert got.status_code == 400
    problem = error_of(got)["problems"][0]
    assert problem["code"] == "actual_after_data_date"
    assert (
        "activity B: actual_start 2026-03-10 is after the data date"
        in (problem["message"])
    )
    assert Project.objects.get(pk=ridge["id"]).data_date == dt.date(2026, 3, 11)
    # Forward is fine and leaves the progress counter alone.
    _, progress_revision, _ = counters(ridge)
    got = planner.patch(
        url(ridge, ""), {"data_date": "2026-03-13"}, format="json", HTTP_IF_MATCH=etag
    )
    assert got.status_code == 200
    assert got.json()["progress_revision"] == progress_revision


def test_a_network_put_keeps_the_recorded_progress(clients, ridge):
    site, planner = clients["site_manager"], clients["scheduler"]
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02"})
    got = planner.get(url(ridge, "network"))
    doc = got.json()
    doc["activities"][0]["actual_start"] = "2026-03-05"  # read-only: ignored
    doc["activities"][1]["duration"] = 6
    put = planner.put(
        url(ridge, "network"), doc, format="json", HTTP_IF_MATCH=got["ETag"]
    )
    assert put.status_code == 200, put.content
    a = next(x for x in put.json()["activities"] if x["key"] == "A")
    assert a["actual_start"] == "2026-03-02"
    # A data date before recorded progress is refused on PUT too.
    doc = put.json()
    doc["project"]["data_date"] = "2026-03-01"
    bad = planner.put(
        url(ridge, "network"), doc, format="json", HTTP_IF_MATCH=put["ETag"]
    )
    assert bad.status_code == 400
    assert any("activity A" in p["message"] for p in error_of(bad)["problems"])


# Out of sequence, both treatments, hand-worked ------------------------------


def _mode(planner, project, mode: str) -> None:
    etag = planner.get(url(project, "")).headers["ETag"]
    got = planner.patch(
        url(project, ""), {"out_of_sequence": mode}, format="json", HTTP_IF_MATCH=etag
    )
    assert got.status_code == 200, got.content
    assert got.json()["out_of_sequence"] == mode


@pytest.mark.parametrize(
    ("mode", "b_finish", "c_dates", "finish"),
    [
        # Retained logic: B's remaining 2 days wait for A, whose remaining 3
        # run Wed 11 – Fri 13 March; so B's run Mon 16 – Tue 17, and C (2
        # days) Wed 18 – Thu 19.
        ("retained_logic", "2026-03-17", ("2026-03-18", "2026-03-19"), "2026-03-19"),
        # Progress override: B's remaining 2 days run from the data date, Wed
        # 11 – Thu 12; C follows B: Fri 13 and, over the weekend, Mon 16. A
        # still ends Fri 13.
        (
            "progress_override",
            "2026-03-12",
            ("2026-03-13", "2026-03-16"),
            "2026-03-16",
        ),
    ],
)
def test_out_of_sequence_both_treatments_end_to_end(
    clients, ridge, mode, b_finish, c_dates, finish
):
    site, planner = clients["site_manager"], clients["scheduler"]
    _mode(planner, ridge, mode)
    # A started Mon 2 March, 3 working days left at the data date (Wed 11).
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02", "remaining": 3})
    # B started Tue 10 March, before A finished: out of sequence (FS).
    post(site, ridge, {"activity": "B", "actual_start": "2026-03-10", "remaining": 2})
    forecast = planner.get(url(ridge, "forecast"))
    assert forecast.status_code == 200
    doc = forecast.json()
    by_key = {a["key"]: a for a in doc["activities"]}
    assert by_key["A"]["early_finish"] == "2026-03-13"
    assert by_key["B"]["early_start"] == "2026-03-10"
    assert by_key["B"]["early_finish"] == b_finish
    assert (by_key["C"]["early_start"], by_key["C"]["early_finish"]) == c_dates
    assert doc["project"]["finish"] == finish
    assert doc["project"]["out_of_sequence"] == mode
    pairs = [w for w in doc["warnings"] if w["code"] == "out_of_sequence"]
    assert len(pairs) == 1 and "relation A → B (FS)" in pairs[0]["message"]
    # D, unstarted, starts no earlier than the data date.
    assert by_key["D"]["early_start"] == "2026-03-11"
    # GET schedule (nothing published yet) answers the same forecast.
    schedule = planner.get(url(ridge, "schedule")).json()
    assert schedule["project"]["finish"] == finish and schedule["published"] is None


def test_the_forecast_follows_each_entry_without_waiting_for_a_run(clients, ridge):
    site, owner = clients["site_manager"], clients["owner"]
    first = owner.get(url(ridge, "schedule"))
    # A 2–6 March, B 9–12, C 13–16 March; but nothing unstarted starts before
    # the data date (Wed 11): A 11–17, B 18–23, C 24–25 March.
    assert first.json()["project"]["finish"] == "2026-03-25"
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02", "remaining": 1})
    post(site, ridge, {"activity": "B", "actual_start": "2026-03-10", "remaining": 1})
    second = owner.get(url(ridge, "schedule"))
    # Retained logic: A's last day Wed 11; B's last day Thu 12; C Fri 13 and
    # Mon 16.
    assert second.json()["project"]["finish"] == "2026-03-16"
    assert second["ETag"] != first["ETag"]
    assert second["ETag"].endswith('-p2"')
    cached = owner.get(url(ridge, "schedule"))
    assert cached["ETag"] == second["ETag"]


@pytest.mark.django_db(transaction=True)
def test_with_a_published_version_the_forecast_is_current_beside_it(clients, ridge):
    from scheduling import runs

    site, planner = clients["site_manager"], clients["scheduler"]
    run = planner.post(url(ridge, "runs/"), {"kind": "cpm"}, format="json").json()
    runs.run_execute(run_id=run["id"])
    post(site, ridge, {"activity": "A", "actual_start": "2026-03-02", "remaining": 1})
    doc = planner.get(url(ridge, "schedule")).json()
    assert doc["published"]["version"] == 1
    assert doc["project"]["finish"] == "2026-03-25"  # the published version
    forecast = doc["published"]["forecast"]
    # A's last day Wed 11; B Thu 12 – Tue 17; C Wed 18 – Thu 19.
    assert forecast["finish"] == "2026-03-19"
    assert forecast["progress_revision"] == 1
