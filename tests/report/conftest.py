"""Fixtures of the report tests: the demo project, published versions, entries.

Published versions are stored the way the worker's publishing step stores
them (the critical path of the current network and progress, with the change
summary against the version before), without a worker process: the report
reads versions, it does not make them.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path
from typing import Any

import pytest
from django.utils import timezone

from scheduling import progress_entries, runs, services
from scheduling.bridge import network_document
from scheduling.models import Project, Run, RunKind, RunState, ScheduleVersion
from tests.api.conftest import (  # noqa: F401 (fixtures used by the tests here)
    _fast_passwords,
    _fresh_throttle_counts,
    clients,
    make_user,
    other_project,
    project,
    users,
)

DEMO = Path(__file__).resolve().parents[2] / "seed_data" / "demo_network.json"


def demo_document() -> dict[str, Any]:
    return json.loads(DEMO.read_text())


def publish(proj: Project, origin: str = "request") -> ScheduleVersion:
    """A published critical-path version of the project as it is now."""
    proj.refresh_from_db()
    schedule = services.schedule_cpm_get(project=proj)
    last = proj.versions.order_by("-number").first()
    finish = dt.date.fromisoformat(schedule["project"]["finish"])
    run = Run.objects.create(
        project=proj,
        kind=RunKind.CPM,
        origin=origin,
        nightly_for=(proj.data_date or timezone.now().date())
        if origin == "nightly"
        else None,
        state=RunState.PUBLISHED,
        revision=proj.revision,
        finished_at=timezone.now(),
    )
    document = network_document(proj)
    return ScheduleVersion.objects.create(
        project=proj,
        number=(last.number + 1) if last else 1,
        run=run,
        kind=RunKind.CPM,
        revision=proj.revision,
        data_date=proj.data_date,
        progress=runs._progress_of(document),
        finish=finish,
        document=schedule,
        changes=runs.changes_between(last, schedule, finish, {}),
    )


def set_data_date(proj: Project, day: dt.date) -> Project:
    proj.refresh_from_db()
    return services.project_update(
        project=proj,
        values={"data_date": day},
        expected_revision=proj.revision,
    )


def record(proj: Project, user: Any, key: str, monkeypatch, **values: Any) -> None:
    """One progress entry through the service, with the site's clock set to
    the project's data date (the demo lies in the future)."""
    proj.refresh_from_db()
    day = proj.data_date
    assert day is not None
    now = dt.datetime.combine(day, dt.time(12), tzinfo=dt.UTC)
    with monkeypatch.context() as m:
        m.setattr(timezone, "now", lambda: now)
        progress_entries.progress_record(
            project=proj,
            user=user,
            values={"activity": key, **values},
            idempotency_key=None,
            render=lambda entry, state: {"id": entry.pk},
        )


@pytest.fixture
def demo(users) -> Project:  # noqa: F811 (the imported fixture)
    """The demo project, scheduled by ``scheduler``, with an owner and a site
    manager."""
    proj = services.project_create(
        user=users["scheduler"], name="Birkenwend Yard", start=dt.date(2027, 3, 1)
    )
    proj = services.network_replace(
        project=proj, document=demo_document(), expected_revision=proj.revision
    )
    services.member_add(project=proj, username=users["owner"].username, role="owner")
    services.member_add(
        project=proj, username=users["site_manager"].username, role="site_manager"
    )
    return proj
