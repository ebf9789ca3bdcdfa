"""Fuzzing the published OpenAPI schema with schemathesis.

Every operation gets a bounded, derandomised set of generated requests (the
examples, coverage and fuzzing phases; at most 15 fuzzed examples), sent
through the WSGI application as the scheduler of a loaded project. The project
path parameter is pinned to that project, item ids mostly to its rows, and
writes to existing rows carry the row's current ETag, so that the requests
reach the validation and the services rather than stopping at 404 or 428.

Checks on every answer: no 5xx; its status is declared for the operation;
its media type, headers and body match what is declared for that status.
The tests after the fuzzing pin down, one request each, the places where the
schema once disagreed with the answers: pages declared as bare arrays, a
calendar that may be null declared as a string, and error answers that were
not declared at all.
"""

from __future__ import annotations

from contextlib import contextmanager

import pytest
import schemathesis
from django.core.cache import cache
from django.core.signals import request_finished, request_started
from django.db import close_old_connections
from hypothesis import HealthCheck, settings
from rest_framework.authtoken.models import Token
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from api.wsgi import application
from scheduling.models import Activity, Calendar, Crew, Membership, Project, Relation

pytestmark = pytest.mark.django_db

MAX_EXAMPLES = 15

CONFIG = schemathesis.Config.from_dict(
    {
        "phases": {"stateful": {"enabled": False}},
        "generation": {"max-examples": MAX_EXAMPLES},
    }
)

#: The schema as the running app serves it; cases are sent to the same app.
schema = schemathesis.openapi.from_wsgi("/api/schema/", application, config=CONFIG)

NESTED = "/api/v1/projects/{project_pk}"

ROWS = {
    "calendars": Calendar,
    "crews": Crew,
    "activities": Activity,
    "relations": Relation,
    "members": Membership,
}


@contextmanager
def _test_transaction_kept():
    """Send requests to the WSGI app without closing the test's connection.

    Django's test client does the same around each of its requests (and
    reconnects the handler afterwards, so this wraps every call, not a test).
    """
    request_started.disconnect(close_old_connections)
    request_finished.disconnect(close_old_connections)
    try:
        yield
    finally:
        request_started.connect(close_old_connections)
        request_finished.connect(close_old_connections)


@pytest.fixture
def auth(users) -> dict[str, str]:
    token, _ = Token.objects.get_or_create(user=users["scheduler"])
    return {"Authorization": f"Token {token.key}"}


def _section(operation) -> str | None:
    """The nested collection an operation is about (``activities``…), if any."""
    parts = operation.path.strip("/").split("/")
    return parts[4] if len(parts) > 4 and parts[3] == "{project_pk}" else None


def _pin(case, project_id: int) -> None:
    """Point the case at the loaded project and, for items, at one of its rows."""
    params = dict(case.path_parameters or {})
    if "project_pk" in params:
        params["project_pk"] = project_id
    elif "id" in params:
        params["id"] = project_id
    model = ROWS.get(_section(case.operation))
    if model is not None and "id" in params:
        ids = sorted(
            model.objects.filter(project_id=project_id).values_list("id", flat=True)
        )
        raw = str(params["id"])
        # Mostly a real row (chosen by the generated value), now and then the
        # generated value itself, which names no row.
        if ids and not raw.endswith("7"):
            params["id"] = ids[sum(map(ord, raw)) % len(ids)]
    case.path_parameters = params


def _if_match(case, project_id: int) -> dict[str, str]:
    """The current ETag of what a write to an existing resource changes."""
    if case.operation.method.upper() not in {"PUT", "PATCH", "DELETE"}:
        return {}
    model = ROWS.get(_section(case.operation))
    if model is None:
        revision = Project.objects.get(pk=project_id).revision
        return {"If-Match": f'"r{revision}"'}
    pk = str((case.path_parameters or {}).get("id", ""))
    row = model.objects.filter(pk=int(pk)).first() if pk.isdigit() else None
    version = getattr(row, "version", None)
    return {"If-Match": f'"{version}"'} if version is not None else {}


@schema.parametrize()
@settings(
    max_examples=MAX_EXAMPLES,
    derandomize=True,
    deadline=None,
    suppress_health_check=list(HealthCheck),
)
def test_no_operation_answers_5xx_and_every_answer_matches_the_schema(
    case, project, auth
):
    cache.clear()  # throttle counts: the token endpoint is fuzzed too
    _pin(case, project["id"])
    checks = [
        not_a_server_error,
        status_code_conformance,
        content_type_conformance,
        response_headers_conformance,
        response_schema_conformance,
    ]
    with _test_transaction_kept():
        case.call_and_validate(
            headers={**auth, **_if_match(case, project["id"])}, checks=checks
        )


def _answer(label: str, project_id: int, headers: dict[str, str], body=None):
    """Send one plain request for the operation ``label`` to its first row."""
    method, path = label.split(" ", 1)
    operation = schema[path][method]
    params = {"project_pk": project_id} if "{project_pk}" in path else {}
    if "{id}" in path:
        if "project_pk" in params:
            model = ROWS[_section(operation)]
            params["id"] = model.objects.filter(project_id=project_id).first().pk
        else:
            params["id"] = project_id
    extra = {} if body is None else {"body": body}
    case = operation.Case(path_parameters=params, **extra)
    with _test_transaction_kept():
        return case, case.call(headers=headers)


LISTS = [
    "GET /api/v1/projects/",
    *(
        f"GET {NESTED}/{section}/"
        for section in ("calendars", "crews", "activities", "relations", "members")
    ),
]


@pytest.mark.parametrize("label", LISTS)
def test_list_answers_are_pages_as_the_schema_declares(label, project, auth):
    case, answer = _answer(label, project["id"], auth)
    assert answer.status_code == 200
    case.validate_response(answer, checks=[response_schema_conformance])


@pytest.mark.parametrize("section", ["activities", "crews"])
def test_an_entry_on_the_project_calendar_matches_its_declared_schema(
    section, project, auth
):
    model = ROWS[section]
    row = model.objects.filter(project_id=project["id"], calendar=None).first()
    operation = schema[f"{NESTED}/{section}/{{id}}/"]["GET"]
    case = operation.Case(path_parameters={"project_pk": project["id"], "id": row.pk})
    with _test_transaction_kept():
        answer = case.call(headers=auth)
    assert answer.status_code == 200
    case.validate_response(answer, checks=[response_schema_conformance])


@pytest.mark.parametrize(
    ("label", "headers", "status"),
    [
        pytest.param(f"PATCH {NESTED}/activities/{{id}}/", {}, 428, id="428"),
        pytest.param(
            f"PATCH {NESTED}/activities/{{id}}/", {"If-Match": '"1"'}, 400, id="400"
        ),
        pytest.param(
            f"PATCH {NESTED}/activities/{{id}}/", {"If-Match": '"0"'}, 412, id="412"
        ),
        pytest.param(
            f"PATCH {NESTED}/activities/{{id}}/",
            {"If-Match": '"1"', "Content-Type": "text/plain"},
            415,
            id="415",
        ),
        pytest.param(
            f"GET {NESTED}/activities/{{id}}/",
            {"Authorization": "Token x"},
            401,
            id="401",
        ),
    ],
)
def test_error_answers_are_declared_in_the_schema_with_the_envelope(
    label, headers, status, project, auth
):
    # A negative duration for the 400; a valid change for the others.
    body = {"duration": -3 if status == 400 else 3}
    body = body if label.startswith("PATCH") else None
    case, answer = _answer(label, project["id"], {**auth, **headers}, body)
    assert answer.status_code == status
    case.validate_response(
        answer, checks=[status_code_conformance, response_schema_conformance]
    )
