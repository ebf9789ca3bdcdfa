"""Baselines: published schedules kept as the yardstick, and comparisons.

A baseline is captured from one published schedule version (by default the
latest) by a scheduler, under a name of their choosing, and never changes
afterwards; one baseline per project is *current*, the one the status report
measures against. Variances are working days of the project's calendar,
positive when the compared schedule is later than the baseline.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from django.db import IntegrityError, transaction

from scheduling.engine import Problem
from scheduling.engine.calendars import WorkCalendar, calendars_from_document
from scheduling.engine.earned import Workdays

from .bridge import network_document
from .errors import Conflict, Invalid, NotFound
from .models import Baseline, Project, ScheduleVersion

NAME_LONGEST = 100


def plan_dates(schedule: dict[str, Any]) -> dict[str, tuple[str, str]]:
    """Key → (start, finish) a schedule document plans: levelled dates when it
    has them, else early dates (ISO dates, finish inclusive)."""
    return {
        a["key"]: (
            a.get("start") or a["early_start"],
            a.get("finish") or a["early_finish"],
        )
        for a in schedule["activities"]
    }


def project_calendar(document: dict[str, Any], key: str | None = None) -> WorkCalendar:
    """The engine calendar named ``key`` (default: the project's) of a network
    document."""
    key = key or document["project"].get("calendar")
    found = calendars_from_document(document).get(key or "")
    if found is not None:
        return found
    # The project's own calendar was deleted since: count plain weekdays.
    return WorkCalendar.from_names("weekdays", ["mon", "tue", "wed", "thu", "fri"])


def workdays_for(
    document: dict[str, Any], dates: list[dt.date], calendar: str | None = None
) -> Workdays:
    """Working-day positions spanning ``dates`` (with a year's margin)."""
    cal = project_calendar(document, calendar)
    first = min(dates, default=dt.date.fromisoformat(document["project"]["start"]))
    last = max(dates, default=first)
    return Workdays.build(
        cal, first - dt.timedelta(days=366), last + dt.timedelta(days=366)
    )


def _name_problems(name: Any) -> list[Problem]:
    if not isinstance(name, str) or not name.strip():
        return [Problem("/name", "required", "give the baseline a name")]
    if len(name) > NAME_LONGEST:
        return [
            Problem(
                "/name", "too_long", f"the name is longer than {NAME_LONGEST} letters"
            )
        ]
    return []


def baseline_capture(
    *,
    project: Project,
    user: Any,
    name: str,
    version: int | None = None,
    make_current: bool = True,
) -> Baseline:
    """Keep a published schedule version (default: the latest) as a baseline.

    The baseline copies, per activity, the version's planned dates, and the
    duration and planned value the network has now (the network the version
    was computed from when it is up to date). ``make_current`` makes it the
    current baseline in the same transaction.
    """
    problems = _name_problems(name)
    if problems:
        raise Invalid("the baseline cannot be captured: give it a name", problems)
    name = name.strip()
    versions = ScheduleVersion.objects.filter(project=project)
    chosen = (
        versions.filter(number=version).first()
        if version is not None
        else versions.order_by("-number").first()
    )
    if chosen is None:
        what = f"no schedule version {version}" if version is not None else None
        raise Invalid(
            f"the baseline cannot be captured: {what or 'nothing is published yet'}",
            [
                Problem(
                    "/version",
                    "no_version",
                    what or "publish a schedule (a run) before capturing a baseline",
                )
            ],
        )
    document = network_document(project)
    rows = {a["key"]: a for a in document["activities"]}
    planned = plan_dates(chosen.document)
    activities = {}
    for entry in chosen.document["activities"]:
        key = entry["key"]
        start, finish = planned[key]
        row = rows.get(key) or {}
        activities[key] = {
            "name": entry.get("name", ""),
            "start": start,
            "finish": finish,
            "duration": entry["duration"],
            "planned_value": row.get("planned_value", entry.get("planned_value")),
            "calendar": entry.get("calendar"),
        }
    starts = [v["start"] for v in activities.values()]
    try:
        with transaction.atomic():
            if make_current:
                Baseline.objects.filter(project=project, current=True).update(
                    current=False
                )
            return Baseline.objects.create(
                project=project,
                name=name,
                version=chosen,
                captured_by=user if getattr(user, "pk", None) else None,
                current=make_current,
                start=min(starts),
                finish=chosen.finish,
                data_date=chosen.data_date,
                calendar=chosen.document["project"].get("calendar") or "",
                activities=activities,
            )
    except IntegrityError:
        if Baseline.objects.filter(project=project, name=name).exists():
            raise Conflict(
                f"a baseline named {name!r} exists already; baselines never change",
                [Problem("/name", "duplicate_name", f"{name!r} is taken")],
            ) from None
        raise


def baseline_set_current(*, baseline: Baseline) -> Baseline:
    """Make ``baseline`` the project's current baseline (and no other)."""
    with transaction.atomic():
        Project.objects.select_for_update().filter(pk=baseline.project_id).first()
        Baseline.objects.filter(project_id=baseline.project_id, current=True).exclude(
            pk=baseline.pk
        ).update(current=False)
        Baseline.objects.filter(pk=baseline.pk).update(current=True)
    baseline.refresh_from_db()
    return baseline


def baselines_list(*, project: Project) -> Any:
    """The project's baselines, newest first, without their activities."""
    return (
        Baseline.objects.filter(project=project)
        .select_related("version", "captured_by")
        .defer("activities")
        .order_by("-id")
    )


#: The largest id or number a lookup sends to the database (a 32-bit integer).
LARGEST = 2**31 - 1


def baseline_get(*, project: Project, baseline_id: Any) -> Baseline:
    try:
        pk = int(baseline_id)
        if not 1 <= pk <= LARGEST:
            raise ValueError(pk)
        return Baseline.objects.select_related("version", "captured_by").get(
            project=project, pk=pk
        )
    except (Baseline.DoesNotExist, TypeError, ValueError):
        raise NotFound(f"no baseline {baseline_id} in this project") from None


def baseline_current_get(*, project: Project) -> Baseline | None:
    return Baseline.objects.filter(project=project, current=True).first()


def baseline_compare(
    *, project: Project, baseline: Baseline, version: Any = None
) -> dict[str, Any]:
    """Per activity: the baseline's dates against a published version's.

    ``version`` is a version number (default: the latest published). Start
    and finish variances are working days of the project calendar, positive
    when the version is later. Activities only in one of the two are listed
    with the other side empty.
    """
    if version is None or version == "":
        chosen = (
            ScheduleVersion.objects.filter(project=project).order_by("-number").first()
        )
        if chosen is None:
            raise NotFound("nothing is published yet to compare with")
    else:
        try:
            number = int(version)
        except (TypeError, ValueError):
            raise Invalid(
                "version must be a whole number",
                [Problem("/version", "not_a_number", f"{version!r} is no number")],
            ) from None
        chosen = (
            ScheduleVersion.objects.filter(project=project, number=number).first()
            if 1 <= number <= LARGEST
            else None
        )
        if chosen is None:
            raise NotFound(f"no schedule version {number} in this project")
    planned = plan_dates(chosen.document)
    names = {a["key"]: a.get("name", "") for a in chosen.document["activities"]}
    base = baseline.activities
    every = [dt.date.fromisoformat(d) for pair in planned.values() for d in pair]
    every += [dt.date.fromisoformat(v["finish"]) for v in base.values()]
    days = workdays_for(
        network_document(project, states={}), every, baseline.calendar or None
    )
    rows = []
    for key in [*base, *(k for k in planned if k not in base)]:
        was = base.get(key)
        now = planned.get(key)
        row: dict[str, Any] = {
            "key": key,
            "name": (was or {}).get("name") or names.get(key, ""),
            "baseline_start": was["start"] if was else None,
            "baseline_finish": was["finish"] if was else None,
            "start": now[0] if now else None,
            "finish": now[1] if now else None,
            "start_variance": None,
            "finish_variance": None,
        }
        if was and now:
            row["start_variance"] = days.variance(
                dt.date.fromisoformat(was["start"]), dt.date.fromisoformat(now[0])
            )
            row["finish_variance"] = days.variance(
                dt.date.fromisoformat(was["finish"]), dt.date.fromisoformat(now[1])
            )
        rows.append(row)
    return {
        "baseline": baseline.pk,
        "baseline_name": baseline.name,
        "version": chosen.number,
        "baseline_finish": baseline.finish.isoformat(),
        "finish": chosen.finish.isoformat(),
        "finish_variance": days.variance(baseline.finish, chosen.finish),
        "unit": "working days of the project calendar; positive is later",
        "activities": rows,
    }
