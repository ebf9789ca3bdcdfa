"""Crew levelling, shortest finish: agreement with the critical path, calendars,
crews, infeasibility explanations and the solver status mapping.

Every levelled schedule is run through the independent checker here too
(``level`` already refuses one that fails it).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from ortools.sat.python import cp_model as cp

from scheduling.engine import (
    Crew,
    WorkCalendar,
    build_network,
    critical_path,
    parse_network,
    passes,
)
from scheduling.engine import levelling as lv
from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import LevellingInfeasible, level

from .builders import SIX_DAYS, WEEKDAYS, doc

START = dt.date(2027, 3, 1)  # a Monday
HOLIDAYS = [dt.date(2027, 3, 12), dt.date(2027, 3, 29), dt.date(2027, 4, 14)]
FIVE = WorkCalendar.from_names("weekdays", WEEKDAYS, holidays=HOLIDAYS)
SIX = WorkCalendar.from_names("sixday", SIX_DAYS, holidays=[dt.date(2027, 3, 20)])


def random_network(seed: int, *, capacity: int | None = None, n_max: int = 22):
    """A random network on two calendars with all relation types, working-day
    and calendar-day lags and leads, not-before dates and three crews.

    ``capacity=None`` gives every crew more than all demands together
    ("unlimited crews"); otherwise each crew has that capacity.
    """
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, n_max))
    duration = rng.integers(0, 8, size=n)
    topo = rng.permutation(n)
    pairs = set()
    for k in range(1, n):
        for _ in range(int(rng.integers(0, 3))):
            j = int(rng.integers(max(0, k - 6), k))
            pairs.add((int(topo[j]), int(topo[k])))
    pairs = sorted(pairs)
    m = len(pairs)
    acal = rng.integers(0, 2, size=n)
    dem_a, dem_c, dem_u = [], [], []
    for i in range(n):
        for k in rng.choice(3, size=int(rng.integers(0, 3)), replace=False):
            dem_a.append(i)
            dem_c.append(int(k))
            units = int(rng.integers(1, 3))
            dem_u.append(units if capacity is None else min(units, capacity))
    totals = [
        sum(u for u, c in zip(dem_u, dem_c, strict=True) if c == k) for k in range(3)
    ]
    crews = [
        Crew(
            f"C{k}",
            f"Crew {k}",
            max(totals[k], 1) + 1 if capacity is None else capacity,
            k % 2,
        )
        for k in range(3)
    ]
    not_before = np.full(n, np.iinfo(np.int64).min, dtype=np.int64)
    for i in rng.choice(n, size=min(2, n), replace=False):
        not_before[i] = int(rng.integers(0, 12))
    return build_network(
        name=f"random {seed}",
        start=START,
        calendars=[FIVE, SIX],
        keys=[f"A{i}" for i in range(n)],
        duration=duration,
        rel_pred=[p for p, _ in pairs],
        rel_succ=[s for _, s in pairs],
        rel_type=rng.integers(0, 4, size=m),
        rel_lag=rng.integers(-3, 6, size=m),
        rel_calendar_days=rng.random(m) < 0.3,
        act_calendar=acal,
        not_before=not_before,
        crews=crews,
        dem_activity=dem_a,
        dem_crew=dem_c,
        dem_units=dem_u,
    )


def assert_checked(network, result, **kw):
    """The independent checker accepts the levelled schedule."""
    problems = check_schedule(network, result.starts, finishes=result.finishes, **kw)
    assert problems == []


def net_of(activities, relations=(), crews=(), calendars=None, **project):
    document = doc(activities, list(relations), calendars=calendars, **project)
    document["crews"] = list(crews)
    return parse_network(document)


TWO_CALENDARS = [
    {"key": "weekdays", "workdays": WEEKDAYS},
    {"key": "sixday", "workdays": SIX_DAYS},
]


# --- agreement with the critical path --------------------------------------


@pytest.mark.parametrize("seed", range(30))
def test_unlimited_crews_finish_on_the_critical_path_finish(seed):
    net = random_network(seed)
    cpm = critical_path(net)
    result = level(net, time_limit=5)
    assert result.status == "optimal"
    assert result.finish == cpm.finish
    assert result.bound == cpm.finish
    assert_checked(net, result)


@pytest.mark.parametrize("seed", range(30))
def test_unlimited_crews_left_justified_starts_are_the_early_starts(seed):
    # With nothing to level, left justification on logic alone is the
    # forward pass: every start is its critical-path early start.
    net = random_network(seed)
    cpm = critical_path(net)
    result = level(net, time_limit=5)
    early = cpm.dates(cpm.early_start_day)
    assert [a.start.isoformat() for a in result.activities] == early


@pytest.mark.parametrize("seed", range(30))
def test_backward_pass_without_crew_links_is_the_critical_path_backward_pass(seed):
    net = random_network(seed)
    cpm = critical_path(net)
    plan = lv._prepare(net, "shortest", None, None)
    tl = plan.tl
    last_end = max(tl.end(i, plan.es[i]) for i in range(net.size))
    ls = lv.late_positions(tl, None, [], end=last_end)
    late = [tl.date(tl.day(tl.cal[i], ls[i])).isoformat() for i in range(net.size)]
    assert late == cpm.dates(cpm.late_start_day)


@pytest.mark.parametrize("seed", range(30))
def test_crews_that_bind_still_give_a_checked_schedule_within_the_bound(seed):
    net = random_network(seed, capacity=2)
    cpm = critical_path(net)
    result = level(net, time_limit=5)
    assert result.status in ("optimal", "feasible")
    assert result.bound is not None
    assert cpm.finish <= result.bound <= result.finish
    assert result.heuristic_finish is not None
    assert result.finish <= result.heuristic_finish
    assert_checked(net, result)


# --- two calendars, checked by hand ----------------------------------------


def test_six_day_crew_works_saturday_and_five_day_crew_waits_for_monday():
    # March 2027: Monday 1st. Crew "steel" works six days, crew "form" five;
    # each has capacity 1. S1, S2 (steel, 4 working days each, six-day
    # calendar) and F1, F2 (form, 3 working days each, weekdays) are all
    # free of logic except S1 → F2 (FS).
    # By hand: S1 Mon 1 – Thu 4; S2 Fri 5 – Tue 9 (Fri, Sat, Mon, Tue: the
    # Saturday counts, Sunday does not). F1 Mon 1 – Wed 3; F2 after S1 and F1:
    # Fri 5 – Tue 9 (Fri, Mon, Tue: the weekend does not count). Finish Tue 9.
    net = net_of(
        [
            {"key": "S1", "duration": 4, "calendar": "sixday", "demands": {"steel": 1}},
            {"key": "S2", "duration": 4, "calendar": "sixday", "demands": {"steel": 1}},
            {"key": "F1", "duration": 3, "demands": {"form": 1}},
            {"key": "F2", "duration": 3, "demands": {"form": 1}},
        ],
        [("S1", "F2")],
        crews=[
            {"key": "steel", "capacity": 1, "calendar": "sixday"},
            {"key": "form", "capacity": 1, "calendar": "weekdays"},
        ],
        calendars=TWO_CALENDARS,
    )
    result = level(net, time_limit=5)
    assert result.status == "optimal"
    got = {
        a.key: (a.start.isoformat(), a.finish.isoformat()) for a in result.activities
    }
    assert got["S1"] == ("2027-03-01", "2027-03-04")
    assert got["S2"] == ("2027-03-05", "2027-03-09")
    assert got["F1"] == ("2027-03-01", "2027-03-03")
    assert got["F2"] == ("2027-03-05", "2027-03-09")
    assert result.finish == dt.date(2027, 3, 9)
    assert_checked(net, result)


def test_a_span_across_the_weekend_holds_the_crew_through_it():
    # Both activities need the whole of crew "c" (capacity 1); A (3 days)
    # starts Thursday 4 March and runs Thu, Fri, Mon 8. B cannot use the
    # weekend in between: it starts Tuesday 9.
    net = net_of(
        [
            {
                "key": "A",
                "duration": 3,
                "not_before": "2027-03-04",
                "demands": {"c": 1},
            },
            {
                "key": "B",
                "duration": 1,
                "not_before": "2027-03-05",
                "demands": {"c": 1},
            },
        ],
        [("A", "B", "SS", 0)],
        crews=[{"key": "c", "capacity": 1}],
    )
    result = level(net, time_limit=5)
    assert result.activity("A").finish == dt.date(2027, 3, 8)
    assert result.activity("B").start == dt.date(2027, 3, 9)
    assert_checked(net, result)


def test_an_activity_needing_two_crews_waits_for_both():
    net = net_of(
        [
            {"key": "A", "duration": 2, "demands": {"x": 1}},
            {"key": "B", "duration": 3, "demands": {"y": 1}},
            {"key": "AB", "duration": 1, "demands": {"x": 1, "y": 1}},
        ],
        crews=[{"key": "x", "capacity": 1}, {"key": "y", "capacity": 1}],
    )
    result = level(net, time_limit=5)
    assert result.status == "optimal"
    # Shortest: AB first (Mon 1), then A Tue 2 – Wed 3 and B Tue 2 – Thu 4.
    assert result.finish == dt.date(2027, 3, 4)
    assert_checked(net, result)


def test_unavailable_period_blocks_the_crew_and_nothing_else():
    net = net_of(
        [
            {"key": "A", "duration": 2, "demands": {"c": 1}},
            {"key": "B", "duration": 2},
        ],
        crews=[
            {
                "key": "c",
                "capacity": 2,
                "unavailable": [{"from": "2027-03-01", "to": "2027-03-03"}],
            }
        ],
    )
    result = level(net, time_limit=5)
    assert result.activity("A").start == dt.date(2027, 3, 4)
    assert result.activity("B").start == dt.date(2027, 3, 1)
    assert_checked(net, result)
    # The crew's return drives A.
    drivers = {s.key: s.driver for s in result.critical_path}
    assert drivers["A"].kind == "crew_unavailable"
    assert drivers["A"].date == dt.date(2027, 3, 4)


def test_a_late_activity_reports_its_days_late():
    net = net_of(
        [
            {"key": "A", "duration": 5, "demands": {"c": 1}},
            {"key": "B", "duration": 5, "demands": {"c": 1}, "deadline": "2027-03-05"},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )
    result = level(net, time_limit=5)
    # Deadlines are soft but weigh: B goes first and is on time, A follows.
    assert result.lateness == {"B": 0}
    assert result.activity("B").start == dt.date(2027, 3, 1)
    assert_checked(net, result)


def test_a_deadline_that_cannot_be_met_is_reported_late_not_refused():
    net = net_of(
        [
            {"key": "A", "duration": 5, "demands": {"c": 1}, "deadline": "2027-03-05"},
            {"key": "B", "duration": 5, "demands": {"c": 1}, "deadline": "2027-03-05"},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )
    result = level(net, time_limit=5)
    # One of them is a week (7 calendar days) late.
    assert sorted(result.lateness.values()) == [0, 7]
    late = [a for a in result.activities if a.lateness]
    assert late[0].total_float < 0
    assert_checked(net, result)


def test_progress_is_reported_for_each_better_solution():
    seen = []
    net = random_network(3, capacity=1)
    result = level(
        net, time_limit=5, on_progress=lambda f, b, t: seen.append((f, b, t))
    )
    assert seen
    assert seen[-1][0] == result.finish
    assert all(b is None or b <= f for f, b, _ in seen)
    assert [f for f, _, _ in seen] == sorted((f for f, _, _ in seen), reverse=True)


def test_progress_over_several_solves_is_news_on_one_clock():
    # 150 work packages on four small crews (the worker tests' generated
    # depot): the first short solve does not prove the finish, so the genetic
    # search, the solve beside it and the improvement solve all report.
    from scheduling.engine.document import parse_network
    from tests.worker.networks import crowded

    seen = []
    result = level(
        parse_network(crowded(150, seed=11)),
        time_limit=10,
        on_progress=lambda f, b, t: seen.append((f, b, t)),
    )
    assert len(seen) >= 2
    assert seen[-1][0] == result.finish
    for (f0, b0, t0), (f1, b1, t1) in zip(seen, seen[1:], strict=False):
        assert t1 >= t0  # one clock: the time since the levelling started
        assert f1 <= f0 and (b0 is None or (b1 is not None and b1 >= b0))
        assert f1 < f0 or (b1 != b0)  # each line is news


def _progressed_depot():
    """The plan of the generated depot of 120 work packages (the worker
    tests' network) levelled by the serial heuristic (deterministic), with the
    work before Monday 22 March 2027 recorded as done, or started, on those
    dates: the nightly re-run's situation."""
    from scheduling.engine.progress import rewrite
    from tests.worker.networks import crowded

    document = crowded(120, seed=11)
    before = lv._prepare(parse_network(document), "shortest", None, None)
    tl, first = before.tl, before.heuristic.pos
    data_date = dt.date(2027, 3, 22)
    document["project"]["data_date"] = data_date.isoformat()
    for i, a in enumerate(document["activities"]):
        start = tl.date(tl.day(tl.cal[i], first[i]))
        finish = tl.date(tl.finish_day(i, first[i]))
        if start < data_date:
            a["actual_start"] = start.isoformat()
        if finish < data_date:
            a["actual_finish"] = finish.isoformat()
    rw = rewrite(parse_network(document))
    plan = lv._prepare(rw.work, "shortest", None, None, rw)
    assert len(plan.tl.pinned) > 20
    return plan


def test_the_genetic_search_leaves_work_done_and_under_way_where_it_is():
    # The genetic search must hold work done or under way where it is
    # (pinned): a schedule that moves it falls outside the model's windows
    # and is thrown away, and the search's time is lost for the re-run.
    if passes.njit is None:
        pytest.skip("Numba is not installed: too few schedules for the Python passes")
    plan = _progressed_depot()
    got = lv._genetic_hint(
        plan, [list(plan.heuristic.pos)], 1.0, 0, target=plan.logic_finish
    )
    assert got is not None  # sooner than the serial heuristic's schedule
    pos, finish = got
    assert finish < plan.heuristic.finish
    assert {i: pos[i] for i in plan.tl.pinned} == plan.tl.pinned


def test_the_genetic_search_draws_pinned_work_first(monkeypatch):
    # Its first population is drawn by priority; pinned work drawn after
    # other work on its crews would find them taken, and the list would
    # decode to nothing (20 of these 30 lists when it was drawn like the rest).
    import random

    from scheduling.engine.improve import Decoder, _sample

    plan = _progressed_depot()
    handed = []
    monkeypatch.setattr(
        lv,
        "genetic_schedule",
        lambda tl, lft, *, limit, **kw: handed.append((tl, lft, limit)),
    )
    lv._genetic_hint(plan, [list(plan.heuristic.pos)], 0.1, 0, target=0)
    tl, lft, limit = handed[0]
    dec = Decoder(tl, limit)
    rng = random.Random(0)
    for _ in range(30):
        assert dec.decode(_sample(dec, lft, rng)) is not None


# --- explanations before the solve ----------------------------------------


def test_demand_over_capacity_names_activity_and_crew():
    net = net_of(
        [{"key": "POUR", "duration": 2, "demands": {"concrete": 3}}],
        crews=[{"key": "concrete", "capacity": 2}],
    )
    with pytest.raises(LevellingInfeasible, match="POUR needs 3 of crew concrete"):
        level(net)


def test_crew_away_for_good_names_crew_and_activity():
    net = net_of(
        [{"key": "ROOF", "duration": 2, "demands": {"roofers": 1}}],
        crews=[
            {
                "key": "roofers",
                "capacity": 1,
                "unavailable": [{"from": "2027-03-01", "to": "2099-12-31"}],
            }
        ],
    )
    with pytest.raises(
        LevellingInfeasible, match="crew roofers has no room for activity ROOF"
    ):
        level(net)


def test_not_before_after_the_finish_limit_is_explained():
    net = net_of(
        [("A", 2), {"key": "B", "duration": 1, "not_before": "2027-06-01"}],
    )
    with pytest.raises(LevellingInfeasible, match="activity B: not before 2027-06-01"):
        level(net, finish=dt.date(2027, 4, 30))


def test_logic_longer_than_the_finish_limit_is_explained():
    net = net_of([("A", 10), ("B", 10)], [("A", "B")])
    with pytest.raises(
        LevellingInfeasible, match="the logic alone finishes 2027-03-26"
    ):
        level(net, finish=dt.date(2027, 3, 19))


def test_crews_that_cannot_meet_the_finish_limit_raise_with_an_explanation():
    # Two 5-day activities on one single crew need two weeks; the logic alone
    # needs one.
    net = net_of(
        [
            {"key": "A", "duration": 5, "demands": {"c": 1}},
            {"key": "B", "duration": 5, "demands": {"c": 1}},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )
    with pytest.raises(LevellingInfeasible, match="finishes by 2027-03-10") as caught:
        level(net, finish=dt.date(2027, 3, 10))
    assert caught.value.problems[0].code == "crews_need_longer"


def test_finish_limit_that_the_crews_can_meet_is_kept():
    net = net_of(
        [
            {"key": "A", "duration": 5, "demands": {"c": 1}},
            {"key": "B", "duration": 5, "demands": {"c": 1}},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )
    result = level(net, finish=dt.date(2027, 3, 12))
    assert result.finish == dt.date(2027, 3, 12)
    assert_checked(net, result, finish=dt.date(2027, 3, 12))


def test_unknown_goal_is_refused():
    net = net_of([("A", 1)])
    with pytest.raises(ValueError, match="goal must be one of shortest, smooth"):
        level(net, goal="fastest")


# --- solver status mapping --------------------------------------------------


def _status_only(status):
    def fake(m, plan, *, phase, hint, time_limit, workers, seed, **_):
        stats = lv.SolveStats(phase, "UNKNOWN", 0.0, 0, 0, None, None)
        return lv._Solved(status, None, None, None, stats)

    return fake


def test_unknown_status_returns_the_heuristic_schedule(monkeypatch):
    net = random_network(5, capacity=1)
    monkeypatch.setattr(lv, "solve", _status_only(cp.UNKNOWN))
    result = level(net, time_limit=1)
    assert result.status == "no_solution_in_time"
    assert result.finish == result.heuristic_finish
    assert "heuristic" in result.message
    assert_checked(net, result)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_a_finish_limit_nothing_met_in_time_is_a_clear_error(monkeypatch, seed):
    # Single crews and a limit on the logic's own finish: the priority rules
    # find no schedule by then, and the solver (made to find nothing) neither.
    net = random_network(seed, capacity=1)
    plan = lv._prepare(net, "shortest", None, None)
    assert plan.heuristic is not None and plan.heuristic.finish > plan.logic_finish
    limit = net.start + dt.timedelta(days=plan.logic_finish)
    monkeypatch.setattr(lv, "solve", _status_only(cp.UNKNOWN))
    with pytest.raises(LevellingInfeasible) as err:
        level(net, time_limit=1, finish=limit)
    (problem,) = err.value.problems
    assert problem.pointer == "/finish"
    assert problem.code == "no_schedule_by_finish_in_time"
    assert str(limit) in problem.message


def test_feasible_is_reported_feasible_with_its_gap(monkeypatch):
    real = lv.solve

    def unproven(*args, **kw):
        got = real(*args, **kw)
        if got.status == cp.OPTIMAL:
            got.status = cp.FEASIBLE
            got.bound = (got.bound or 0) - 1  # as if the proof were unfinished
        return got

    net = random_network(5, capacity=1)
    monkeypatch.setattr(lv, "solve", unproven)
    result = level(net, time_limit=5)
    assert result.status == "feasible"
    assert result.gap_percent > 0
    assert result.bound is not None and result.bound < result.finish
    assert_checked(net, result)


def test_model_invalid_is_a_bug_and_raises(monkeypatch):
    net = net_of([{"key": "A", "duration": 1}])
    original = lv.build_model

    def broken(plan):
        m = original(plan)
        span = m.model.new_fixed_size_interval_var(m.pos[0], 1, "bad")
        m.model.add_cumulative([span], [-1], 1)  # a negative demand
        return m

    monkeypatch.setattr(lv, "build_model", broken)
    with pytest.raises(RuntimeError, match="levelling model invalid"):
        level(net)


def test_a_schedule_the_checker_refuses_is_never_returned(monkeypatch):
    net = net_of([("A", 2), ("B", 2)], [("A", "B")])
    monkeypatch.setattr(lv, "check_schedule", lambda *a, **k: ["made up"])
    with pytest.raises(lv.ScheduleRejected, match="made up"):
        level(net)
