"""Projects, the whole network (GET/PUT with ETags), the cached schedule,
members, tokens, health and the published schema."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from rest_framework.test import APIClient

from scheduling import services
from scheduling.models import Activity, ComputedSchedule, Membership, Project

from .conftest import API, PASSWORD, error_of, stored, url, workshop

pytestmark = pytest.mark.django_db

DEMO = Path(__file__).resolve().parents[2] / "seed_data" / "demo_network.json"


# Projects ------------------------------------------------------------------


def test_creating_a_project_answers_201_with_its_id_and_the_creator_schedules_it(
    clients, users
):
    made = clients["scheduler"].post(
        f"{API}/projects/",
        {"name": "Boathouse", "start": "2027-05-03", "deadline": "2027-09-30"},
        format="json",
    )
    assert made.status_code == 201, made.content
    body = made.json()
    assert isinstance(body["id"], int)
    assert body["name"] == "Boathouse"
    assert body["start"] == "2027-05-03"
    assert body["deadline"] == "2027-09-30"
    assert body["calendar"] == "weekdays"
    assert body["role"] == "scheduler"
    assert made["ETag"] == f'"r{body["revision"]}"'
    assert Membership.objects.get(project_id=body["id"]).user == users["scheduler"]


def test_project_list_shows_only_the_projects_the_user_belongs_to(
    clients, project, other_project
):
    mine = clients["owner"].get(f"{API}/projects/")
    assert mine.status_code == 200
    assert [p["id"] for p in mine.json()["results"]] == [project["id"]]
    assert mine.json()["results"][0]["role"] == "owner"
    assert clients["outsider"].get(f"{API}/projects/").json()["results"] == []


def test_patching_a_project_needs_its_revision_and_moves_it_on(clients, project):
    planner = clients["scheduler"]
    path = f"{API}/projects/{project['id']}/"
    rev = project["revision"]
    body = {"deadline": "2027-06-30"}
    assert planner.patch(path, body, format="json").status_code == 428
    stale = planner.patch(path, body, format="json", HTTP_IF_MATCH=f'"r{rev - 1}"')
    assert stale.status_code == 412
    assert error_of(stale)["code"] == "version_mismatch"
    done = planner.patch(path, body, format="json", HTTP_IF_MATCH=f'"r{rev}"')
    assert done.status_code == 200, done.content
    assert done.json()["deadline"] == "2027-06-30"
    assert done.json()["revision"] == rev + 1
    assert done["ETag"] == f'"r{rev + 1}"'


# The whole network ---------------------------------------------------------


def test_get_network_answers_the_document_with_the_revision_as_etag(clients, project):
    got = clients["scheduler"].get(url(project, "network"))
    assert got.status_code == 200
    assert got["ETag"] == f'"r{project["revision"]}"'
    assert got.json()["format"] == "sitepace.network/1"


def test_the_stored_network_round_trips_unchanged(clients, project):
    got = clients["scheduler"].get(url(project, "network"))
    assert got.json() == workshop()


def test_put_network_without_if_match_is_428_and_stores_nothing(clients, project):
    before = stored(project)
    doc = workshop()
    doc["activities"][0]["duration"] = 9
    put = clients["scheduler"].put(url(project, "network"), doc, format="json")
    assert put.status_code == 428
    assert error_of(put)["code"] == "if_match_required"
    assert stored(project) == before


def test_put_network_with_a_stale_etag_is_412_and_stores_nothing(clients, project):
    before = stored(project)
    doc = workshop()
    doc["activities"][0]["duration"] = 9
    stale = f'"r{project["revision"] - 1}"'
    put = clients["scheduler"].put(
        url(project, "network"), doc, format="json", HTTP_IF_MATCH=stale
    )
    assert put.status_code == 412
    err = error_of(put)
    assert err["code"] == "version_mismatch"
    assert "read it again" in err["message"]
    assert stored(project) == before


def test_put_network_with_the_current_etag_stores_it_and_moves_the_revision_on(
    clients, project
):
    planner = clients["scheduler"]
    etag = planner.get(url(project, "network"))["ETag"]
    doc = workshop()
    doc["activities"][2]["duration"] = 6
    doc["relations"] = [r for r in doc["relations"] if r["succ"] != "POWER"]
    put = planner.put(url(project, "network"), doc, format="json", HTTP_IF_MATCH=etag)
    assert put.status_code == 200, put.content
    assert put.json() == doc
    assert put["ETag"] == f'"r{project["revision"] + 1}"'
    assert planner.get(url(project, "network")).json() == doc
    # The old ETag is spent: a second write with it is refused.
    again = planner.put(url(project, "network"), doc, format="json", HTTP_IF_MATCH=etag)
    assert again.status_code == 412


def test_put_network_of_the_same_document_keeps_row_ids_and_versions(clients, project):
    planner = clients["scheduler"]
    before = list(
        Activity.objects.filter(project_id=project["id"]).values_list(
            "key", "id", "version"
        )
    )
    etag = planner.get(url(project, "network"))["ETag"]
    put = planner.put(
        url(project, "network"), workshop(), format="json", HTTP_IF_MATCH=etag
    )
    assert put.status_code == 200
    after = list(
        Activity.objects.filter(project_id=project["id"]).values_list(
            "key", "id", "version"
        )
    )
    assert after == before


def test_the_demo_network_stores_and_reads_back_every_stored_field(clients):
    demo = json.loads(DEMO.read_text())
    planner = clients["scheduler"]
    made = planner.post(
        f"{API}/projects/", {"name": "Demo", "start": "2027-03-01"}, format="json"
    )
    pid = made.json()["id"]
    put = planner.put(
        url(pid, "network"), demo, format="json", HTTP_IF_MATCH=made["ETag"]
    )
    assert put.status_code == 200, put.content[:2000]
    back = planner.get(url(pid, "network")).json()
    assert back["project"] == demo["project"]
    # Progress and the milestone flag are not part of the stored network.
    not_stored = {
        "milestone",
        "actual_start",
        "actual_finish",
        "remaining",
        "percent_complete",
    }
    for section in ("calendars", "crews", "activities", "relations"):
        assert len(back[section]) == len(demo[section]), section
        for sent, got in zip(demo[section], back[section], strict=True):
            for name, value in sent.items():
                if name not in not_stored:
                    assert got[name] == value, (section, sent, name)


# The schedule --------------------------------------------------------------


def test_get_schedule_answers_sitepace_schedule_1_of_the_current_revision(
    clients, project
):
    got = clients["owner"].get(url(project, "schedule"))
    assert got.status_code == 200, got.content
    doc = got.json()
    assert doc["format"] == "sitepace.schedule/1"
    assert doc["revision"] == project["revision"]
    assert got["ETag"] == f'"r{project["revision"]}"'
    keys = [a["key"] for a in doc["activities"]]
    assert keys == [a["key"] for a in workshop()["activities"]]
    frame = next(a for a in doc["activities"] if a["key"] == "FRAME")
    # SLAB finishes on Wednesday 3 March; +3 calendar days from Thursday 4
    # lands on Sunday 7, so the frame starts on Monday 8 and takes four days.
    assert (frame["early_start"], frame["early_finish"]) == ("2027-03-08", "2027-03-11")
    assert doc["critical_path"], "a critical path is listed"


def test_schedule_is_computed_once_per_revision(clients, project, monkeypatch):
    runs = []
    real = services.critical_path

    def counting(net):
        runs.append(net.size)
        return real(net)

    monkeypatch.setattr(services, "critical_path", counting)
    reader = clients["site_manager"]
    first = reader.get(url(project, "schedule")).json()
    second = reader.get(url(project, "schedule")).json()
    assert len(runs) == 1
    assert second == first
    cached = ComputedSchedule.objects.get(project_id=project["id"])
    assert cached.revision == project["revision"]

    planner = clients["scheduler"]
    frame = Activity.objects.get(project_id=project["id"], key="FRAME")
    changed = planner.patch(
        url(project, f"activities/{frame.pk}/"),
        {"duration": 7},
        format="json",
        HTTP_IF_MATCH=f'"{frame.version}"',
    )
    assert changed.status_code == 200, changed.content
    third = reader.get(url(project, "schedule")).json()
    assert len(runs) == 2
    assert third["revision"] == project["revision"] + 1
    assert reader.get(url(project, "schedule")).json() == third
    assert len(runs) == 2


def test_cached_schedule_answers_with_few_queries(
    clients, project, django_assert_max_num_queries
):
    reader = clients["site_manager"]
    reader.get(url(project, "schedule"))
    # token, membership and the cached row; no rows of the network are read
    with django_assert_max_num_queries(4):
        assert reader.get(url(project, "schedule")).status_code == 200


def test_schedule_of_a_project_without_activities_is_400_naming_activities(clients):
    planner = clients["scheduler"]
    made = planner.post(
        f"{API}/projects/", {"name": "Empty", "start": "2027-03-01"}, format="json"
    )
    got = planner.get(url(made.json()["id"], "schedule"))
    assert got.status_code == 400
    err = error_of(got)
    assert [p["pointer"] for p in err["problems"]] == ["/activities"]


# Items carry their own versions ---------------------------------------------


def test_an_activity_write_needs_its_version_and_moves_it_on(clients, project):
    planner = clients["scheduler"]
    dig = Activity.objects.get(project_id=project["id"], key="DIG")
    path = url(project, f"activities/{dig.pk}/")
    got = planner.get(path)
    assert got["ETag"] == '"1"'
    assert planner.patch(path, {"duration": 3}, format="json").status_code == 428
    stale = planner.patch(path, {"duration": 3}, format="json", HTTP_IF_MATCH='"0"')
    assert stale.status_code == 412
    done = planner.patch(path, {"duration": 3}, format="json", HTTP_IF_MATCH='"1"')
    assert done.status_code == 200, done.content
    assert done.json()["duration"] == 3
    assert done["ETag"] == '"2"'


def test_renaming_an_activity_key_carries_over_to_its_relations(clients, project):
    planner = clients["scheduler"]
    frame = Activity.objects.get(project_id=project["id"], key="FRAME")
    renamed = planner.patch(
        url(project, f"activities/{frame.pk}/"),
        {"key": "FRAME-TIMBER"},
        format="json",
        HTTP_IF_MATCH=f'"{frame.version}"',
    )
    assert renamed.status_code == 200, renamed.content
    doc = planner.get(url(project, "network")).json()
    ends = {(r["pred"], r["succ"]) for r in doc["relations"]}
    assert ("SLAB", "FRAME-TIMBER") in ends
    assert ("FRAME-TIMBER", "ROOF") in ends
    assert not any("FRAME" in pair for pair in ends)


def test_creating_an_entry_needs_no_if_match(clients, project):
    made = clients["scheduler"].post(
        url(project, "activities/"),
        {"key": "PAINT", "name": "Paint the walls", "duration": 2},
        format="json",
    )
    assert made.status_code == 201, made.content
    assert made.json()["version"] == 1
    assert made["ETag"] == '"1"'


def test_entries_without_a_name_keep_the_project_editable(clients, project):
    planner = clients["scheduler"]
    for path, body in (
        ("activities/", {"key": "SNAG", "duration": 1}),
        ("activities/", {"key": "SWEEP", "name": "", "duration": 1}),
        ("crews/", {"key": "sweepers", "capacity": 1}),
        ("activities/", {"key": "CLEAN", "name": "Clean up", "duration": 1}),
    ):
        made = planner.post(url(project, path), body, format="json")
        assert made.status_code == 201, made.content
    assert planner.get(url(project, "schedule")).status_code == 200
    got = planner.get(url(project, "network"))
    again = planner.put(
        url(project, "network"), got.json(), format="json", HTTP_IF_MATCH=got["ETag"]
    )
    assert again.status_code == 200, again.content
    assert again.json() == got.json()


# Members -------------------------------------------------------------------


def test_a_scheduler_adds_a_member_who_then_sees_the_project(clients, users, project):
    added = clients["scheduler"].post(
        url(project, "members/"),
        {"username": users["outsider"].username, "role": "site_manager"},
        format="json",
    )
    assert added.status_code == 201, added.content
    assert added.json()["username"] == users["outsider"].username
    assert added.json()["role"] == "site_manager"
    seen = clients["outsider"].get(f"{API}/projects/{project['id']}/")
    assert seen.status_code == 200
    assert seen.json()["role"] == "site_manager"
    listed = clients["site_manager"].get(url(project, "members/")).json()
    assert {m["username"] for m in listed["results"]} == {
        users[r].username for r in ("scheduler", "owner", "site_manager", "outsider")
    }


def test_adding_an_unknown_user_names_the_username(clients, project):
    added = clients["scheduler"].post(
        url(project, "members/"),
        {"username": "nobody.here", "role": "owner"},
        format="json",
    )
    assert added.status_code == 400
    problems = error_of(added)["problems"]
    assert [p["pointer"] for p in problems] == ["/username"]
    assert "nobody.here" in problems[0]["message"]


def test_adding_a_member_with_an_unknown_role_names_the_role(clients, users, project):
    added = clients["scheduler"].post(
        url(project, "members/"),
        {"username": users["outsider"].username, "role": "foreman"},
        format="json",
    )
    assert added.status_code == 400
    assert [p["pointer"] for p in error_of(added)["problems"]] == ["/role"]


def test_the_last_scheduler_cannot_leave(clients, users, project):
    mine = Membership.objects.get(project_id=project["id"], user=users["scheduler"])
    gone = clients["scheduler"].delete(url(project, f"members/{mine.pk}/"))
    assert gone.status_code == 400
    assert [p["pointer"] for p in error_of(gone)["problems"]] == ["/role"]
    assert Membership.objects.filter(pk=mine.pk).exists()


# Tokens, health, schema ----------------------------------------------------


def test_token_endpoint_gives_a_token_that_authenticates(users, anonymous):
    got = anonymous.post(
        f"{API}/auth/token",
        {"username": users["owner"].username, "password": PASSWORD},
        format="json",
    )
    assert got.status_code == 200, got.content
    token = got.json()["token"]
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")
    assert client.get(f"{API}/projects/").status_code == 200


def test_token_endpoint_refuses_a_wrong_password_naming_the_password(users, anonymous):
    got = anonymous.post(
        f"{API}/auth/token",
        {"username": users["owner"].username, "password": "not-it"},
        format="json",
    )
    assert got.status_code == 400
    err = error_of(got)
    assert [p["pointer"] for p in err["problems"]] == ["/password"]
    assert "token" not in got.json()


def test_token_endpoint_names_missing_fields(anonymous):
    got = anonymous.post(f"{API}/auth/token", {}, format="json")
    assert got.status_code == 400
    pointers = {p["pointer"] for p in error_of(got)["problems"]}
    assert pointers == {"/username", "/password"}


def test_anonymous_requests_are_refused_with_401(anonymous, project):
    for path in (f"{API}/projects/", url(project, "network"), url(project, "schedule")):
        got = anonymous.get(path)
        assert got.status_code == 401, path
        assert error_of(got)["code"] == "not_authenticated"


def test_a_wrong_token_is_refused_with_401(project):
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION="Token not-a-real-token")
    got = client.get(f"{API}/projects/")
    assert got.status_code == 401
    error_of(got)


def test_healthz_answers_ok(anonymous):
    got = anonymous.get("/healthz")
    assert got.status_code == 200
    assert got.json() == {"status": "ok"}


def test_schema_answers_openapi_with_the_network_and_schedule_paths(anonymous):
    got = anonymous.get("/api/schema/", HTTP_ACCEPT="application/json")
    assert got.status_code == 200
    doc = got.json()
    assert doc["openapi"].startswith("3.")
    assert "/api/v1/projects/{id}/network/" in doc["paths"]
    assert "/api/v1/projects/{id}/schedule/" in doc["paths"]
    assert "/api/v1/auth/token" in doc["paths"]


def test_docs_page_answers_200(anonymous):
    got = anonymous.get("/api/docs/")
    assert got.status_code == 200
    assert b"swagger" in got.content.lower()


def test_an_unknown_api_path_answers_404_in_the_envelope(clients):
    got = clients["scheduler"].get(f"{API}/no-such-thing/")
    assert got.status_code == 404
    error_of(got)


def test_a_project_the_user_has_no_part_in_is_404_not_403(clients, other_project):
    got = clients["scheduler"].get(f"{API}/projects/{other_project['id']}/")
    assert got.status_code == 404
    assert error_of(got)["code"] == "not_found"
    assert Project.objects.filter(pk=other_project["id"]).exists()
