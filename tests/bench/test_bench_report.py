"""Benchmark: the owner's status report of a generated 2,000-activity project.

Run with (PostgreSQL; the figures print on SQLite too, unchecked)::

    DATABASE_URL=postgres://postgres@127.0.0.1:5432/sitepace SECRET_KEY=… \\
        .venv/bin/python -m pytest tests/bench/test_bench_report.py --bench -s

The network of ``test_bench_api`` (40 zones × 50 trades, planned values on
every activity) is stored, published, kept as the baseline, then moved to a
data date with the work due by then recorded (finished, or started at half);
a second version is published at that data date. Timed through the Django
test client: GET report (JSON) with the report cached, GET report with
nothing cached (neither the report nor the forecast's critical path: what the
first read after a progress entry costs), and GET report?format=pdf with
nothing cached. Targets (issue): JSON p95 ≤ 300 ms cached, ≤ 1 s uncached;
PDF ≤ 5 s.
"""

from __future__ import annotations

import datetime as dt
import statistics
import time
from collections.abc import Callable

import pytest
from django.core.cache import cache
from django.db import connection
from django.db.models import F
from django.utils import timezone
from rest_framework.authtoken.models import Token
from rest_framework.test import APIClient

from scheduling import baselines, services
from scheduling.models import (
    Activity,
    ComputedSchedule,
    EntryKind,
    ProgressEntry,
    Project,
)
from tests.report.conftest import publish

from .test_bench_api import generated_network

pytestmark = [pytest.mark.bench, pytest.mark.django_db(transaction=True)]

DATA_DATE = dt.date(2027, 9, 6)
CACHED_REQUESTS = 50
UNCACHED_REQUESTS = 20
PDF_REQUESTS = 5

TARGET_CACHED_P95 = 0.300
TARGET_UNCACHED_P95 = 1.0
TARGET_PDF = 5.0


def _figures(times: list[float]) -> tuple[float, float, float]:
    ordered = sorted(times)
    p95 = ordered[max(0, round(0.95 * len(ordered)) - 1)]
    return statistics.median(ordered), p95, ordered[-1]


def _timed(
    fn: Callable[[], None], n: int, before: Callable[[], None] | None = None
) -> tuple[float, float, float]:
    times = []
    for _ in range(n):
        if before is not None:
            before()
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return _figures(times)


def _progress(project: Project, user, version) -> int:
    """Entries for the work the baseline had due before the data date: the
    finished part finished on its dates, the rest started at half (stored in
    one insert: the report reads entries, it does not check them)."""
    ids = dict(Activity.objects.filter(project=project).values_list("key", "id"))
    now = timezone.now()
    rows = []
    for a in version.document["activities"]:
        start, finish = a["early_start"], a["early_finish"]
        if start >= DATA_DATE.isoformat():
            continue
        done = finish < DATA_DATE.isoformat()
        rows.append(
            ProgressEntry(
                project=project,
                activity_id=ids[a["key"]],
                activity_key=a["key"],
                kind=EntryKind.RECORD,
                actual_start=dt.date.fromisoformat(start),
                actual_finish=dt.date.fromisoformat(finish) if done else None,
                percent_complete=100 if done else 50,
                actual_cost=(a.get("planned_value") or 0) * 1.05,
                recorded_by=user,
                recorded_at=now,
            )
        )
    ProgressEntry.objects.bulk_create(rows, batch_size=500)
    Project.objects.filter(pk=project.pk).update(
        progress_revision=F("progress_revision") + 1
    )
    return len(rows)


def test_report_speed_on_a_2000_activity_project(django_user_model):
    user = django_user_model.objects.create_user("bench.owner", password="x" * 12)
    token = Token.objects.create(user=user).key
    client = APIClient()
    client.credentials(HTTP_AUTHORIZATION=f"Token {token}")

    doc = generated_network()
    assert len(doc["activities"]) == 2000
    project = services.project_create(
        user=user, name="Bench report", start=dt.date(2027, 3, 1)
    )
    project = services.network_replace(
        project=project, document=doc, expected_revision=project.revision
    )
    first = publish(project)
    baselines.baseline_capture(project=project, user=user, name="Bench baseline")
    project.refresh_from_db()
    project = services.project_update(
        project=project,
        values={"data_date": DATA_DATE},
        expected_revision=project.revision,
    )
    entries = _progress(project, user, first)
    project.refresh_from_db()
    publish(project)

    path = f"/api/v1/projects/{project.pk}/report"

    def get(query: str = "") -> Callable[[], None]:
        def fetch() -> None:
            answer = client.get(path + query)
            assert answer.status_code == 200, answer.content[:300]

        return fetch

    def uncache() -> None:
        cache.clear()
        ComputedSchedule.objects.filter(project=project).delete()

    get()()  # warm: imports, the first connection
    body = client.get(path).json()
    rows = [
        ("JSON, cached", *_timed(get(), CACHED_REQUESTS), TARGET_CACHED_P95),
        (
            "JSON, uncached",
            *_timed(get(), UNCACHED_REQUESTS, uncache),
            TARGET_UNCACHED_P95,
        ),
        ("PDF, uncached", *_timed(get("?format=pdf"), PDF_REQUESTS, uncache), None),
        ("CSV zip, cached", *_timed(get("?format=csv"), PDF_REQUESTS), None),
    ]
    pdf_bytes = len(client.get(path + "?format=pdf").content)
    ev = body["earned_value"]
    lines = [
        "",
        f"Report benchmark on {connection.vendor}: {len(doc['activities'])} "
        f"activities, {len(doc['relations'])} relations, {entries} activities "
        f"with progress, data date {DATA_DATE}",
        f"  critical and near-critical: {len(body['critical']['activities'])}; "
        f"crew-load weeks: {len(body['crew_load']['weeks'])}; SPI "
        f"{ev['spi']}, CPI {ev['cpi']}, SPI(t) {body['earned_schedule']['spi_t']}; "
        f"PDF {pdf_bytes / 1024:.0f} KiB",
        f"  {'request':<18} {'median ms':>10} {'p95 ms':>8} {'max ms':>8}  target",
    ]
    for what, median, p95, worst, target in rows:
        want = (
            f"p95 <= {target * 1000:.0f}"
            if target
            else (f"each <= {TARGET_PDF * 1000:.0f}" if "PDF" in what else "")
        )
        lines.append(
            f"  {what:<18} {median * 1000:10.1f} {p95 * 1000:8.1f} "
            f"{worst * 1000:8.1f}  {want}"
        )
    if connection.vendor != "postgresql":
        lines.append("  (the targets are for PostgreSQL; not checked on this database)")
    print("\n".join(lines))
    if connection.vendor != "postgresql":
        return
    for what, _, p95, worst, target in rows:
        if target is not None:
            assert p95 <= target, what
        elif "PDF" in what:
            assert worst <= TARGET_PDF, what
