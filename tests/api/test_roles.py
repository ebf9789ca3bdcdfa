"""The role matrix: every role × every endpoint × own project and someone else's.

The rule (``api/v1/access.py``, DESIGN.md "Roles"):

- an owner reads the project, its schedule, the status report and the
  baselines, nothing else, and writes nothing;
- a site manager reads the project, the schedule, the network (calendars,
  crews, activities, relations, the whole document) and the members, and
  writes nothing here (progress entries are theirs, elsewhere);
- a site manager also reads the report and the baselines;
- a scheduler reads and writes all of it (a baseline is captured, made
  current, never changed);
- a user who is not a member of a project gets 404 for everything under it,
  whatever their role elsewhere: nobody learns that the project exists.

Each request is a valid one, with the current ETag where a write needs it, so
that the answer depends on the role alone.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import pytest

from scheduling.models import (
    Activity,
    Calendar,
    Crew,
    Membership,
    Project,
    Relation,
    Role,
)

from .conftest import ROLES, error_of, url

pytestmark = pytest.mark.django_db

OK, CREATED, GONE, FORBIDDEN, HIDDEN = 200, 201, 204, 403, 404

#: Endpoint → answer on the user's own project, per role. Outsiders and anyone
#: on someone else's project get 404 (see ``expected``).
MATRIX: dict[str, dict[str, int]] = {
    # endpoint                owner      site_manager  scheduler
    "project.retrieve": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "project.patch": {"owner": FORBIDDEN, "site_manager": FORBIDDEN, "scheduler": OK},
    "schedule.get": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "network.get": {"owner": FORBIDDEN, "site_manager": OK, "scheduler": OK},
    "network.put": {"owner": FORBIDDEN, "site_manager": FORBIDDEN, "scheduler": OK},
    **{
        f"{section}.{verb}": {
            "owner": FORBIDDEN,
            "site_manager": OK if verb in ("list", "retrieve") else FORBIDDEN,
            "scheduler": success,
        }
        for section in ("calendars", "crews", "activities")
        for verb, success in (
            ("list", OK),
            ("retrieve", OK),
            ("create", CREATED),
            ("update", OK),
            ("patch", OK),
            ("delete", GONE),
        )
    },
    "relations.list": {"owner": FORBIDDEN, "site_manager": OK, "scheduler": OK},
    "relations.retrieve": {"owner": FORBIDDEN, "site_manager": OK, "scheduler": OK},
    "relations.create": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": CREATED,
    },
    "relations.patch": {"owner": FORBIDDEN, "site_manager": FORBIDDEN, "scheduler": OK},
    "relations.delete": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": GONE,
    },
    "members.list": {"owner": FORBIDDEN, "site_manager": OK, "scheduler": OK},
    "members.create": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": CREATED,
    },
    "members.delete": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": GONE,
    },
    # The owner's status report and baselines: every member reads them; a
    # scheduler captures baselines and chooses the current one.
    "report.get": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "report.pdf": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "baselines.list": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "baselines.retrieve": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "baselines.compare": {"owner": OK, "site_manager": OK, "scheduler": OK},
    "baselines.create": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": CREATED,
    },
    "baselines.current": {
        "owner": FORBIDDEN,
        "site_manager": FORBIDDEN,
        "scheduler": OK,
    },
}


def expected(endpoint: str, who: str, whose: str) -> int:
    if who == "outsider" or whose == "someone_elses":
        return HIDDEN
    return MATRIX[endpoint][who]


def test_the_matrix_follows_the_access_table_of_the_code():
    """The table written out above agrees with ``api.v1.access.ACCESS``."""
    from api.v1.access import ACCESS

    area_of = {
        "project": "project",
        "schedule": "schedule",
        "network": "network",
        "calendars": "network",
        "crews": "network",
        "activities": "network",
        "relations": "network",
        "members": "members",
        "report": "report",
        "baselines": "baselines",
    }
    reads = {"list", "retrieve", "get", "pdf", "compare"}
    for endpoint, answers in MATRIX.items():
        resource, verb = endpoint.split(".")
        readers, writers = ACCESS[area_of[resource]]
        allowed = readers if verb in reads else writers
        for role in ROLES:
            assert (answers[role] != FORBIDDEN) == (role in allowed), (endpoint, role)


@dataclass(frozen=True)
class Call:
    method: str
    path: str
    body: Any = None
    if_match: str | None = None


def _item(model, project_id: int, **lookup) -> Any:
    return model.objects.get(project_id=project_id, **lookup)


def build_call(endpoint: str, project_id: int) -> Call:
    """A valid request for ``endpoint`` on the project (ids of its own rows)."""
    project = Project.objects.get(pk=project_id)
    rev = f'"r{project.revision}"'
    base = url(project_id)
    resource, verb = endpoint.split(".")
    if resource == "project":
        path = f"/api/v1/projects/{project_id}/"
        if verb == "retrieve":
            return Call("get", path)
        return Call("patch", path, {"name": "Workshop, phase two"}, rev)
    if resource == "schedule":
        return Call("get", base + "schedule")
    if resource == "report":
        return Call("get", base + ("report?format=pdf" if verb == "pdf" else "report"))
    if resource == "baselines":
        return _baseline_call(verb, project, base + "baselines/")
    if resource == "network":
        if verb == "get":
            return Call("get", base + "network")
        from scheduling.bridge import network_document

        doc = network_document(project)
        doc["activities"][0]["duration"] += 1
        return Call("put", base + "network", doc, rev)

    targets = {
        "calendars": (Calendar, {"key": "fourday"}),
        "crews": (Crew, {"key": "scaffold"}),
        "activities": (Activity, {"key": "POWER"}),
        "relations": (Relation, {"pred__key": "ROOF", "succ__key": "DONE"}),
    }
    new = {
        "calendars": {"key": "nights", "name": "Nights", "workdays": ["mon", "tue"]},
        "crews": {"key": "paint", "name": "Painters", "capacity": 2},
        "activities": {"key": "PAINT", "name": "Paint", "duration": 2},
        "relations": {"pred": "DIG", "succ": "POWER", "type": "SS", "lag": 1},
    }
    changed = {
        "calendars": {"key": "fourday", "name": "Four days", "workdays": ["mon"]},
        "crews": {"key": "scaffold", "name": "Scaffolders", "capacity": 3},
        "activities": {"key": "POWER", "name": "Power", "duration": 3},
        "relations": {"lag": 2},
    }
    collection = base + f"{resource}/"
    if resource == "members":
        if verb == "list":
            return Call("get", collection)
        if verb == "create":
            return Call("post", collection, {"username": "nell.new", "role": "owner"})
        member = (
            Membership.objects.filter(project_id=project_id)
            .exclude(role=Role.SCHEDULER)
            .first()
        ) or Membership.objects.get(project_id=project_id)
        return Call("delete", f"{collection}{member.pk}/")
    if verb == "list":
        return Call("get", collection)
    if verb == "create":
        return Call("post", collection, new[resource])
    model, lookup = targets[resource]
    row = _item(model, project_id, **lookup)
    item = f"{collection}{row.pk}/"
    version = f'"{row.version}"'
    if verb == "retrieve":
        return Call("get", item)
    if verb == "update":
        return Call("put", item, changed[resource], version)
    if verb == "patch":
        return Call("patch", item, changed[resource], version)
    assert verb == "delete"
    return Call("delete", item, None, version)


def _baseline_call(verb: str, project: Project, collection: str) -> Call:
    """A published version to capture, and a baseline to read or make current."""
    from scheduling.baselines import baseline_capture
    from tests.report.conftest import publish

    version = publish(project)
    if verb == "create":
        return Call("post", collection, {"name": f"Baseline {version.number}"})
    if verb == "list":
        return Call("get", collection)
    row = baseline_capture(
        project=project, user=None, name=f"Kept {version.number}", make_current=False
    )
    if verb == "retrieve":
        return Call("get", f"{collection}{row.pk}/")
    if verb == "compare":
        return Call("get", f"{collection}{row.pk}/compare")
    assert verb == "current"
    return Call("post", f"{collection}{row.pk}/current")


@pytest.fixture
def newcomer(make_user):
    """The user that ``members.create`` adds."""
    return make_user("nell.new")


@pytest.mark.parametrize("whose", ["own", "someone_elses"])
@pytest.mark.parametrize("who", [*ROLES, "outsider"])
@pytest.mark.parametrize("endpoint", list(MATRIX))
def test_role_matrix(endpoint, who, whose, clients, project, other_project, newcomer):
    target = project if whose == "own" else other_project
    call = build_call(endpoint, target["id"])
    before = Project.objects.get(pk=target["id"]).revision
    headers = {"HTTP_IF_MATCH": call.if_match} if call.if_match else {}
    send = getattr(clients[who], call.method)
    if call.body is None:
        answer = send(call.path, **headers)
    else:
        answer = send(call.path, call.body, format="json", **headers)
    want = expected(endpoint, who, whose)
    assert answer.status_code == want, answer.content[:500]
    if want >= 400:
        err = error_of(answer)
        assert err["code"] == ("forbidden" if want == FORBIDDEN else "not_found")
        # A refused write changes nothing.
        assert Project.objects.get(pk=target["id"]).revision == before


def test_a_refused_answer_does_not_tell_whether_a_project_exists(
    clients, other_project
):
    """Someone else's project and a project that never existed look the same."""
    outsider = clients["outsider"]
    real = outsider.get(f"/api/v1/projects/{other_project['id']}/network")
    missing = outsider.get("/api/v1/projects/999999/network")
    assert real.status_code == missing.status_code == HIDDEN
    assert real.json() == missing.json()


def test_rows_of_another_project_are_404_under_ones_own(
    clients, project, other_project
):
    """An id from someone else's project does not reach their row."""
    theirs = Activity.objects.get(project_id=other_project["id"], key="DIG")
    planner = clients["scheduler"]
    path = url(project, f"activities/{theirs.pk}/")
    assert planner.get(path).status_code == HIDDEN
    changed = planner.patch(
        path, {"duration": 9}, format="json", HTTP_IF_MATCH=f'"{theirs.version}"'
    )
    assert changed.status_code == HIDDEN
    theirs.refresh_from_db()
    assert theirs.duration == 2
