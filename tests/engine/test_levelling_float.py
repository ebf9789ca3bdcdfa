"""Float after levelling: crew links added to the logic (Kim & de la Garza,
"Phantom float", J. Constr. Eng. Manage. 129(5), 2003)."""

from __future__ import annotations

import datetime as dt

import pytest

from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import level

from .test_levelling import net_of, random_network

BOUNDS = {"project_start", "data_date", "not_before", "crew_unavailable"}


def phantom():
    # A and B (4 days each) both need the single crew "c"; D follows both.
    # Without crews each has zero float; levelled, one follows the other.
    return net_of(
        [
            {"key": "A", "duration": 4, "demands": {"c": 1}},
            {"key": "B", "duration": 4, "demands": {"c": 1}},
            {"key": "D", "duration": 1},
            {"key": "X", "duration": 3},
        ],
        [("A", "D"), ("B", "D"), ("X", "D")],
        crews=[{"key": "c", "capacity": 1}],
    )


def test_the_crew_hand_over_removes_the_phantom_float():
    net = phantom()
    result = level(net, time_limit=5)
    first, second = sorted(
        (result.activity("A"), result.activity("B")), key=lambda a: a.start
    )
    # By hand: first Mon 1 – Thu 4, second Fri 5 – Wed 10, D Thu 11.
    assert (first.start, first.finish) == (dt.date(2027, 3, 1), dt.date(2027, 3, 4))
    assert (second.start, second.finish) == (dt.date(2027, 3, 5), dt.date(2027, 3, 10))
    assert result.activity("D").start == dt.date(2027, 3, 11)
    # Logic alone would leave the first four days of float (it could slip
    # to Fri 5 – Wed 10): phantom. With the crew link it has none.
    assert first.total_float == 0
    assert first.critical and second.critical
    # X (3 days, no crew) may slip until D: Mon 8 – Wed 10 at the latest.
    x = result.activity("X")
    assert x.total_float == 5  # working days: Mon 1 → Mon 8
    assert x.late_start == dt.date(2027, 3, 8)
    links = [(link.crew, link.pred, link.succ) for link in result.crew_links]
    assert links == [("c", first.key, second.key)]
    steps = [(s.key, s.driver.kind) for s in result.critical_path]
    assert steps == [
        (first.key, "project_start"),
        (second.key, "crew"),
        ("D", "relation"),
    ]
    assert result.critical_path[1].driver.describe() == f"crew c from {first.key}"


def continuous(result):
    """The driving path runs from a date bound to the last activity, each step
    driven by the step before it."""
    path = result.critical_path
    assert path[0].driver.kind in BOUNDS
    for before, step in zip(path, path[1:], strict=False):
        assert step.driver.kind in ("relation", "crew")
        assert step.driver.pred == before.key
    last = max(result.activities, key=lambda a: a.finish)
    assert result.activity(path[-1].key).finish == last.finish


@pytest.mark.parametrize("seed", range(25))
def test_critical_path_after_levelling_is_continuous(seed):
    net = random_network(seed, capacity=2)
    result = level(net, time_limit=5)
    continuous(result)


@pytest.mark.parametrize("seed", range(25))
def test_every_activity_at_its_late_dates_is_still_a_sound_schedule(seed):
    # The late dates keep every relation and crew link, so every crew stays
    # within capacity and nothing ends after the project end.
    net = random_network(seed, capacity=2)
    result = level(net, time_limit=5)
    late = {a.key: a.late_start for a in result.activities}
    assert check_schedule(net, late) == []
    work = [a for a, d in zip(result.activities, net.duration, strict=True) if d]
    assert max(a.late_finish for a in work) <= result.finish
    assert all(a.total_float >= 0 for a in result.activities)


@pytest.mark.parametrize("seed", range(25))
def test_slipping_one_activity_by_its_free_float_moves_nothing_else(seed):
    net = random_network(seed, capacity=2)
    result = level(net, time_limit=5)
    for a, d in zip(result.activities, net.duration.tolist(), strict=True):
        if a.free_float <= 0:
            continue
        cal = net.calendars[int(net.act_calendar[net.keys.index(a.key)])]
        day, left = a.start, a.free_float
        while left:
            day += dt.timedelta(days=1)
            left -= cal.is_workday(day)
        starts = result.starts | {a.key: day}
        assert check_schedule(net, starts) == [], a.key
        assert max(result.finishes.values()) == result.finish
        del d
