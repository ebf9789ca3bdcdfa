"""The independent schedule checker: it accepts sound schedules and catches
each kind of violation, naming the activity, relation or crew."""

from __future__ import annotations

import datetime as dt

import pytest

from scheduling.engine import critical_path
from scheduling.engine.checker import check_schedule, finish_of

from .builders import SIX_DAYS, WEEKDAYS
from .test_levelling import net_of, random_network

D = dt.date
TWO_CALENDARS = [
    {"key": "weekdays", "workdays": WEEKDAYS, "holidays": ["2027-03-12"]},
    {"key": "sixday", "workdays": SIX_DAYS},
]


def early_starts(net):
    cpm = critical_path(net)
    return {
        k: D.fromisoformat(s)
        for k, s in zip(net.keys, cpm.dates(cpm.early_start_day), strict=True)
    }


@pytest.mark.parametrize("seed", range(40))
def test_critical_path_early_dates_pass_the_checker(seed):
    # Random networks on two calendars, all relation types, working-day and
    # calendar-day lags and leads: the critical path and the checker agree.
    net = random_network(seed)
    cpm = critical_path(net)
    finishes = dict(
        zip(
            net.keys, map(D.fromisoformat, cpm.dates(cpm.early_finish_day)), strict=True
        )
    )
    assert check_schedule(net, early_starts(net), finishes=finishes) == []


@pytest.mark.parametrize("seed", range(40))
def test_critical_path_late_dates_pass_the_checker(seed):
    net = random_network(seed)
    cpm = critical_path(net)
    late = dict(
        zip(net.keys, map(D.fromisoformat, cpm.dates(cpm.late_start_day)), strict=True)
    )
    # No finish limit here: the critical path reads the project end as an
    # instant, so a milestone at that instant shows the day after the finish.
    assert check_schedule(net, late) == []


@pytest.mark.parametrize("seed", range(40))
def test_one_day_earlier_than_a_driving_relation_allows_is_caught(seed):
    net = random_network(seed)
    cpm = critical_path(net)
    starts = early_starts(net)
    driven = [int(net.rel_succ[e]) for e in range(len(net.rel_pred)) if cpm.driving[e]]
    if not driven:
        pytest.skip("no relation drives an early start in this network")
    key = net.keys[driven[0]]
    cal = net.calendars[int(net.act_calendar[driven[0]])]
    day = starts[key] - dt.timedelta(days=1)
    while not cal.is_workday(day):
        day -= dt.timedelta(days=1)
    starts[key] = day
    found = check_schedule(net, starts)
    assert any(f"→ {key} (" in p and "too early" in p for p in found), found


def two(kind, lag=0, unit="workdays", **b):
    return net_of(
        [("A", 3), {"key": "B", "duration": 2, **b}],
        [("A", "B", kind, lag, unit)],
        calendars=TWO_CALENDARS,
    )


@pytest.mark.parametrize(
    ("kind", "good", "bad"),
    [
        # A works Mon 1 – Wed 3 March.
        ("FS", D(2027, 3, 4), D(2027, 3, 3)),  # FS: B from Thursday
        ("SS", D(2027, 3, 1), D(2027, 2, 26)),  # SS: B with A (before: Friday)
        ("FF", D(2027, 3, 2), D(2027, 3, 1)),  # FF: B ends Wed 3 at the earliest
        ("SF", D(2027, 2, 26), D(2027, 2, 25)),  # SF: B ends by A's start
    ],
)
def test_each_relation_type_is_checked(kind, good, bad):
    net = two(kind)
    starts = {"A": D(2027, 3, 1), "B": good}
    if kind == "SF":
        # SF 0: B's end at or after A's start — B may end Friday 26 February
        # only if the project started then; start A later instead.
        starts = {"A": D(2027, 3, 3), "B": D(2027, 3, 1)}
        bad = D(2027, 2, 26)
        net = net_of(
            [("A", 3), {"key": "B", "duration": 2}],
            [("A", "B", "SF", 0)],
            start="2027-02-22",
            calendars=TWO_CALENDARS,
        )
    elif kind == "SS":
        net = net_of(
            [("A", 3), {"key": "B", "duration": 2}],
            [("A", "B", "SS", 0)],
            start="2027-02-22",
            calendars=TWO_CALENDARS,
        )
    elif kind == "FF":
        net = net_of(
            [("A", 3), {"key": "B", "duration": 2}],
            [("A", "B", "FF", 0)],
            calendars=TWO_CALENDARS,
        )
    assert check_schedule(net, starts) == []
    starts["B"] = bad
    found = check_schedule(net, starts)
    assert len(found) == 1
    assert f"relation A → B ({kind} +0 working days)" in found[0]
    assert "1 working days too early" in found[0]


def test_working_day_lag_counts_on_the_successor_calendar():
    # A (weekdays) ends Wed 3 March; FS +3 working days on B's six-day
    # calendar: Thu 4, Fri 5, Sat 6 are the lag; B from Monday 8.
    net = net_of(
        [("A", 3), {"key": "B", "duration": 1, "calendar": "sixday"}],
        [("A", "B", "FS", 3)],
        calendars=TWO_CALENDARS,
    )
    assert check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 8)}) == []
    found = check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 6)})
    assert found == [
        "relation A → B (FS +3 working days): B starts 2027-03-06, 1 working days "
        "too early"
    ]


def test_calendar_day_lag_counts_the_weekend():
    # A ends Wed 3; 4 calendar days of curing → Sunday 7 → Monday 8.
    net = net_of([("A", 3), ("B", 1)], [("A", "B", "FS", 4, "calendar_days")])
    assert check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 8)}) == []
    found = check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 5)})
    assert "(FS +4 calendar days)" in found[0]


def test_start_on_a_day_off_is_caught():
    net = net_of([("A", 2)], calendars=TWO_CALENDARS)
    found = check_schedule(net, {"A": D(2027, 3, 6)})
    assert found == [
        "activity A: starts 2027-03-06, not a working day of calendar weekdays"
    ]


def test_finish_is_counted_in_working_days_of_the_activity_calendar():
    # Five weekdays from Tuesday 9 March skip Friday 12 (a holiday) and the
    # weekend: Tue 9, Wed 10, Thu 11, Mon 15, Tue 16.
    net = net_of([("A", 5)], calendars=TWO_CALENDARS)
    cal = net.calendars[0]
    assert finish_of(cal, D(2027, 3, 9), 5) == D(2027, 3, 16)
    assert (
        check_schedule(net, {"A": D(2027, 3, 9)}, finishes={"A": D(2027, 3, 16)}) == []
    )
    found = check_schedule(net, {"A": D(2027, 3, 9)}, finishes={"A": D(2027, 3, 15)})
    assert "finish given as 2027-03-15 but 5 working days" in found[0]


def test_milestone_finishes_on_its_start():
    net = net_of([("M", 0)])
    assert finish_of(net.calendars[0], D(2027, 3, 3), 0) == D(2027, 3, 3)
    assert (
        check_schedule(net, {"M": D(2027, 3, 3)}, finishes={"M": D(2027, 3, 3)}) == []
    )


def test_date_bounds_are_checked():
    net = net_of(
        [{"key": "A", "duration": 1, "not_before": "2027-03-10"}, ("B", 1)],
        data_date="2027-03-03",
    )
    found = check_schedule(net, {"A": D(2027, 3, 9), "B": D(2027, 3, 2)})
    assert (
        "activity A: starts 2027-03-09, before its not-before date 2027-03-10" in found
    )
    assert "activity B: starts 2027-03-02, before the data date 2027-03-03" in found
    found = check_schedule(net, {"A": D(2027, 3, 10), "B": D(2027, 2, 26)})
    assert any("before the project start 2027-03-01" in p for p in found)


def test_finish_limit_is_checked():
    net = net_of([("A", 5)])
    found = check_schedule(net, {"A": D(2027, 3, 1)}, finish=D(2027, 3, 4))
    assert found == [
        "activity A: finishes 2027-03-05, after the finish limit 2027-03-04"
    ]


def test_missing_and_unknown_activities_are_reported():
    net = net_of([("A", 1), ("B", 1)])
    assert check_schedule(net, {"A": D(2027, 3, 1)}) == ["no start for 1 activities: B"]
    found = check_schedule(
        net, {"A": D(2027, 3, 1), "B": D(2027, 3, 1), "Z": D(2027, 3, 1)}
    )
    assert found == ["starts given for unknown activities: Z"]


def crews_net(**crew):
    return net_of(
        [
            {"key": "A", "duration": 3, "demands": {"c": 2}},
            {"key": "B", "duration": 2, "demands": {"c": 1}},
        ],
        crews=[{"key": "c", "capacity": 2, **crew}],
    )


def test_crew_over_capacity_is_caught_on_each_date():
    net = crews_net()
    found = check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 3)})
    assert found == ["crew c: 3 units on 2027-03-03 (capacity 2) by A, B"]
    assert check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 4)}) == []


def test_crew_load_counts_only_the_activity_working_days():
    # A runs Thu 4 – Mon 8 and B Sat 6 – Sun 7 would overlap only on days A
    # does not work; B on a seven-day calendar is legal here.
    net = net_of(
        [
            {"key": "A", "duration": 3, "demands": {"c": 2}},
            {"key": "B", "duration": 2, "demands": {"c": 2}, "calendar": "all"},
        ],
        crews=[{"key": "c", "capacity": 2}],
        calendars=[
            {"key": "weekdays", "workdays": WEEKDAYS},
            {"key": "all", "workdays": [*SIX_DAYS, "sun"]},
        ],
    )
    assert check_schedule(net, {"A": D(2027, 3, 4), "B": D(2027, 3, 6)}) == []


def test_crew_on_an_unavailable_date_is_caught():
    net = crews_net(unavailable=[{"from": "2027-03-08", "to": "2027-03-09"}])
    found = check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 5)})
    assert found == ["crew c: 1 units on 2027-03-08 (unavailable) by B"]


def test_tolerated_over_capacity_is_held_to_exactly_that():
    net = crews_net()
    starts = {"A": D(2027, 3, 1), "B": D(2027, 3, 3)}
    assert check_schedule(net, starts, over_capacity={"c": 1}) == []
    net3 = net_of(
        [
            {"key": "A", "duration": 3, "demands": {"c": 2}},
            {"key": "B", "duration": 2, "demands": {"c": 2}},
        ],
        crews=[{"key": "c", "capacity": 2}],
    )
    found = check_schedule(net3, starts, over_capacity={"c": 1})
    assert found == ["crew c: 4 units on 2027-03-03 (capacity 2 + 1 tolerated) by A, B"]


def test_many_crew_violations_are_summarised():
    net = net_of(
        [
            {"key": "A", "duration": 30, "demands": {"c": 1}},
            {"key": "B", "duration": 30, "demands": {"c": 1}},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )
    found = check_schedule(net, {"A": D(2027, 3, 1), "B": D(2027, 3, 1)})
    assert len(found) == 21
    assert found[-1] == "crew c: and 10 more dates over capacity"
