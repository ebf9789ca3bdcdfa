"""Work calendars and the lookup tables that turn dates into working positions.

Time has two scales here:

* an *instant* is a calendar-day boundary, counted as a table day index: the
  start of day ``t`` (midnight). The start of a piece of work is the instant at
  the beginning of its first working day; its end is the instant just after its
  last working day (finish date + 1).
* a *position* counts working days of one calendar: the position of an instant
  ``t`` is the number of that calendar's working days wholly before ``t``.

For every calendar two tables join the scales (both integer arrays):
``W[t]`` = position of instant ``t`` (working days in ``[0, t)``), and
``D[p]`` = table day index of the working day at position ``p``. Hence
``D[W[t]]`` is the first working day at or after ``t``, ``W[D[p]] == p`` and
``W[t] <= m  ⇔  t <= D[m]``. The tables of all calendars are concatenated into
one flat array each, with per-calendar offsets, so that a whole batch of
relations on mixed calendars is converted with one gather.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

WEEKDAYS = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


@dataclass(frozen=True, slots=True)
class WorkCalendar:
    """Which days are worked: a weekly pattern, minus holidays, plus extra days.

    ``workdays`` holds seven booleans, Monday first. A holiday on a day the
    pattern does not work anyway changes nothing; an extra working day on a day
    the pattern works anyway changes nothing.
    """

    key: str
    workdays: tuple[bool, bool, bool, bool, bool, bool, bool]
    holidays: frozenset[dt.date] = field(default_factory=frozenset)
    extra_workdays: frozenset[dt.date] = field(default_factory=frozenset)

    @classmethod
    def from_names(
        cls,
        key: str,
        workdays: Iterable[str],
        holidays: Iterable[dt.date] = (),
        extra_workdays: Iterable[dt.date] = (),
    ) -> WorkCalendar:
        names = set(workdays)
        mask = tuple(name in names for name in WEEKDAYS)
        return cls(key, mask, frozenset(holidays), frozenset(extra_workdays))  # type: ignore[arg-type]

    @property
    def days_per_week(self) -> int:
        return sum(self.workdays)

    def is_workday(self, day: dt.date) -> bool:
        if day in self.extra_workdays:
            return True
        if day in self.holidays:
            return False
        return self.workdays[day.weekday()]

    def workday_mask(self, origin: dt.date, n_days: int) -> np.ndarray:
        """Boolean array: is table day ``i`` (``origin + i``) a working day."""
        weekday = (origin.weekday() + np.arange(n_days)) % 7
        work = np.asarray(self.workdays, dtype=bool)[weekday]
        # Extra days are applied last: validation refuses a date in both lists.
        for days, value in ((self.holidays, False), (self.extra_workdays, True)):
            idx = np.array([(d - origin).days for d in days], dtype=np.int64)
            work[idx[(idx >= 0) & (idx < n_days)]] = value
        return work


@dataclass(frozen=True, slots=True)
class CalendarTables:
    """Flat position tables for several calendars over one range of days.

    Table day ``i`` is ``origin + i``. For calendar ``c``, ``W[w_off[c] + i]`` is
    the position of instant ``i`` (``0 <= i <= n_days``) and ``D[d_off[c] + p]``
    the day index of position ``p`` (``0 <= p < n_work[c]``).
    """

    origin: dt.date
    n_days: int
    W: np.ndarray
    D: np.ndarray
    w_off: np.ndarray
    d_off: np.ndarray
    n_work: np.ndarray

    @classmethod
    def build(
        cls, calendars: Sequence[WorkCalendar], origin: dt.date, n_days: int
    ) -> CalendarTables:
        w_parts, d_parts, w_off, d_off, n_work = [], [], [], [], []
        w_len = d_len = 0
        for cal in calendars:
            work = cal.workday_mask(origin, n_days)
            w = np.zeros(n_days + 1, dtype=np.int32)
            np.cumsum(work, out=w[1:])
            d = np.flatnonzero(work).astype(np.int32)
            w_parts.append(w)
            d_parts.append(d)
            w_off.append(w_len)
            d_off.append(d_len)
            n_work.append(len(d))
            w_len += len(w)
            d_len += len(d)
        return cls(
            origin,
            n_days,
            np.concatenate(w_parts),
            np.concatenate(d_parts),
            np.array(w_off, dtype=np.int64),
            np.array(d_off, dtype=np.int64),
            np.array(n_work, dtype=np.int64),
        )

    # Scalar helpers, for the edges of the engine (documents, tests).

    def day_index(self, day: dt.date) -> int:
        return (day - self.origin).days

    def date_of(self, index: int) -> dt.date:
        return self.origin + dt.timedelta(days=int(index))

    def position(self, cal: int, instant: int) -> int:
        """Working days of calendar ``cal`` wholly before instant ``instant``."""
        return int(self.W[self.w_off[cal] + instant])

    def workday(self, cal: int, position: int) -> int:
        """Table day index of the working day at ``position``."""
        return int(self.D[self.d_off[cal] + position])


def calendars_from_document(document: Mapping[str, Any]) -> dict[str, WorkCalendar]:
    """The calendars of a network document the engine has already accepted
    (a stored project's, a published schedule's), by key; no checks here."""
    return {
        c["key"]: WorkCalendar.from_names(
            c["key"],
            c.get("workdays") or [],
            [dt.date.fromisoformat(str(d)) for d in c.get("holidays") or []],
            [dt.date.fromisoformat(str(d)) for d in c.get("extra_workdays") or []],
        )
        for c in document.get("calendars") or []
    }


def days_needed(calendar: WorkCalendar, workdays: int) -> int:
    """A safe number of calendar days that holds ``workdays`` working days.

    Counts whole weeks of the weekly pattern and adds every holiday, as if each
    fell on a working day; extra working days only ever shorten the need.
    """
    per_week = max(calendar.days_per_week, 1)
    return (max(workdays, 0) // per_week + 2) * 7 + len(calendar.holidays)
