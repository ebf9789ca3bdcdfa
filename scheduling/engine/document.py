"""Reading the ``sitepace.network/1`` document into a checked :class:`Network`.

Every field is checked and every problem is collected, each with a JSON
pointer to its entry, before the structural checks of
:func:`~.network.build_network` add theirs; one answer lists everything.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any

import numpy as np

from .calendars import WEEKDAYS, WorkCalendar
from .network import (
    MAX_LAG,
    NO_DATE,
    RELATION_TYPES,
    Crew,
    Network,
    Progress,
    build_network,
)
from .problems import NetworkInvalid, Problem, pointer
from .progress import MODES, RETAINED_LOGIC

FORMAT = "sitepace.network/1"
LAG_UNITS = ("workdays", "calendar_days")

_TOP = {
    "format",
    "scenario",
    "project",
    "calendars",
    "crews",
    "activities",
    "relations",
}
_PROJECT = {"name", "start", "calendar", "data_date", "deadline", "out_of_sequence"}
_CALENDAR = {"key", "name", "workdays", "holidays", "extra_workdays"}
_CREW = {"key", "name", "capacity", "calendar", "unavailable"}
_ACTIVITY = {
    "key",
    "name",
    "duration",
    "calendar",
    "demands",
    "not_before",
    "deadline",
    "actual_start",
    "actual_finish",
    "remaining",
    "percent_complete",
    "zone",
    "trade",
    "milestone",
    "planned_value",
    "quantity",
    "unit",
}
#: Longest key of a calendar, crew or activity (the stored rows hold 64).
MAX_KEY = 64
_RELATION = {"pred", "succ", "type", "lag", "lag_unit"}


class _Reader:
    def __init__(self) -> None:
        self.problems: list[Problem] = []

    def problem(self, ptr: str, code: str, message: str) -> None:
        self.problems.append(Problem(ptr, code, message))

    def unknown_fields(
        self, entry: Mapping[str, Any], allowed: set[str], ptr: str, what: str
    ) -> None:
        for name in sorted(set(entry) - allowed):
            self.problem(
                pointer(*_parts(ptr), name),
                "unknown_field",
                f"{what}: unknown field {name!r}",
            )

    def obj(self, value: Any, ptr: str, what: str) -> Mapping[str, Any] | None:
        if not isinstance(value, Mapping):
            self.problem(ptr, "wrong_type", f"{what} must be an object")
            return None
        return value

    def array(self, value: Any, ptr: str, what: str) -> list[Any]:
        if value is None:
            return []
        if not isinstance(value, list):
            self.problem(ptr, "wrong_type", f"{what} must be a list")
            return []
        return value

    def text(
        self,
        value: Any,
        ptr: str,
        what: str,
        *,
        required: bool = True,
        longest: int = 200,
    ) -> str | None:
        # An optional text left empty (as spreadsheets and forms leave it) is
        # the same as no text.
        if not required and (value is None or value == ""):
            return None
        if not isinstance(value, str) or not value.strip():
            self.problem(ptr, "wrong_type", f"{what} must be a non-empty text")
            return None
        if len(value) > longest:
            self.problem(ptr, "too_long", f"{what} is longer than {longest} characters")
            return None
        return value

    def key(self, value: Any, ptr: str, what: str) -> str | None:
        return self.text(value, ptr, what, longest=MAX_KEY)

    def amount(self, value: Any, ptr: str, what: str) -> float | None:
        """An optional number ≥ 0 (money or quantity), at most 10^12."""
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, int | float):
            self.problem(ptr, "not_number", f"{what} must be a number, got {value!r}")
            return None
        if not 0 <= value <= 1e12:
            self.problem(
                ptr, "out_of_range", f"{what} must be 0 to 10^12, got {value!r}"
            )
            return None
        return value

    def date(
        self, value: Any, ptr: str, what: str, *, required: bool = False
    ) -> dt.date | None:
        if value is None:
            if required:
                self.problem(ptr, "missing", f"{what} is required (YYYY-MM-DD)")
            return None
        if isinstance(value, str) and len(value) == 10:
            try:
                day = dt.date.fromisoformat(value)
            except ValueError:
                pass
            else:
                if 1900 <= day.year <= 2999:
                    return day
                self.problem(
                    ptr,
                    "date_out_of_range",
                    f"{what}: {value} is not between 1900 and 2999",
                )
                return None
        self.problem(
            ptr, "bad_date", f"{what}: {value!r} is not a date of the form YYYY-MM-DD"
        )
        return None

    def integer(
        self, value: Any, ptr: str, what: str, low: int, high: int, *, unit: str = ""
    ) -> int | None:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                self.problem(
                    ptr,
                    "not_integer",
                    f"{what} must be a whole number, got {value!r}",
                )
                return None
        if not low <= value <= high:
            code = "negative" if value < 0 <= low else "out_of_range"
            self.problem(
                ptr, code, f"{what} must be {low} to {high}{unit}, got {value}"
            )
            return None
        return int(value)


def _parts(ptr: str) -> list[str]:
    return [p.replace("~1", "/").replace("~0", "~") for p in ptr.split("/")[1:]]


def parse_network(document: Any) -> Network:
    """Check a ``sitepace.network/1`` document and return the :class:`Network`.

    Raises :class:`NetworkInvalid` with every problem found (fields, keys,
    dates, relations, loops), each naming its entry.
    """
    r = _Reader()
    doc = r.obj(document, "", "the network document")
    if doc is None:
        raise NetworkInvalid(r.problems)
    if doc.get("format") != FORMAT:
        r.problem(
            "/format",
            "wrong_format",
            f"format must be {FORMAT!r}, got {doc.get('format')!r}",
        )
    r.unknown_fields(doc, _TOP, "", "the network document")

    project = r.obj(doc.get("project"), "/project", "project") or {}
    r.unknown_fields(project, _PROJECT, "/project", "project")
    name = r.text(project.get("name"), "/project/name", "project name") or ""
    start = r.date(
        project.get("start"), "/project/start", "project start", required=True
    )
    data_date = r.date(
        project.get("data_date"), "/project/data_date", "project data date"
    )
    deadline = r.date(project.get("deadline"), "/project/deadline", "project deadline")
    if start and deadline and deadline < start:
        r.problem(
            "/project/deadline",
            "deadline_before_start",
            "project deadline is before the project start",
        )
    if start and data_date and data_date < start:
        r.problem(
            "/project/data_date",
            "data_date_before_start",
            "project data date is before the project start",
        )
    oos_mode = project.get("out_of_sequence") or RETAINED_LOGIC
    if oos_mode not in MODES:
        r.problem(
            "/project/out_of_sequence",
            "unknown_mode",
            f"project out_of_sequence must be {' or '.join(MODES)}, got {oos_mode!r}",
        )
        oos_mode = RETAINED_LOGIC

    calendars: list[WorkCalendar] = []
    cal_index: dict[str, int] = {}
    for i, raw in enumerate(r.array(doc.get("calendars"), "/calendars", "calendars")):
        ptr = pointer("calendars", i)
        entry = r.obj(raw, ptr, f"calendar #{i}")
        if entry is None:
            continue
        key = r.key(entry.get("key"), ptr + "/key", f"calendar #{i} key")
        label = f"calendar {key or '#' + str(i)}"
        r.unknown_fields(entry, _CALENDAR, ptr, label)
        days = r.array(entry.get("workdays"), ptr + "/workdays", f"{label}: workdays")
        for j, day in enumerate(days):
            if day not in WEEKDAYS:
                r.problem(
                    pointer("calendars", i, "workdays", j),
                    "bad_weekday",
                    f"{label}: {day!r} is not one of {', '.join(WEEKDAYS)}",
                )
        hol = _dates(r, entry.get("holidays"), ptr, "holidays", label)
        extra = _dates(r, entry.get("extra_workdays"), ptr, "extra_workdays", label)
        for both in sorted(hol & extra):
            r.problem(
                ptr + "/extra_workdays",
                "holiday_and_workday",
                f"{label}: {both} is both a holiday and an extra working day",
            )
        if key is None:
            continue
        if key in cal_index:
            r.problem(ptr + "/key", "duplicate_key", f"calendar {key} is defined twice")
            continue
        cal_index[key] = len(calendars)
        calendars.append(
            WorkCalendar.from_names(key, [d for d in days if d in WEEKDAYS], hol, extra)
        )

    def calendar_ref(
        value: Any, ptr: str, what: str, default: int | None
    ) -> int | None:
        if value is None:
            return default
        if value not in cal_index:
            r.problem(
                ptr, "unknown_calendar", f"{what}: calendar {value!r} is not defined"
            )
            return None
        return cal_index[value]

    if not calendars:
        r.problem("/calendars", "no_calendars", "the network defines no calendar")
    project_cal = calendar_ref(
        project.get("calendar"), "/project/calendar", "project", 0
    )
    if project.get("calendar") is None and calendars:
        r.problem("/project/calendar", "missing", "project calendar is required")

    crews: list[Crew] = []
    crew_index: dict[str, int] = {}
    for i, raw in enumerate(r.array(doc.get("crews"), "/crews", "crews")):
        ptr = pointer("crews", i)
        entry = r.obj(raw, ptr, f"crew #{i}")
        if entry is None:
            continue
        key = r.key(entry.get("key"), ptr + "/key", f"crew #{i} key")
        label = f"crew {key or '#' + str(i)}"
        r.unknown_fields(entry, _CREW, ptr, label)
        cname = r.text(
            entry.get("name"), ptr + "/name", f"{label}: name", required=False
        )
        capacity = r.integer(
            entry.get("capacity"), ptr + "/capacity", f"{label}: capacity", 1, 10_000
        )
        ccal = calendar_ref(
            entry.get("calendar"), ptr + "/calendar", label, project_cal
        )
        away = []
        for j, period in enumerate(
            r.array(
                entry.get("unavailable"), ptr + "/unavailable", f"{label}: unavailable"
            )
        ):
            pptr = pointer("crews", i, "unavailable", j)
            pe = r.obj(period, pptr, f"{label}: unavailable period #{j}")
            if pe is None:
                continue
            r.unknown_fields(
                pe, {"from", "to", "capacity"}, pptr, f"{label}: unavailable period"
            )
            a = r.date(
                pe.get("from"),
                pptr + "/from",
                f"{label}: unavailable from",
                required=True,
            )
            b = r.date(
                pe.get("to"), pptr + "/to", f"{label}: unavailable to", required=True
            )
            if a and b and b < a:
                r.problem(
                    pptr + "/to",
                    "period_reversed",
                    f"{label}: unavailable period ends before it begins",
                )
            elif a and b:
                away.append((a, b))
        if key is None:
            continue
        if key in crew_index:
            r.problem(ptr + "/key", "duplicate_key", f"crew {key} is defined twice")
            continue
        crew_index[key] = len(crews)
        crews.append(Crew(key, cname or key, capacity or 1, ccal or 0, tuple(away)))

    keys: list[str] = []
    names: list[str] = []
    durations: list[int] = []
    act_cals: list[int] = []
    not_before: list[int] = []
    act_deadline: list[int] = []
    extras: list[dict[str, object]] = []
    dem_a: list[int] = []
    dem_c: list[int] = []
    dem_u: list[int] = []
    warnings: list[Problem] = []
    act_index: dict[str, int] = {}
    actual_start: list[int] = []
    actual_finish: list[int] = []
    remaining: list[int] = []
    percent: list[int] = []

    def day_offset(day: dt.date | None) -> int:
        return NO_DATE if day is None or start is None else (day - start).days

    for i, raw in enumerate(
        r.array(doc.get("activities"), "/activities", "activities")
    ):
        ptr = pointer("activities", i)
        entry = r.obj(raw, ptr, f"activity #{i}")
        key = (
            r.key(entry.get("key"), ptr + "/key", f"activity #{i} key")
            if entry is not None
            else None
        )
        if key and key in act_index:
            r.problem(
                ptr + "/key",
                "duplicate_key",
                f"activity {key} is defined twice "
                f"(first at {pointer('activities', act_index[key])})",
            )
        elif key:
            act_index[key] = i
        label = f"activity {key or '#' + str(i)}"
        entry = entry or {}
        r.unknown_fields(entry, _ACTIVITY, ptr, label)
        aname = r.text(
            entry.get("name"), ptr + "/name", f"{label}: name", required=False
        )
        dur = r.integer(
            entry.get("duration"),
            ptr + "/duration",
            f"{label}: duration",
            0,
            10_000,
            unit=" working days",
        )
        acal = calendar_ref(
            entry.get("calendar"), ptr + "/calendar", label, project_cal
        )
        nb = r.date(
            entry.get("not_before"), ptr + "/not_before", f"{label}: not_before"
        )
        dl = r.date(entry.get("deadline"), ptr + "/deadline", f"{label}: deadline")
        a_start, a_finish, left, pct = _progress(r, entry, ptr, label, start, data_date)
        if entry.get("milestone") is not None and not isinstance(
            entry.get("milestone"), bool
        ):
            r.problem(
                ptr + "/milestone",
                "wrong_type",
                f"{label}: milestone must be true or false",
            )
        elif entry.get("milestone") and dur not in (None, 0):
            r.problem(
                ptr + "/duration",
                "milestone_duration",
                f"{label}: a milestone has duration 0",
            )
        demands = entry.get("demands") or {}
        if not isinstance(demands, Mapping):
            r.problem(
                ptr + "/demands",
                "wrong_type",
                f"{label}: demands must map crew keys to numbers",
            )
            demands = {}
        for crew_key, units in demands.items():
            dptr = pointer("activities", i, "demands", crew_key)
            if crew_key not in crew_index:
                r.problem(
                    dptr, "unknown_crew", f"{label}: crew {crew_key!r} is not defined"
                )
                continue
            u = r.integer(
                units, dptr, f"{label}: demand for crew {crew_key}", 1, 10_000
            )
            if u is not None:
                dem_a.append(i)
                dem_c.append(crew_index[crew_key])
                dem_u.append(u)
        keys.append(key or f"#{i}")
        names.append(aname or key or f"#{i}")
        durations.append(dur if dur is not None else 0)
        act_cals.append(acal if acal is not None else 0)
        not_before.append(day_offset(nb))
        act_deadline.append(day_offset(dl))
        actual_start.append(day_offset(a_start))
        actual_finish.append(day_offset(a_finish))
        remaining.append(-1 if left is None else left)
        percent.append(-1 if pct is None else pct)
        grouping: dict[str, object] = {}
        for name_, longest in (("zone", 100), ("trade", 100), ("unit", 32)):
            word = r.text(
                entry.get(name_),
                f"{ptr}/{name_}",
                f"{label}: {name_}",
                required=False,
                longest=longest,
            )
            if word is not None:
                grouping[name_] = word
        for name_ in ("planned_value", "quantity"):
            amount = r.amount(entry.get(name_), f"{ptr}/{name_}", f"{label}: {name_}")
            if amount is not None:
                grouping[name_] = amount
        extras.append(grouping)

    preds: list[int] = []
    succs: list[int] = []
    types: list[int] = []
    lags: list[int] = []
    caldays: list[bool] = []
    rel_ptrs: list[str] = []
    for i, raw in enumerate(r.array(doc.get("relations"), "/relations", "relations")):
        ptr = pointer("relations", i)
        entry = r.obj(raw, ptr, f"relation #{i}")
        if entry is None:
            continue
        label = f"relation {entry.get('pred')!s} → {entry.get('succ')!s}"
        r.unknown_fields(entry, _RELATION, ptr, label)
        ends = []
        for end in ("pred", "succ"):
            value = entry.get(end)
            if not isinstance(value, str) or value not in act_index:
                r.problem(
                    f"{ptr}/{end}",
                    "unknown_activity",
                    f"{label}: activity {value!r} is not defined",
                )
            ends.append(act_index.get(value) if isinstance(value, str) else None)
        rtype = entry.get("type", "FS")
        if rtype not in RELATION_TYPES:
            r.problem(
                ptr + "/type",
                "unknown_relation_type",
                f"{label}: type {rtype!r} is not FS, SS, FF or SF",
            )
        unit = entry.get("lag_unit", "workdays") or "workdays"
        if unit not in LAG_UNITS:
            r.problem(
                ptr + "/lag_unit",
                "unknown_lag_unit",
                f"{label}: lag_unit {unit!r} is not workdays or calendar_days",
            )
        lag = r.integer(
            entry.get("lag", 0) or 0,
            ptr + "/lag",
            f"{label}: lag",
            -MAX_LAG,
            MAX_LAG,
            unit=" days",
        )
        pred_i, succ_i = ends
        if pred_i is None or succ_i is None or rtype not in RELATION_TYPES:
            continue
        if lag is None:
            continue
        preds.append(pred_i)
        succs.append(succ_i)
        types.append(RELATION_TYPES.index(rtype))
        lags.append(lag)
        caldays.append(unit == "calendar_days")
        rel_ptrs.append(ptr)

    if r.problems and (start is None or not calendars):
        raise NetworkInvalid(r.problems)
    return build_network(
        name=name,
        start=start or dt.date(2000, 1, 1),
        calendars=calendars,
        calendar=project_cal or 0,
        keys=keys,
        names=names,
        duration=durations,
        act_calendar=act_cals,
        not_before=not_before,
        act_deadline=act_deadline,
        deadline=deadline,
        data_date=data_date,
        crews=crews,
        dem_activity=dem_a,
        dem_crew=dem_c,
        dem_units=dem_u,
        rel_pred=preds,
        rel_succ=succs,
        rel_type=types,
        rel_lag=lags,
        rel_calendar_days=caldays,
        rel_pointers=rel_ptrs,
        extras=extras,
        warnings=warnings,
        problems=r.problems,
        progress=(
            Progress(
                mode=oos_mode,
                actual_start=np.array(actual_start, dtype=np.int64),
                actual_finish=np.array(actual_finish, dtype=np.int64),
                remaining=np.array(remaining, dtype=np.int64),
                percent=np.array(percent, dtype=np.int64),
            )
            if any(d != NO_DATE for d in actual_start)
            else None
        ),
    )


def _progress(
    r: _Reader,
    entry: Mapping[str, Any],
    ptr: str,
    label: str,
    start: dt.date | None,
    data_date: dt.date | None,
) -> tuple[dt.date | None, dt.date | None, int | None, int | None]:
    """An activity's progress fields, checked together; see :mod:`.progress`.

    Progress is measured up to the data date: it needs one, and no actual date
    lies after it or before the project start. A finish needs a start on or
    before it; remaining work and percent complete need a start, and a
    finished activity has neither work remaining nor less than 100 %.
    """
    a_start = r.date(
        entry.get("actual_start"), f"{ptr}/actual_start", f"{label}: actual_start"
    )
    a_finish = r.date(
        entry.get("actual_finish"), f"{ptr}/actual_finish", f"{label}: actual_finish"
    )
    left = None
    if entry.get("remaining") is not None:
        left = r.integer(
            entry["remaining"],
            ptr + "/remaining",
            f"{label}: remaining",
            0,
            10_000,
            unit=" working days",
        )
    pct = None
    if entry.get("percent_complete") is not None:
        pct = r.integer(
            entry["percent_complete"],
            ptr + "/percent_complete",
            f"{label}: percent_complete",
            0,
            100,
        )
    given = [
        name
        for name, value in (
            ("actual_start", a_start),
            ("actual_finish", a_finish),
            ("remaining", left),
            ("percent_complete", pct),
        )
        if value is not None
    ]
    if not given:
        return None, None, None, None
    bad = len(r.problems)
    if data_date is None:
        r.problem(
            f"{ptr}/{given[0]}",
            "progress_without_data_date",
            f"{label}: progress is measured up to the data date; set the project "
            "data_date first",
        )
    if a_start is None:
        for name in given:
            r.problem(
                f"{ptr}/{name}",
                "progress_without_start",
                f"{label}: {name} needs an actual_start",
            )
    for name, day in (("actual_start", a_start), ("actual_finish", a_finish)):
        if day is None:
            continue
        if data_date is not None and day > data_date:
            r.problem(
                f"{ptr}/{name}",
                "actual_after_data_date",
                f"{label}: {name} {day} is after the data date {data_date}",
            )
        if start is not None and day < start:
            r.problem(
                f"{ptr}/{name}",
                "actual_before_start",
                f"{label}: {name} {day} is before the project start {start}",
            )
    if a_start and a_finish and a_finish < a_start:
        r.problem(
            f"{ptr}/actual_finish",
            "finish_before_start",
            f"{label}: actual_finish {a_finish} is before actual_start {a_start}",
        )
    if a_finish is not None and left:
        r.problem(
            f"{ptr}/remaining",
            "remaining_after_finish",
            f"{label}: a finished activity has no remaining work (got {left})",
        )
    if a_finish is not None and pct is not None and pct < 100:
        r.problem(
            f"{ptr}/percent_complete",
            "percent_after_finish",
            f"{label}: a finished activity is 100 % complete (got {pct})",
        )
    if len(r.problems) > bad:
        return None, None, None, None
    return a_start, a_finish, left, pct


def _dates(r: _Reader, value: Any, ptr: str, field: str, label: str) -> set[dt.date]:
    out = set()
    for j, raw in enumerate(r.array(value, f"{ptr}/{field}", f"{label}: {field}")):
        day = r.date(raw, f"{ptr}/{field}/{j}", f"{label}: {field}")
        if day:
            out.add(day)
    return out
