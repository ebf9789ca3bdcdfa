"""Fixtures of the page tests: the demo project with one user per role, a
small known network for the chart module, and a levelled demo schedule."""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any

import pytest
from django.conf import settings

PASSWORD = "trowel-and-float-77"
DEMO_FILE = Path(settings.BASE_DIR) / "seed_data" / "demo_network.json"

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]

#: A small known network. Project start Monday 1 March 2027; Friday 26 March
#: 2027 is a holiday. A (5 days) → B (3 days) → M (milestone); C (2 days,
#: sharing crew "carp" with B, capacity 1) with float; FS throughout.
SMALL: dict[str, Any] = {
    "format": "sitepace.network/1",
    "project": {
        "name": "Bothy on the moor",
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
        }
    ],
    "crews": [
        {
            "key": "carp",
            "name": "Carpentry crew",
            "capacity": 1,
            "calendar": None,
            "unavailable": [],
        }
    ],
    "activities": [
        {"key": "A", "name": "Footings", "duration": 5, "demands": {}, "zone": "Base"},
        {
            "key": "B",
            "name": "Walls <&> roof",
            "duration": 3,
            "demands": {"carp": 1},
            "zone": "Shell",
        },
        {"key": "C", "name": "Door", "duration": 2, "demands": {"carp": 1}},
        {"key": "M", "name": "Handover", "duration": 0, "demands": {}},
    ],
    "relations": [
        {"pred": "A", "succ": "B", "type": "FS", "lag": 0},
        {"pred": "B", "succ": "M", "type": "FS", "lag": 0},
        {"pred": "A", "succ": "C", "type": "FS", "lag": 0},
        {"pred": "C", "succ": "M", "type": "FS", "lag": 0},
    ],
}


@pytest.fixture
def small_network() -> dict[str, Any]:
    return copy.deepcopy(SMALL)


def schedule_of(network: dict[str, Any]) -> dict[str, Any]:
    from scheduling.engine import critical_path, parse_network, schedule_document

    net = parse_network(network)
    return schedule_document(net, critical_path(net))


def levelled_of(network: dict[str, Any], time_limit: float = 10.0) -> dict[str, Any]:
    from scheduling.engine import critical_path, parse_network
    from scheduling.engine.levelling import level
    from scheduling.engine.output import levelled_document

    net = parse_network(network)
    result = critical_path(net)
    levelled = level(net, time_limit=time_limit, workers=2)
    return levelled_document(net, result, levelled)


def demo_document() -> dict[str, Any]:
    return json.loads(DEMO_FILE.read_text())


@pytest.fixture(scope="session")
def demo_levelled() -> dict[str, Any]:
    """The demo levelled by the engine (goal shortest), computed once."""
    return levelled_of(demo_document())


@pytest.fixture(autouse=True)
def _fast_passwords(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture
def demo(django_user_model):
    """The demo project loaded through the service the demo command uses, with
    ``demo-scheduler``/``demo-site-manager``/``demo-owner`` and an outsider."""
    from scheduling.models import Role
    from scheduling.services import demo_load

    project = demo_load(
        document=demo_document(), passwords={role: PASSWORD for role in Role.values}
    )
    django_user_model.objects.create_user(username="otto.outside", password=PASSWORD)
    return project
