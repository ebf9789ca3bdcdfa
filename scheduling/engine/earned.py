"""Earned value and earned schedule: the measures of an owner's status report.

Pure arithmetic on plain numbers; the report (``scheduling/report.py``) feeds
it amounts summed from the baseline and the progress, and periods counted in
working days of the project's calendar.

Earned value (PMI Practice Standard for Earned Value Management):
``SV = EV − PV``, ``SPI = EV / PV``, ``CV = EV − AC``, ``CPI = EV / AC``,
``TCPI = (BAC − EV) / (BAC − AC)`` and three estimates at completion, each
named by its variant:

* ``eac_cpi`` = ``BAC / CPI`` (the cost efficiency so far holds to the end);
* ``eac_budget_rate`` = ``AC + (BAC − EV)`` (the rest of the work goes at the
  budgeted rate);
* ``eac_cpi_spi`` = ``AC + (BAC − EV) / (CPI · SPI)`` (cost and schedule
  efficiency both weigh on the rest).

Earned schedule (Lipke, "Schedule is Different", The Measurable News, 2003):
``ES = C + (EV − PV_C) / (PV_{C+1} − PV_C)`` where ``C`` is the last whole
period whose cumulative planned value is at most EV; ``SV(t) = ES − AT``,
``SPI(t) = ES / AT`` and the independent estimate of duration
``IEAC(t) = PD / SPI(t)``.

A ratio whose divisor is zero is ``None``, never infinity: the report says
"not measurable yet" rather than printing a number nobody can use.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .calendars import CalendarTables, WorkCalendar


def _ratio(top: float, bottom: float | None) -> float | None:
    if bottom is None or bottom == 0:
        return None
    return top / bottom


@dataclass(frozen=True, slots=True)
class EarnedValue:
    """Earned value measures, in the money (or other unit) of the inputs.

    ``ac`` and every measure that needs it are ``None`` when no actual cost
    is recorded; ratios are ``None`` when their divisor is zero.
    """

    bac: float
    pv: float
    ev: float
    ac: float | None
    sv: float
    spi: float | None
    cv: float | None
    cpi: float | None
    eac_cpi: float | None
    eac_budget_rate: float | None
    eac_cpi_spi: float | None
    tcpi: float | None
    vac: float | None


def earned_value(
    *, bac: float, pv: float, ev: float, ac: float | None = None
) -> EarnedValue:
    """The earned value measures of one data date (see the module docstring).

    ``bac`` is the budget at completion, ``pv`` the planned value and ``ev``
    the earned value at the data date, ``ac`` the actual cost to date.
    ``vac`` is ``BAC − EAC`` with the ``eac_cpi`` variant.
    """
    spi = _ratio(ev, pv)
    if ac is None:
        return EarnedValue(
            bac, pv, ev, None, ev - pv, spi, None, None, None, None, None, None, None
        )
    cpi = _ratio(ev, ac)
    eac_cpi = _ratio(bac, cpi) if cpi else None
    eac_budget_rate = ac + (bac - ev)
    both = cpi * spi if cpi is not None and spi is not None else None
    eac_cpi_spi = ac + (bac - ev) / both if both else None
    tcpi = _ratio(bac - ev, bac - ac)
    vac = bac - eac_cpi if eac_cpi is not None else None
    return EarnedValue(
        bac,
        pv,
        ev,
        ac,
        ev - pv,
        spi,
        ev - ac,
        cpi,
        eac_cpi,
        eac_budget_rate,
        eac_cpi_spi,
        tcpi,
        vac,
    )


@dataclass(frozen=True, slots=True)
class EarnedSchedule:
    """Earned schedule measures, in periods (the report's: working days).

    ``es`` is the time at which the baseline planned to have earned what is
    earned now; ``at`` the actual time (the data date); ``pd`` the planned
    duration. ``spi_t`` and ``ieac_t`` are ``None`` while ``at`` or ``es`` is
    zero (nothing to measure yet).
    """

    es: float
    at: float
    pd: float
    sv_t: float
    spi_t: float | None
    ieac_t: float | None


def earned_schedule(
    *, pv_cumulative: Sequence[float], ev: float, at: float, pd: float
) -> EarnedSchedule:
    """Lipke's earned schedule from the cumulative planned value per period.

    ``pv_cumulative[c]`` is the planned value earned by the end of period
    ``c`` (``pv_cumulative[0]`` is the value at the start, normally 0), so
    periods are counted from the baseline's start. Beyond the period in which
    the planned value reaches its total, the curve is flat; earning the whole
    budget gives ``ES`` = that period, never a later one.
    """
    pv = np.asarray(pv_cumulative, dtype=np.float64)
    if pv.size == 0:
        return EarnedSchedule(0.0, at, pd, -at, None, None)
    # The plateau after the total is reached carries no schedule information.
    end = int(np.argmax(pv >= pv[-1]))
    pv = pv[: end + 1]
    if ev >= pv[-1]:
        es = float(end)
    elif ev < pv[0]:
        es = 0.0
    else:
        c = int(np.searchsorted(pv, ev, side="right")) - 1
        es = c + (ev - pv[c]) / (pv[c + 1] - pv[c])
    spi_t = _ratio(es, at)
    ieac_t = _ratio(pd, spi_t) if spi_t else None
    return EarnedSchedule(es, at, pd, es - at, spi_t, ieac_t)


@dataclass(frozen=True, slots=True)
class Workdays:
    """Working-day positions of one calendar over a range of dates.

    ``position(day)`` is the number of working days from ``origin`` up to the
    start of ``day`` (the calendar tables' ``W``); the variance of two dates
    is the difference of their positions: positive when ``later`` is later.
    Dates outside the range are clamped to its ends.
    """

    tables: CalendarTables

    @classmethod
    def build(cls, calendar: WorkCalendar, first: dt.date, last: dt.date) -> Workdays:
        first = min(first, last)
        n_days = (last - first).days + 2
        return cls(CalendarTables.build([calendar], first, n_days))

    def position(self, day: dt.date) -> int:
        index = min(max(self.tables.day_index(day), 0), self.tables.n_days)
        return self.tables.position(0, index)

    def date_at(self, position: int) -> dt.date:
        """The working day at ``position`` (clamped to the range's days)."""
        last = int(self.tables.n_work[0]) - 1
        return self.tables.date_of(self.tables.workday(0, min(max(position, 0), last)))

    def variance(self, earlier: dt.date, later: dt.date) -> int:
        """Working days from ``earlier`` to ``later`` (negative if before)."""
        return self.position(later) - self.position(earlier)


def planned_value_curve(
    *,
    budget: Sequence[float],
    first: Sequence[int],
    end: Sequence[int],
    periods: int,
) -> np.ndarray:
    """Cumulative planned value at the end of each period ``0..periods``.

    Activity ``i`` plans to earn ``budget[i]`` evenly over periods
    ``[first[i], end[i])``; with ``end[i] <= first[i]`` (a milestone, or work
    on days the period calendar does not count) it earns it all at the end of
    period ``first[i]``. Element ``k`` of the answer is the value planned by
    instant ``k``; what is planned before period 0 is in element 0, what is
    planned after the last period is not in the answer.
    """
    b = np.asarray(budget, dtype=np.float64)
    s = np.asarray(first, dtype=np.int64)
    e = np.asarray(end, dtype=np.int64)
    spread = e > s
    rate = np.where(spread, b / np.where(spread, e - s, 1), 0.0)
    before = np.where(spread, rate * (np.clip(e, None, 0) - np.clip(s, None, 0)), 0.0)
    sc, ec = np.clip(s, 0, periods), np.clip(e, 0, periods)
    rate_diff = np.zeros(periods + 2, dtype=np.float64)
    np.add.at(rate_diff, sc[spread], rate[spread])
    np.add.at(rate_diff, ec[spread], -rate[spread])
    # A lump is earned by the end of its period: from instant first + 1 on.
    lump = ~spread & (s < periods)
    steps = np.zeros(periods + 2, dtype=np.float64)
    np.add.at(steps, np.clip(s[lump] + 1, 0, periods), b[lump])
    curve = np.zeros(periods + 1, dtype=np.float64)
    curve[1:] = np.cumsum(np.cumsum(rate_diff)[:periods])
    curve += np.cumsum(steps)[: periods + 1] + before.sum()
    return curve
