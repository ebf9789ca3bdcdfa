"""Calendar tables, checked against NumPy's business-day functions.

``numpy.busday_count`` and ``numpy.busday_offset`` (a general-purpose
reference) take a weekly mask and a list of holidays, the same model as a
:class:`WorkCalendar` without extra working days, so they give positions and
working days independently of the engine's tables.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from scheduling.engine import (
    FS,
    CalendarTables,
    WorkCalendar,
    build_network,
    critical_path,
    parse_network,
)

from .builders import ALL_DAYS, WEEKDAYS, doc

ORIGIN = dt.date(2026, 1, 1)
N_DAYS = 4 * 365
SEEDS = range(20)


def random_calendar(rng: np.random.Generator, key: str) -> WorkCalendar:
    mask = rng.random(7) < rng.uniform(0.3, 0.95)
    if not mask.any():
        mask[int(rng.integers(0, 7))] = True
    count = int(rng.integers(0, 60))
    holidays = {
        ORIGIN + dt.timedelta(days=int(i)) for i in rng.integers(0, N_DAYS, count)
    }
    return WorkCalendar(key, tuple(bool(x) for x in mask), frozenset(holidays))


def numpy_args(cal: WorkCalendar) -> dict:
    return {
        "weekmask": [int(x) for x in cal.workdays],
        "holidays": sorted(np.datetime64(h, "D") for h in cal.holidays),
    }


def day64(index: int) -> np.datetime64:
    return np.datetime64(ORIGIN, "D") + np.timedelta64(index, "D")


@pytest.mark.parametrize("seed", SEEDS)
def test_position_differences_equal_numpy_busday_count(seed):
    rng = np.random.default_rng(seed)
    cals = [random_calendar(rng, f"c{k}") for k in range(3)]
    tables = CalendarTables.build(cals, ORIGIN, N_DAYS)
    for c, cal in enumerate(cals):
        args = numpy_args(cal)
        a = rng.integers(0, N_DAYS + 1, size=200)
        b = rng.integers(0, N_DAYS + 1, size=200)
        i, j = np.minimum(a, b), np.maximum(a, b)
        got = [
            tables.position(c, y) - tables.position(c, x)
            for x, y in zip(i, j, strict=True)
        ]
        # Reference: numpy.busday_count(begin, end) counts working days in
        # [begin, end). (For end before begin NumPy counts (end, begin], a
        # different half-open range, so the pairs are put in order.)
        want = np.busday_count(day64(0) + i, day64(0) + j, **args).tolist()
        assert got == want
        back = [
            tables.position(c, x) - tables.position(c, y)
            for x, y in zip(i, j, strict=True)
        ]
        assert back == [-w for w in want]


@pytest.mark.parametrize("seed", SEEDS)
def test_workday_of_position_plus_k_equals_numpy_busday_offset(seed):
    rng = np.random.default_rng(100 + seed)
    cals = [random_calendar(rng, f"c{k}") for k in range(3)]
    tables = CalendarTables.build(cals, ORIGIN, N_DAYS)
    for c, cal in enumerate(cals):
        args = numpy_args(cal)
        # Stay a safe margin inside the table on both sides.
        i = rng.integers(N_DAYS // 4, 3 * N_DAYS // 4, size=300)
        k = rng.integers(-60, 61, size=300)
        got = [
            tables.date_of(tables.workday(c, tables.position(c, a) + b))
            for a, b in zip(i.tolist(), k.tolist(), strict=True)
        ]
        # Reference: numpy.busday_offset with roll="forward": move to the
        # first working day at or after the date, then k working days on
        # (back for negative k).
        want = np.busday_offset(day64(0) + i, k, roll="forward", **args)
        assert got == want.tolist()


def test_workday_round_trips_on_numpy_is_busday():
    rng = np.random.default_rng(7)
    cals = [random_calendar(rng, f"c{k}") for k in range(4)]
    tables = CalendarTables.build(cals, ORIGIN, N_DAYS)
    days = day64(0) + np.arange(N_DAYS)
    for c, cal in enumerate(cals):
        # Reference: numpy.is_busday with the same weekmask and holidays.
        work = np.is_busday(days, **numpy_args(cal))
        assert cal.workday_mask(ORIGIN, N_DAYS).tolist() == work.tolist()
        positions = np.array([tables.position(c, t) for t in range(N_DAYS)])
        assert int(tables.n_work[c]) == int(work.sum())
        working = np.flatnonzero(work)
        assert [tables.workday(c, p) for p in range(len(working))] == working.tolist()
        assert positions[working].tolist() == list(range(len(working)))


HOLIDAYS = [
    dt.date(2027, 4, 2),
    dt.date(2027, 4, 5),
    dt.date(2027, 5, 17),
    dt.date(2027, 5, 18),
    dt.date(2027, 7, 5),
]


@pytest.mark.parametrize("seed", range(15))
def test_fs_chain_on_five_day_calendar_finishes_on_numpy_busday_offset(seed):
    rng = np.random.default_rng(300 + seed)
    n = int(rng.integers(1, 25))
    duration = rng.integers(0, 11, size=n)
    duration[-1] = max(int(duration[-1]), 1)  # the chain ends with work
    start = dt.date(2027, 3, 1) + dt.timedelta(days=int(rng.integers(0, 60)))
    cal = WorkCalendar.from_names("weekdays", WEEKDAYS, holidays=HOLIDAYS)
    net = build_network(
        name="chain",
        start=start,
        calendars=[cal],
        keys=[f"A{i}" for i in range(n)],
        duration=duration,
        rel_pred=np.arange(n - 1),
        rel_succ=np.arange(1, n),
        rel_type=np.full(n - 1, FS),
        rel_lag=np.zeros(n - 1, dtype=np.int64),
        act_calendar=np.zeros(n, dtype=np.int64),
    )
    result = critical_path(net)
    # Reference: numpy.busday_offset(start, total - 1, roll="forward") with the
    # Monday-to-Friday mask and the same holidays: the last working day.
    want = np.busday_offset(
        np.datetime64(start, "D"),
        int(duration.sum()) - 1,
        roll="forward",
        weekmask="1111100",
        holidays=[np.datetime64(h, "D") for h in HOLIDAYS],
    )
    assert result.finish == want.astype(dt.date)
    assert result.length == int(duration.sum())


def test_21_days_on_7_day_calendar_reach_the_finish_of_15_on_5_day_calendar():
    # Reference: PMI College of Scheduling, "Use of Calendars in a Project
    # Schedule" (2003): 21 working days on a 7-day calendar and 15 working days
    # on a 5-day calendar both take three weeks from a Monday start. The 7-day
    # work ends on the Sunday, the 5-day work on the Friday of the third week;
    # a weekday successor of either starts on the Monday after.
    calendars = [
        {"key": "weekdays", "workdays": WEEKDAYS},
        {"key": "seven", "workdays": ALL_DAYS},
    ]
    acts = [
        {"key": "SEVEN", "duration": 21, "calendar": "seven"},
        {"key": "FIVE", "duration": 15, "calendar": "weekdays"},
        {"key": "AFTER-SEVEN", "duration": 1},
        {"key": "AFTER-FIVE", "duration": 1},
    ]
    rels = [("SEVEN", "AFTER-SEVEN"), ("FIVE", "AFTER-FIVE")]
    net = parse_network(doc(acts, rels, start="2027-03-01", calendars=calendars))
    result = critical_path(net)
    finish = dict(zip(net.keys, result.dates(result.early_finish_day), strict=True))
    start = dict(zip(net.keys, result.dates(result.early_start_day), strict=True))
    assert finish["SEVEN"] == "2027-03-21"  # Sunday of the third week
    assert finish["FIVE"] == "2027-03-19"  # Friday of the third week
    assert start["AFTER-SEVEN"] == start["AFTER-FIVE"] == "2027-03-22"
    # Reference: numpy.busday_offset for the same three weeks.
    monday = np.datetime64("2027-03-01")
    assert str(np.busday_offset(monday, 20, weekmask="1111111")) == "2027-03-21"
    assert str(np.busday_offset(monday, 14, weekmask="1111100")) == "2027-03-19"
