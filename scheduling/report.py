"""The owner's status report: one plain dict, as of the project's data date.

``report_build`` gathers the forecast (the critical path of the current
network with the latest progress), the current baseline, the published
versions and the progress into the sections below; the API answers it as
JSON, ``scheduling/report_render.py`` turns it into a zip of CSV files or a
PDF. Dates are ISO strings; day counts are working days of the project's
calendar unless a field says otherwise; variances are positive when the
forecast is later than what it is compared with.

Earned value is measured against the current baseline. Each baseline
activity's budget is its planned value when any baseline activity carries
one (``basis: planned_value``), else its duration in working days
(``basis: duration``); the budget is planned evenly over the activity's
baseline working days. The share of an activity done is 1 when finished, its
``percent_complete`` when recorded, else (duration − remaining) / duration.

Cached per (project, revision, progress_revision, latest version, current
baseline, threshold): every input moves one of those.
"""

from __future__ import annotations

import datetime as dt
import json
from collections import defaultdict
from typing import Any

import numpy as np
from django.core.cache import cache

from scheduling.engine import SITE_CAUTION, Problem
from scheduling.engine.calendars import CalendarTables
from scheduling.engine.earned import (
    earned_schedule,
    earned_value,
    planned_value_curve,
)

from .baselines import baseline_current_get, plan_dates, project_calendar, workdays_for
from .bridge import network_document
from .errors import Invalid
from .models import Baseline, Project, RunOrigin, ScheduleVersion
from .progress_entries import progress_states_get
from .services import forecast_get

FORMAT = "sitepace.report/1"
DEFAULT_THRESHOLD = 5
MAX_THRESHOLD = 250
LOOK_AHEAD_DAYS = 21
CACHE_SECONDS = 24 * 3600

SECTIONS = (
    "finish",
    "percent_complete",
    "earned_value",
    "earned_schedule",
    "milestones",
    "critical",
    "since_previous",
    "late",
    "look_ahead",
    "crew_load",
    "nightly",
)


def threshold_parse(value: Any) -> int:
    """The near-critical threshold from a query parameter: 0 to 250 days."""
    if value is None or value == "":
        return DEFAULT_THRESHOLD
    try:
        days = int(str(value).strip())
    except ValueError:
        days = -1
    if not 0 <= days <= MAX_THRESHOLD:
        raise Invalid(
            f"threshold must be a whole number of working days from 0 to "
            f"{MAX_THRESHOLD}, got {value!r}",
            [
                Problem(
                    "/threshold",
                    "bad_threshold",
                    f"threshold must be 0 to {MAX_THRESHOLD} working days",
                )
            ],
        )
    return days


def _iso(day: dt.date | None) -> str | None:
    return day.isoformat() if day else None


def _day(text: str | None) -> dt.date | None:
    return dt.date.fromisoformat(text) if text else None


def _round(value: float | None, places: int = 4) -> float | None:
    return None if value is None else round(float(value), places)


def share_done(duration: int, fields: dict[str, Any], remaining: Any) -> float:
    """The share of an activity done (0 to 1) from its progress fields.

    ``remaining`` is the forecast's remaining working days (used when no
    percent is recorded).
    """
    if fields.get("actual_finish"):
        return 1.0
    if not fields.get("actual_start"):
        return 0.0
    if fields.get("percent_complete") is not None:
        return min(max(fields["percent_complete"], 0), 100) / 100
    left = fields.get("remaining", remaining)
    if duration <= 0 or left is None:
        return 0.0
    return min(max(duration - left, 0), duration) / duration


def report_cache_key(
    *, project: Project, threshold: int = DEFAULT_THRESHOLD
) -> tuple[str, ScheduleVersion | None, Baseline | None]:
    latest = ScheduleVersion.objects.filter(project=project).order_by("-number").first()
    baseline = baseline_current_get(project=project)
    key = (
        f"sitepace:report:{project.pk}:r{project.revision}:p{project.progress_revision}"
        f":v{latest.number if latest else 0}:b{baseline.pk if baseline else 0}"
        f":t{threshold}"
    )
    return key, latest, baseline


def report_build(
    *, project: Project, threshold: int = DEFAULT_THRESHOLD, use_cache: bool = True
) -> dict[str, Any]:
    """The status report of ``project`` as of its data date (see the module)."""
    key, latest, baseline = report_cache_key(project=project, threshold=threshold)
    if use_cache:
        hit = cache.get(key)
        if hit is not None:
            return hit
    report = _Report(project, threshold, latest, baseline).build()
    cache.set(key, report, CACHE_SECONDS)
    return report


def report_json_get(*, project: Project, threshold: int = DEFAULT_THRESHOLD) -> bytes:
    """The report as JSON bytes, cached beside the dict under the same key, so
    that a cached read costs neither the build nor the rendering."""
    key, _, _ = report_cache_key(project=project, threshold=threshold)
    hit = cache.get(key + ":json")
    if hit is not None:
        return hit
    body = json.dumps(
        report_build(project=project, threshold=threshold),
        ensure_ascii=False,
        separators=(",", ":"),
    ).encode()
    cache.set(key + ":json", body, CACHE_SECONDS)
    return body


class _Report:
    def __init__(
        self,
        project: Project,
        threshold: int,
        latest: ScheduleVersion | None,
        baseline: Baseline | None,
    ) -> None:
        self.project = project
        self.threshold = threshold
        self.latest = latest
        self.baseline = baseline
        self.forecast = forecast_get(project=project)
        self.states = progress_states_get(project=project)
        self.network = network_document(project, states=self.states)
        self.rows = {a["key"]: a for a in self.network["activities"]}
        self.fc = {a["key"]: a for a in self.forecast["activities"]}
        self.data_date = project.data_date or project.start
        self.previous = (
            ScheduleVersion.objects.filter(
                project=project, data_date__lt=self.data_date
            )
            .order_by("-data_date", "-number")
            .only("number", "data_date", "finish", "published_at")
            .first()
        )
        self.plan, self.plan_source = self._plan()
        self.basis, self.dates, self.path = self._forecast_dates()
        self.finish = dt.date.fromisoformat(self.basis["finish"])
        dates = [project.start, self.data_date, self.finish]
        if baseline is not None:
            dates += [baseline.start, baseline.finish]
        self.days = workdays_for(self.network, dates)

    # -- helpers ---------------------------------------------------------

    def wd(self, earlier: dt.date | None, later: dt.date | None) -> int | None:
        if earlier is None or later is None:
            return None
        return self.days.variance(earlier, later)

    def _plan(self) -> tuple[dict[str, tuple[str, str]], dict[str, Any]]:
        """The dates crews work to: the latest published version when it was
        computed from the current network and data date, else the forecast."""
        v = self.latest
        if (
            v is not None
            and v.revision == self.project.revision
            and v.data_date == self.project.data_date
        ):
            return plan_dates(v.document), {
                "kind": "published_version",
                "version": v.number,
                "levelled": v.kind == "level",
            }
        return plan_dates(self.forecast), {
            "kind": "forecast",
            "version": None,
            "levelled": False,
        }

    def _forecast_dates(
        self,
    ) -> tuple[dict[str, Any], dict[str, dict[str, Any]], list[dict[str, Any]]]:
        """The forecast the report measures: the levelled dates of the latest
        published version when it is levelled and was computed from the
        current network and data date (crews respected, crew-aware float);
        else the critical path of the current network and progress, which
        ignores crew limits. Per activity: start, finish, total float and
        whether it is critical; and the driving path as published."""
        if self.plan_source.get("levelled") and self.latest is not None:
            doc = self.latest.document
            dates = {
                a["key"]: {
                    "start": a["start"],
                    "finish": a["finish"],
                    "total_float": a.get("level_total_float", a["total_float"]),
                    "critical": bool(a.get("level_critical", a["critical"])),
                }
                for a in doc["activities"]
            }
            basis = {
                "basis": "levelled",
                "version": self.latest.number,
                "finish": doc["levelling"]["finish"],
                "critical_path_finish": self.forecast["project"]["finish"],
            }
            return basis, dates, doc["levelling"]["critical_path"]
        dates = {
            a["key"]: {
                "start": a["early_start"],
                "finish": a["early_finish"],
                "total_float": a["total_float"],
                "critical": a["total_float"] <= 0,
            }
            for a in self.forecast["activities"]
        }
        basis = {
            "basis": "critical_path",
            "version": None,
            "finish": self.forecast["project"]["finish"],
            "critical_path_finish": self.forecast["project"]["finish"],
        }
        return basis, dates, self.forecast.get("critical_path", [])

    def done(self, key: str) -> float:
        row = self.rows[key]
        return share_done(row["duration"], row, self.fc.get(key, {}).get("remaining"))

    def status(self, key: str) -> str:
        return self.fc.get(key, {}).get("status", "not_started")

    # -- sections --------------------------------------------------------

    def build(self) -> dict[str, Any]:
        p = self.project
        ev, es, curve = self._earned()
        return {
            "format": FORMAT,
            "caution": SITE_CAUTION,
            "project": {
                "id": p.pk,
                "name": p.name,
                "start": _iso(p.start),
                "data_date": _iso(self.data_date),
                "data_date_set": p.data_date is not None,
                "calendar": self.network["project"].get("calendar"),
                "revision": p.revision,
                "progress_revision": p.progress_revision,
            },
            "sources": {
                "published_version": self.latest.number if self.latest else None,
                "baseline": (
                    {"id": self.baseline.pk, "name": self.baseline.name}
                    if self.baseline
                    else None
                ),
                "previous_report": (
                    {
                        "version": self.previous.number,
                        "data_date": _iso(self.previous.data_date),
                    }
                    if self.previous
                    else None
                ),
                "plan": self.plan_source,
                "near_critical_threshold": self.threshold,
                "day_unit": "working days of the project calendar",
            },
            "finish": self._finish(),
            "percent_complete": self._percent(),
            "earned_value": ev,
            "earned_schedule": es,
            "s_curve": curve,
            "milestones": self._milestones(),
            "critical": self._critical(),
            "since_previous": self._since_previous(),
            "late": self._late(),
            "look_ahead": self._look_ahead(),
            "crew_load": self._crew_load(),
            "nightly": self._nightly(),
        }

    def _finish(self) -> dict[str, Any]:
        base = self.baseline.finish if self.baseline else None
        prev = self.previous.finish if self.previous else None
        to_base = self.wd(base, self.finish)
        path = []
        for step in self.path:
            key = step["key"]
            fc = self.dates.get(key, {})
            was = (self.baseline.activities.get(key) if self.baseline else None) or {}
            finish = _day(fc.get("finish"))
            path.append(
                {
                    "key": key,
                    "name": step.get("name", ""),
                    "status": self.status(key),
                    "start": fc.get("start"),
                    "finish": fc.get("finish"),
                    "baseline_finish": was.get("finish"),
                    "finish_variance": self.wd(_day(was.get("finish")), finish),
                    "driver": step.get("driver"),
                }
            )
        return {
            "forecast": _iso(self.finish),
            "forecast_basis": self.basis["basis"],
            "forecast_version": self.basis["version"],
            "critical_path_finish": self.basis["critical_path_finish"],
            "baseline": _iso(base),
            "previous_report": _iso(prev),
            "published": _iso(self.latest.finish) if self.latest else None,
            "variance_to_baseline": to_base,
            "variance_to_previous": self.wd(prev, self.finish),
            "reason": self._reason(to_base, path),
            "driving_path": path,
        }

    def _reason(self, to_base: int | None, path: list[dict[str, Any]]) -> str:
        if not path:
            return "the network has no driving path"
        head = f"The driving path now runs through {len(path)} activities, "
        head += f"from {path[0]['key']} to {path[-1]['key']}"
        slipped = [s for s in path if (s["finish_variance"] or 0) > 0]
        if to_base is None:
            return head + "; there is no current baseline to compare with."
        if to_base <= 0:
            return head + (
                f"; the forecast finish is {-to_base} working days ahead of the "
                "baseline."
                if to_base
                else "; the forecast finish holds the baseline."
            )
        if not slipped:
            return head + (
                f"; the forecast finish is {to_base} working days behind the "
                "baseline, though no activity on the path finishes later than its "
                "baseline: the path itself changed."
            )
        most = max(s["finish_variance"] for s in slipped)
        # The first on the path with the largest slip: where the delay begins.
        worst = next(s for s in slipped if s["finish_variance"] == most)
        return head + (
            f"; the forecast finish is {to_base} working days behind the baseline. "
            f"{len(slipped)} of them finish later than in the baseline, most of "
            f"all {worst['key']} ({worst['name']}), {worst['finish_variance']} "
            "working days late."
        )

    def _percent(self) -> dict[str, Any]:
        dur_total = dur_done = 0.0
        val_total = val_done = 0.0
        valued = 0
        for key, row in self.rows.items():
            share = self.done(key)
            dur_total += row["duration"]
            dur_done += row["duration"] * share
            if row.get("planned_value") is not None:
                valued += 1
                val_total += row["planned_value"]
                val_done += row["planned_value"] * share
        return {
            "by_duration": _round(100 * dur_done / dur_total, 2) if dur_total else None,
            "by_value": _round(100 * val_done / val_total, 2) if val_total else None,
            "by_value_reason": (
                None if val_total else "no activity carries a planned value"
            ),
            "activities_with_value": valued,
            "activities": len(self.rows),
            "finished": sum(1 for k in self.rows if self.status(k) == "finished"),
            "started": sum(1 for k in self.rows if self.status(k) == "started"),
        }

    def _earned(self) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
        b = self.baseline
        if b is None:
            reason = (
                "no current baseline: a scheduler captures one "
                "(POST /api/v1/projects/{id}/baselines/)"
            )
            return (
                {"absent": reason},
                {"absent": reason},
                {"absent": reason, "planned": [], "earned": []},
            )
        acts = b.activities
        basis = (
            "planned_value"
            if any(v.get("planned_value") is not None for v in acts.values())
            else "duration"
        )

        def budget(v: dict[str, Any]) -> float:
            if basis == "planned_value":
                return float(v.get("planned_value") or 0)
            return float(v["duration"])

        origin = self.days.position(b.start)
        periods = self.days.position(b.finish + dt.timedelta(days=1)) - origin
        keys = list(acts)
        budgets = [budget(acts[k]) for k in keys]
        first = [self.days.position(_day(acts[k]["start"])) - origin for k in keys]
        end = [
            self.days.position(_day(acts[k]["finish"]) + dt.timedelta(days=1)) - origin
            for k in keys
        ]
        curve = planned_value_curve(
            budget=budgets, first=first, end=end, periods=max(periods, 0)
        )
        bac = float(sum(budgets))
        at = self.days.position(self.data_date) - origin
        pv = float(curve[min(max(at, 0), len(curve) - 1)])
        ev = sum(
            budgets[i] * self.done(k) for i, k in enumerate(keys) if k in self.rows
        )
        ac, ac_reason = self._actual_cost(basis)
        m = earned_value(bac=bac, pv=pv, ev=ev, ac=ac)
        ev_out = {
            "basis": basis,
            "unit": "planned value" if basis == "planned_value" else "working days",
            "bac": _round(bac, 2),
            "pv": _round(pv, 2),
            "ev": _round(ev, 2),
            "ac": _round(m.ac, 2),
            "sv": _round(m.sv, 2),
            "spi": _round(m.spi),
            "cv": _round(m.cv, 2),
            "cpi": _round(m.cpi),
            "eac": _round(m.eac_cpi, 2),
            "eac_variant": "BAC / CPI",
            "eac_budget_rate": _round(m.eac_budget_rate, 2),
            "eac_cpi_spi": _round(m.eac_cpi_spi, 2),
            "tcpi": _round(m.tcpi),
            "vac": _round(m.vac, 2),
            "ac_reason": ac_reason,
        }
        sched = earned_schedule(
            pv_cumulative=curve, ev=ev, at=max(at, 0), pd=max(periods, 0)
        )
        ieac_date = None
        need = int(-(-sched.ieac_t // 1)) if sched.ieac_t is not None else 0
        # The finish IEAC(t) implies, on the project calendar; beyond some
        # eighty years of work the figure says enough without a date.
        if 0 < need <= 20_000:
            span = workdays_for(
                self.network, [b.start, b.start + dt.timedelta(days=2 * need + 60)]
            )
            ieac_date = span.date_at(span.position(b.start) + need - 1)
        es_out = {
            "unit": "working days of the project calendar from the baseline start",
            "es": _round(sched.es, 2),
            "at": _round(sched.at, 2),
            "pd": _round(sched.pd, 2),
            "sv_t": _round(sched.sv_t, 2),
            "spi_t": _round(sched.spi_t),
            "ieac_t": _round(sched.ieac_t, 2),
            "ieac_t_finish": _iso(ieac_date),
            "formula": "IEAC(t) = PD / SPI(t)",
        }
        step = 5
        marks = sorted({*range(0, len(curve), step), len(curve) - 1})
        planned = [
            {
                "period": m,
                "date": _iso(self.days.date_at(origin + m - 1)) if m else _iso(b.start),
                "value": _round(float(curve[m]), 2),
            }
            for m in marks
        ]
        earned = self._earned_history(keys, budgets, origin)
        earned.append(
            {"period": at, "date": _iso(self.data_date), "value": _round(ev, 2)}
        )
        return (
            ev_out,
            es_out,
            {"basis": basis, "planned": planned, "earned": earned},
        )

    def _actual_cost(self, basis: str) -> tuple[float | None, str | None]:
        """AC: the sum of each activity's latest recorded cost to date."""
        costs = [
            float(s.actual_cost)
            for s in self.states.values()
            if s.actual_cost is not None
        ]
        if not costs:
            return None, "no progress entry records an actual_cost yet"
        if basis != "planned_value":
            return None, (
                "actual cost is money, while earned value here is counted in "
                "working days (no activity of the baseline carries a planned value)"
            )
        return sum(costs), None

    def _earned_history(
        self, keys: list[str], budgets: list[float], origin: int
    ) -> list[dict[str, Any]]:
        """Earned value at the data date of each earlier published version,
        from the progress stored with it (the S-curve's earned line)."""
        out: dict[dt.date, dict[str, Any]] = {}
        versions = (
            ScheduleVersion.objects.filter(
                project=self.project,
                data_date__isnull=False,
                data_date__lt=self.data_date,
            )
            .order_by("data_date", "number")
            .only("data_date", "progress", "document")
        )
        for v in versions:
            remaining = {a["key"]: a.get("remaining") for a in v.document["activities"]}
            duration = {a["key"]: a["duration"] for a in v.document["activities"]}
            value = sum(
                budgets[i]
                * share_done(
                    duration.get(k, 0), v.progress.get(k, {}), remaining.get(k)
                )
                for i, k in enumerate(keys)
            )
            assert v.data_date is not None
            out[v.data_date] = {
                "period": self.days.position(v.data_date) - origin,
                "date": _iso(v.data_date),
                "value": _round(value, 2),
            }
        return [out[d] for d in sorted(out)]

    def _milestones(self) -> list[dict[str, Any]]:
        acts = self.baseline.activities if self.baseline else {}
        out = []
        for key, row in self.rows.items():
            if row["duration"] != 0:
                continue
            fc = self.dates.get(key, {})
            was = acts.get(key) or {}
            actual = row.get("actual_finish") or row.get("actual_start")
            forecast = _day(actual or fc.get("finish"))
            variance = self.wd(_day(was.get("finish")), forecast)
            out.append(
                {
                    "key": key,
                    "name": row.get("name", ""),
                    "baseline": was.get("finish"),
                    "forecast": fc.get("finish"),
                    "actual": actual,
                    "variance": variance,
                    "slipped": bool(variance and variance > 0),
                }
            )
        out.sort(
            key=lambda m: (
                not m["slipped"],
                -(m["variance"] or 0) if m["slipped"] else 0,
                m["forecast"] or "",
                m["key"],
            )
        )
        return out

    def _critical(self) -> dict[str, Any]:
        rows = []
        for key, a in self.dates.items():
            status = self.status(key)
            if status == "finished" or a["total_float"] > self.threshold:
                continue
            row = self.rows.get(key, {})
            rows.append(
                {
                    "key": key,
                    "name": row.get("name", ""),
                    "start": a["start"],
                    "finish": a["finish"],
                    "duration": row.get("duration", 0),
                    "total_float": a["total_float"],
                    "critical": a["critical"],
                    "status": status,
                }
            )
        rows.sort(key=lambda r: (r["start"], r["finish"], r["key"]))
        return {
            "threshold": self.threshold,
            "critical_count": sum(1 for r in rows if r["critical"]),
            "near_critical_count": sum(1 for r in rows if not r["critical"]),
            "activities": rows,
        }

    def _since_previous(self) -> dict[str, Any]:
        since = self.previous.data_date if self.previous else None
        started, finished = [], []
        for key, row in self.rows.items():
            a_s, a_f = _day(row.get("actual_start")), _day(row.get("actual_finish"))
            entry = {"key": key, "name": row.get("name", "")}
            if a_s and (since is None or a_s >= since):
                started.append({**entry, "actual_start": _iso(a_s)})
            if a_f and (since is None or a_f >= since):
                finished.append({**entry, "actual_finish": _iso(a_f)})
        started.sort(key=lambda r: (r["actual_start"], r["key"]))
        finished.sort(key=lambda r: (r["actual_finish"], r["key"]))
        return {
            "from": _iso(since),
            "to": _iso(self.data_date),
            "started": started,
            "finished": finished,
        }

    def _late(self) -> dict[str, Any]:
        if self.baseline is None:
            return {"absent": "no current baseline", "to_start": [], "to_finish": []}
        to_start, to_finish = [], []
        for key, was in self.baseline.activities.items():
            if key not in self.rows:
                continue
            status = self.status(key)
            b_s, b_f = _day(was["start"]), _day(was["finish"])
            entry = {"key": key, "name": was.get("name", "")}
            if status == "not_started" and b_s is not None and b_s < self.data_date:
                to_start.append(
                    {
                        **entry,
                        "baseline_start": was["start"],
                        "forecast_start": self.dates.get(key, {}).get("start"),
                        "days_late": self.wd(b_s, self.data_date),
                    }
                )
            if status != "finished" and b_f is not None and b_f < self.data_date:
                to_finish.append(
                    {
                        **entry,
                        "baseline_finish": was["finish"],
                        "forecast_finish": self.dates.get(key, {}).get("finish"),
                        "days_late": self.wd(
                            b_f + dt.timedelta(days=1), self.data_date
                        ),
                    }
                )
        for rows in (to_start, to_finish):
            rows.sort(key=lambda r: (-(r["days_late"] or 0), r["key"]))
        return {"to_start": to_start, "to_finish": to_finish}

    def _look_ahead(self) -> dict[str, Any]:
        start = self.data_date
        end = start + dt.timedelta(days=LOOK_AHEAD_DAYS - 1)
        crews = {c["key"]: c for c in self.network["crews"]}
        by_crew: dict[str, list[dict[str, Any]]] = defaultdict(list)
        for key, row in self.rows.items():
            if self.status(key) == "finished" or key not in self.plan:
                continue
            s, f = self.plan[key]
            if s > end.isoformat() or f < start.isoformat():
                continue
            entry = {
                "key": key,
                "name": row.get("name", ""),
                "start": s,
                "finish": f,
                "status": self.status(key),
                "zone": row.get("zone"),
            }
            demands = row.get("demands") or {}
            for crew, units in sorted(demands.items()):
                by_crew[crew].append({**entry, "units": units})
            if not demands:
                by_crew[""].append({**entry, "units": 0})
        groups = []
        for crew in sorted(by_crew, key=lambda c: (c == "", c)):
            rows = sorted(by_crew[crew], key=lambda r: (r["start"], r["key"]))
            groups.append(
                {
                    "crew": crew or None,
                    "name": (crews.get(crew) or {}).get("name") or "without a crew",
                    "activities": rows,
                }
            )
        return {"from": _iso(start), "to": _iso(end), "crews": groups}

    def _crew_load(self) -> dict[str, Any]:
        """Per crew and week (Monday first): the busiest day's demand against
        the crew's capacity, and the crew-days, at the plan's dates, from the
        data date's week to the plan's finish."""
        crews = self.network["crews"]
        if not crews:
            return {"weeks": [], "crews": []}
        week0 = self.data_date - dt.timedelta(days=self.data_date.weekday())
        finish = max(
            (
                _day(f)
                for k, (_, f) in self.plan.items()
                if self.status(k) != "finished"
            ),
            default=self.data_date,
        )
        assert finish is not None
        n_days = max((finish - week0).days + 1, 1)
        n_weeks = (n_days + 6) // 7
        n_days = n_weeks * 7
        cal_keys = [c["key"] for c in self.network["calendars"]]
        tables = CalendarTables.build(
            [project_calendar(self.network, k) for k in cal_keys], week0, n_days
        )
        cal_index = {k: i for i, k in enumerate(cal_keys)}
        default = cal_index.get(self.network["project"].get("calendar") or "", 0)
        crew_index = {c["key"]: i for i, c in enumerate(crews)}
        load = np.zeros((len(crews), n_days), dtype=np.int64)
        for key, row in self.rows.items():
            demands = row.get("demands") or {}
            if not demands or row["duration"] == 0 or key not in self.plan:
                continue
            if self.status(key) == "finished":
                continue
            s, f = (_day(d) for d in self.plan[key])
            assert s is not None and f is not None
            lo = max((s - week0).days, (self.data_date - week0).days)
            hi = min((f - week0).days + 1, n_days)
            if hi <= lo:
                continue
            c = cal_index.get(row.get("calendar") or "", default)
            first = tables.position(c, lo)
            last = tables.position(c, hi)
            days = tables.D[tables.d_off[c] + first : tables.d_off[c] + last]
            for crew, units in demands.items():
                if crew in crew_index:
                    load[crew_index[crew], days] += units
        weekly = load.reshape(len(crews), n_weeks, 7)
        peaks = weekly.max(axis=2)
        totals = weekly.sum(axis=2)
        weeks = [_iso(week0 + dt.timedelta(days=7 * w)) for w in range(n_weeks)]
        return {
            "weeks": weeks,
            "crews": [
                {
                    "crew": c["key"],
                    "name": c.get("name") or c["key"],
                    "capacity": c["capacity"],
                    "peak": [int(x) for x in peaks[i]],
                    "crew_days": [int(x) for x in totals[i]],
                    "over_capacity_weeks": [
                        weeks[w] for w in range(n_weeks) if peaks[i][w] > c["capacity"]
                    ],
                }
                for i, c in enumerate(crews)
            ],
        }

    def _nightly(self) -> dict[str, Any]:
        last = (
            ScheduleVersion.objects.filter(
                project=self.project, run__origin=RunOrigin.NIGHTLY
            )
            .order_by("-number")
            .only("number", "published_at", "changes", "finish")
            .first()
        )
        if last is None:
            return {"absent": "no nightly run has published a schedule yet"}
        changes = dict(last.changes)
        changes.pop("caution", None)
        return {
            "version": last.number,
            "published_at": last.published_at.isoformat(),
            "finish": _iso(last.finish),
            "changes": changes,
        }
