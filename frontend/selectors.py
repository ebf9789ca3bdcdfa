"""What the pages show, read through the services and the bridge.

Each page reads the schedule the services publish (``schedule_get``: the
latest published schedule, or the critical path computed on demand) and the
network document (calendars, crews, demands, relations), and hands them to
the chart module. Nothing here writes.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

from django.conf import settings

from scheduling.baselines import baseline_current_get, workdays_for
from scheduling.bridge import network_document
from scheduling.engine import SITE_CAUTION
from scheduling.models import ACTIVE_STATES, Baseline, Membership, Project, Run
from scheduling.services import schedule_get

from . import charts

#: How many moved activities a change line names (largest moves first).
MOVED_SHOWN = 8


@dataclass(frozen=True)
class PageData:
    project: Project
    schedule: dict[str, Any]
    network: dict[str, Any]
    baseline: Baseline | None = None

    @property
    def levelled(self) -> bool:
        return charts.is_levelled(self.schedule)

    @property
    def baseline_dates(self) -> dict[str, tuple[dt.date, dt.date]] | None:
        """Activity key → the current baseline's (start, finish), for the chart."""
        if self.baseline is None:
            return None
        return {
            key: (dt.date.fromisoformat(a["start"]), dt.date.fromisoformat(a["finish"]))
            for key, a in self.baseline.activities.items()
        }


def page_data_get(*, project: Project) -> PageData:
    """The schedule, the network and the current baseline of ``project``.
    Raises the services' errors (a project without activities, a network that
    cannot be scheduled)."""
    return PageData(
        project=project,
        schedule=schedule_get(project=project),
        network=network_document(project),
        baseline=baseline_current_get(project=project),
    )


def baseline_card_get(data: PageData, finish: str | None) -> dict[str, Any] | None:
    """The current baseline against the forecast finish: its name, its finish
    and the variance in working days of the project calendar (positive when
    the forecast is later)."""
    base = data.baseline
    if base is None or not finish:
        return None
    forecast = dt.date.fromisoformat(finish)
    days = workdays_for(data.network, [base.finish, forecast], base.calendar or None)
    return {
        "name": base.name,
        "finish": base.finish.isoformat(),
        "variance": days.variance(base.finish, forecast),
        "version": base.version.number,
        "captured_at": base.captured_at,
    }


def projects_of_user(*, user: Any) -> list[Membership]:
    return list(
        Membership.objects.filter(user=user)
        .select_related("project")
        .order_by("project__name", "project_id")
    )


def _describe_driver(driver: dict[str, Any]) -> str:
    kind = driver.get("kind", "")
    if kind == "relation":
        lag = driver.get("lag") or 0
        unit = str(driver.get("lag_unit", "workdays")).replace("_", " ")
        unit = "working days" if unit == "workdays" else unit
        lag_text = f" {lag:+d} {unit}" if lag else ""
        return f"{driver.get('type', 'FS')}{lag_text} from {driver.get('pred')}"
    if kind == "crew":
        return f"crew {driver.get('crew')} handed on by {driver.get('pred')}"
    if kind == "crew_unavailable":
        return f"crew {driver.get('crew')} back on {driver.get('date')}"
    if kind == "not_before":
        return f"not before {driver.get('date')}"
    if kind == "actual_start":
        return f"started {driver.get('date')}"
    if kind == "levelling":
        return f"held to {driver.get('date')} by the levelling"
    if kind == "project_start":
        return f"project start {driver.get('date', '')}".strip()
    if kind == "data_date":
        return f"data date {driver.get('date', '')}".strip()
    return kind.replace("_", " ")


def _changes_summary(changes: dict[str, Any]) -> list[str]:
    """Plain lines from a published version's comparison with the one before
    (the summary :func:`scheduling.runs.changes_between` stores)."""
    if not changes:
        return []
    if changes.get("previous_version") is None:
        return [f"the first published version: finish {changes.get('finish')}"]
    lines = []
    finish, before = changes.get("finish"), changes.get("previous_finish")
    shift = changes.get("finish_shift_days")
    if finish and before and finish != before:
        lines.append(f"finish moved from {before} to {finish} ({shift:+d} days)")
    elif finish:
        lines.append(f"finish unchanged at {finish}")
    moved = changes.get("moved") or []
    if moved:
        biggest = ", ".join(
            f"{m['key']} {m['shift_days']:+d} d" for m in moved[:MOVED_SHOWN]
        )
        more = (
            f" and {len(moved) - MOVED_SHOWN} more" if len(moved) > MOVED_SHOWN else ""
        )
        lines.append(f"{len(moved)} activities moved: {biggest}{more}")
    for what in ("added", "removed"):
        keys = changes.get(what) or []
        if keys:
            lines.append(
                f"{len(keys)} activities {what}: {', '.join(keys[:MOVED_SHOWN])}"
            )
    for crew in changes.get("crew_peaks") or []:
        lines.append(
            f"crew {crew['crew']}: peak {crew['previous_peak']} → {crew['peak']} "
            f"(capacity {crew['capacity']})"
        )
    return lines


def last_run_get(*, project: Project) -> dict[str, Any] | None:
    """The project's latest run and, when it published, its change summary."""
    run = Run.objects.filter(project=project).order_by("-id").first()
    if run is None:
        return None
    version = getattr(run, "version", None) if run.state == "published" else None
    return {
        "id": run.pk,
        "kind": run.get_kind_display(),
        "goal": run.get_goal_display() if run.goal else "",
        "state": run.get_state_display(),
        "requested_at": run.requested_at,
        "finished_at": run.finished_at,
        "best_finish": run.best_finish,
        "error": run.error,
        "version": version.number if version else None,
        "changes": _changes_summary(version.changes or {}) if version else [],
    }


def run_panel_get(*, project: Project, can_start: bool) -> dict[str, Any]:
    """What the run panel needs: whether this user may start a run (the
    caller asks the API's role table), the active run to follow, and the
    limits."""
    active = (
        Run.objects.filter(project=project, state__in=ACTIVE_STATES)
        .order_by("-id")
        .values_list("id", flat=True)
        .first()
    )
    return {
        "can_start": can_start,
        "active_run": active,
        "max_seconds": int(settings.SITEPACE_RUN_MAX_SECONDS),
        "default_seconds": 10,
    }


def overview_get(*, project: Project) -> dict[str, Any]:
    """The overview's figures: forecast finish, data date, percent complete,
    the driving path, milestones and the last run."""
    data = page_data_get(project=project)
    schedule = data.schedule
    summary = schedule.get("project") or {}
    levelling = schedule.get("levelling") or {}
    levelled = data.levelled
    finish = levelling.get("finish") if levelled else None
    path = levelling.get("critical_path") if levelled else None
    path = path or schedule.get("critical_path") or []
    floats = {
        a["key"]: (
            a.get("level_total_float", a["total_float"])
            if levelled
            else a["total_float"]
        )
        for a in schedule.get("activities") or []
    }
    dates = {
        a["key"]: (a.get("start") or a["early_start"]) if levelled else a["early_start"]
        for a in schedule.get("activities") or []
    }
    milestones = [
        {
            "key": a["key"],
            "name": a.get("name") or "",
            "date": dates[a["key"]],
            "float": floats[a["key"]],
            "critical": bool(a.get("level_critical", a["critical"]))
            if levelled
            else bool(a["critical"]),
        }
        for a in schedule.get("activities") or []
        if int(a.get("duration") or 0) == 0
    ]
    return {
        "data": data,
        "levelled": levelled,
        "baseline": baseline_card_get(data, finish or summary.get("finish")),
        "finish": finish or summary.get("finish"),
        "critical_path_finish": summary.get("finish"),
        "start": summary.get("start"),
        "data_date": summary.get("data_date"),
        "deadline": summary.get("deadline"),
        "working_days": summary.get("working_days"),
        "percent_complete": round(charts.percent_complete(schedule), 1),
        "activities": len(schedule.get("activities") or []),
        "path": [
            {
                "key": s["key"],
                "name": s.get("name") or "",
                "start": dates.get(s["key"]),
                "float": floats.get(s["key"]),
                "driver": _describe_driver(s.get("driver") or {}),
            }
            for s in path
        ],
        "milestones": milestones,
        "levelling": levelling,
        "last_run": last_run_get(project=project),
        "caution": schedule.get("caution") or SITE_CAUTION,
        "revision": schedule.get("revision", project.revision),
        "today": dt.date.today(),
    }
