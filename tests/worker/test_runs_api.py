"""Runs and schedule versions through the API, with the worker's job done here.

These tests need no broker server: messages go to kombu's in-memory
transport, where no worker takes them, and the worker's job
(``runs.run_execute``) is called in this process, as a worker would call it.
They commit (``transaction=True``) because the run's watcher thread writes
progress on its own database connection, as it does in a worker. The worker
processes themselves are tested in ``test_worker_process.py``.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.core.management import call_command
from django.core.management.base import CommandError

from scheduling import runs
from scheduling.engine import SITE_CAUTION
from scheduling.models import (
    Activity,
    Project,
    Relation,
    Run,
    RunState,
    ScheduleVersion,
)
from tests.api.conftest import create_project, error_of, url, workshop

pytestmark = pytest.mark.django_db(transaction=True)


@pytest.fixture(autouse=True)
def _memory_broker(broker):
    broker("memory://")


def levelling_workshop():
    """The API tests' workshop without the handover deadline: the levelling
    fails on an activity deadline later than its own finish tables (an
    IndexError in ``late_positions``, reported to the engine's owner)."""
    network = workshop()
    for activity in network["activities"]:
        activity["deadline"] = None
    return network


@pytest.fixture
def project(clients, users):
    planner = clients["scheduler"]
    made = create_project(planner, "Garden workshop", levelling_workshop())
    for role in ("owner", "site_manager"):
        added = planner.post(
            url(made, "members/"),
            {"username": users[role].username, "role": role},
            format="json",
        )
        assert added.status_code == 201, added.content
    return made


def queue(client, project, **body):
    return client.post(url(project, "runs/"), body, format="json")


def test_post_runs_answers_202_with_a_waiting_run_and_its_location(clients, project):
    got = queue(clients["scheduler"], project, kind="level", time_limit=10)
    assert got.status_code == 202, got.content
    run = got.json()
    assert run["state"] == "waiting"
    assert (run["kind"], run["goal"], run["time_limit"]) == ("level", "shortest", 10.0)
    assert run["requested_by"] == "priya.planner"
    assert got["Location"] == url(project, f"runs/{run['id']}")
    again = clients["owner"].get(url(project, f"runs/{run['id']}"))
    assert again.status_code == 200
    assert again.json() == run


def test_a_second_run_while_one_is_active_is_refused_with_409_naming_it(
    clients, project
):
    first = queue(clients["scheduler"], project, kind="cpm").json()
    second = queue(clients["scheduler"], project, kind="level")
    assert second.status_code == 409
    err = error_of(second)
    assert f"run {first['id']}" in err["message"]
    assert Run.objects.filter(project_id=project["id"]).count() == 1
    # Once the first is cancelled, the project takes a new run.
    cancelled = clients["scheduler"].post(url(project, f"runs/{first['id']}/cancel"))
    assert cancelled.status_code == 200
    assert cancelled.json()["state"] == "cancelled"
    assert queue(clients["scheduler"], project, kind="level").status_code == 202


@pytest.mark.parametrize(
    ("body", "pointer"),
    [
        ({"kind": "forecast"}, "/kind"),
        ({}, "/kind"),
        ({"kind": "level", "goal": "fastest"}, "/goal"),
        ({"kind": "level", "time_limit": 0}, "/time_limit"),
        ({"kind": "level", "time_limit": 100000}, "/time_limit"),
        ({"kind": "level", "time_limit": "soon"}, "/time_limit"),
        ({"kind": "cpm", "goal": "smooth"}, "/goal"),
        ({"kind": "cpm", "stable": True}, "/stable"),
    ],
)
def test_bad_run_requests_are_400_naming_the_field_and_store_nothing(
    clients, project, body, pointer
):
    got = queue(clients["scheduler"], project, **body)
    assert got.status_code == 400, got.content
    assert pointer in [p["pointer"] for p in error_of(got)["problems"]]
    assert not Run.objects.exists()


def test_roles_schedulers_queue_and_cancel_everyone_reads_outsiders_see_nothing(
    clients, project
):
    run = queue(clients["scheduler"], project, kind="cpm").json()
    for role in ("owner", "site_manager"):
        assert queue(clients[role], project, kind="cpm").status_code == 403
        cancel = clients[role].post(url(project, f"runs/{run['id']}/cancel"))
        assert cancel.status_code == 403
        assert clients[role].get(url(project, f"runs/{run['id']}")).status_code == 200
        assert clients[role].get(url(project, "runs/")).json()["count"] == 1
        assert clients[role].get(url(project, "schedule/versions/")).status_code == 200
    for who in ("outsider", "rival"):
        assert clients[who].get(url(project, f"runs/{run['id']}")).status_code == 404
        assert queue(clients[who], project, kind="cpm").status_code == 404
    assert Run.objects.get(pk=run["id"]).state == RunState.WAITING


def test_a_run_publishes_a_version_that_get_schedule_then_answers(clients, project):
    reader = clients["owner"]
    before = reader.get(url(project, "schedule")).json()
    assert before["published"] is None  # the on-demand critical path
    run = queue(clients["scheduler"], project, kind="level", time_limit=5).json()
    outcome = runs.run_execute(run_id=run["id"])
    assert outcome == f"run {run['id']} published version 1"
    got = reader.get(url(project, f"runs/{run['id']}")).json()
    assert got["state"] == "published"
    assert got["version"] == 1
    assert got["attempts"] == 1
    assert got["revision"] == project["revision"]
    assert got["progress"]["best_finish"] is not None
    schedule = reader.get(url(project, "schedule"))
    doc = schedule.json()
    assert doc["published"]["version"] == 1
    assert doc["published"]["run"] == run["id"]
    assert doc["published"]["up_to_date"] is True
    assert doc["kind"] == "levelled"
    assert doc["levelling"]["finish"] == got["progress"]["best_finish"]
    assert doc["caution"] == SITE_CAUTION
    assert schedule["ETag"] == f'"v1-r{project["revision"]}"'
    version = ScheduleVersion.objects.get(project_id=project["id"], number=1)
    assert version.document == {k: v for k, v in doc.items() if k != "published"}


def test_a_second_delivery_of_a_finished_run_publishes_nothing_new(clients, project):
    run = queue(clients["scheduler"], project, kind="cpm").json()
    runs.run_execute(run_id=run["id"])
    again = runs.run_execute(run_id=run["id"])
    assert again == f"nothing to do: run {run['id']} is published"
    assert ScheduleVersion.objects.filter(project_id=project["id"]).count() == 1
    assert Run.objects.get(pk=run["id"]).attempts == 1


def test_a_delivery_while_a_live_worker_holds_the_run_does_nothing(clients, project):
    run = queue(clients["scheduler"], project, kind="cpm").json()
    claim = runs._claim(run["id"], "first-delivery")
    assert claim is not None
    assert runs.run_execute(run_id=run["id"]) == (
        f"nothing to do: run {run['id']} is working"
    )
    assert not ScheduleVersion.objects.exists()


def test_a_stale_claim_is_taken_over_and_the_old_worker_cannot_publish(
    clients, project, settings
):
    run = queue(clients["scheduler"], project, kind="cpm").json()
    old = runs._claim(run["id"], "first-delivery")
    gone = dt.timedelta(seconds=settings.SITEPACE_RUN_STALE_SECONDS + 1)
    Run.objects.filter(pk=run["id"]).update(
        heartbeat_at=Run.objects.get().heartbeat_at - gone
    )
    assert runs.run_execute(run_id=run["id"]).endswith("published version 1")
    stored = Run.objects.get(pk=run["id"])
    assert stored.attempts == 2
    # The first worker's claim is void: its progress and its publishing are
    # refused (the conditional update matches nothing).
    assert not Run.objects.filter(pk=run["id"], claim=old).exists()


def test_a_cancelled_run_never_publishes(clients, project):
    run = queue(clients["scheduler"], project, kind="level", time_limit=2).json()
    clients["scheduler"].post(url(project, f"runs/{run['id']}/cancel"))
    assert runs.run_execute(run_id=run["id"]) == (
        f"nothing to do: run {run['id']} is cancelled"
    )
    assert not ScheduleVersion.objects.exists()
    again = clients["scheduler"].post(url(project, f"runs/{run['id']}/cancel"))
    assert again.status_code == 409
    assert "cancelled already" in error_of(again)["message"]


def test_a_run_cancelled_while_working_stops_and_does_not_publish(clients, project):
    run = queue(clients["scheduler"], project, kind="level", time_limit=5).json()
    claim = runs._claim(run["id"], "")
    runs.run_cancel(run=Run.objects.get(pk=run["id"]))
    watch = runs._Watch(run["id"], claim)
    try:
        outcome = runs._work(Run.objects.select_related("project").get(), watch)
    except runs.RunStopped:
        outcome = "stopped by the watcher"
    finally:
        watch.stop()
    # Either the watcher noticed during the solve, or the publishing did.
    assert outcome in (
        "stopped by the watcher",
        f"run {run['id']} was not published: it is cancelled",
    )
    assert not ScheduleVersion.objects.exists()
    assert Run.objects.get(pk=run["id"]).state == RunState.CANCELLED


def test_a_network_the_engine_refuses_fails_the_run_with_its_problems(clients, project):
    run = queue(clients["scheduler"], project, kind="level", time_limit=2).json()
    # A loop written past the services (as staff could in the admin): the
    # engine refuses the network when the worker reads it.
    acts = {a.key: a for a in Activity.objects.filter(project_id=project["id"])}
    Relation.objects.create(
        project_id=project["id"], pred=acts["DONE"], succ=acts["DIG"]
    )
    outcome = runs.run_execute(run_id=run["id"])
    assert outcome == f"run {run['id']} failed: the network cannot be scheduled"
    got = clients["scheduler"].get(url(project, f"runs/{run['id']}")).json()
    assert got["state"] == "failed"
    assert got["finished_at"] is not None
    assert any("DIG" in p["message"] for p in got["problems"]), got["problems"]
    assert not ScheduleVersion.objects.exists()
    # The project is free again.
    assert queue(clients["scheduler"], project, kind="cpm").status_code == 202


def test_stable_relevelling_stores_what_changed_against_the_previous_version(
    clients, project
):
    planner = clients["scheduler"]
    first = queue(planner, project, kind="level", time_limit=5).json()
    runs.run_execute(run_id=first["id"])
    frame = Activity.objects.get(project_id=project["id"], key="FRAME")
    patched = planner.patch(
        url(project, f"activities/{frame.pk}/"),
        {"duration": 9},
        format="json",
        HTTP_IF_MATCH=f'"{frame.version}"',
    )
    assert patched.status_code == 200
    # The published version stays what readers get, marked out of date.
    doc = planner.get(url(project, "schedule")).json()
    assert doc["published"]["version"] == 1
    assert doc["published"]["up_to_date"] is False
    second = queue(planner, project, kind="level", time_limit=5, stable=True).json()
    runs.run_execute(run_id=second["id"])
    listed = planner.get(url(project, "schedule/versions/")).json()
    assert [v["number"] for v in listed["results"]] == [2, 1]
    changes = listed["results"][0]["changes"]
    v1 = ScheduleVersion.objects.get(number=1)
    v2 = ScheduleVersion.objects.get(number=2)
    assert changes["previous_version"] == 1
    assert changes["previous_finish"] == v1.finish.isoformat()
    assert changes["finish"] == v2.finish.isoformat()
    assert changes["finish_shift_days"] == (v2.finish - v1.finish).days > 0
    starts = {
        n: {a["key"]: a["start"] for a in v.document["activities"]}
        for n, v in ((1, v1), (2, v2))
    }
    moved = {m["key"]: m for m in changes["moved"]}
    assert set(moved) == {k for k in starts[2] if starts[1][k] != starts[2][k]}
    for key, m in moved.items():
        assert (m["from"], m["to"]) == (starts[1][key], starts[2][key])
        shift = dt.date.fromisoformat(m["to"]) - dt.date.fromisoformat(m["from"])
        assert m["shift_days"] == shift.days
    assert changes["caution"] == SITE_CAUTION
    detail = planner.get(url(project, "schedule/versions/2")).json()
    assert detail["document"] == v2.document
    assert detail["revision"] == project["revision"] + 1
    assert planner.get(url(project, "schedule/versions/9")).status_code == 404


def test_crew_peaks_of_a_levelled_version_count_each_working_day(clients, project):
    run = queue(clients["scheduler"], project, kind="level", time_limit=5).json()
    runs.run_execute(run_id=run["id"])
    version = ScheduleVersion.objects.get()
    # By hand from the workshop: SLAB needs both ground units on its one day,
    # the joinery crew has one unit and FRAME and ROOF share it one at a time.
    assert version.crew_peaks["ground"]["peak"] == 2
    assert version.crew_peaks["joinery"] == {
        "peak": 1,
        "date": next(
            a["start"] for a in version.document["activities"] if a["key"] == "FRAME"
        ),
        "capacity": 1,
    }
    assert version.crew_peaks["scaffold"] == {"peak": 0, "date": None, "capacity": 1}


def test_broker_down_answers_503_with_retry_after_and_leaves_no_active_run(
    clients, project, broker
):
    from tests.worker.conftest import free_port

    broker(f"redis://127.0.0.1:{free_port()}/0")  # nothing listens there
    got = queue(clients["scheduler"], project, kind="level")
    assert got.status_code == 503
    assert int(got["Retry-After"]) > 0
    err = error_of(got)
    assert "queue" in err["message"]
    run = Run.objects.get()
    assert run.state == RunState.FAILED
    assert "could not be reached" in run.error
    # Reads go on, and the project is free for the next request.
    assert clients["owner"].get(url(project, "schedule")).status_code == 200
    assert clients["owner"].get(url(project, f"runs/{run.pk}")).status_code == 200
    broker("memory://")
    assert queue(clients["scheduler"], project, kind="cpm").status_code == 202


def test_nightly_due_reads_each_projects_own_time_zone_and_hour(clients, project):
    p = Project.objects.get(pk=project["id"])
    p.time_zone, p.nightly_hour = "Pacific/Auckland", 2
    p.save()
    # 13:30 UTC on 1 June 2027 is 01:30 in Auckland (UTC+12 in winter) ...
    assert runs.nightly_due(now=dt.datetime(2027, 6, 1, 13, 30, tzinfo=dt.UTC)) == []
    # ... and 14:10 UTC is 02:10 on 2 June there.
    due = runs.nightly_due(now=dt.datetime(2027, 6, 1, 14, 10, tzinfo=dt.UTC))
    assert due == [(p, dt.date(2027, 6, 2))]
    run = runs.nightly_queue(project=p, day=dt.date(2027, 6, 2))
    assert run is not None and run.stable and run.origin == "nightly"
    runs.run_execute(run_id=run.pk)
    # One nightly run per project and local day, even after it finished.
    assert runs.nightly_due(now=dt.datetime(2027, 6, 1, 14, 40, tzinfo=dt.UTC)) == []
    assert runs.nightly_queue(project=p, day=dt.date(2027, 6, 2)) is None


def test_relevel_command_publishes_and_prints_the_change_summary(
    clients, project, capsys
):
    call_command("relevel", str(project["id"]), "--time-limit", "3")
    first = capsys.readouterr().out
    assert f"project {project['id']}" in first and "version 1" in first
    call_command("relevel", "--all", "--time-limit", "3")
    second = capsys.readouterr().out
    assert "version 2" in second and "against version 1" in second
    assert [r.origin for r in Run.objects.order_by("id")] == ["command", "command"]
    with pytest.raises(CommandError, match="no project 999"):
        call_command("relevel", "999")
    with pytest.raises(CommandError, match="name project ids or give --all"):
        call_command("relevel")


def test_runs_recover_queues_again_runs_whose_worker_was_lost(
    clients, project, settings, broker, monkeypatch
):
    run = queue(clients["scheduler"], project, kind="cpm").json()
    runs._claim(run["id"], "")
    sent = []
    monkeypatch.setattr(runs, "run_send", lambda **kw: sent.append(kw["run_id"]))
    assert runs.runs_recover() == []  # the heartbeat is fresh
    later = dt.datetime.now(dt.UTC) + dt.timedelta(
        seconds=settings.SITEPACE_RUN_STALE_SECONDS + 5
    )
    assert runs.runs_recover(now=later) == [run["id"]]
    assert sent == [run["id"]]
