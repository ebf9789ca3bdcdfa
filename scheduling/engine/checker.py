"""An independent check of a schedule against its network, in plain Python.

The levelling model and the heuristic work on NumPy tables and solver
variables; this module shares none of that. It walks dates one by one with
:meth:`~.calendars.WorkCalendar.is_workday`, so a mistake in the tables, the
model or the read-out shows up as a violation here rather than as a wrong
schedule on site.

Conventions checked (DESIGN.md, "Time and dates"):

* a start date is a working day of the activity's calendar; the finish date is
  the day of its ``duration``-th working day (a milestone's finish is its
  start);
* a relation reads the predecessor's start, or for FS/FF its end (the instant
  after its finish day; a milestone's end is its start), adds a
  ``calendar_days`` lag as elapsed days, and requires the successor's start
  (FS/SS) or end (FF/SF) to lie at least the working-day lag, counted on the
  successor's calendar, after the first successor working day at or after
  that instant;
* every start is on or after the project start, the data date and the
  activity's ``not_before``; every finish is on or before ``finish`` when
  given;
* progress (see :mod:`.progress`, checked here from the progress columns, not
  from its work network): finished work starts and finishes on its actual
  dates and holds no crew; started work starts on its actual start and its
  remaining work (remaining days, else the share of percent complete, else
  the duration less the working days since the start) starts on a working
  day on or after the data date and holds the crews; relations do not bind
  finished work, nor started work under progress override; relations into
  started work under retained logic bind its remaining work; SS/SF read a
  predecessor's actual start, FS/FF the end of its (remaining) work;
* each crew, on each date, carries no more units than its capacity, and none
  at all on the dates of its unavailable periods. An activity loads its crews
  on its own working days from start to finish. A crew's own calendar does not
  forbid work: the activity's calendar says when work happens.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Mapping
from dataclasses import dataclass

from .calendars import WorkCalendar
from .network import FF, FS, NO_DATE, RELATION_TYPES, SF, SS, Network

#: Violations listed per crew before the rest are summarised.
MAX_CREW_MESSAGES = 20

_DAY = dt.timedelta(days=1)


class _Counter:
    """Working days of one calendar before a date, from a prefix list.

    ``before(day)`` is the number of working days in ``[low, day)``; only
    differences of it are meaningful, which is all the relation check needs.
    """

    def __init__(self, calendar: WorkCalendar, low: dt.date, high: dt.date):
        self.low = low
        self.prefix = [0]
        day = low
        while day <= high:
            self.prefix.append(self.prefix[-1] + calendar.is_workday(day))
            day += _DAY

    def before(self, day: dt.date) -> int:
        return self.prefix[(day - self.low).days]


def finish_of(calendar: WorkCalendar, start: dt.date, duration: int) -> dt.date:
    """The day of the ``duration``-th working day from ``start`` (inclusive).

    A milestone (duration 0) finishes on its start. ``start`` is assumed to be
    a working day; the walk counts it as the first working day when it is.
    """
    if duration <= 0:
        return start
    day, left = start, duration
    while True:
        if calendar.is_workday(day):
            left -= 1
            if left == 0:
                return day
        day += _DAY


def check_schedule(
    network: Network,
    starts: Mapping[str, dt.date],
    *,
    finishes: Mapping[str, dt.date] | None = None,
    finish: dt.date | None = None,
    over_capacity: Mapping[str, int] | None = None,
) -> list[str]:
    """Every way in which ``starts`` breaks ``network``; empty when it is sound.

    ``starts`` maps each activity key to its start date. ``finishes``, when
    given, are the finish dates the caller claims, checked against the
    counted ones. ``finish`` is the latest allowed finish of any activity.
    ``over_capacity`` maps a crew key to extra units tolerated on every date
    beyond what the crew has (a smoothing run that makes capacity soft reports
    how far it went over; the check then holds it to exactly that).
    """
    net = network
    out: list[str] = []
    keys = net.keys
    missing = [k for k in keys if k not in starts]
    if missing:
        out.append(f"no start for {len(missing)} activities: {', '.join(missing[:10])}")
        return out
    unknown = sorted(set(starts) - set(keys))
    if unknown:
        out.append(f"starts given for unknown activities: {', '.join(unknown[:10])}")

    cals = net.calendars
    dur = [int(d) for d in net.duration]
    acal = [int(c) for c in net.act_calendar]
    start = [starts[k] for k in keys]
    work = _Work.of(net, start, finishes, out)
    if work is None:
        return out
    fin = work.finish

    for i, key in enumerate(keys):
        cal = cals[acal[i]]
        if work.state[i] != "not_started":
            continue  # checked by _Work against what happened on site
        if not cal.is_workday(start[i]):
            out.append(
                f"activity {key}: starts {start[i]}, not a working day of calendar "
                f"{cal.key}"
            )
        if start[i] < net.start:
            out.append(
                f"activity {key}: starts {start[i]}, before the project start "
                f"{net.start}"
            )
        if net.data_date is not None and start[i] < net.data_date:
            out.append(
                f"activity {key}: starts {start[i]}, before the data date "
                f"{net.data_date}"
            )
        nb = int(net.not_before[i])
        if nb != NO_DATE and start[i] < net.start + dt.timedelta(days=nb):
            out.append(
                f"activity {key}: starts {start[i]}, before its not-before date "
                f"{net.start + dt.timedelta(days=nb)}"
            )
        if finishes is not None and key in finishes and finishes[key] != fin[i]:
            out.append(
                f"activity {key}: finish given as {finishes[key]} but {dur[i]} "
                f"working days of calendar {cal.key} from {start[i]} end {fin[i]}"
            )
        if finish is not None and fin[i] > finish:
            out.append(
                f"activity {key}: finishes {fin[i]}, after the finish limit {finish}"
            )

    out += _check_relations(net, start, work, acal)
    out += _check_crews(net, work, acal, over_capacity or {})
    return out


@dataclass
class _Work:
    """The work each activity still holds, read from its progress.

    ``first``/``length``/``finish``: the first day, working days and finish
    day of the work the schedule places — all of it for work not started,
    the remaining work of a started activity (from the data date on), the
    actual dates of finished work (``loads`` false: it holds no crew now).
    ``waits`` is false where relations into the activity no longer bind it:
    finished work, and started work under progress override.
    """

    state: list[str]
    first: list[dt.date]
    length: list[int]
    finish: list[dt.date]
    loads: list[bool]
    waits: list[bool]

    @classmethod
    def of(
        cls,
        net: Network,
        start: list[dt.date],
        finishes: Mapping[str, dt.date] | None,
        out: list[str],
    ) -> _Work | None:
        cals = net.calendars
        n = net.size
        dur = [int(d) for d in net.duration]
        acal = [int(c) for c in net.act_calendar]
        first = list(start)
        length = list(dur)
        fin = [finish_of(cals[acal[i]], start[i], dur[i]) for i in range(n)]
        state = ["not_started"] * n
        loads = [True] * n
        waits = [True] * n
        prog = net.progress
        if prog is None or net.data_date is None:
            return cls(state, first, length, fin, loads, waits)
        dd = net.data_date
        override = prog.mode == "progress_override"
        for i, key in enumerate(net.keys):
            a_s, a_f = int(prog.actual_start[i]), int(prog.actual_finish[i])
            if a_s == NO_DATE:
                continue
            cal = cals[acal[i]]
            actual = net.start + dt.timedelta(days=a_s)
            if start[i] != actual:
                out.append(
                    f"activity {key}: starts {start[i]}, not on its actual "
                    f"start {actual}"
                )
            if a_f != NO_DATE:
                state[i] = "finished"
                fin[i] = net.start + dt.timedelta(days=a_f)
                length[i] = max(_count(cal, actual, fin[i] + _DAY), 1 if dur[i] else 0)
                loads[i] = waits[i] = False
                if finishes is not None and finishes.get(key, fin[i]) != fin[i]:
                    out.append(
                        f"activity {key}: finish given as {finishes[key]}, "
                        f"not its actual finish {fin[i]}"
                    )
                continue
            state[i] = "started"
            waits[i] = not override
            rem, pct = int(prog.remaining[i]), int(prog.percent[i])
            if rem < 0:
                if pct >= 0:
                    rem = -(-dur[i] * (100 - pct) // 100)
                elif dur[i] == 0:
                    rem = 0
                else:
                    rem = max(dur[i] - _count(cal, actual, dd), 1)
            if finishes is None or key not in finishes:
                out.append(
                    f"activity {key}: started, but no finish given for its "
                    "remaining work"
                )
                return None
            end = finishes[key]
            # The remaining work ends on ``end``: walk back to its first day.
            day, left = end, rem
            while left > 1 or (left == 1 and not cal.is_workday(day)):
                left -= cal.is_workday(day)
                day -= _DAY
            if rem and not cal.is_workday(end):
                out.append(
                    f"activity {key}: finishes {end}, not a working day of "
                    f"calendar {cal.key}"
                )
            if not rem and not cal.is_workday(day):
                out.append(
                    f"activity {key}: its remaining work ends {day}, not a "
                    f"working day of calendar {cal.key}"
                )
            if day < dd:
                out.append(
                    f"activity {key}: its remaining work starts {day}, "
                    f"before the data date {dd}"
                )
            first[i], length[i], fin[i] = day, rem, end
        return cls(state, first, length, fin, loads, waits)


def _count(cal: WorkCalendar, low: dt.date, high: dt.date) -> int:
    """Working days of ``cal`` in ``[low, high)``."""
    day, got = low, 0
    while day < high:
        got += cal.is_workday(day)
        day += _DAY
    return got


def _check_relations(
    net: Network, start: list[dt.date], work: _Work, acal: list[int]
) -> list[str]:
    out: list[str] = []
    fin, length, first = work.finish, work.length, work.first
    m = len(net.rel_pred)
    if not m:
        return out
    caldays = [bool(x) for x in net.rel_calendar_days]
    lags = [int(x) for x in net.rel_lag]
    reach = max((abs(x) for x in lags), default=0) + 2
    low = min(min(start), min(first), net.start) - dt.timedelta(days=reach)
    high = max(fin) + dt.timedelta(days=reach)
    counters = {c: _Counter(net.calendars[c], low, high) for c in set(acal)}
    for r in range(m):
        p, s = int(net.rel_pred[r]), int(net.rel_succ[r])
        if not work.waits[s]:
            continue
        kind = int(net.rel_type[r])
        lag = lags[r]
        # The predecessor's end: the day after its (remaining) work, or the
        # day of a milestone; its start: when it started.
        if kind in (FS, FF):
            point = fin[p] + _DAY if length[p] >= 1 else first[p]
        else:
            point = start[p]
        if caldays[r]:
            point += dt.timedelta(days=lag)
            work_lag = 0
        else:
            work_lag = lag
        count = counters[acal[s]]
        reached = count.before(first[s])
        if kind in (FF, SF):
            reached += length[s]
        short = work_lag - (reached - count.before(point))
        if short > 0:
            unit = "calendar days" if caldays[r] else "working days"
            what = "starts" if kind in (FS, SS) else "finishes"
            end = first[s] if kind in (FS, SS) else fin[s]
            out.append(
                f"relation {net.keys[p]} → {net.keys[s]} ({RELATION_TYPES[kind]} "
                f"{lag:+d} {unit}): {net.keys[s]} {what} {end}, {short} working "
                f"days too early"
            )
    return out


def _check_crews(
    net: Network, work: _Work, acal: list[int], over: Mapping[str, int]
) -> list[str]:
    out: list[str] = []
    load: list[dict[dt.date, int]] = [defaultdict(int) for _ in net.crews]
    who: list[dict[dt.date, list[str]]] = [defaultdict(list) for _ in net.crews]
    for a, k, u in zip(
        net.dem_activity.tolist(),
        net.dem_crew.tolist(),
        net.dem_units.tolist(),
        strict=True,
    ):
        if work.length[a] < 1 or not work.loads[a]:
            continue
        cal = net.calendars[acal[a]]
        day = work.first[a]
        while day <= work.finish[a]:
            if cal.is_workday(day):
                load[k][day] += u
                who[k][day].append(net.keys[a])
            day += _DAY
    for k, crew in enumerate(net.crews):
        away: set[dt.date] = set()
        for first, last in crew.unavailable:
            day = first
            while day <= last:
                away.add(day)
                day += _DAY
        extra = int(over.get(crew.key, 0))
        bad = []
        for day in sorted(load[k]):
            have = (0 if day in away else crew.capacity) + extra
            if load[k][day] > have:
                bad.append(day)
        for day in bad[:MAX_CREW_MESSAGES]:
            state = "unavailable" if day in away else f"capacity {crew.capacity}"
            allowed = f" + {extra} tolerated" if extra else ""
            out.append(
                f"crew {crew.key}: {load[k][day]} units on {day} ({state}{allowed}) "
                f"by {', '.join(who[k][day])}"
            )
        if len(bad) > MAX_CREW_MESSAGES:
            out.append(
                f"crew {crew.key}: and {len(bad) - MAX_CREW_MESSAGES} more dates "
                "over capacity"
            )
    return out
