"""Real worker processes on Redis and PostgreSQL, driven through the API.

Each test commits its rows (``transaction=True``) so that the worker, another
process, reads them; the web side is this process's Django test client, whose
Celery app publishes to the same Redis (with this session's key prefix).
"""

from __future__ import annotations

import threading
import time

import pytest

from scheduling import runs
from scheduling.models import Run, RunState, ScheduleVersion
from tests.api.conftest import create_project, error_of, token_client, url, workshop
from tests.worker.conftest import wait_for
from tests.worker.networks import crowded

pytestmark = pytest.mark.django_db(transaction=True)


def levelling_workshop():
    network = workshop()
    for activity in network["activities"]:
        activity["deadline"] = None  # see test_runs_api.levelling_workshop
    return network


def run_of(client, project, run_id):
    got = client.get(url(project, f"runs/{run_id}"))
    assert got.status_code == 200, got.content
    return got.json()


def finished(client, project, run_id):
    run = run_of(client, project, run_id)
    return run if run["state"] not in ("waiting", "working") else None


def test_a_levelling_run_end_to_end_with_progress_and_the_published_schedule(
    postgres, redis_url, broker, start_worker, clients
):
    broker(redis_url)
    start_worker(redis_url)
    planner = clients["scheduler"]
    project = create_project(planner, "Generated depot", crowded(120))
    got = planner.post(
        url(project, "runs/"), {"kind": "level", "time_limit": 4}, format="json"
    )
    assert got.status_code == 202, got.content
    run_id = got.json()["id"]
    seen = []

    def progress():
        run = run_of(planner, project, run_id)
        if run["state"] == "working" and run["progress"]["best_finish"]:
            seen.append(run["progress"])
        return run["state"] not in ("waiting", "working") and run

    run = wait_for(progress, 60, "the run to finish")
    assert run["state"] == "published", run
    assert seen, "progress was visible while the solver worked"
    assert all(p["bound"] <= p["best_finish"] for p in seen)
    schedule = planner.get(url(project, "schedule")).json()
    assert schedule["published"]["version"] == 1
    assert schedule["published"]["run"] == run_id
    assert schedule["levelling"]["finish"] == run["progress"]["best_finish"]
    assert len(schedule["activities"]) == 120


def test_a_worker_killed_mid_run_the_run_is_delivered_again_and_readers_see_whole_versions(  # noqa: E501
    postgres, redis_url, broker, start_worker, clients, users
):
    broker(redis_url)
    first = start_worker(redis_url)
    planner = clients["scheduler"]
    project = create_project(planner, "Generated depot", crowded(120))
    # Version 1: the critical path, published by the worker.
    cpm = planner.post(url(project, "runs/"), {"kind": "cpm"}, format="json").json()
    assert wait_for(lambda: finished(planner, project, cpm["id"]), 60, "the cpm run")[
        "state"
    ] == ("published")
    v1 = ScheduleVersion.objects.get(project_id=project["id"], number=1).document

    answers: list[dict] = []
    stop = threading.Event()

    def read_schedule():
        from django.db import connection

        client = token_client(users["scheduler"])  # a client of its own
        try:
            while not stop.is_set():
                doc = client.get(url(project, "schedule")).json()
                answers.append(doc)
                time.sleep(0.1)
        finally:
            connection.close()

    level = planner.post(
        url(project, "runs/"), {"kind": "level", "time_limit": 5}, format="json"
    ).json()
    reader = threading.Thread(target=read_schedule)
    reader.start()
    try:
        wait_for(
            lambda: run_of(planner, project, level["id"])["progress"]["best_finish"],
            60,
            "progress of the levelling",
        )
        assert run_of(planner, project, level["id"])["state"] == "working"
        first.kill()
        start_worker(redis_url)
        run = wait_for(
            lambda: finished(planner, project, level["id"]), 90, "the redelivery"
        )
    finally:
        stop.set()
        reader.join()
    assert run["state"] == "published", run
    assert run["attempts"] == 2, "the second worker took the run over"
    assert run["version"] == 2
    v2 = ScheduleVersion.objects.get(project_id=project["id"], number=2).document
    # Every answer was one whole version: version 1 until version 2 was there.
    numbers = [a["published"]["version"] for a in answers]
    assert numbers[0] == 1 and numbers == sorted(numbers), numbers
    for answer in answers:
        body = {k: v for k, v in answer.items() if k != "published"}
        assert body == (v1 if answer["published"]["version"] == 1 else v2)
    assert ScheduleVersion.objects.filter(project_id=project["id"]).count() == 2


def test_the_same_run_delivered_twice_publishes_once(
    postgres, redis_url, broker, start_worker, clients
):
    broker(redis_url)
    start_worker(redis_url, concurrency=2)
    planner = clients["scheduler"]
    project = create_project(planner, "Garden workshop", levelling_workshop())
    run_id = planner.post(
        url(project, "runs/"), {"kind": "level", "time_limit": 2}, format="json"
    ).json()["id"]
    runs.run_send(run_id=run_id, task_id="second-delivery")
    run = wait_for(lambda: finished(planner, project, run_id), 60, "the run")
    assert run["state"] == "published"
    runs.run_send(run_id=run_id, task_id="third-delivery")
    time.sleep(3)  # time for the worker to take the third message
    assert ScheduleVersion.objects.filter(project_id=project["id"]).count() == 1
    assert Run.objects.get(pk=run_id).attempts == 1


def test_redis_stopped_posts_answer_503_reads_go_on_and_runs_work_when_it_is_back(
    postgres, private_redis, broker, start_worker, clients, users
):
    broker(private_redis.url)
    start_worker(private_redis.url)
    planner, owner = clients["scheduler"], clients["owner"]
    project = create_project(planner, "Garden workshop", levelling_workshop())
    planner.post(
        url(project, "members/"),
        {"username": users["owner"].username, "role": "owner"},
        format="json",
    )
    first = planner.post(url(project, "runs/"), {"kind": "cpm"}, format="json").json()
    assert wait_for(lambda: finished(planner, project, first["id"]), 60, "run")[
        "state"
    ] == ("published")
    schedule_before = planner.get(url(project, "schedule")).json()
    network_before = planner.get(url(project, "network")).json()

    private_redis.stop()
    refused = planner.post(
        url(project, "runs/"), {"kind": "level", "time_limit": 2}, format="json"
    )
    assert refused.status_code == 503
    assert int(refused["Retry-After"]) > 0
    assert "again" in error_of(refused)["message"]
    # Reads and progress go on; nothing stored is lost or left half-done.
    assert owner.get(url(project, "schedule")).json() == schedule_before
    assert planner.get(url(project, "network")).json() == network_before
    assert run_of(owner, project, first["id"])["state"] == "published"
    assert not Run.objects.filter(state__in=[RunState.WAITING, RunState.WORKING])

    private_redis.start()
    again = planner.post(
        url(project, "runs/"), {"kind": "level", "time_limit": 2}, format="json"
    )
    assert again.status_code == 202, again.content
    run = wait_for(
        lambda: finished(planner, project, again.json()["id"]), 90, "a new run"
    )
    assert run["state"] == "published"
    assert planner.get(url(project, "schedule")).json()["published"]["version"] == 2
