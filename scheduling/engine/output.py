"""Turning a critical-path result into the ``sitepace.schedule/1`` document."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from typing import Any

import numpy as np

from .cautions import SITE_CAUTION
from .cpm import CpmResult
from .network import Network
from .progress import FINISHED, NOT_STARTED, RETAINED_LOGIC, actual_date

FORMAT = "sitepace.schedule/1"


def schedule_document(network: Network, result: CpmResult) -> dict[str, Any]:
    """The JSON-ready schedule: per-activity dates and floats, the driving path.

    Finish dates are inclusive; floats are working days of each activity's
    calendar. ``critical`` means total float at or below zero.
    """
    net = network
    es, ef = result.dates(result.early_start_day), result.dates(result.early_finish_day)
    ls, lf = result.dates(result.late_start_day), result.dates(result.late_finish_day)
    drivers: list[list[str]] = [[] for _ in range(net.size)]
    for e in np.flatnonzero(result.driving).tolist():
        drivers[int(net.rel_succ[e])].append(net.keys[int(net.rel_pred[e])])
    cal_keys = [c.key for c in net.calendars]
    progress = _progress_fields(net, result)
    tf, ff = result.total_float.tolist(), result.free_float.tolist()
    crit = result.critical.tolist()
    dur = net.duration.tolist()
    acal = net.act_calendar.tolist()
    activities = [
        {
            "key": net.keys[i],
            "name": net.names[i],
            "duration": dur[i],
            "calendar": cal_keys[acal[i]],
            "early_start": es[i],
            "early_finish": ef[i],
            "late_start": ls[i],
            "late_finish": lf[i],
            "total_float": tf[i],
            "free_float": ff[i],
            "critical": crit[i],
            "drivers": drivers[i],
            **progress[i],
            **(net.extras[i] if net.extras else {}),
        }
        for i in range(net.size)
    ]
    return {
        "format": FORMAT,
        "kind": "critical_path",
        "project": {
            "name": net.name,
            "start": net.start.isoformat(),
            "finish": result.finish.isoformat(),
            "deadline": net.deadline.isoformat() if net.deadline else None,
            "data_date": net.data_date.isoformat() if net.data_date else None,
            "out_of_sequence": (
                net.progress.mode if net.progress is not None else RETAINED_LOGIC
            ),
            "calendar": cal_keys[net.calendar],
            "working_days": result.length,
        },
        "activities": activities,
        "critical_path": [
            {"key": s.key, "name": s.name, "driver": s.driver.as_dict()}
            for s in result.critical_path
        ],
        "open_ends": {
            "no_predecessor": list(result.no_predecessor),
            "no_successor": list(result.no_successor),
        },
        "warnings": [
            w.as_dict()
            for w in (result.progress.work if result.progress else net).warnings
        ],
        "caution": SITE_CAUTION,
    }


def _progress_fields(net: Network, result: CpmResult) -> list[dict[str, Any]]:
    """Per activity: its progress state, actual dates and remaining work."""
    rw = result.progress
    if rw is None or net.progress is None:
        return [{"status": NOT_STARTED}] * net.size
    a_s = net.progress.actual_start.tolist()
    a_f = net.progress.actual_finish.tolist()
    out: list[dict[str, Any]] = []
    for i in range(net.size):
        entry: dict[str, Any] = {"status": rw.status[i]}
        if rw.status[i] != NOT_STARTED:
            day = actual_date(net, a_s[i])
            entry["actual_start"] = day.isoformat() if day else None
        if rw.status[i] == FINISHED:
            day = actual_date(net, a_f[i])
            entry["actual_finish"] = day.isoformat() if day else None
        if rw.remaining[i] is not None:
            entry["remaining"] = rw.remaining[i]
        out.append(entry)
    return out


@dataclass(frozen=True, slots=True)
class CrewPeak:
    crew: str
    name: str
    capacity: int
    peak: int
    peak_date: dt.date | None


def crew_daily_demand(network: Network, result: CpmResult) -> np.ndarray:
    """Demand per crew and table day at early dates: array ``[crew, day]``.

    An activity loads its crews on its own working days from its early start
    to its early finish; milestones load nothing. With progress only the
    remaining work loads crews, from its start on the data date or later.
    """
    net = network
    if result.progress is not None:
        # Remaining work only: the work network holds it under the same
        # activity numbers, and no crew for finished work or work done.
        net = result.progress.work
    tables = result.tables
    load = np.zeros((len(net.crews), tables.n_days), dtype=np.int64)
    if not len(net.dem_activity):
        return load
    act = net.dem_activity
    d = net.duration[act]
    keep = d > 0
    act, crew, units, d = act[keep], net.dem_crew[keep], net.dem_units[keep], d[keep]
    first = result.early_start_pos[act] + tables.d_off[net.act_calendar[act]]
    rows = np.repeat(np.arange(len(act)), d)
    step = np.arange(len(rows)) - np.repeat(np.cumsum(d) - d, d)
    days = tables.D[first[rows] + step]
    np.add.at(load, (crew[rows], days), units[rows])
    return load


def crew_peaks(network: Network, result: CpmResult) -> list[CrewPeak]:
    """Each crew's highest daily demand at early dates, and its first date."""
    load = crew_daily_demand(network, result)
    out = []
    for c, crew in enumerate(network.crews):
        row = load[c]
        peak = int(row.max(initial=0))
        when = result.tables.date_of(int(row.argmax())) if peak else None
        out.append(CrewPeak(crew.key, crew.name, crew.capacity, peak, when))
    return out


def levelled_document(
    network: Network, result: CpmResult, levelled: Any
) -> dict[str, Any]:
    """The schedule document with the levelled dates and the run's figures.

    Each activity gains ``start``/``finish`` (levelled, inclusive finish) and
    the crew-aware ``level_total_float``/``level_free_float``/``level_critical``
    (working days of its calendar); ``levelling`` holds the status, goal,
    finish, the solver's bound and gap, what moved and the levelled driving
    path, each step driven by a relation or a crew.
    """
    doc = schedule_document(network, result)
    by_key = {a.key: a for a in levelled.activities}
    for entry in doc["activities"]:
        got = by_key[entry["key"]]
        entry.update(
            start=got.start.isoformat(),
            finish=got.finish.isoformat(),
            level_late_start=got.late_start.isoformat(),
            level_late_finish=got.late_finish.isoformat(),
            level_total_float=got.total_float,
            level_free_float=got.free_float,
            level_critical=got.critical,
            lateness=got.lateness,
        )
    doc["kind"] = "levelled"
    doc["levelling"] = {
        "status": levelled.status,
        "goal": levelled.goal,
        "finish": levelled.finish.isoformat(),
        "bound": levelled.bound.isoformat() if levelled.bound else None,
        "gap_percent": round(levelled.gap_percent, 2),
        "objective": levelled.objective,
        "objective_bound": levelled.objective_bound,
        # Wall seconds of the whole levelling: model, solves, heuristic, float.
        "seconds": round(levelled.wall_time, 3),
        "heuristic_finish": (
            levelled.heuristic_finish.isoformat() if levelled.heuristic_finish else None
        ),
        "over_capacity": dict(levelled.over_capacity),
        "moved": [
            {
                "key": mv.key,
                "previous": mv.previous.isoformat(),
                "start": mv.start.isoformat(),
                "days": mv.days,
                "reason": mv.reason,
            }
            for mv in levelled.moved
        ],
        "critical_path": [
            {"key": s.key, "name": s.name, "driver": s.driver.as_dict()}
            for s in levelled.critical_path
        ],
    }
    return doc
