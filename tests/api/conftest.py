"""Fixtures of the API tests: a user per role, token clients, a loaded project.

``project`` is a small network of a garden workshop, stored through the API
itself (POST the project, PUT its network, add the members), so every test
starts from what a real client would have made.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

import pytest
from django.core.cache import cache
from rest_framework.authtoken.models import Token
from rest_framework.test import APIClient

API = "/api/v1"
PASSWORD = "plumb-line-42-level"
ROLES = ("owner", "site_manager", "scheduler")

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]

#: The network of the ``project`` fixture, in the exact shape GET network answers
#: (every optional field present), so that a PUT of it reads back unchanged. The
#: four-day calendar and the scaffold crew are in use by nothing, so they can be
#: deleted.
WORKSHOP: dict[str, Any] = {
    "format": "sitepace.network/1",
    "project": {
        "name": "Garden workshop, Hollin Lane",
        "start": "2027-03-01",
        "calendar": "weekdays",
        "data_date": None,
        "deadline": None,
    },
    "calendars": [
        {
            "key": "weekdays",
            "name": "Monday to Friday",
            "workdays": WEEKDAYS,
            "holidays": ["2027-03-26"],
            "extra_workdays": [],
        },
        {
            "key": "sixday",
            "name": "Monday to Saturday",
            "workdays": [*WEEKDAYS, "sat"],
            "holidays": [],
            "extra_workdays": [],
        },
        {
            "key": "fourday",
            "name": "Winter four-day week",
            "workdays": ["mon", "tue", "wed", "thu"],
            "holidays": [],
            "extra_workdays": ["2027-12-03"],
        },
    ],
    "crews": [
        {
            "key": "ground",
            "name": "Groundworks crew",
            "capacity": 2,
            "calendar": "sixday",
            "unavailable": [],
        },
        {
            "key": "joinery",
            "name": "Joinery crew",
            "capacity": 1,
            "calendar": None,
            "unavailable": [{"from": "2027-04-05", "to": "2027-04-09"}],
        },
        {
            "key": "scaffold",
            "name": "Scaffold crew",
            "capacity": 1,
            "calendar": None,
            "unavailable": [],
        },
    ],
    "activities": [
        {
            "key": "DIG",
            "name": "Dig and level the base",
            "duration": 2,
            "calendar": "sixday",
            "demands": {"ground": 1},
            "not_before": None,
            "deadline": None,
            "zone": "Base",
            "trade": "Groundworks",
            "planned_value": 1200.0,
            "quantity": 24.0,
            "unit": "m2",
        },
        {
            "key": "SLAB",
            "name": "Pour the slab",
            "duration": 1,
            "calendar": "sixday",
            "demands": {"ground": 2},
            "not_before": None,
            "deadline": None,
            "zone": "Base",
            "trade": "Groundworks",
            "planned_value": 2100.5,
            "quantity": None,
            "unit": None,
        },
        {
            "key": "FRAME",
            "name": "Timber frame",
            "duration": 4,
            "calendar": None,
            "demands": {"joinery": 1},
            "not_before": None,
            "deadline": None,
            "zone": "Shell",
            "trade": "Joinery",
            "planned_value": None,
            "quantity": None,
            "unit": None,
        },
        {
            "key": "ROOF",
            "name": "Roof sheets",
            "duration": 2,
            "calendar": None,
            "demands": {"joinery": 1},
            "not_before": None,
            "deadline": None,
            "zone": "Shell",
            "trade": "Joinery",
            "planned_value": None,
            "quantity": None,
            "unit": None,
        },
        {
            "key": "POWER",
            "name": "Power and lights",
            "duration": 2,
            "calendar": None,
            "demands": {},
            "not_before": "2027-03-15",
            "deadline": None,
            "zone": "Shell",
            "trade": "Electrical",
            "planned_value": None,
            "quantity": None,
            "unit": None,
        },
        {
            "key": "DONE",
            "name": "Handover",
            "duration": 0,
            "calendar": None,
            "demands": {},
            "not_before": None,
            "deadline": "2027-04-30",
            "zone": None,
            "trade": None,
            "planned_value": None,
            "quantity": None,
            "unit": None,
        },
    ],
    "relations": [
        {"pred": "DIG", "succ": "SLAB", "type": "FS", "lag": 0, "lag_unit": "workdays"},
        {
            "pred": "SLAB",
            "succ": "FRAME",
            "type": "FS",
            "lag": 3,
            "lag_unit": "calendar_days",
        },
        {
            "pred": "FRAME",
            "succ": "ROOF",
            "type": "SS",
            "lag": 2,
            "lag_unit": "workdays",
        },
        {
            "pred": "FRAME",
            "succ": "POWER",
            "type": "FF",
            "lag": 1,
            "lag_unit": "workdays",
        },
        {
            "pred": "ROOF",
            "succ": "DONE",
            "type": "FS",
            "lag": 0,
            "lag_unit": "workdays",
        },
        {
            "pred": "POWER",
            "succ": "DONE",
            "type": "FS",
            "lag": 0,
            "lag_unit": "workdays",
        },
    ],
}


def workshop() -> dict[str, Any]:
    """A fresh copy of the workshop network, safe to change."""
    return copy.deepcopy(WORKSHOP)


@pytest.fixture(autouse=True)
def _fast_passwords(settings):
    """A cheap hasher: the tests make five users each, the default costs seconds."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture(autouse=True)
def _fresh_throttle_counts():
    """Throttle counts live in the cache; every test starts without any."""
    cache.clear()
    yield
    cache.clear()


def token_client(user) -> APIClient:
    client = APIClient()
    token, _ = Token.objects.get_or_create(user=user)
    client.credentials(HTTP_AUTHORIZATION=f"Token {token.key}")
    return client


@pytest.fixture
def make_user(django_user_model) -> Callable[[str], Any]:
    def make(username: str):
        return django_user_model.objects.create_user(
            username=username, password=PASSWORD, email=f"{username}@example.invalid"
        )

    return make


@pytest.fixture
def users(make_user) -> dict[str, Any]:
    """One user per role of ``project``, its rival's scheduler and an outsider."""
    return {
        "owner": make_user("olwen.owner"),
        "site_manager": make_user("sami.site"),
        "scheduler": make_user("priya.planner"),
        "outsider": make_user("otto.outside"),
        "rival": make_user("rhea.rival"),
    }


@pytest.fixture
def clients(users) -> dict[str, APIClient]:
    return {name: token_client(user) for name, user in users.items()}


@pytest.fixture
def anonymous() -> APIClient:
    return APIClient()


def create_project(client: APIClient, name: str, network: dict[str, Any] | None):
    """POST a project, PUT its network; the project as answered."""
    made = client.post(
        f"{API}/projects/", {"name": name, "start": "2027-03-01"}, format="json"
    )
    assert made.status_code == 201, made.content
    pid = made.json()["id"]
    if network is not None:
        put = client.put(
            f"{API}/projects/{pid}/network",
            network,
            format="json",
            HTTP_IF_MATCH=made["ETag"],
        )
        assert put.status_code == 200, put.content
    return client.get(f"{API}/projects/{pid}/").json()


@pytest.fixture
def project(clients, users) -> dict[str, Any]:
    """The workshop, scheduled by ``scheduler``, with an owner and a site manager."""
    planner = clients["scheduler"]
    made = create_project(planner, "Garden workshop", workshop())
    for role in ("owner", "site_manager"):
        added = planner.post(
            f"{API}/projects/{made['id']}/members/",
            {"username": users[role].username, "role": role},
            format="json",
        )
        assert added.status_code == 201, added.content
    return made


@pytest.fixture
def other_project(clients) -> dict[str, Any]:
    """Someone else's project: only ``rival`` is a member."""
    return create_project(clients["rival"], "Rival depot", workshop())


def url(project: dict[str, Any] | int, *rest: str) -> str:
    pid = project if isinstance(project, int) else project["id"]
    tail = "/".join(rest)
    return f"{API}/projects/{pid}/{tail}"


def error_of(response) -> dict[str, Any]:
    """The error envelope of an answer, after checking its shape."""
    body = response.json()
    assert set(body) == {"error"}, body
    err = body["error"]
    assert set(err) == {"status", "code", "message", "problems"}, err
    assert err["status"] == response.status_code
    assert isinstance(err["code"], str) and err["code"]
    assert isinstance(err["message"], str) and err["message"]
    assert isinstance(err["problems"], list)
    for p in err["problems"]:
        assert set(p) == {"pointer", "code", "message"}, p
        assert all(isinstance(v, str) for v in p.values()), p
    return err


def stored(project: dict[str, Any] | int) -> tuple[int, dict[str, Any]]:
    """The project's revision and its network document, read from the rows."""
    from scheduling.bridge import network_document
    from scheduling.models import Project

    pid = project if isinstance(project, int) else project["id"]
    row = Project.objects.get(pk=pid)
    return row.revision, network_document(row)


def index_of(document: dict[str, Any], section: str, key: str) -> int:
    return next(i for i, e in enumerate(document[section]) if e["key"] == key)
