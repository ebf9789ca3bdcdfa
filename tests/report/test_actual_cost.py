"""Actual cost on progress entries, and the cost measures of the report.

The expected figures are worked out here by plain arithmetic from the entries
and the planned values (formulas: PMI Practice Standard for EVM).
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.utils import timezone

from scheduling import baselines, report, services
from scheduling.models import ProgressEntry
from tests.api.conftest import error_of, token_client

from .conftest import demo_document, publish, set_data_date
from .test_report_figures import busdays, next_day

pytestmark = pytest.mark.django_db

DAY = dt.date(2027, 3, 22)
#: Planned value per working day of duration, for every activity.
RATE = 1000


@pytest.fixture
def costed(demo, users, monkeypatch):
    """The demo with planned values, a baseline and the site clock on DAY."""
    document = demo_document()
    for a in document["activities"]:
        a["planned_value"] = a["duration"] * RATE
    demo.refresh_from_db()
    demo = services.network_replace(
        project=demo, document=document, expected_revision=demo.revision
    )
    publish(demo)
    baselines.baseline_capture(project=demo, user=users["scheduler"], name="Budget")
    demo = set_data_date(demo, DAY)
    now = dt.datetime.combine(DAY, dt.time(12), tzinfo=dt.UTC)
    monkeypatch.setattr(timezone, "now", lambda: now)
    return demo


def post(project, client, **body):
    return client.post(f"/api/v1/projects/{project.pk}/progress/", body, format="json")


def test_the_latest_actual_cost_wins_and_the_report_sums_them(costed, users):
    site = token_client(users["site_manager"])
    first = post(
        costed, site, activity="SITE-SETUP", actual_start="2027-03-01",
        percent_complete=50, actual_cost=3000,
    )  # fmt: skip
    assert first.status_code == 201, first.content[:300]
    assert first.json()["actual_cost"] == 3000
    assert first.json()["state"]["actual_cost"] == 3000
    # A cost alone is an entry; the later one replaces the earlier.
    again = post(costed, site, activity="SITE-SETUP", actual_cost="5200.50")
    assert again.status_code == 201, again.content[:300]
    assert again.json()["state"]["actual_cost"] == 5200.5
    assert again.json()["state"]["percent_complete"] == 50
    post(
        costed, site, activity="SITE-POWER", actual_start="2027-03-01",
        actual_finish="2027-03-04", actual_cost=4100,
    )  # fmt: skip
    costed.refresh_from_db()
    got = report.report_build(project=costed, use_cache=False)["earned_value"]

    durations = {a["key"]: a["duration"] for a in demo_document()["activities"]}
    bac = RATE * sum(durations.values())
    ev = RATE * (durations["SITE-SETUP"] * 0.5 + durations["SITE-POWER"])
    ac = 5200.50 + 4100
    # PV: each activity's value spread evenly over its baseline working days
    # (numpy's busday_count on the project calendar counts them).
    version = costed.versions.get(number=1)
    pv = 0.0
    for a in version.document["activities"]:
        n = busdays(a["early_start"], next_day(a["early_finish"]))
        done = busdays(a["early_start"], DAY)
        if n > 0:
            pv += RATE * a["duration"] * min(max(done / n, 0.0), 1.0)
        elif done >= 1:
            pv += RATE * a["duration"]
    assert got["pv"] == pytest.approx(pv, abs=0.01)
    assert got["basis"] == "planned_value" and got["ac_reason"] is None
    assert (got["bac"], got["ev"], got["ac"]) == (bac, ev, ac)
    cpi, spi = ev / ac, ev / pv
    assert got["cv"] == pytest.approx(ev - ac, abs=0.01)
    assert got["cpi"] == pytest.approx(cpi, abs=1e-4)
    assert got["eac"] == pytest.approx(bac / cpi, abs=0.01)
    assert got["eac_budget_rate"] == pytest.approx(ac + bac - ev, abs=0.01)
    assert got["eac_cpi_spi"] == pytest.approx(ac + (bac - ev) / (cpi * spi), abs=0.01)
    assert got["tcpi"] == pytest.approx((bac - ev) / (bac - ac), abs=1e-4)
    assert got["vac"] == pytest.approx(bac - bac / cpi, abs=0.01)
    pc = report.report_build(project=costed, use_cache=False)["percent_complete"]
    assert pc["by_value"] == pytest.approx(100 * ev / bac, abs=0.01)


@pytest.mark.parametrize("cost", [-1, "abc", "1e15", "12.345", "NaN", "Infinity", True])
def test_a_bad_actual_cost_names_the_field_and_stores_nothing(cost, costed, users):
    site = token_client(users["site_manager"])
    before = ProgressEntry.objects.count()
    answer = post(costed, site, activity="SITE-SETUP", actual_cost=cost)
    assert answer.status_code == 400, answer.content[:300]
    err = error_of(answer)
    assert [p["pointer"] for p in err["problems"]] == ["/actual_cost"]
    assert ProgressEntry.objects.count() == before


def test_cost_against_duration_weighted_value_is_left_out_with_a_reason(
    demo, users, monkeypatch
):
    publish(demo)
    baselines.baseline_capture(project=demo, user=users["scheduler"], name="Plain")
    demo = set_data_date(demo, DAY)
    now = dt.datetime.combine(DAY, dt.time(12), tzinfo=dt.UTC)
    monkeypatch.setattr(timezone, "now", lambda: now)
    site = token_client(users["site_manager"])
    made = post(demo, site, activity="SITE-POWER", actual_cost=800)
    assert made.status_code == 201
    demo.refresh_from_db()
    got = report.report_build(project=demo, use_cache=False)["earned_value"]
    assert got["basis"] == "duration"
    assert got["ac"] is None and got["cpi"] is None and got["eac"] is None
    assert "working days" in got["ac_reason"]
