"""Bad input is refused with 400 (413 for a body over the limit), in the one
error envelope, naming the field or the row, and nothing is stored.

Each case goes in twice where the API allows it: as part of a whole network
(PUT …/network, pointers relative to the document) and as one entry through
its collection (POST/PATCH, pointers relative to the entry).
"""

from __future__ import annotations

import json
from collections.abc import Callable
from typing import Any

import pytest

from scheduling.models import Activity, ComputedSchedule, Project

from .conftest import API, error_of, index_of, stored, url, workshop

pytestmark = pytest.mark.django_db

Doc = dict[str, Any]


def _act(doc: Doc, key: str) -> Doc:
    return doc["activities"][index_of(doc, "activities", key)]


def _rel(doc: Doc, pred: str, succ: str) -> Doc:
    return next(r for r in doc["relations"] if (r["pred"], r["succ"]) == (pred, succ))


def _add_loop(doc: Doc) -> None:
    doc["relations"].append({"pred": "DONE", "succ": "DIG"})


def _unknown_pred(doc: Doc) -> None:
    doc["relations"].append({"pred": "GHOST", "succ": "DIG"})


def _duplicate_key(doc: Doc) -> None:
    doc["activities"].append({**_act(doc, "DIG"), "name": "Dig again"})


def _negative_duration(doc: Doc) -> None:
    _act(doc, "FRAME")["duration"] = -3


def _huge_lag(doc: Doc) -> None:
    _rel(doc, "DIG", "SLAB")["lag"] = 10_000


def _no_working_weekday(doc: Doc) -> None:
    doc["calendars"][index_of(doc, "calendars", "sixday")]["workdays"] = []


def _impossible_date(doc: Doc) -> None:
    _act(doc, "POWER")["not_before"] = "2027-02-30"


def _impossible_start(doc: Doc) -> None:
    doc["project"]["start"] = "2027-02-30"


def _impossible_holiday(doc: Doc) -> None:
    doc["calendars"][0]["holidays"] = ["2027-02-30"]


def _duration_as_text(doc: Doc) -> None:
    _act(doc, "SLAB")["duration"] = "2"


def _capacity_as_list(doc: Doc) -> None:
    doc["crews"][0]["capacity"] = [1]


def _lag_as_text(doc: Doc) -> None:
    _rel(doc, "SLAB", "FRAME")["lag"] = "3"


def _workdays_as_text(doc: Doc) -> None:
    doc["calendars"][0]["workdays"] = "mon"


def _start_as_number(doc: Doc) -> None:
    doc["project"]["start"] = 20270301


def _activities_as_object(doc: Doc) -> None:
    doc["activities"] = {"DIG": 2}


def _relation_type_as_number(doc: Doc) -> None:
    _rel(doc, "FRAME", "ROOF")["type"] = 1


def _planned_value_as_text(doc: Doc) -> None:
    _act(doc, "DIG")["planned_value"] = "lots"


def _zone_as_number(doc: Doc) -> None:
    _act(doc, "DIG")["zone"] = 5


def _key_too_long(doc: Doc) -> None:
    _act(doc, "DONE")["key"] = "D" * 100
    for r in doc["relations"]:
        if r["succ"] == "DONE":
            r["succ"] = "D" * 100


def _zone_too_long(doc: Doc) -> None:
    _act(doc, "DIG")["zone"] = "z" * 150


#: (mutation, pointer of the problem, words its message must contain)
NETWORK_CASES: list[Any] = [
    pytest.param(_add_loop, "/activities/0", ["loop", "DONE → DIG"], id="cycle"),
    pytest.param(
        _unknown_pred, "/relations/6/pred", ["GHOST"], id="unknown-predecessor"
    ),
    pytest.param(
        _duplicate_key, "/activities/6/key", ["DIG", "twice"], id="duplicate-key"
    ),
    pytest.param(
        _negative_duration,
        "/activities/2/duration",
        ["FRAME", "-3"],
        id="negative-duration",
    ),
    pytest.param(
        _huge_lag, "/relations/0/lag", ["DIG → SLAB", "10000"], id="lag-10000-days"
    ),
    pytest.param(
        _no_working_weekday,
        "/calendars/1/workdays",
        ["sixday", "no working weekday"],
        id="calendar-without-working-weekday",
    ),
    pytest.param(
        _impossible_date,
        "/activities/4/not_before",
        ["POWER", "2027-02-30"],
        id="date-2027-02-30",
    ),
    pytest.param(
        _impossible_start,
        "/project/start",
        ["2027-02-30"],
        id="project-start-2027-02-30",
    ),
    pytest.param(
        _impossible_holiday,
        "/calendars/0/holidays/0",
        ["weekdays", "2027-02-30"],
        id="holiday-2027-02-30",
    ),
    pytest.param(
        _duration_as_text,
        "/activities/1/duration",
        ["SLAB", "whole number"],
        id="duration-as-text",
    ),
    pytest.param(
        _capacity_as_list,
        "/crews/0/capacity",
        ["ground", "whole number"],
        id="capacity-as-list",
    ),
    pytest.param(
        _lag_as_text,
        "/relations/1/lag",
        ["SLAB → FRAME", "whole number"],
        id="lag-as-text",
    ),
    pytest.param(
        _workdays_as_text,
        "/calendars/0/workdays",
        ["weekdays", "list"],
        id="workdays-as-text",
    ),
    pytest.param(
        _start_as_number, "/project/start", ["20270301"], id="start-as-number"
    ),
    pytest.param(
        _activities_as_object,
        "/activities",
        ["activities", "list"],
        id="activities-as-object",
    ),
    pytest.param(
        _relation_type_as_number,
        "/relations/2/type",
        ["FRAME → ROOF", "FS, SS, FF or SF"],
        id="relation-type-as-number",
    ),
    pytest.param(
        _planned_value_as_text,
        "/activities/0/planned_value",
        ["DIG"],
        id="planned-value-as-text",
    ),
    pytest.param(
        _zone_as_number,
        "/activities/0/zone",
        ["DIG"],
        id="zone-as-number",
    ),
    pytest.param(
        _key_too_long,
        "/activities/5/key",
        ["64"],
        id="key-over-64-characters",
    ),
    pytest.param(
        _zone_too_long,
        "/activities/0/zone",
        ["DIG"],
        id="zone-over-100-characters",
    ),
]


def _network_etag(project: dict[str, Any]) -> str:
    return f'"r{Project.objects.get(pk=project["id"]).revision}"'


def _assert_names(response, pointer: str, words: list[str]) -> dict[str, Any]:
    assert response.status_code == 400, response.content[:1000]
    err = error_of(response)
    hits = [p for p in err["problems"] if p["pointer"] == pointer]
    assert hits, f"no problem at {pointer}: {err['problems']}"
    for word in words:
        assert any(word in p["message"] for p in hits), (word, hits)
    return err


@pytest.mark.parametrize(("mutate", "pointer", "words"), NETWORK_CASES)
def test_bad_network_is_refused_naming_the_row_and_nothing_is_stored(
    clients, project, mutate: Callable[[Doc], None], pointer, words
):
    planner = clients["scheduler"]
    planner.get(url(project, "schedule"))  # a cached schedule that must survive
    before = stored(project)
    doc = workshop()
    mutate(doc)
    put = planner.put(
        url(project, "network"),
        doc,
        format="json",
        HTTP_IF_MATCH=_network_etag(project),
    )
    err = _assert_names(put, pointer, words)
    assert "nothing was stored" in err["message"]
    assert stored(project) == before
    cached = ComputedSchedule.objects.get(project_id=project["id"])
    assert cached.revision == before[0]


def test_a_loop_in_the_network_is_named_in_full(clients, project):
    doc = workshop()
    _add_loop(doc)
    put = clients["scheduler"].put(
        url(project, "network"),
        doc,
        format="json",
        HTTP_IF_MATCH=_network_etag(project),
    )
    (loop,) = [p for p in error_of(put)["problems"] if p["code"] == "cycle"]
    assert loop["message"].endswith("DIG → SLAB → FRAME → ROOF → DONE → DIG")


def test_every_problem_of_a_network_is_listed_in_one_answer(clients, project):
    doc = workshop()
    for mutate in (_add_loop, _negative_duration, _huge_lag, _impossible_date):
        mutate(doc)
    put = clients["scheduler"].put(
        url(project, "network"),
        doc,
        format="json",
        HTTP_IF_MATCH=_network_etag(project),
    )
    assert put.status_code == 400
    pointers = {p["pointer"] for p in error_of(put)["problems"]}
    assert {
        "/activities/2/duration",
        "/relations/0/lag",
        "/activities/4/not_before",
    } <= pointers


def test_a_network_that_is_not_an_object_is_refused(clients, project):
    before = stored(project)
    for body in ([1, 2, 3], "network", 42):
        put = clients["scheduler"].put(
            url(project, "network"),
            body,
            format="json",
            HTTP_IF_MATCH=_network_etag(project),
        )
        assert put.status_code == 400, body
        problems = error_of(put)["problems"]
        assert problems and problems[0]["code"] == "wrong_type"
    assert stored(project) == before


# One entry at a time -------------------------------------------------------


def _ids(project: dict[str, Any], key: str) -> tuple[int, int]:
    row = Activity.objects.get(project_id=project["id"], key=key)
    return row.pk, row.version


#: (method, path under the project, body, pointer, words, an item to patch)
ENTRY_CASES: list[Any] = [
    pytest.param(
        "post",
        "relations/",
        {"pred": "DONE", "succ": "DIG"},
        "/activities/0",
        ["loop", "DIG → SLAB → FRAME → ROOF → DONE → DIG"],
        None,
        id="cycle-by-one-relation",
    ),
    pytest.param(
        "post",
        "relations/",
        {"pred": "GHOST", "succ": "DIG"},
        "/pred",
        ["GHOST"],
        None,
        id="unknown-predecessor",
    ),
    pytest.param(
        "post",
        "relations/",
        {"pred": "DIG", "succ": "DIG"},
        "/",
        ["DIG", "itself"],
        None,
        id="relation-to-itself",
    ),
    pytest.param(
        "post",
        "relations/",
        {"pred": "DIG", "succ": "SLAB", "type": "SS"},
        "/",
        ["DIG → SLAB", "twice"],
        None,
        id="duplicate-relation",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "DIG", "name": "Dig again", "duration": 1},
        "/key",
        ["DIG"],
        None,
        id="duplicate-key",
    ),
    pytest.param(
        "patch",
        "activities/{FRAME}/",
        {"key": "ROOF"},
        "/activities/3/key",
        ["ROOF", "twice"],
        "FRAME",
        id="renamed-onto-a-taken-key",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "NEW", "name": "New", "duration": -1},
        "/duration",
        ["0"],
        None,
        id="negative-duration",
    ),
    pytest.param(
        "patch",
        "activities/{FRAME}/",
        {"duration": -5},
        "/duration",
        ["0"],
        "FRAME",
        id="negative-duration-on-change",
    ),
    pytest.param(
        "post",
        "relations/",
        {"pred": "DIG", "succ": "ROOF", "lag": 10_000},
        "/lag",
        ["1000"],
        None,
        id="lag-10000-days",
    ),
    pytest.param(
        "post",
        "calendars/",
        {"key": "never", "name": "Never", "workdays": []},
        "/workdays",
        ["never", "no working weekday"],
        None,
        id="calendar-without-working-weekday",
    ),
    pytest.param(
        "post",
        "calendars/",
        {"key": "odd", "name": "Odd", "workdays": ["mon", "funday"]},
        "/workdays/1",
        ["funday"],
        None,
        id="unknown-weekday",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "NEW", "name": "New", "duration": 1, "not_before": "2027-02-30"},
        "/not_before",
        ["Date", "YYYY-MM-DD"],
        None,
        id="date-2027-02-30",
    ),
    pytest.param(
        "post",
        "calendars/",
        {"key": "c2", "name": "C2", "workdays": ["mon"], "holidays": ["2027-02-30"]},
        "/holidays/0",
        ["YYYY-MM-DD"],
        None,
        id="holiday-2027-02-30",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "NEW", "name": "New", "duration": "three"},
        "/duration",
        ["integer"],
        None,
        id="duration-as-text",
    ),
    pytest.param(
        "post",
        "crews/",
        {"key": "paint", "name": "Painters", "capacity": "many"},
        "/capacity",
        ["integer"],
        None,
        id="capacity-as-text",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "NEW", "name": "New", "duration": 1, "demands": ["ground"]},
        "/demands",
        ["dictionary"],
        None,
        id="demands-as-list",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "NEW", "name": "New", "duration": 1, "demands": {"painters": 1}},
        "/demands/painters",
        ["painters"],
        None,
        id="demand-for-an-unknown-crew",
    ),
    pytest.param(
        "post",
        "relations/",
        {"pred": "DIG", "succ": "ROOF", "type": "XX"},
        "/type",
        ["XX"],
        None,
        id="unknown-relation-type",
    ),
    pytest.param(
        "post",
        "activities/",
        {"key": "K" * 65, "name": "Long", "duration": 1},
        "/key",
        ["64"],
        None,
        id="key-over-64-characters",
    ),
    pytest.param(
        "post",
        "activities/",
        {"name": "No key", "duration": 1},
        "/key",
        ["required"],
        None,
        id="missing-key",
    ),
]


@pytest.mark.parametrize(
    ("method", "path", "body", "pointer", "words", "item"), ENTRY_CASES
)
def test_bad_entry_is_refused_naming_the_field_and_nothing_is_stored(
    clients, project, method, path, body, pointer, words, item
):
    headers = {}
    if item is not None:
        pk, version = _ids(project, item)
        path = path.replace("{" + item + "}", str(pk))
        headers["HTTP_IF_MATCH"] = f'"{version}"'
    before = stored(project)
    send = getattr(clients["scheduler"], method)
    answer = send(url(project, path), body, format="json", **headers)
    _assert_names(answer, pointer, words)
    assert stored(project) == before


def test_a_project_with_an_impossible_start_is_not_created(clients):
    made = clients["scheduler"].post(
        f"{API}/projects/", {"name": "Leap", "start": "2027-02-30"}, format="json"
    )
    assert made.status_code == 400
    assert [p["pointer"] for p in error_of(made)["problems"]] == ["/start"]
    assert not Project.objects.filter(name="Leap").exists()


def test_a_project_with_a_deadline_before_its_start_is_not_created(clients):
    made = clients["scheduler"].post(
        f"{API}/projects/",
        {"name": "Backwards", "start": "2027-03-01", "deadline": "2027-02-01"},
        format="json",
    )
    assert made.status_code == 400
    pointers = [p["pointer"] for p in error_of(made)["problems"]]
    assert any(p.endswith("/deadline") for p in pointers), pointers
    assert not Project.objects.filter(name="Backwards").exists()


def test_a_project_without_a_name_or_start_names_both(clients):
    made = clients["scheduler"].post(f"{API}/projects/", {}, format="json")
    assert made.status_code == 400
    pointers = {p["pointer"] for p in error_of(made)["problems"]}
    assert pointers == {"/name", "/start"}


def test_an_unknown_ordering_names_the_ordering(clients, project):
    got = clients["scheduler"].get(url(project, "activities/") + "?ordering=colour")
    assert got.status_code == 400
    assert [p["pointer"] for p in error_of(got)["problems"]] == ["/ordering"]


# Bodies that are not JSON, or too large -----------------------------------

MALFORMED = '{"format": "sitepace.network/1",\n "project": [}\n'


@pytest.mark.parametrize("path", ["network", "activities/", "relations/"])
def test_malformed_json_is_400_naming_line_and_column(clients, project, path):
    before = stored(project)
    send = clients["scheduler"].put if path == "network" else clients["scheduler"].post
    answer = send(
        url(project, path),
        MALFORMED,
        content_type="application/json",
        HTTP_IF_MATCH=_network_etag(project),
    )
    assert answer.status_code == 400
    err = error_of(answer)
    assert err["code"] == "parse_error"
    assert "line 2 column 14" in err["message"]
    assert stored(project) == before


def test_a_body_that_is_not_utf8_is_400(clients, project):
    before = stored(project)
    answer = clients["scheduler"].post(
        url(project, "activities/"),
        b'{"key": "\xff\xfe", "duration": 1}',
        content_type="application/json",
    )
    assert answer.status_code == 400
    error_of(answer)
    assert stored(project) == before


TWENTY_MB = 20 * 10**6


@pytest.mark.parametrize("path", ["network", "activities/"])
def test_a_20_mb_body_is_refused_with_413(clients, project, path):
    before = stored(project)
    doc = workshop()
    doc["project"]["name"] = "x" * TWENTY_MB
    body = json.dumps(doc)
    assert len(body) > TWENTY_MB
    send = clients["scheduler"].put if path == "network" else clients["scheduler"].post
    answer = send(
        url(project, path),
        body,
        content_type="application/json",
        HTTP_IF_MATCH=_network_etag(project),
    )
    assert answer.status_code == 413
    err = error_of(answer)
    assert err["code"] == "too_large"
    assert "MiB" in err["message"]
    assert stored(project) == before
