"""The compiled serial passes (:mod:`scheduling.engine.passes`) against their
Python twins in :class:`scheduling.engine.improve.Decoder`.

Both must give the same schedule for the same activity list, tie for tie:
the serial scheme, the forward-backward improvement (Tormos & Lova, Annals of
Operations Research 102, 2001) and the start order. Compared on random lists
over PSPLIB instances (Kolisch & Sprecher, EJOR 96, 1996/97) and over an
invented one-calendar network with holidays, crew absences, not-before dates,
work fixed in place and a tight end limit. Every compiled child of the
genetic search passes the independent checker.
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import random

import numpy as np
import pytest

from scheduling.engine import Crew, build_network, passes
from scheduling.engine import levelling as lv
from scheduling.engine.checker import check_schedule
from scheduling.engine.heuristic import Timeline
from scheduling.engine.improve import (
    Decoder,
    _sample,
    genetic_schedule,
    shift_search,
    turns,
)
from scheduling.engine.psplib import datasets_dir, load_instance

from .test_levelling import FIVE, START, random_network

pytestmark = pytest.mark.skipif(
    passes.njit is None, reason="Numba is not installed: nothing is compiled"
)


def flat_network(seed: int, n: int = 30, *, dates: bool = True):
    """An invented fit-out network on one calendar (weekdays with holidays):
    all four relation types with working-day lags, three crews, one of them
    away for a week, and two not-before dates (none with ``dates=False``)."""
    rng = np.random.default_rng(seed)
    duration = rng.integers(0, 7, size=n)
    pairs = set()
    for k in range(1, n):
        for _ in range(int(rng.integers(1, 3))):
            pairs.add((int(rng.integers(max(0, k - 8), k)), k))
    pairs = sorted(pairs)
    dem_a, dem_c, dem_u = [], [], []
    for i in range(n):
        for k in rng.choice(3, size=int(rng.integers(0, 3)), replace=False):
            dem_a += [i]
            dem_c += [int(k)]
            dem_u += [int(rng.integers(1, 3))]
    away = ((START + dt.timedelta(days=14), START + dt.timedelta(days=20)),)
    crews = [
        Crew("C0", "Drylining gang", 2, 0),
        Crew("C1", "Electricians", 3, 0, unavailable=away),
        Crew("C2", "Plasterers", 2, 0),
    ]
    not_before = np.full(n, np.iinfo(np.int64).min, dtype=np.int64)
    if dates:
        not_before[n // 2] = 10
        not_before[n - 3] = 25
    return build_network(
        name=f"flat {seed}",
        start=START,
        calendars=[FIVE],
        keys=[f"F{i}" for i in range(n)],
        duration=duration,
        rel_pred=[p for p, _ in pairs],
        rel_succ=[s for _, s in pairs],
        rel_type=rng.integers(0, 4, size=len(pairs)),
        rel_lag=rng.integers(0, 4, size=len(pairs)),
        not_before=not_before,
        crews=crews,
        dem_activity=dem_a,
        dem_crew=dem_c,
        dem_units=dem_u,
    )


def _timeline(net, factor: int = 2) -> tuple[Timeline, list[int]]:
    plan = lv._prepare(net, "shortest", None, None)
    tl = lv.build_timeline(net, factor * plan.finish_max + 2)
    late = [
        tl.pos(tl.cal[i], plan.tl.day(plan.tl.cal[i], plan.ls[i]))
        for i in range(tl.size)
    ]
    return tl, [float(tl.finish_day(i, late[i])) for i in range(tl.size)]


def _both(tl: Timeline, limit: int) -> tuple[Decoder, Decoder]:
    slow, fast = Decoder(tl, limit, compiled=False), Decoder(tl, limit, compiled=True)
    assert not slow.compiled
    assert fast.compiled
    return slow, fast


def _agree(tl: Timeline, lft, limit: int, lists: int, seed: int) -> int:
    """Compare both decoders on ``lists`` random lists; how many fitted."""
    slow, fast = _both(tl, limit)
    rng = random.Random(seed)
    fitted = 0
    for _ in range(lists):
        noisy = [x + rng.uniform(-8.0, 8.0) for x in lft]
        order = _sample(slow, noisy, rng)
        pos = slow.decode(order)
        assert fast.decode(order) == pos
        if pos is None:
            continue
        fitted += 1
        finish = slow.finish_of(pos)
        assert fast.backward(list(pos), finish) == slow.backward(list(pos), finish)
        assert fast.forward(list(pos)) == slow.forward(list(pos))
        assert fast.improve(list(pos)) == slow.improve(list(pos))
        assert fast.improve(list(pos), 1) == slow.improve(list(pos), 1)
        assert fast.order_of(pos) == slow.order_of(pos)
    return fitted


@pytest.mark.parametrize("seed", range(6))
def test_compiled_passes_match_python_on_an_invented_network(seed):
    net = flat_network(seed)
    tl, lft = _timeline(net)
    assert _agree(tl, lft, tl.horizon, 40, seed) == 40


@pytest.mark.parametrize("seed", range(6))
def test_compiled_passes_match_python_with_fixed_work_and_a_tight_limit(seed):
    net = flat_network(seed)
    tl, lft = _timeline(net)
    dec = Decoder(tl, tl.horizon, compiled=False)
    first = dec.decode(list(tl.order))
    assert first is not None
    # Work under way stays where it is: pin the first two activities placed.
    for i in sorted(range(tl.size), key=lambda i: first[i])[:2]:
        tl.pinned[i] = first[i]
    # A limit a little past the serial finish: some lists no longer fit.
    limit = dec.finish_of(first) + 1
    fitted = _agree(tl, lft, limit, 60, seed)
    assert 0 < fitted < 60


@pytest.mark.parametrize("seed", range(3))
def test_pinned_work_stays_on_its_pin_in_both_passes(seed):
    # Work done or under way is pinned: the backward pass may not push it
    # later, however much room it has, and a list that would place it later
    # decodes to nothing (in Python and compiled alike).
    net = flat_network(seed)
    tl, lft = _timeline(net)
    free = Decoder(tl, tl.horizon, compiled=False)  # before any pin
    first = free.decode(list(tl.order))
    assert first is not None
    finish = free.finish_of(first)
    late = free.backward(list(first), finish)
    slack = [i for i in range(tl.size) if late[i] > first[i]]
    assert slack  # some work has room to move later
    rng = random.Random(seed)
    lists = [
        _sample(free, [x + rng.uniform(-8.0, 8.0) for x in lft], rng) for _ in range(40)
    ]
    pushed = {
        i
        for pos in map(free.decode, lists)
        if pos is not None
        for i in range(tl.size)
        if pos[i] > first[i]
    }
    assert pushed  # unpinned, some lists place some work later than first
    # Pinned as the levelling pins work done: on its day, and not before it.
    pins = {i: first[i] for i in (slack[0], min(pushed))}
    lb = list(tl.lb_day)
    for i, p in pins.items():
        lb[i] = tl.day(tl.cal[i], p)
    tl = dataclasses.replace(tl, pinned=pins, lb_day=tuple(lb))
    for dec in _both(tl, tl.horizon):
        assert dec.backward(list(first), finish)[slack[0]] == first[slack[0]]
        for order in lists:
            got = dec.decode(order)
            assert got is None or all(got[i] == p for i, p in tl.pinned.items())


@pytest.mark.skipif(
    not (datasets_dir() / "solutions" / "j30opt.sm").is_file(),
    reason=f"PSPLIB data set not found at {datasets_dir()}",
)
@pytest.mark.parametrize(("size", "group"), [(30, 1), (60, 9), (120, 6)])
def test_compiled_passes_match_python_on_psplib(size, group):
    net = load_instance(size, group, 1).network
    tl, lft = _timeline(net)
    assert _agree(tl, lft, tl.horizon, 15, group) == 15


def test_networks_the_passes_cannot_read_stay_in_python():
    # Two calendars and calendar-day lags: relations that are no plain
    # offset between positions.
    tl, _ = _timeline(random_network(3, capacity=2))
    assert not Decoder(tl, tl.horizon).compiled


def test_the_search_gets_the_longer_time_only_with_compiled_passes():
    two_calendars = lv._prepare(random_network(3, capacity=2), "shortest", None, None)
    one_calendar = lv._prepare(flat_network(0), "shortest", None, None)
    assert lv._genetic_time(two_calendars) == (
        lv.PYTHON_GENETIC_SHARE,
        lv.PYTHON_GENETIC_MAX_SECONDS,
    )
    assert lv._genetic_time(one_calendar) == (
        lv.GENETIC_SHARE,
        lv.GENETIC_MAX_SECONDS,
    )
    assert lv.GENETIC_MAX_SECONDS > lv.PYTHON_GENETIC_MAX_SECONDS


@pytest.mark.parametrize("seed", range(4))
def test_compiled_generations_give_checked_schedules(seed):
    net = flat_network(seed, n=40)
    tl, lft = _timeline(net)
    dec = Decoder(tl, tl.horizon)
    rng = random.Random(seed)
    parents = [_sample(dec, lft, rng) for _ in range(12)]
    children = dec.breed(parents, 0.1, 1 << 30, seed)
    assert children == dec.breed(parents, 0.1, 1 << 30, seed)
    assert len(children) == 12
    for order, pos, finish in children:
        assert sorted(order) == list(range(tl.size))
        assert dec.order_of(pos) == order
        assert finish == dec.finish_of(pos)
        starts = {net.keys[i]: tl.date(tl.day(tl.cal[i], p)) for i, p in enumerate(pos)}
        ends = {net.keys[i]: tl.date(tl.finish_day(i, p)) for i, p in enumerate(pos)}
        assert check_schedule(net, starts, finishes=ends) == []
    best = min(children, key=lambda c: c[2])
    got = genetic_schedule(
        tl,
        lft,
        limit=tl.horizon,
        seeds=[best[1]],
        population=12,
        generations=20,
        seed=seed,
    )
    assert got is not None
    assert got.finish <= best[2]
    starts = {net.keys[i]: tl.date(tl.day(tl.cal[i], p)) for i, p in enumerate(got.pos)}
    ends = {net.keys[i]: tl.date(tl.finish_day(i, p)) for i, p in enumerate(got.pos)}
    assert check_schedule(net, starts, finishes=ends) == []


def _checked(net, tl: Timeline, pos) -> list:
    starts = {net.keys[i]: tl.date(tl.day(tl.cal[i], p)) for i, p in enumerate(pos)}
    ends = {net.keys[i]: tl.date(tl.finish_day(i, p)) for i, p in enumerate(pos)}
    return check_schedule(net, starts, finishes=ends)


@pytest.mark.parametrize("seed", range(6))
def test_schedules_built_from_the_finish_back_pass_the_checker(seed):
    # Lists decoded and improved on the turned problem, turned back: every
    # relation type with lags, the crew away for a week, holidays.
    net = flat_network(seed, n=40, dates=False)
    tl, _ = _timeline(net)
    assert turns(tl)
    roomy = Decoder(tl, tl.horizon)
    first = roomy.decode(list(tl.order))
    assert first is not None
    # A tight room, so that schedules from the finish back reach the start
    # and the week the electricians are away.
    dec = Decoder(tl, roomy.finish_of(first) + 4)
    twin = dec.turned()
    assert twin is not None
    assert twin.turn(dec.turn(first)) == first  # the map is its own inverse
    lft = [-float(x) for x in dec.turn(first)]
    rng = random.Random(seed)
    fitted = 0
    for _ in range(40):
        order = _sample(twin, [x + rng.uniform(-8.0, 8.0) for x in lft], rng)
        back = twin.decode(order)
        if back is None:
            continue
        fitted += 1
        assert _checked(net, tl, twin.turn(back)) == []
        better, finish = twin.improve(back)
        # Finish days of the turned problem: positions on an every-day axis.
        ends = [p + max(d - 1, 0) for p, d in zip(back, twin.dur, strict=True)]
        assert finish <= max(ends)
        assert _checked(net, tl, twin.turn(better)) == []
    assert fitted > 0


@pytest.mark.parametrize("seed", range(4))
def test_the_search_from_the_finish_is_checked_and_no_longer_than_its_seed(seed):
    net = flat_network(seed, n=40, dates=False)
    tl, lft = _timeline(net)
    dec = Decoder(tl, tl.horizon)
    first = dec.improve(dec.decode(list(tl.order)))
    kwargs = dict(limit=tl.horizon, seeds=[first[0]], population=12, seed=seed)
    runs = [
        genetic_schedule(tl, lft, generations=10, local_steps=200, turn=True, **kwargs)
        for _ in range(2)
    ]
    assert runs[0] == runs[1]  # the same seed, the same schedule
    got = runs[0]
    assert got is not None
    assert got.finish <= first[1]
    assert got.finish == dec.finish_of(list(got.pos))
    assert _checked(net, tl, got.pos) == []


def test_problems_that_cannot_be_turned_are_left_to_the_search_from_the_start():
    # A not-before date later than the rest would turn into a deadline; work
    # under way is fixed; two calendars with calendar-day lags do not compile.
    dated, _ = _timeline(flat_network(0, dates=True))
    pinned, lft = _timeline(flat_network(0, dates=False))
    pinned.pinned[0] = Decoder(pinned, pinned.horizon).decode(list(pinned.order))[0]
    two, _ = _timeline(random_network(3, capacity=2))
    for tl in (dated, pinned, two):
        assert not turns(tl)
        assert Decoder(tl, tl.horizon).turned() is None
    got = genetic_schedule(pinned, lft, limit=pinned.horizon, generations=2, turn=True)
    assert got is None


def _short_first_solve(monkeypatch) -> None:
    """Cut the first goal solve to 0.05 s, so that it cannot prove the
    finish and the genetic search runs (left to its 0.1 × limit, CP-SAT
    proves the network below in 0.6 s in some runs and not in others)."""
    monkeypatch.setattr(lv, "_probe_time", lambda plan, goal_time: 0.05)


@pytest.mark.parametrize("dates", [False, True])
def test_the_levelling_runs_the_search_from_the_finish_where_it_turns(
    dates, monkeypatch
):
    # 60 fit-out activities on tight crews: the short first solve does not
    # prove them, so the genetic search runs, and beside it the search from
    # the finish back, or CP-SAT where a not-before date keeps the problem
    # from turning round.
    _short_first_solve(monkeypatch)
    net = flat_network(4, n=60, dates=dates)
    seen = []
    result = lv.level(
        net, time_limit=4, on_progress=lambda f, b, t: seen.append((f, t))
    )
    phases = [s.phase for s in result.stats]
    assert "genetic" in phases
    beside = "beside genetic" if dates else "genetic from the finish"
    assert beside in phases
    assert ("genetic from the finish" in phases) is not dates
    assert check_schedule(net, result.starts, finishes=result.finishes) == []
    assert seen and seen[-1][0] == result.finish


def test_the_search_from_the_finish_ends_when_the_other_fails(monkeypatch):
    # A lost run raises from the progress callback inside the search from
    # the start; the search beside it must not go on burning a core.
    import threading
    import time

    real = lv._genetic_hint
    ended = threading.Event()
    took = []

    def hint(*args, turn=False, **kwargs):
        if not turn:
            time.sleep(0.2)
            raise RuntimeError("the run was lost")
        t0 = time.perf_counter()
        try:
            return real(*args, turn=turn, **kwargs)
        finally:
            took.append(time.perf_counter() - t0)
            ended.set()

    monkeypatch.setattr(lv, "_genetic_hint", hint)
    _short_first_solve(monkeypatch)
    with pytest.raises(RuntimeError, match="lost"):
        lv.level(flat_network(4, n=60, dates=False), time_limit=8)
    assert ended.wait(5)
    assert took[0] < 1.5  # its own time would have been about 6.5 s


@pytest.mark.parametrize("seed", range(4))
def test_a_compiled_shift_keeps_the_list_precedence_feasible(seed):
    net = flat_network(seed, n=40)
    tl, _ = _timeline(net)
    dec = Decoder(tl, tl.horizon)
    first = dec.decode(list(tl.order))
    order = np.array(dec.order_of(first), dtype=np.int64)
    where = np.argsort(order)
    lists = set()
    for _ in range(300):
        passes._shift(order, where, dec.in_ptr, dec.in_src, dec.out_ptr, dec.out_dst)
        assert sorted(order.tolist()) == list(range(tl.size))
        assert (where[order] == np.arange(tl.size)).all()
        assert all(where[r.pred] < where[r.succ] for r in tl.relations)
        lists.add(tuple(order.tolist()))
    assert len(lists) > 50


@pytest.mark.parametrize("seed", range(4))
def test_the_compiled_local_search_is_checked_and_never_longer(seed):
    # All four relation types with lags, a crew away for a week, not-before
    # dates: every schedule it reports passes the independent checker.
    net = flat_network(seed, n=40)
    tl, _ = _timeline(net)
    dec = Decoder(tl, tl.horizon)
    assert dec.compiled
    start = dec.decode(list(tl.order))
    before = dec.finish_of(start)
    heard: list[tuple[list[int], int]] = []
    runs = [
        shift_search(
            dec,
            list(start),
            before,
            random.Random(seed),
            steps=600,
            better=lambda pos, finish: heard.append((pos, finish)),
        )
        for _ in range(2)
    ]
    assert runs[0] == runs[1]  # the same seed, the same schedule
    pos, finish = runs[0]
    assert finish <= before
    assert finish == dec.finish_of(pos)
    assert _checked(net, tl, pos) == []
    # Each sooner finish was reported, in order, the last one returned.
    days = [f for _, f in heard[: len(heard) // 2]]
    assert days == sorted(set(days), reverse=True)
    assert all(f < before for f in days)
    if days:
        assert heard[len(days) - 1] == (pos, finish)
    for got, _ in heard:
        assert _checked(net, tl, got) == []
    # A chunk of steps walks only to schedules that finish no later.
    steps, order, now, got = passes.shift_steps(
        np.array(dec.order_of(pos), dtype=np.int64),
        np.array(pos, dtype=np.int64),
        finish,
        300,
        6,
        seed,
        1 << 30,
        dec.a_hi,
        *dec._all_args(),
    )
    assert got <= finish
    assert steps == 300 or got < finish  # it stops early only on a gain
    assert got == dec.finish_of(now.tolist())
    assert order.tolist() == dec.order_of(now.tolist())
    assert _checked(net, tl, now.tolist()) == []


def test_the_compiled_local_search_asks_whether_to_stop():
    net = flat_network(2, n=40)
    tl, _ = _timeline(net)
    dec = Decoder(tl, tl.horizon)
    start = dec.decode(list(tl.order))
    before = dec.finish_of(start)
    asked: list[int] = []

    def done(best: int) -> bool:
        asked.append(best)
        return len(asked) > 2

    shift_search(dec, start, before, random.Random(0), steps=1 << 40, done=done)
    assert len(asked) == 3  # two chunks of steps, then the stop


def test_warm_up_compiles_every_pass():
    passes.warm_up()
    assert passes.is_warm()
    for fn in (
        passes.decode,
        passes.improve,
        passes.order_of,
        passes.breed,
        passes.shift_steps,
    ):
        assert fn.signatures


def test_warm_up_is_needed_only_where_the_genetic_search_runs(monkeypatch):
    monkeypatch.setattr(passes, "_warm", False)
    small, mid = flat_network(1, n=lv.GENETIC_MIN_ACTIVITIES - 1), flat_network(1, 60)
    assert not lv.needs_warm_up(small)
    assert lv.needs_warm_up(mid)
    monkeypatch.setattr(passes, "_warm", True)
    assert not lv.needs_warm_up(mid)
