"""Stability: given the previous plan, a change moves only what it must, and
each move says why."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from scheduling.engine import build_network
from scheduling.engine.levelling import level

from .test_levelling import assert_checked, net_of, random_network

D = dt.date


def site(a_days=3, y_capacity=1, y_away=None):
    """A → B on crew x; C → D with C and E sharing crew y."""
    crew_y = {"key": "y", "capacity": y_capacity}
    if y_away:
        crew_y["unavailable"] = [{"from": y_away[0], "to": y_away[1]}]
    return net_of(
        [
            {"key": "A", "duration": a_days, "demands": {"x": 1}},
            {"key": "B", "duration": 2, "demands": {"x": 1}},
            {"key": "C", "duration": 2, "demands": {"y": 1}},
            {"key": "D", "duration": 4},
            {"key": "E", "duration": 3, "demands": {"y": 1}},
        ],
        [("A", "B"), ("C", "D")],
        crews=[{"key": "x", "capacity": 1}, crew_y],
    )


@pytest.fixture(scope="module")
def plan():
    result = level(site(), time_limit=5)
    # By hand: C first on crew y (D waits for it), E after; A then B on x.
    assert result.starts == {
        "A": D(2027, 3, 1),
        "B": D(2027, 3, 4),
        "C": D(2027, 3, 1),
        "D": D(2027, 3, 3),
        "E": D(2027, 3, 3),
    }
    return result.starts


def test_the_same_network_keeps_the_same_plan(plan):
    result = level(site(), previous=plan, time_limit=5)
    assert result.moved == ()
    assert result.starts == plan
    assert_checked(site(), result)


def test_a_longer_activity_moves_only_its_successor(plan):
    net = site(a_days=4)
    result = level(net, previous=plan, time_limit=5)
    assert [(m.key, m.days, m.reason) for m in result.moved] == [
        ("B", 1, "network change")
    ]
    assert result.activity("B").start == D(2027, 3, 5)
    assert_checked(net, result)


def test_a_crew_away_moves_its_work_and_what_follows(plan):
    # Crew y is away Mon 1 – Tue 2: C (and D after it) wait; E follows C.
    net = site(y_away=("2027-03-01", "2027-03-02"))
    result = level(net, previous=plan, time_limit=5)
    moved = {m.key: (m.days, m.reason) for m in result.moved}
    assert moved["C"] == (2, "crew change")
    assert moved["D"][1] == "crew change"
    assert "A" not in moved and "B" not in moved
    assert_checked(net, result)


def test_a_late_previous_plan_is_pulled_in_for_the_goal(plan):
    # The previous plan had B a week late (Thu 11); nothing forces that now,
    # and the shortest finish (D ends Mon 8) wants it back — but no further
    # than it must: Fri 5 – Mon 8, four working days earlier.
    late = plan | {"B": D(2027, 3, 11)}
    result = level(site(), previous=late, time_limit=5)
    assert [(m.key, m.days, m.reason) for m in result.moved] == [("B", -4, "goal")]
    assert result.activity("B").start == D(2027, 3, 5)
    assert result.finish == D(2027, 3, 8)


def test_an_activity_without_previous_date_is_scheduled_not_moved(plan):
    net = site()
    result = level(net, previous={k: v for k, v in plan.items() if k != "E"})
    assert result.moved == ()
    assert_checked(net, result)


def longer(net, i, extra):
    dur = net.duration.copy()
    dur[i] += extra
    return build_network(
        name=net.name,
        start=net.start,
        calendars=net.calendars,
        keys=net.keys,
        duration=dur,
        rel_pred=net.rel_pred,
        rel_succ=net.rel_succ,
        rel_type=net.rel_type,
        rel_lag=net.rel_lag,
        rel_calendar_days=net.rel_calendar_days,
        act_calendar=net.act_calendar,
        not_before=net.not_before,
        crews=net.crews,
        dem_activity=net.dem_activity,
        dem_crew=net.dem_crew,
        dem_units=net.dem_units,
    )


@pytest.mark.parametrize("seed", range(12))
def test_stability_moves_no_more_than_a_fresh_levelling(seed):
    net = random_network(seed, capacity=2)
    before = level(net, time_limit=5)
    rng = np.random.default_rng(seed)
    changed = longer(net, int(rng.integers(net.size)), 2)
    fresh = level(changed, time_limit=5)
    kept = level(changed, previous=before.starts, time_limit=5)
    # The goal is met as well as without the previous plan …
    assert kept.finish == fresh.finish
    # … and no more activities move than a levelling from scratch moves.
    fresh_moves = sum(fresh.starts[k] != before.starts[k] for k in net.keys)
    assert len(kept.moved) <= fresh_moves
    assert all(
        m.reason in ("goal", "crew change", "network change") for m in kept.moved
    )
    assert_checked(changed, kept)
