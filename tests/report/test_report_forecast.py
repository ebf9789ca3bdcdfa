"""Which forecast the report measures: the levelled schedule while it is
current, else the critical path of the current network and progress."""

from __future__ import annotations

import datetime as dt

import pytest

from scheduling import report, runs, services
from scheduling.baselines import baseline_capture
from scheduling.models import ScheduleVersion

from .conftest import publish

# The levelling runs in this process as the worker would run it; its watcher
# thread has a connection of its own and must see the run: committed rows.
pytestmark = pytest.mark.django_db(transaction=True)


def level_now(project, user) -> ScheduleVersion:
    run = runs.run_queue(
        project=project, user=user, kind="level", time_limit=10, dispatch=False
    )
    outcome = runs.run_execute(run_id=run.pk)
    assert "published" in outcome, outcome
    return ScheduleVersion.objects.get(run=run)


def test_a_current_levelled_version_is_the_forecast(demo, users):
    levelled = level_now(demo, users["scheduler"])
    demo.refresh_from_db()
    doc = levelled.document
    got = report.report_build(project=demo, use_cache=False)
    fin = got["finish"]
    assert fin["forecast_basis"] == "levelled"
    assert fin["forecast_version"] == levelled.number
    assert fin["forecast"] == doc["levelling"]["finish"] == levelled.finish.isoformat()
    # The crews push the finish past the critical path's on the demo.
    cpm = services.forecast_get(project=demo)["project"]["finish"]
    assert fin["critical_path_finish"] == cpm < fin["forecast"]
    assert [s["key"] for s in fin["driving_path"]] == [
        s["key"] for s in doc["levelling"]["critical_path"]
    ]
    by_key = {a["key"]: a for a in doc["activities"]}
    for step in fin["driving_path"]:
        assert (step["start"], step["finish"]) == (
            by_key[step["key"]]["start"],
            by_key[step["key"]]["finish"],
        )
    # Critical and near-critical work by the crew-aware float.
    listed = {r["key"]: r for r in got["critical"]["activities"]}
    expected = {
        k
        for k, a in by_key.items()
        if a["level_total_float"] <= got["critical"]["threshold"]
    }
    assert set(listed) == expected
    assert all(
        listed[k]["critical"] == bool(by_key[k]["level_critical"]) for k in listed
    )
    milestones = {m["key"]: m for m in got["milestones"]}
    assert milestones["M-HANDOVER"]["forecast"] == by_key["M-HANDOVER"]["finish"]


def test_against_a_levelled_baseline_the_levelled_forecast_holds_it(demo, users):
    """The critical path alone would look weeks ahead of a levelled baseline;
    measured levelled against levelled, the variance is 0."""
    level_now(demo, users["scheduler"])
    baseline_capture(project=demo, user=users["scheduler"], name="Contract")
    demo.refresh_from_db()
    fin = report.report_build(project=demo, use_cache=False)["finish"]
    assert fin["variance_to_baseline"] == 0
    assert "holds the baseline" in fin["reason"]


def test_after_a_network_change_the_forecast_is_the_critical_path_again(demo, users):
    level_now(demo, users["scheduler"])
    demo = services.project_update(
        project=demo,
        values={"deadline": dt.date(2029, 1, 31)},
        expected_revision=demo.revision,
    )
    fin = report.report_build(project=demo, use_cache=False)["finish"]
    assert fin["forecast_basis"] == "critical_path"
    assert fin["forecast_version"] is None
    assert fin["forecast"] == services.forecast_get(project=demo)["project"]["finish"]


def test_a_critical_path_version_leaves_the_critical_path_forecast(demo, users):
    publish(demo)
    demo.refresh_from_db()
    fin = report.report_build(project=demo, use_cache=False)["finish"]
    assert fin["forecast_basis"] == "critical_path"
    assert fin["forecast"] == fin["critical_path_finish"]
