"""Crew levelling with constraint programming (OR-Tools CP-SAT).

:func:`level` schedules a network so that no crew is asked for more than it
has, with one of two goals:

* ``"shortest"`` — the earliest finish that respects every crew's capacity
  (the resource-constrained project scheduling problem), with a proven lower
  bound on that finish;
* ``"smooth"`` — keep a given finish (by default the critical-path finish) and
  spread each crew's daily demand as evenly as possible: capacity becomes
  soft, the peak over capacity is minimised first, then, with that peak held,
  the day-to-day changes of demand.

Given the previous plan, a further solve keeps as many activities as it can
where they were (the goal's result held), then moves the rest as little as it
can, and says why each moved.

Time and relations follow the critical path exactly (see :mod:`.heuristic`
and :mod:`.cpm`): the solver's time axis is calendar days from the project
start; an activity's start is a working day of its calendar, its end comes
through the calendar's tables, so a span may cross weekends and holidays
without being split. A crew is held over the whole span of an activity: exact
when the crew's activities share a calendar (nothing of theirs can start on
the days off inside a span), cautious otherwise. A crew's days off are not
taken from its capacity — a span across a weekend would become impossible —
while an unavailable period is a fixed block that uses up the whole capacity.

The steps are the CP-SAT order: data (:func:`_prepare`), model
(:func:`build_model`), solve (:func:`solve`), read out (:func:`read_out`).
Every schedule returned has passed :func:`~.checker.check_schedule`.

Float after levelling follows Kim & de la Garza, "Phantom float" (J. Constr.
Eng. Manage. 129(5), 2003): crew links — which activity hands crew units on to
which — are added to the logic, and the backward pass on both gives float that
respects the crews and a driving path that is continuous, each step driven by
a relation or a crew.
"""

from __future__ import annotations

import datetime as dt
import heapq
import threading
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace

import numpy as np
from ortools.sat.python import cp_model as cp

from . import passes
from .checker import check_schedule
from .cpm import CpmResult, Driver, critical_path, date_bound
from .heuristic import (
    Relation,
    Schedule,
    Stuck,
    Timeline,
    best_heuristic,
    build_timeline,
)
from .improve import compiles, genetic_schedule, turns
from .network import NO_DATE, RELATION_TYPES, Network
from .problems import NetworkInvalid, Problem, pointer
from .progress import FINISHED, NOT_STARTED, STARTED, Rewrite, rewrite, status_of

GOALS = ("shortest", "smooth")
#: A hard upper limit on the horizon the heuristic may search, in days (about
#: 40 years): beyond it a crew is taken to have no availability at all.
MAX_HORIZON_DAYS = 14_610

ProgressFn = Callable[[dt.date, "dt.date | None", float], None]


class LevellingInfeasible(NetworkInvalid):
    """No schedule meets the crews and the limits; the problems say why."""


class LevellingStopped(RuntimeError):
    """The caller's ``should_stop`` turned true: nothing is returned."""


#: Seconds between two looks at ``should_stop`` during a solve.
STOP_POLL = 0.2


class ScheduleRejected(RuntimeError):
    """The independent checker refused a schedule: a bug in the levelling."""


# ---------------------------------------------------------------------------
# Results


#: What holds a levelled start where it is: the critical path's
#: :class:`~.cpm.Driver`, whose kinds include the crews'.
LevelDriver = Driver


@dataclass(frozen=True, slots=True)
class LevelStep:
    key: str
    name: str
    driver: LevelDriver


@dataclass(frozen=True, slots=True)
class LevelledActivity:
    """One activity after levelling.

    ``finish`` is inclusive (the last working day; a milestone's finish is its
    start). ``total_float``/``free_float`` are the crew-aware floats in working
    days of the activity's calendar: how far it can slip with the logic *and*
    the crew hand-overs kept (total: without moving the project finish or a
    deadline; free: without moving anything else). ``late_start``/
    ``late_finish`` are the matching latest dates. ``lateness`` is the calendar
    days past the activity's deadline (0 when on time), ``None`` without one.
    """

    key: str
    start: dt.date
    finish: dt.date
    late_start: dt.date
    late_finish: dt.date
    total_float: int
    free_float: int
    critical: bool
    lateness: int | None


@dataclass(frozen=True, slots=True)
class Move:
    """An activity that starts on another date than in the previous plan.

    ``days`` is signed, in working days of the activity's calendar (positive:
    later). ``reason``: ``"progress"`` (work done or under way, a previous
    date before the data date, or a move forced by such a move),
    ``"network change"`` (the previous date breaks the
    network now — its logic, durations, dates or calendars — or a move forced
    by such a move), ``"crew change"`` (the previous plan overloads a crew the
    activity uses — capacity, unavailable periods or demands changed — or a
    move forced by such a move), ``"goal"`` (the previous date would still be
    feasible: the goal moved it).
    """

    key: str
    previous: dt.date
    start: dt.date
    days: int
    reason: str


@dataclass(frozen=True, slots=True)
class CrewLink:
    """``pred`` hands ``units`` of ``crew`` on to ``succ`` (``pred`` ends first).

    ``pred`` or ``succ`` is ``None`` for a crew's unavailable period (its
    dates are ``block``).
    """

    crew: str
    pred: str | None
    succ: str | None
    units: int
    block: tuple[dt.date, dt.date] | None = None


@dataclass(frozen=True, slots=True)
class SolveStats:
    """One CP-SAT solve. ``objective``/``bound`` are in the solve's own units."""

    phase: str
    status: str
    wall_time: float
    branches: int
    conflicts: int
    objective: int | None
    bound: int | None


@dataclass(frozen=True)
class LevelResult:
    """A levelled schedule.

    ``status``: ``"optimal"`` (the goal is proven best), ``"feasible"`` (a
    schedule, not proven best), ``"no_solution_in_time"`` (the solver found
    nothing: this is the heuristic's schedule) — an infeasible problem raises
    :class:`LevellingInfeasible` instead.

    ``finish`` is the project finish (latest finish date). ``bound`` is a date:
    for ``"shortest"`` no crew-feasible schedule finishes before it (equal to
    ``finish`` when optimal); for ``"smooth"`` it is ``None``. ``objective`` and
    ``objective_bound`` are the goal solve's figures: the finish in calendar
    days from the project start (``"shortest"``), or the crew units over
    capacity, summed over crews (``"smooth"``); activity lateness, when there
    are deadlines, is a lower-order term folded into neither (see
    ``lateness``). ``gap_percent`` = 100 · (objective − bound) / objective.

    ``over_capacity`` lists, per crew, how many units over its capacity the
    schedule asks on its worst day (always zero for ``"shortest"``).
    """

    status: str
    goal: str
    finish: dt.date
    bound: dt.date | None
    gap_percent: float
    objective: int
    objective_bound: int
    activities: tuple[LevelledActivity, ...]
    moved: tuple[Move, ...]
    crew_links: tuple[CrewLink, ...]
    critical_path: tuple[LevelStep, ...]
    over_capacity: tuple[tuple[str, int], ...]
    heuristic_finish: dt.date | None
    stats: tuple[SolveStats, ...]
    wall_time: float
    message: str = ""
    _index: dict[str, int] = field(default_factory=dict, repr=False, compare=False)

    def __post_init__(self) -> None:
        self._index.update({a.key: i for i, a in enumerate(self.activities)})

    @property
    def starts(self) -> dict[str, dt.date]:
        return {a.key: a.start for a in self.activities}

    @property
    def finishes(self) -> dict[str, dt.date]:
        return {a.key: a.finish for a in self.activities}

    @property
    def lateness(self) -> dict[str, int]:
        """Calendar days late, per activity that has a deadline."""
        return {a.key: a.lateness for a in self.activities if a.lateness is not None}

    @property
    def branches(self) -> int:
        return sum(s.branches for s in self.stats)

    def activity(self, key: str) -> LevelledActivity:
        return self.activities[self._index[key]]


# ---------------------------------------------------------------------------
# Data


@dataclass
class _Plan:
    """Everything the model needs, in integers (days from the project start)."""

    network: Network
    cpm: CpmResult
    tl: Timeline
    goal: str
    limit: int | None  # latest finish day allowed, or None
    es: list[int]  # earliest start positions (critical path)
    ls: list[int]  # latest start positions for the model's horizon
    finish_max: int  # latest finish day the model may use
    logic_finish: int  # critical-path finish day (latest early finish)
    heuristic: Schedule | None
    heuristic_rule: str
    previous: dict[int, int]  # activity → previous start day
    deadline: dict[int, int]  # activity → deadline day
    #: Work done or under way (see :mod:`.progress`): activity → start day.
    pinned: dict[int, int] = field(default_factory=dict)
    #: The network as given, when it holds progress (``network`` is then the
    #: work network of :func:`.progress.rewrite`).
    rewrite: Rewrite | None = None


def _days(cpm: CpmResult, days: np.ndarray) -> list[int]:
    """Table days of a critical-path result as days from the project start."""
    off = (cpm.network.start - cpm.tables.origin).days
    return [int(x) - off for x in days]


def _prepare(
    network: Network,
    goal: str,
    finish: dt.date | None,
    previous: Mapping[str, dt.date] | None,
    rw: Rewrite | None = None,
) -> _Plan:
    """Check what can be checked before a solve and lay out the integer data.

    Raises :class:`LevellingInfeasible` for an activity that needs more of a
    crew than it has, a ``not_before`` past the finish limit, logic that cannot
    meet the limit, a crew with no room for an activity before the horizon,
    or work under way that needs more of a crew than it has.
    """
    net = network
    cpm = critical_path(net)
    problems: list[Problem] = []
    pin_day = _pinned_days(net, cpm, rw)
    for a, k, u in zip(
        net.dem_activity.tolist(),
        net.dem_crew.tolist(),
        net.dem_units.tolist(),
        strict=True,
    ):
        crew = net.crews[k]
        if u > crew.capacity and net.duration[a] > 0:
            problems.append(
                Problem(
                    pointer("activities", a, "demands", crew.key),
                    "demand_over_capacity",
                    f"activity {net.keys[a]} needs {u} of crew {crew.key}, which "
                    f"has {crew.capacity} on every day; no date can fit it",
                )
            )
    early_finish = _days(cpm, cpm.early_finish_day)
    logic_finish = max(early_finish)
    limit = None
    if finish is not None:
        limit = (finish - net.start).days
    elif goal == "smooth":
        limit = logic_finish
    if limit is not None:
        for i in range(net.size):
            nb = int(net.not_before[i])
            if nb != NO_DATE and nb > limit:
                problems.append(
                    Problem(
                        pointer("activities", i, "not_before"),
                        "not_before_after_horizon",
                        f"activity {net.keys[i]}: not before "
                        f"{net.start + dt.timedelta(days=nb)} is after the finish "
                        f"limit {net.start + dt.timedelta(days=limit)}",
                    )
                )
        if logic_finish > limit and not problems:
            last = cpm.critical_path[-1].key if cpm.critical_path else net.keys[0]
            problems.append(
                Problem(
                    "/project",
                    "logic_after_horizon",
                    "the logic alone finishes "
                    f"{net.start + dt.timedelta(days=logic_finish)} "
                    f"(activity {last}), after the finish limit "
                    f"{net.start + dt.timedelta(days=limit)}",
                )
            )
    if problems:
        raise LevellingInfeasible(problems)

    prev_day: dict[int, int] = {}
    index = {k: i for i, k in enumerate(net.keys)}
    for key, day in (previous or {}).items():
        if key in index:
            prev_day[index[key]] = (day - net.start).days
    deadline = {
        i: int(d) for i, d in enumerate(net.act_deadline.tolist()) if d != NO_DATE
    }

    es_day = _days(cpm, cpm.early_start_day)
    ls_day = _days(cpm, cpm.late_start_day)
    heuristic: Schedule | None = None
    rule = ""
    if pin_day and goal == "shortest":
        _check_pinned_room(net, pin_day, rw, logic_finish, problems)
        if problems:
            raise LevellingInfeasible(problems)
    if limit is not None:
        tl, es = _timeline(net, limit + 1, es_day, pin_day)
        late = [tl.pos(tl.cal[i], ls_day[i]) for i in range(net.size)]
        first = _previous_priority(tl, prev_day, es) if prev_day else None
        heuristic, stuck, rule = best_heuristic(
            tl, es, late, limit=limit + 1, first=first
        )
        if heuristic is None and goal == "shortest" and stuck is not None:
            _explain_no_room(net, tl, stuck, problems, limit)
        # The shortest finish is no later than a schedule already in hand.
        finish_max = limit
        if heuristic is not None and goal == "shortest":
            finish_max = min(limit, heuristic.finish)
    else:
        # A first search limit: the logic's finish plus every crew-holding
        # span one after another (a week spare each); doubled while the
        # heuristic finds no room, up to MAX_HORIZON_DAYS.
        held = set(net.dem_activity.tolist())
        span = sum(early_finish[i] - es_day[i] + 8 for i in held if net.duration[i] > 0)
        cap = logic_finish + 1 + span
        while True:
            tl, es = _timeline(net, cap, es_day, pin_day)
            late = [tl.pos(tl.cal[i], ls_day[i]) for i in range(net.size)]
            first = _previous_priority(tl, prev_day, es) if prev_day else None
            heuristic, stuck, rule = best_heuristic(
                tl, es, late, limit=cap, first=first
            )
            if heuristic is not None:
                break
            if cap >= MAX_HORIZON_DAYS + logic_finish:
                assert stuck is not None
                _explain_no_room(net, tl, stuck, problems, None)
                raise LevellingInfeasible(
                    [
                        Problem(
                            pointer("activities", stuck.activity),
                            "no_room_before_horizon",
                            f"activity {net.keys[stuck.activity]} finds no room "
                            f"before the horizon {tl.date(cap - 1)}",
                        )
                    ]
                )
            cap = min(cap * 2, MAX_HORIZON_DAYS + logic_finish)
        finish_max = heuristic.finish
        # Tables just past the heuristic's finish: the model needs no more.
        tl, es = _timeline(net, finish_max + 1, es_day, pin_day)
    if problems:
        raise LevellingInfeasible(problems)
    ls = late_positions(tl, finish_max, [], deadlines=False)
    for i, p in tl.pinned.items():
        ls[i] = p
    return _Plan(
        network=net,
        cpm=cpm,
        tl=tl,
        goal=goal,
        limit=limit,
        es=es,
        ls=ls,
        finish_max=finish_max,
        logic_finish=logic_finish,
        heuristic=heuristic,
        heuristic_rule=rule,
        previous=prev_day,
        deadline=deadline,
        pinned=pin_day,
        rewrite=rw,
    )


def _pinned_days(net: Network, cpm: CpmResult, rw: Rewrite | None) -> dict[int, int]:
    """Activities the levelling may not move, with their start days.

    Work done and finished work start where they did. The remaining work of
    a started activity carries on where the critical path puts it (on the
    data date, or after its fixed predecessors) — unless, under retained
    logic, it still waits for work the levelling may move; then it moves
    with that work.
    """
    if rw is None or net.fixed_start is None:
        return {}
    es_day = _days(cpm, cpm.early_start_day)
    fixed = {i for i, d in enumerate(net.fixed_start.tolist()) if d != NO_DATE}
    preds: dict[int, set[int]] = {}
    for p, s in zip(net.rel_pred.tolist(), net.rel_succ.tolist(), strict=True):
        preds.setdefault(s, set()).add(p)
    pinned = set(fixed)
    for i, state in enumerate(rw.status):
        if state == STARTED and preds.get(i, set()) <= fixed:
            pinned.add(i)
    return {i: es_day[i] for i in sorted(pinned)}


def _timeline(
    net: Network, horizon: int, es_day: list[int], pin_day: dict[int, int]
) -> tuple[Timeline, list[int]]:
    """The timeline to ``horizon``, its early start positions, pins set."""
    tl = _pinned_timeline(net, horizon, pin_day)
    return tl, [tl.pos(tl.cal[i], es_day[i]) for i in range(net.size)]


def _pinned_timeline(net: Network, horizon: int, pin_day: dict[int, int]) -> Timeline:
    """The timeline to ``horizon`` with the activities of ``pin_day`` pinned to
    their days."""
    tl = build_timeline(net, horizon)
    if pin_day:
        tl = replace(tl, pinned={i: tl.pos(tl.cal[i], d) for i, d in pin_day.items()})
    return tl


def _check_pinned_room(
    net: Network,
    pin_day: dict[int, int],
    rw: Rewrite | None,
    horizon: int,
    problems: list[Problem],
) -> None:
    """Work under way that already needs more of a crew than it has.

    The levelling cannot move started work, so such an overload is reported
    before the solve, naming the crew, the day and the activities.
    """
    tl = build_timeline(net, horizon + 1)
    load: dict[tuple[int, int], list[tuple[int, int]]] = {}
    for i, day in pin_day.items():
        if not tl.dur[i]:
            continue
        p = tl.pos(tl.cal[i], day)
        for k, u in tl.demands[i]:
            for q in range(p, p + tl.dur[i]):
                load.setdefault((k, tl.day(tl.cal[i], q)), []).append((i, u))
    reported: set[int] = set()
    for (k, day), items in sorted(load.items(), key=lambda kv: kv[0][1]):
        total = sum(u for _, u in items)
        crew = net.crews[k]
        if total <= crew.capacity or k in reported:
            continue
        reported.add(k)
        names = ", ".join(
            (rw.source_key(net.keys[i]) if rw else net.keys[i]) or "" for i, _ in items
        )
        problems.append(
            Problem(
                pointer("crews", k),
                "started_work_over_capacity",
                f"crew {crew.key}: work under way ({names}) needs {total} of its "
                f"{crew.capacity} on {tl.date(day)}; started work is not moved by "
                "the levelling — record the progress again or add crew capacity",
            )
        )


def _previous_priority(
    tl: Timeline, prev_day: dict[int, int], es: list[int]
) -> list[float]:
    """Serial-scheme priorities that replay the previous plan: earlier first."""
    return [float(prev_day.get(i, tl.day(tl.cal[i], es[i]))) for i in range(tl.size)]


def _explain_no_room(
    net: Network,
    tl: Timeline,
    stuck: Stuck,
    problems: list[Problem],
    limit: int | None,
) -> None:
    """Turn the heuristic's dead end into a problem naming activity and crew."""
    key = net.keys[stuck.activity]
    when = net.start + dt.timedelta(days=stuck.limit - 1)
    if stuck.crew is None:
        return
    crew = net.crews[stuck.crew]
    if limit is None or not _has_room_before(tl, stuck.crew, stuck.limit):
        problems.append(
            Problem(
                pointer("crews", stuck.crew, "unavailable"),
                "crew_unavailable",
                f"crew {crew.key} has no room for activity {key} "
                f"({tl.dur[stuck.activity]} working days) before the horizon "
                f"{when}: its unavailable periods leave no long enough gap",
            )
        )
    if problems:
        raise LevellingInfeasible(problems)


def _has_room_before(tl: Timeline, k: int, limit: int) -> bool:
    free = 0
    last = 0
    for a, b in tl.blocks[k]:
        free += max(0, min(a, limit) - last)
        last = max(last, b)
    free += max(0, limit - last)
    return free > 0


# ---------------------------------------------------------------------------
# Model


@dataclass
class _Model:
    """The CP-SAT model and the variables the later steps read or hint.

    ``pos[i]`` is activity ``i``'s start position (working days of its
    calendar). Day variables are made only where something needs a day:
    ``start``/``end`` (start day, end instant) for spans of crews whose
    activities mix calendars, ``finish`` for the project finish and
    deadlines, ``rel_w`` for relations read through a table.
    """

    model: cp.CpModel
    plan: _Plan
    pos: list[cp.IntVar]
    makespan: cp.IntVar
    start: dict[int, cp.IntVar] = field(default_factory=dict)
    end: dict[int, cp.IntVar] = field(default_factory=dict)
    finish: dict[int, cp.IntVar] = field(default_factory=dict)
    finish_pos: dict[int, cp.IntVar] = field(default_factory=dict)
    span: dict[int, cp.IntVar] = field(default_factory=dict)
    rel_w: list[tuple[Relation, cp.IntVar]] = field(default_factory=list)
    late: dict[int, cp.IntVar] = field(default_factory=dict)
    over: dict[int, cp.IntVar] = field(default_factory=dict)
    goal_objective: cp.LinearExprT = 0
    goal_weight: int = 1
    intervals: dict[tuple[int, int | None], cp.IntervalVar] = field(
        default_factory=dict
    )
    tv: list[tuple[cp.IntVar, list[tuple[int, cp.IntVar]], int]] = field(
        default_factory=list
    )
    starts_at: dict[tuple[int, int], cp.IntVar] = field(default_factory=dict)
    moved: dict[int, tuple[cp.IntVar | None, cp.IntVar, int]] = field(
        default_factory=dict
    )

    # Expressions of a position through the calendar tables. An element
    # constraint reads a slice of the shared table over the activity's window.

    def _table(self, i: int, values: list[int], name: str) -> cp.IntVar:
        lo = self.plan.es[i]
        var = self.model.new_int_var_from_domain(
            cp.Domain.from_values(sorted(set(values))), f"{name}_{i}"
        )
        self.model.add_element(self.pos[i] - lo, values, var)
        return var

    def _window(self, i: int) -> range:
        return range(self.plan.es[i], self.plan.ls[i] + 1)

    def start_day(self, i: int) -> cp.LinearExprT:
        """The start day (days from the project start)."""
        tl = self.plan.tl
        c = tl.cal[i]
        if tl.identity[c]:
            return self.pos[i] - tl.pad
        if i not in self.start:
            self.start[i] = self._table(
                i, [tl.day(c, q) for q in self._window(i)], "start"
            )
        return self.start[i]

    def end_instant(self, i: int) -> cp.LinearExprT:
        """The end instant (the day after the finish; a milestone's start)."""
        tl = self.plan.tl
        if tl.dur[i] == 0:
            return self.start_day(i)
        if tl.identity[tl.cal[i]]:
            return self.pos[i] - tl.pad + tl.dur[i]
        if i not in self.end:
            self.end[i] = self._table(i, [tl.end(i, q) for q in self._window(i)], "end")
        return self.end[i]

    def finish_day(self, i: int) -> cp.LinearExprT:
        """The finish day (inclusive; a milestone's day)."""
        tl = self.plan.tl
        if tl.identity[tl.cal[i]]:
            return self.pos[i] - tl.pad + max(tl.dur[i] - 1, 0)
        if i not in self.finish:
            self.finish[i] = self._table(
                i, [tl.finish_day(i, q) for q in self._window(i)], "finish"
            )
        return self.finish[i]

    def interval(self, i: int, k: int) -> cp.IntervalVar:
        """Activity ``i`` on crew ``k``'s axis (positions or days)."""
        tl = self.plan.tl
        axis = tl.axis[k]
        key = (i, axis if axis is None else tl.cal[i])
        if key in self.intervals:
            return self.intervals[key]
        model = self.model
        if axis is not None or tl.identity[tl.cal[i]]:
            # Positions on the shared calendar: working days, fixed length.
            start = self.pos[i] if axis is not None else self.start_day(i)
            iv = model.new_fixed_size_interval_var(start, tl.dur[i], f"span_{i}")
        else:
            lengths = [tl.end(i, q) - tl.day(tl.cal[i], q) for q in self._window(i)]
            size = model.new_int_var(min(lengths), max(lengths), f"span_days_{i}")
            self.span[i] = size
            iv = model.new_interval_var(
                self.start_day(i), size, self.end_instant(i), f"span_{i}"
            )
        self.intervals[key] = iv
        return iv


def build_model(plan: _Plan) -> _Model:
    """Variables and constraints of the levelling, and the goal's objective.

    Each start is a position between its critical-path early start and its
    latest start for the horizon; every position is a working day of the
    activity's calendar, so starts fall on working days by construction, and
    days come through the calendar's tables (element constraints on slices
    of the shared tables) only where something needs them. Relations are
    linear on positions when both ends share a calendar and the lag is in
    working days (or both calendars work every day); the others read the
    successor's table through one element each. A crew's cumulative counts
    positions when all its activities share a calendar, days over whole spans
    otherwise.
    """
    tl, net = plan.tl, plan.network
    n = tl.size
    model = cp.CpModel()
    pos = []
    for i in range(n):
        if plan.ls[i] < plan.es[i]:
            raise AssertionError(f"empty window for {net.keys[i]}")
        pos.append(model.new_int_var(plan.es[i], plan.ls[i], f"pos_{i}"))
    m = _Model(
        model=model,
        plan=plan,
        pos=pos,
        makespan=model.new_int_var(plan.logic_finish, plan.finish_max, "finish"),
    )

    for r in tl.relations:
        _add_relation(m, plan, r)

    # The finish: only activities that can end last bound it. One with an FS
    # successor (no lead) never does, nor one that cannot pass the logic's
    # finish, which bounds the finish from below anyway. On a calendar that
    # does not work every day, "finishes by day M" reads as "ends by position
    # W[M + 1]": one table look-up of M per calendar, shared by all.
    for i in range(n):
        if any(rr.type == 0 and rr.wl >= 0 and rr.cl >= 0 for rr in tl.succs[i]):
            continue
        if tl.finish_day(i, plan.ls[i]) <= plan.logic_finish:
            continue
        c = tl.cal[i]
        if tl.identity[c]:
            model.add(m.makespan >= m.finish_day(i))
            continue
        if c not in m.finish_pos:
            days = range(plan.logic_finish, plan.finish_max + 1)
            table = [tl.Wl[c][t + 1 + tl.pad] for t in days]
            v = model.new_int_var(min(table), max(table), f"finish_on_{c}")
            model.add_element(m.makespan - plan.logic_finish, table, v)
            m.finish_pos[c] = v
        model.add(m.pos[i] + max(tl.dur[i], 1) <= m.finish_pos[c])

    # Crews: a cumulative each, with unavailable periods as fixed blocks.
    for k, crew in enumerate(net.crews):
        tasks = [
            (m.interval(i, k), u)
            for i in range(n)
            if tl.dur[i]
            for kk, u in tl.demands[i]
            if kk == k
        ]
        if not tasks:
            continue
        total = sum(u for _, u in tasks)
        limit = tl.axis_limit(k, plan.finish_max + 1)
        blocks = [
            (
                model.new_fixed_size_interval_var(a, b - a, f"away_{k}_{a}"),
                crew.capacity,
            )
            for a, b in tl.axis_blocks[k]
            if a < limit
        ]
        if plan.goal == "smooth":
            # Up to every demand at once, even during an unavailable period.
            over = model.new_int_var(0, total, f"over_{k}")
            m.over[k] = over
            capacity: cp.LinearExprT = crew.capacity + over
        else:
            if total <= crew.capacity and not blocks:
                continue  # never binding
            capacity = crew.capacity
        items = tasks + blocks
        model.add_cumulative([x for x, _ in items], [u for _, u in items], capacity)
    if plan.goal == "shortest" and CLIQUES:
        _add_cliques(m, plan)

    # Deadlines are soft: days late cost less than any change of the goal.
    max_late = 0
    for i, dl in plan.deadline.items():
        worst = max(tl.finish_day(i, plan.ls[i]) - dl, 0)
        v = model.new_int_var(0, worst, f"late_{i}")
        model.add(v >= m.finish_day(i) - dl)
        m.late[i] = v
        max_late += worst
    weight = max_late + 1
    main: cp.LinearExprT = (
        m.makespan
        if plan.goal == "shortest"
        else cp.LinearExpr.sum(list(m.over.values()))
    )
    m.goal_weight = weight
    m.goal_objective = main * weight + cp.LinearExpr.sum(list(m.late.values()))  # type: ignore[operator]
    model.minimize(m.goal_objective)
    return m


CLIQUES = True


def _add_cliques(m: _Model, plan: _Plan) -> None:
    """Redundant no-overlap constraints over activities that exclude each other.

    Two activities whose demands on some crew exceed its capacity together
    can never overlap. A set of such activities, each pair excluding each
    other, may be given a disjunctive constraint as well as the cumulatives:
    its propagation (edge finding, not-first/not-last) is stronger than the
    cumulative's. Cliques are grown greedily, largest demand first, starting
    from each crew's set of activities that need more than half of it, among
    the activities counted on the same axis as that crew.
    """
    tl = plan.tl
    held = [i for i in range(tl.size) if tl.dur[i] and tl.demands[i]]
    need = {i: dict(tl.demands[i]) for i in held}

    def clash(a: int, b: int) -> bool:
        return any(u + need[b].get(k, 0) > tl.capacity[k] for k, u in need[a].items())

    weight = {i: max(u / tl.capacity[k] for k, u in need[i].items()) for i in held}
    seen: set[frozenset[int]] = set()
    for k, cap in enumerate(tl.capacity):
        axis = tl.axis[k]
        core = [i for i in held if 2 * need[i].get(k, 0) > cap]
        if len(core) < 2:
            continue
        same = [
            j
            for j in held
            if (axis is not None and tl.cal[j] == axis)
            or (axis is None and (j, None) in m.intervals)
        ]
        clique = list(core)
        for j in sorted(same, key=lambda x: (-weight[x], x)):
            if j not in clique and all(clash(j, c) for c in clique):
                clique.append(j)
        key = frozenset(clique)
        if len(clique) >= 3 and key not in seen:
            seen.add(key)
            m.model.add_no_overlap([m.interval(i, k) for i in sorted(clique)])


def _add_relation(m: _Model, plan: _Plan, r: Relation) -> None:
    tl = plan.tl
    model = m.model
    p, s = r.pred, r.succ
    cal_p, cal_s = tl.cal[p], tl.cal[s]
    use_end = r.from_end and tl.dur[p] >= 1
    target = tl.dur[s] if r.to_end else 0
    if (cal_p == cal_s and r.cl == 0) or (tl.identity[cal_p] and tl.identity[cal_s]):
        # One calendar (or two that work every day): positions are linear,
        # W[D[q + skip] + use_end] = q + skip + use_end, calendar days too.
        model.add(
            m.pos[s] + target >= m.pos[p] + (tl.dur[p] if use_end else 0) + r.cl + r.wl
        )
        return
    # Across calendars, or a calendar-day lag: the successor-calendar
    # position of the predecessor's point, as a table over its window.
    table = []
    for q in range(plan.es[p], plan.ls[p] + 1):
        point = tl.end(p, q) if use_end else tl.day(cal_p, q)
        table.append(tl.pos(cal_s, point + r.cl))
    w = model.new_int_var(min(table), max(table), f"rel_{r.index}")
    model.add_element(m.pos[p] - plan.es[p], table, w)
    model.add(m.pos[s] + target >= w + r.wl)
    m.rel_w.append((r, w))


def _add_smoothing(m: _Model, plan: _Plan) -> cp.LinearExprT:
    """Day-to-day changes of each crew's demand; returns their sum.

    A boolean per activity and possible start (only the positions its window
    allows) says where it starts; the change of a crew's demand from one unit
    of its axis to the next (a working day, or a calendar day for a crew
    whose activities mix calendars) is what starts there minus what ends,
    and the sum of its absolute values over crews and days is the measure of
    unevenness.
    """
    tl, model = plan.tl, m.model
    delta: list[dict[int, list[tuple[int, cp.IntVar | None]]]] = [
        {} for _ in tl.capacity
    ]
    for i in range(tl.size):
        if tl.dur[i] == 0 or not tl.demands[i]:
            continue
        window = range(plan.es[i], plan.ls[i] + 1)
        choices: list[tuple[int, cp.IntVar | None]] = []
        for q in window:
            x = None
            if len(window) > 1:
                x = model.new_bool_var(f"at_{i}_{q}")
                m.starts_at[(i, q)] = x
            choices.append((q, x))
        if len(choices) > 1:
            xs = [x for _, x in choices if x is not None]
            model.add_exactly_one(xs)
            model.add(
                m.pos[i] == cp.LinearExpr.weighted_sum(xs, [q for q, _ in choices])
            )
        for k, u in tl.demands[i]:
            for q, x in choices:
                a, b = tl.on_axis(k, i, q)
                delta[k].setdefault(a, []).append((u, x))
                delta[k].setdefault(b, []).append((-u, x))
    total: list[cp.LinearExprT] = []
    fixed = 0
    for k in range(len(tl.capacity)):
        for _unit, terms in sorted(delta[k].items()):
            const = sum(u for u, x in terms if x is None)
            var_terms = [(u, x) for u, x in terms if x is not None]
            if not var_terms:
                fixed += abs(const)
                continue
            a = model.new_int_var(0, sum(abs(u) for u, _ in terms), "change")  # type: ignore[assignment]
            expr = cp.LinearExpr.weighted_sum(
                [x for _, x in var_terms], [u for u, _ in var_terms]
            )
            model.add(a >= expr + const)
            model.add(a >= -expr - const)
            m.tv.append((a, var_terms, const))  # type: ignore[arg-type]
            total.append(a)
    return cp.LinearExpr.sum(total) + fixed


def _add_stability(m: _Model, plan: _Plan) -> cp.LinearExprT:
    """Moved activities, then working days moved; returns the weighted sum.

    An activity counts as moved when its start date differs from the previous
    one; days moved are counted in working days of its calendar. The count
    weighs more than any total of days, so fewer moves always win.
    """
    tl, model = plan.tl, m.model
    count: list[cp.LinearExprT] = []
    days = []
    worst_total = 0
    for i, prev in sorted(plan.previous.items()):
        c = tl.cal[i]
        pp = tl.pos(c, _clamp_day(tl, prev))
        lo, hi = plan.es[i], plan.ls[i]
        worst = max(abs(hi - pp), abs(pp - lo))
        d = model.new_int_var(0, worst, f"moved_days_{i}")
        model.add(d >= m.pos[i] - pp)
        model.add(d >= pp - m.pos[i])
        if tl.day(c, pp) == prev and lo <= pp <= hi:
            moved = model.new_bool_var(f"moved_{i}")
            model.add(m.pos[i] == pp).only_enforce_if(~moved)
            count.append(moved)
            m.moved[i] = (moved, d, pp)
        else:
            m.moved[i] = (None, d, pp)
            count.append(1)
        days.append(d)
        worst_total += worst
    weight = worst_total + 1
    return cp.LinearExpr.sum(count) * weight + cp.LinearExpr.sum(days)


def _clamp_day(tl: Timeline, day: int) -> int:
    return min(max(day, -tl.pad + 1), tl.horizon + tl.pad - 1)


def _hint(m: _Model, plan: _Plan, pos: list[int]) -> None:
    """Hint every variable of the model with the schedule ``pos``."""
    tl, model = plan.tl, m.model
    model.clear_hints()
    fin = [tl.finish_day(i, pos[i]) for i in range(tl.size)]
    for i in range(tl.size):
        model.add_hint(m.pos[i], pos[i])
    for i, v in m.start.items():
        model.add_hint(v, tl.day(tl.cal[i], pos[i]))
    for i, v in m.end.items():
        model.add_hint(v, tl.end(i, pos[i]))
    for i, v in m.finish.items():
        model.add_hint(v, fin[i])
    for i, v in m.span.items():
        model.add_hint(v, tl.end(i, pos[i]) - tl.day(tl.cal[i], pos[i]))
    for r, w in m.rel_w:
        use_end = r.from_end and tl.dur[r.pred] >= 1
        point = (
            tl.end(r.pred, pos[r.pred])
            if use_end
            else tl.day(tl.cal[r.pred], pos[r.pred])
        )
        model.add_hint(w, tl.pos(tl.cal[r.succ], point + r.cl))
    made = max(max(fin), plan.logic_finish)
    model.add_hint(m.makespan, made)
    for c, v in m.finish_pos.items():
        model.add_hint(v, tl.Wl[c][made + 1 + tl.pad])
    for i, v in m.late.items():
        model.add_hint(v, max(0, fin[i] - plan.deadline[i]))
    if m.over:
        over = _over_capacity(tl, pos)
        for k, v in m.over.items():
            model.add_hint(v, over[k])
    values: dict[int, int] = {}
    for (i, q), x in m.starts_at.items():
        value = int(pos[i] == q)
        values[x.index] = value
        model.add_hint(x, value)
    for a, terms, const in m.tv:
        model.add_hint(a, abs(sum(u * values[x.index] for u, x in terms) + const))
    for i, (moved, d, pp) in m.moved.items():
        if moved is not None:
            model.add_hint(moved, int(pos[i] != pp))
        model.add_hint(d, abs(pos[i] - pp))


def _load(tl: Timeline, pos: list[int]) -> list[np.ndarray]:
    """Units per crew along its axis, unavailable blocks included."""
    load = []
    for k, cap in enumerate(tl.capacity):
        ends = [tl.on_axis(k, i, pos[i])[1] for i in range(tl.size)]
        size = max([*ends, *(b for _, b in tl.axis_blocks[k]), 0]) + 1
        row = np.zeros(size, dtype=np.int64)
        for a, b in tl.axis_blocks[k]:
            row[a:b] += cap
        load.append(row)
    for i in range(tl.size):
        if tl.dur[i] == 0:
            continue
        for k, u in tl.demands[i]:
            a, b = tl.on_axis(k, i, pos[i])
            load[k][max(a, 0) : max(b, 0)] += u
    return load


def _over_capacity(tl: Timeline, pos: list[int]) -> list[int]:
    """Per crew, the most units over capacity on any unit of its axis."""
    load = _load(tl, pos)
    return [
        max(int(load[k].max(initial=0)) - cap, 0) for k, cap in enumerate(tl.capacity)
    ]


# ---------------------------------------------------------------------------
# Solve and read out


@dataclass
class _Solved:
    status: int
    pos: list[int] | None
    objective: int | None
    bound: int | None
    stats: SolveStats


class _Progress(cp.CpSolverSolutionCallback):
    """Reports each better solution of the goal solve to ``on_progress``."""

    def __init__(
        self, m: _Model, plan: _Plan, report: ProgressFn, started: float
    ) -> None:
        super().__init__()
        self.m, self.plan, self.report, self.started = m, plan, report, started

    def on_solution_callback(self) -> None:
        tl = self.plan.tl
        finish = tl.date(self.value(self.m.makespan))
        bound = None
        if self.plan.goal == "shortest":
            raw = int(np.ceil(self.best_objective_bound - 1e-9))
            bound = tl.date(max(raw // self.m.goal_weight, self.plan.logic_finish))
        self.report(finish, bound, time.perf_counter() - self.started)


def _parameters(
    solver: cp.CpSolver, time_limit: float, workers: int, seed: int, phase: str = ""
) -> None:
    """Solver settings: the limits given, plus what measured best.

    On two workers CP-SAT runs one full search beside its neighbourhood
    searches. Without the linear relaxation (``no_lp``) that search
    propagates faster and proved more optima on PSPLIB J30 in 10 s (475 of
    480 against 469 with the default ``default_lp``; mean 0.26 s against
    0.41 s, 2 workers, this machine); more workers keep CP-SAT's own mix.
    Precedences between tasks of one cumulative feed its propagation.
    """
    params = solver.parameters
    params.max_time_in_seconds = max(time_limit, 0.05)
    params.num_workers = workers
    params.random_seed = seed
    if workers <= 2:
        params.subsolvers.append("no_lp")
    params.use_hard_precedences_in_cumulative = True
    params.exploit_all_precedences = True
    for key, value in (PHASE_OPTIONS.get(phase, {}) if workers <= 2 else {}).items():
        field_ = getattr(params, key)
        if isinstance(value, list):
            field_.clear()
            field_.extend(value)
        else:
            setattr(params, key, value)


#: Settings for one phase over :func:`_parameters`' own, on two workers or
#: fewer (more keep CP-SAT's own mix). The improvement phase, which starts
#: from the genetic search's schedule, runs one search with the linear
#: relaxation beside one without: on the hardest PSPLIB J60
#: instances (groups 9, 13, 25, 29, 45; 10 s, 2 workers, seeds 0-2) it
#: reached 114, 114, 115 on j6025_1 (best known 114) against 115, 116, 117,
#: and nothing worse elsewhere. Tried since on groups 9, 13, 25, 29, 41, 45
#: (seeds 0-1, days over the best known summed; these settings 17):
#: ``interleave_search`` 18, with both subsolvers 15, ``no_lp`` beside
#: ``quick_restart_no_lp`` 16, one violation local search 19 — seed noise.
#: So were ``use_lns_only`` (16), the scheduling neighbourhoods alone (the
#: others ignored; 20), edge finding and the overload checker in the cumulatives
#: (21), a fixed earliest-start search beside ``no_lp`` (21), and a second
#: genetic search in place of the side solve (19). Even told the best known
#: finish as a hard limit, CP-SAT (10 s, 2 workers) found a schedule for only
#: one of those six (j6041_1); with the objective dropped too (a search for
#: any schedule within the limit), none in 30 s for j6013_1, j6025_1 and
#: j6045_1. Given 60 s (seed 0), the levelling still ends one day over the
#: best known on those three (113, 115, 97), the last sooner finish found
#: within 2 s but for j6013_1 (at 19 s).
PHASE_OPTIONS: dict[str, dict[str, object]] = {
    "improvement": {"subsolvers": ["default_lp", "no_lp"]},
}


def solve(
    m: _Model,
    plan: _Plan,
    *,
    phase: str,
    hint: list[int] | None,
    time_limit: float,
    workers: int,
    seed: int,
    on_progress: ProgressFn | None = None,
    should_stop: Callable[[], bool] | None = None,
) -> _Solved:
    """One CP-SAT solve of the current objective; maps nothing, hides nothing.

    ``should_stop`` is polled every :data:`STOP_POLL` seconds while the
    solver works; when it turns true the search stops and
    :class:`LevellingStopped` is raised. Raises :class:`RuntimeError` on
    MODEL_INVALID (a bug in the builder).
    """
    if hint is not None:
        _hint(m, plan, hint)
    solver = cp.CpSolver()
    _parameters(solver, time_limit, workers, seed, phase)
    callback = (
        _Progress(m, plan, on_progress, time.perf_counter()) if on_progress else None
    )
    done = threading.Event()
    stopped = threading.Event()

    def watch() -> None:
        assert should_stop is not None
        while not done.wait(STOP_POLL):
            if should_stop():
                stopped.set()
                solver.stop_search()
                return

    watcher = None
    if should_stop is not None:
        if should_stop():
            raise LevellingStopped("stopped before the solve")
        watcher = threading.Thread(target=watch, name="levelling-stop", daemon=True)
        watcher.start()
    try:
        status = solver.solve(m.model, callback)
    finally:
        done.set()
        if watcher is not None:
            watcher.join()
    if stopped.is_set():
        raise LevellingStopped(f"stopped during the {phase} solve")
    if status == cp.MODEL_INVALID:
        raise RuntimeError(f"levelling model invalid: {m.model.validate()}")
    found = status in (cp.OPTIMAL, cp.FEASIBLE)
    objective = int(round(solver.objective_value)) if found else None
    bound = (
        int(np.ceil(solver.best_objective_bound - 1e-9))
        if status != cp.INFEASIBLE
        else None
    )
    stats = SolveStats(
        phase=phase,
        status=solver.status_name(status),
        wall_time=solver.wall_time,
        branches=solver.num_branches,
        conflicts=solver.num_conflicts,
        objective=objective,
        bound=bound,
    )
    pos = read_out(solver, m, plan) if found else None
    return _Solved(status, pos, objective, bound, stats)  # type: ignore[arg-type]


def read_out(solver: cp.CpSolver, m: _Model, plan: _Plan) -> list[int]:
    """Start positions (each on its activity's calendar) of the solution."""
    return [solver.value(v) for v in m.pos]


# ---------------------------------------------------------------------------
# Crew links, passes and float


@dataclass(frozen=True, slots=True)
class _Link:
    crew: int
    pred: int | None  # activity, or None for a block
    succ: int | None
    units: int
    block: tuple[int, int] | None = None


def crew_flow(
    tl: Timeline, pos: list[int], extra: list[int] | None = None
) -> list[_Link]:
    """Which activity hands how many units of each crew on to which.

    Counted on each crew's axis (see :class:`~.heuristic.Timeline`), as in
    the model. Activities take units in start order; each takes first units
    never used, then those released longest ago, and the units released last
    only when it needs them — so a link is tight (the successor starts as the
    predecessor ends) only where the hand-over really sets the start, and
    every other link leaves the most slack. Unavailable periods take the whole
    capacity like an activity. Every activity that takes units from another
    gets a link from it; the links are a resource flow, so any schedule that
    keeps them and the logic keeps every crew within capacity.
    """
    links: dict[tuple[int, int | None, int | None], int] = {}
    blocks_of: dict[tuple[int, int], tuple[int, int]] = {}
    for k, cap in enumerate(tl.capacity):
        nodes = []
        for i in range(tl.size):
            if tl.dur[i] == 0:
                continue
            for kk, u in tl.demands[i]:
                if kk == k:
                    s, e = tl.on_axis(k, i, pos[i])
                    nodes.append((s, e, 1, i, u))
        if not nodes:
            continue
        axis = tl.axis[k]
        for b, (a, z) in enumerate(tl.blocks[k]):
            qa, qz = (a, z) if axis is None else (tl.pos(axis, a), tl.pos(axis, z))
            if qa < qz:
                nodes.append((qa, qz, 0, -1 - b, cap))
                blocks_of[(k, -1 - b)] = (a, z)
        nodes.sort()
        total = cap + (extra[k] if extra else 0)
        pool: list[list[int | None]] = [[-(10**9), None, total]]
        busy: list[tuple[int, int, int]] = []
        for s, e, _, node, u in nodes:
            while busy and busy[0][0] <= s:
                released, held, units = heapq.heappop(busy)
                pool.append([released, held, units])
            pool.sort(key=lambda c: (c[0] or 0, c[1] if c[1] is not None else 0))
            need = u
            for chunk in pool:
                if need == 0:
                    break
                take = min(need, int(chunk[2] or 0))
                if take == 0:
                    continue
                chunk[2] = int(chunk[2] or 0) - take
                need -= take
                if chunk[1] is not None and (int(chunk[1]) >= 0 or node >= 0):
                    key = (k, int(chunk[1]), node)
                    links[key] = links.get(key, 0) + take
            if need:
                raise ScheduleRejected(
                    f"crew {tl.network.crews[k].key} is over capacity on day {s}"
                )
            pool = [c for c in pool if c[2]]
            heapq.heappush(busy, (e, node, u))
    out = []
    for (k, a, b), units in sorted(  # type: ignore[assignment]
        links.items(), key=lambda x: (x[0][0], x[0][1], x[0][2])
    ):
        block = blocks_of.get((k, a)) or blocks_of.get((k, b))
        out.append(
            _Link(
                k,
                a if a is not None and a >= 0 else None,
                b if b is not None and b >= 0 else None,
                units,
                block,
            )
        )
    return out


def _floor(tl: Timeline, c: int) -> int:
    """The least position a late pass may reach: far enough inside the tables
    that every relation can still be read backwards."""
    reach = max(tl.dur, default=0) + max((abs(r.wl) for r in tl.relations), default=0)
    cl = max((abs(r.cl) for r in tl.relations), default=0)
    return tl.Wl[c][cl + 1] + reach + 1


def late_positions(
    tl: Timeline,
    finish_day: int | None,
    links: list[_Link],
    *,
    end: int | None = None,
    deadlines: bool = True,
) -> list[int]:
    """The backward pass on the logic and the crew links: latest starts.

    Every activity finishes by ``finish_day`` — or, given ``end`` instead, ends
    by that instant (a milestone's day at or before it), as the critical path
    reads its project end — by its own deadline when ``deadlines``, before
    each unavailable period it hands its crew to, and early enough for every
    successor by relation or crew link to keep its latest start. Positions
    are each activity's own calendar. Without links, with ``end`` the latest
    end, this is exactly the critical path's backward pass.
    """
    n = tl.size
    net = tl.network
    if end is not None:
        ub = [tl.latest_for_end(i, end) for i in range(n)]
    else:
        assert finish_day is not None
        ub = [tl.latest_for_finish(i, finish_day) for i in range(n)]
    if deadlines:
        for i, dl in enumerate(net.act_deadline.tolist()):
            # A deadline past the tables never binds (the finish comes
            # first); one before them binds at their first day.
            if dl != NO_DATE and dl <= tl.horizon:
                day = max(int(dl), 1 - tl.pad)
                ub[i] = min(ub[i], tl.latest_for_finish(i, day))
    crew_succ: list[list[int]] = [[] for _ in range(n)]
    for link in links:
        if link.pred is None:
            continue
        if link.succ is None:
            assert link.block is not None
            c = tl.cal[link.pred]
            ub[link.pred] = min(
                ub[link.pred], tl.pos(c, link.block[0]) - tl.dur[link.pred]
            )
        else:
            crew_succ[link.pred].append(link.succ)
    floor = [_floor(tl, tl.cal[i]) for i in range(n)]
    ls = [max(u, floor[i]) for i, u in enumerate(ub)]
    order = list(reversed(tl.order))
    for _sweep in range(n + 2):
        changed = False
        for i in order:
            c = tl.cal[i]
            best = ls[i]
            for r in tl.succs[i]:
                best = min(best, tl.backward(r, ls[r.succ]))
            for j in crew_succ[i]:
                best = min(best, tl.pos(c, tl.day(tl.cal[j], ls[j])) - tl.dur[i])
            best = max(best, floor[i])
            if best < ls[i]:
                ls[i] = best
                changed = True
        if not changed:
            return ls
        if not links:
            return ls
    raise ScheduleRejected("the backward pass over crew links does not settle")


def left_justify(tl: Timeline, pos: list[int], links: list[_Link]) -> list[int]:
    """The forward pass on the logic and the crew links, from the lower bounds.

    Moves every activity as early as its relations, crew links and date bounds
    allow; never later than ``pos`` (which satisfies them all), so crews stay
    within capacity and the finish does not grow.
    """
    n = tl.size
    crew_pred: list[list[int]] = [[] for _ in range(n)]
    lb = [tl.pos(tl.cal[i], tl.lb_day[i]) for i in range(n)]
    for link in links:
        if link.succ is None:
            continue
        if link.pred is None:
            assert link.block is not None
            c = tl.cal[link.succ]
            lb[link.succ] = max(lb[link.succ], tl.pos(c, link.block[1]))
        else:
            crew_pred[link.succ].append(link.pred)
    new = list(lb)
    for _sweep in range(n + 2):
        changed = False
        for j in tl.order:
            c = tl.cal[j]
            best = new[j]
            for r in tl.preds[j]:
                best = max(best, tl.forward(r, new[r.pred]))
            for i in crew_pred[j]:
                best = max(best, tl.pos(c, tl.end(i, new[i])))
            if best > new[j]:
                new[j] = best
                changed = True
        if not changed:
            break
    else:
        raise ScheduleRejected("the forward pass over crew links does not settle")
    if any(a > b for a, b in zip(new, pos, strict=True)):
        raise ScheduleRejected("left justification moved an activity later")
    return new


def _free_float(
    tl: Timeline, pos: list[int], links: list[_Link], end: int
) -> list[int]:
    """Slack to the nearest successor by relation or crew link, at the levelled
    dates, and never past the project finish."""
    n = tl.size
    ff = [tl.latest_for_end(i, end) - pos[i] for i in range(n)]
    for r in tl.relations:
        ff[r.pred] = min(ff[r.pred], tl.backward(r, pos[r.succ]) - pos[r.pred])
    for link in links:
        i = link.pred
        if i is None:
            continue
        c = tl.cal[i]
        if link.succ is None:
            assert link.block is not None
            bound = tl.pos(c, link.block[0]) - tl.dur[i]
        else:
            bound = tl.pos(c, tl.day(tl.cal[link.succ], pos[link.succ])) - tl.dur[i]
        ff[i] = min(ff[i], bound - pos[i])
    return ff


def _driving_path(
    tl: Timeline,
    pos: list[int],
    links: list[_Link],
    total_float: list[int],
) -> tuple[LevelStep, ...]:
    """The path of what holds each start, from a date bound to the finish.

    A relation or crew link holds a start when it allows no earlier date. From
    the last activity the search walks back along such links — from the
    predecessor with the least float first, a relation before a crew, then the
    first in the document — to an activity held by a date bound (project
    start, data date, ``not_before``) or by a crew's return from an
    unavailable period. Loops of tight links (leads, crew links and calendar
    rounding can close one) are never walked twice, and a branch that cannot
    reach a bound is left for the next. A left-justified schedule always has
    such a path; when the levelling held an activity back (smoothing, or
    keeping the previous plan), the path ends there with a ``"levelling"``
    step.
    """
    net = tl.network
    n = tl.size
    crew_in: list[list[_Link]] = [[] for _ in range(n)]
    for link in links:
        if link.succ is not None:
            crew_in[link.succ].append(link)
    rank = net.topology.rank.tolist()
    fin = [tl.finish_day(i, pos[i]) for i in range(n)]
    end = [tl.end(i, pos[i]) for i in range(n)]
    sinks = {i for i in range(n) if not tl.succs[i]}
    final = max(
        range(n),
        key=lambda i: (fin[i], end[i], i in sinks, -total_float[i], rank[i]),
    )

    def options(node: int) -> list[tuple[LevelDriver, int]]:
        c = tl.cal[node]
        found: list[tuple[int, int, int, LevelDriver]] = []
        for r in tl.preds[node]:
            if tl.forward(r, pos[r.pred]) == pos[node]:
                unit = "calendar_days" if net.rel_calendar_days[r.index] else "workdays"
                driver = LevelDriver(
                    "relation",
                    pred=net.keys[r.pred],
                    type=RELATION_TYPES[r.type],
                    lag=int(net.rel_lag[r.index]),
                    lag_unit=unit,
                )
                found.append((total_float[r.pred], 0, r.pred, driver))
        for link in crew_in[node]:
            if link.pred is not None and tl.pos(c, end[link.pred]) == pos[node]:
                driver = LevelDriver(
                    "crew", pred=net.keys[link.pred], crew=net.crews[link.crew].key
                )
                found.append((total_float[link.pred], 1, link.pred, driver))
        found.sort(key=lambda o: (o[0], o[1], o[2]))
        return [(d, p) for _, _, p, d in found]

    def step(node: int, driver: LevelDriver) -> LevelStep:
        return LevelStep(net.keys[node], net.names[node], driver)

    # Depth-first, iteratively: ``trail`` holds the walk, ``pending`` the options
    # left at each of its nodes, ``via`` the driver taken out of each.
    failed: set[int] = set()
    trail = [final]
    on_trail = {final}
    pending = [options(final)]
    via: list[LevelDriver] = []
    while trail:
        node = trail[-1]
        if pending[-1]:
            driver, pred = pending[-1].pop(0)
            if pred in failed or pred in on_trail:
                continue
            via.append(driver)
            trail.append(pred)
            on_trail.add(pred)
            pending.append(options(pred))
            continue
        bound = _bound_driver(tl, pos, node, crew_in)
        if bound is not None:
            steps = [step(node, bound)]
            for k in range(len(trail) - 2, -1, -1):
                steps.append(step(trail[k], via[k]))
            return tuple(steps)
        failed.add(node)
        trail.pop()
        on_trail.discard(node)
        pending.pop()
        if via:
            via.pop()
    return _held_path(tl, pos, final, options, step)


def _held_path(
    tl: Timeline,
    pos: list[int],
    final: int,
    options: Callable[[int], list[tuple[LevelDriver, int]]],
    step: Callable[[int, LevelDriver], LevelStep],
) -> tuple[LevelStep, ...]:
    """The greedy walk back to where the levelling chose to hold a start."""
    steps: list[LevelStep] = []
    seen: set[int] = set()
    node = final
    while True:
        seen.add(node)
        choice = [(d, p) for d, p in options(node) if p not in seen]
        if not choice:
            day = tl.date(tl.day(tl.cal[node], pos[node]))
            steps.append(step(node, LevelDriver("levelling", date=day)))
            return tuple(reversed(steps))
        driver, node_before = choice[0]
        steps.append(step(node, driver))
        node = node_before


def _bound_driver(
    tl: Timeline, pos: list[int], i: int, crew_in: list[list[_Link]]
) -> LevelDriver | None:
    """The date bound that holds ``i`` where it is, or ``None``."""
    net = tl.network
    c = tl.cal[i]
    if tl.pos(c, tl.lb_day[i]) == pos[i]:
        return date_bound(net, i)
    for link in crew_in[i]:
        if link.pred is None and link.block is not None:
            if tl.pos(c, link.block[1]) == pos[i]:
                return LevelDriver(
                    "crew_unavailable",
                    crew=net.crews[link.crew].key,
                    date=tl.date(link.block[1]),
                )
    return None


def _move_reasons(tl: Timeline, plan: _Plan, pos: list[int]) -> tuple[Move, ...]:
    """The activities that moved from the previous plan, and why.

    Rule, in topological order: an activity moved for *progress* when it is
    work done or under way, its previous start is before the data date, or a
    predecessor that moved for progress pushes it now; else for a *network
    change* when,
    at the previous dates, one of its incoming relations, its date bounds,
    its calendar or the finish limit is broken, or a predecessor that moved
    for a network change pushes it now; else for a *crew change* when, at the
    previous dates, a crew it uses is over capacity (or away) on one of its
    days, or a predecessor that moved for a crew change pushes it now; else
    for the *goal*.
    """
    net = tl.network
    if not plan.previous:
        return ()
    before = list(pos)
    prev_pos: dict[int, int] = {}
    for i, day in plan.previous.items():
        prev_pos[i] = tl.pos(tl.cal[i], _clamp_day(tl, day))
        before[i] = prev_pos[i]
    load = _load(tl, before)
    reason: dict[int, str] = {}
    moves = []
    for i in tl.order:
        if i not in plan.previous:
            continue
        c = tl.cal[i]
        prev_day = plan.previous[i]
        new_day = tl.day(c, pos[i])
        if new_day == prev_day:
            continue
        pp = prev_pos[i]
        pushed = {
            reason[r.pred]
            for r in tl.preds[i]
            if r.pred in reason and tl.forward(r, pos[r.pred]) > pp
        }
        if (
            i in tl.pinned
            or (net.data_date is not None and tl.date(prev_day) < net.data_date)
            or "progress" in pushed
        ):
            # Work under way, a plan overtaken by the data date, or pushed
            # by either: what happened on site moved it.
            reason[i] = "progress"
            moves.append(
                Move(
                    net.keys[i],
                    tl.date(prev_day),
                    tl.date(new_day),
                    pos[i] - pp,
                    "progress",
                )
            )
            continue
        own = (
            tl.day(c, pp) != prev_day
            or pp < tl.pos(c, tl.lb_day[i])
            or (plan.limit is not None and tl.finish_day(i, pp) > plan.limit)
            or any(tl.forward(r, before[r.pred]) > pp for r in tl.preds[i])
        )
        if own or "network change" in pushed:
            why = "network change"
        else:
            over = False
            for k, _ in tl.demands[i] if tl.dur[i] else ():
                a, b = tl.on_axis(k, i, pp)
                peak = int(load[k][max(a, 0) : max(b, 0)].max(initial=0))
                over = over or peak > tl.capacity[k]
            why = "crew change" if over or "crew change" in pushed else "goal"
        reason[i] = why
        moves.append(
            Move(
                net.keys[i],
                tl.date(prev_day),
                tl.date(new_day),
                pos[i] - pp,
                why,
            )
        )
    order = {k: j for j, k in enumerate(net.keys)}
    return tuple(sorted(moves, key=lambda mv: order[mv.key]))


# ---------------------------------------------------------------------------
# The whole run


def needs_warm_up(network: Network, goal: str = "shortest") -> bool:
    """True when levelling ``network`` for ``goal`` in this process will first
    compile the genetic search's passes (:func:`.passes.warm_up`: about 15 s
    once after an install, under a second from the disk cache after that)."""
    return _genetic_fits(goal, network.size) and not passes.is_warm()


def level(
    network: Network,
    *,
    goal: str = "shortest",
    finish: dt.date | None = None,
    previous: Mapping[str, dt.date] | None = None,
    time_limit: float = 10.0,
    workers: int = 2,
    seed: int = 0,
    on_progress: ProgressFn | None = None,
    should_stop: Callable[[], bool] | None = None,
) -> LevelResult:
    """Level ``network`` for ``goal``; see the module docstring.

    ``finish``: the latest allowed project finish (inclusive date); for
    ``"smooth"`` it defaults to the critical-path finish, for ``"shortest"``
    there is none. ``previous`` maps activity keys to their previous start
    dates (a stability solve follows the goal). ``time_limit`` is the budget in
    seconds for all solves together; ``workers`` and ``seed`` go to CP-SAT.
    ``on_progress(finish, bound, elapsed)`` is called for each better solution
    of the goal solve (``bound`` a date for ``"shortest"``, else ``None``;
    ``elapsed`` seconds since the levelling started); for ``"shortest"``
    only a sooner finish or a higher bound is news. ``should_stop()``, when
    given, is asked about five times a second while anything is computed;
    once it answers true the run ends with :class:`LevellingStopped` (a
    cancelled run, say).

    For ``"shortest"`` the goal's time is spent in steps: a short CP-SAT solve
    (:data:`PROBE_SHARE`, at most :data:`PROBE_MAX` seconds), which proves
    most small networks at once; if it does not, the genetic search of
    :mod:`.improve` and its local search (:data:`GENETIC_SHARE` of the rest)
    with, on the other workers, the same search from the finish back where
    the problem can be turned round (:data:`TURNED_SIDE`), else CP-SAT going
    on; then CP-SAT on all workers from the best schedule so far. ``stats``
    lists every solve, a ``"genetic"`` row whose ``objective`` is the finish
    day of the genetic and local search, and a ``"genetic from the finish"``
    row for the search beside it.

    Raises :class:`~.problems.NetworkInvalid` for a network the critical path
    refuses, :class:`LevellingInfeasible` when no schedule can meet the crews
    and limits (each problem names the activity and the crew or date), or
    when under a ``finish`` limit neither the solver in its time nor the
    priority rules found one (the problem points at ``/finish``), and
    :class:`ScheduleRejected` if a schedule fails the independent check.
    """
    if needs_warm_up(network, goal):
        # Compile the genetic search's passes before the clock starts (once
        # per process; from the disk cache after the first time).
        passes.warm_up()
    started = time.perf_counter()
    if goal not in GOALS:
        raise ValueError(f"goal must be one of {', '.join(GOALS)}, got {goal!r}")
    if on_progress is not None:
        on_progress = _as_news(on_progress, started, goal == "shortest")
    rw = None
    if network.progress is not None and network.progress.any:
        rw = rewrite(network)
    plan = _prepare(rw.work if rw else network, goal, finish, previous, rw)
    tl = plan.tl
    m = build_model(plan)
    phases = ["goal"] + (["stability"] if plan.previous else [])
    phases += ["smoothing"] if goal == "smooth" else []

    def budget(left: int) -> float:
        remaining = time_limit - (time.perf_counter() - started)
        share = 1.0 if left == 1 else (0.6 if left == len(phases) else 1.0 / left)
        return max(remaining * share, 0.05)

    hint: list[int] | None
    if plan.heuristic is not None:
        hint = list(plan.heuristic.pos)
    elif goal == "smooth":
        hint = list(plan.es)
    else:
        hint = None
    stats: list[SolveStats] = []
    goal_time = budget(len(phases))
    goal_started = time.perf_counter()
    first = solve(
        m,
        plan,
        phase="goal",
        hint=hint,
        time_limit=_probe_time(plan, goal_time),
        workers=workers,
        seed=seed,
        on_progress=on_progress,
        should_stop=should_stop,
    )
    stats.append(first.stats)
    if _worth_improving(plan, first):
        # Not proven in the short first solve: a genetic search and a local
        # search for a better hint — beside them, on the other workers, the
        # same search from the finish back, or CP-SAT going on from the first
        # solve's schedule — then CP-SAT on all workers from the best, with
        # the rest of the goal time.
        rest = goal_time - (time.perf_counter() - goal_started)
        share, most = _genetic_time(plan)
        side_time = min(rest * share, most)
        seeds = [p for p in (hint, first.pos) if p is not None]
        side: list[_Solved | BaseException] = []

        def side_solve() -> None:
            try:
                side.append(
                    solve(
                        m,
                        plan,
                        phase="beside genetic",
                        hint=first.pos if first.pos is not None else hint,
                        time_limit=side_time,
                        workers=workers - 1,
                        seed=seed,
                        on_progress=on_progress,
                        should_stop=should_stop,
                    )
                )
            except BaseException as exc:  # re-raised in the calling thread
                side.append(exc)

        weight = m.goal_weight
        known = max(first.bound or 0, plan.logic_finish * weight) // weight
        # Where the problem can be turned round, the other worker runs the
        # genetic search from the finish back (see TURNED_SIDE) until the
        # search from the start ends; elsewhere CP-SAT goes on there.
        turned = workers >= 2 and TURNED_SIDE and turns(tl)
        back: list[tuple[list[int], int] | None | BaseException] = []
        ahead_done = threading.Event()

        def heard(day: int) -> None:
            # A sooner finish from either search (news only, see _as_news).
            if on_progress is not None:
                on_progress(
                    tl.date(day), tl.date(known), time.perf_counter() - goal_started
                )

        def side_turned() -> None:
            try:
                back.append(
                    _genetic_hint(
                        plan,
                        seeds,
                        side_time,
                        seed,
                        target=known,
                        turn=True,
                        stop=lambda: (
                            ahead_done.is_set()
                            or (should_stop is not None and should_stop())
                        ),
                        on_better=heard,
                    )
                )
            except BaseException as exc:  # re-raised in the calling thread
                back.append(exc)

        thread = None
        if workers >= 2 and (turned or SIDE_SOLVE):
            thread = threading.Thread(
                target=side_turned if turned else side_solve, daemon=True
            )
            thread.start()
        t0 = time.perf_counter()
        try:
            found = _genetic_hint(
                plan,
                seeds,
                side_time,
                seed,
                target=known,
                stop=lambda: (
                    (should_stop is not None and should_stop())
                    or bool(side)
                    and not isinstance(side[0], BaseException)
                    and side[0].status == cp.OPTIMAL
                ),
                on_better=heard,
            )
        finally:
            # Ends the search from the finish too, also when a progress
            # report stopped this one (a lost run raises from the callback).
            ahead_done.set()
        stats.append(_search_stats("genetic", found, time.perf_counter() - t0))
        if thread is not None:
            thread.join()
        if turned:
            other = back[0]
            if isinstance(other, BaseException):
                raise other
            stats.append(
                _search_stats(
                    "genetic from the finish", other, time.perf_counter() - t0
                )
            )
            if other is not None and (found is None or other[1] < found[1]):
                found = other
        elif thread is not None:
            if isinstance(side[0], BaseException):
                raise side[0]
            stats.append(side[0].stats)
            first = _better(first, side[0])
        best = first.pos if first.pos is not None else hint
        if found is not None and (
            first.objective is None
            or found[1] < max(tl.finish_day(i, first.pos[i]) for i in range(tl.size))  # type: ignore[index]
        ):
            best = found[0]
            if on_progress is not None:
                on_progress(
                    tl.date(found[1]),
                    tl.date(known),
                    time.perf_counter() - goal_started,
                )
            if not plan.deadline:
                # Without deadlines the objective is the finish day itself.
                first = _better(
                    first,
                    _Solved(int(cp.FEASIBLE), found[0], found[1], None, first.stats),
                )
        if first.status != cp.OPTIMAL:
            again = solve(
                m,
                plan,
                phase="improvement",
                hint=best,
                time_limit=goal_time - (time.perf_counter() - goal_started),
                workers=workers,
                seed=seed,
                on_progress=on_progress,
                should_stop=should_stop,
            )
            stats.append(again.stats)
            first = _better(first, again)
        if first.pos is None and found is not None:
            hint = found[0]
    if first.status == cp.INFEASIBLE:
        raise LevellingInfeasible([_no_schedule(plan)])
    message = ""
    if first.pos is None:
        status = "no_solution_in_time"
        if hint is None and plan.limit is not None:
            # Nothing in hand meets the finish limit, and a schedule past it
            # is no answer to a caller who set it.
            raise LevellingInfeasible([_none_by_limit(plan, time_limit)])
        pos = hint if hint is not None else _any_schedule(plan)
        message = "the solver found no schedule in time; this is the heuristic's"
    else:
        status = "optimal" if first.status == cp.OPTIMAL else "feasible"
        pos = first.pos
        assert first.objective is not None
        goal_value = first.objective
        m.model.add(m.goal_objective <= goal_value)
        if plan.previous:
            moves = _add_stability(m, plan)
            m.model.minimize(moves)
            got = solve(
                m,
                plan,
                phase="stability",
                hint=pos,
                time_limit=budget(len(phases) - 1),
                workers=workers,
                seed=seed,
                should_stop=should_stop,
            )
            stats.append(got.stats)
            if got.pos is not None and got.objective is not None:
                pos = got.pos
                m.model.add(moves <= got.objective)
        if goal == "smooth":
            changes = _add_smoothing(m, plan)
            m.model.minimize(changes)
            got = solve(
                m,
                plan,
                phase="smoothing",
                hint=pos,
                time_limit=budget(1),
                workers=workers,
                seed=seed,
                should_stop=should_stop,
            )
            stats.append(got.stats)
            if got.pos is not None:
                pos = got.pos

    over = _over_capacity(tl, pos) if goal == "smooth" else [0] * len(tl.capacity)
    links = crew_flow(tl, pos, over)
    if goal == "shortest" and not plan.previous:
        # Nothing asks for a later date: start everything as early as the
        # logic and the crew hand-overs allow (the finish cannot grow).
        pos = left_justify(tl, pos, links)
        links = crew_flow(tl, pos, over)
    return _result(plan, m, pos, links, over, status, first, stats, started, message)


def _as_news(report: ProgressFn, started: float, shortest: bool) -> ProgressFn:
    """``report`` as :func:`level` promises it: the solves run one after
    another and one beside the genetic search, each reporting on its own
    clock and from its own best. This passes on the time since ``started``
    and, for the shortest finish, only news — a sooner finish or a higher
    bound — with the best finish and highest bound so far."""
    lock = threading.Lock()
    best_finish: dt.date | None = None
    best_bound: dt.date | None = None

    def passed_on(finish: dt.date, bound: dt.date | None, elapsed: float) -> None:
        nonlocal best_finish, best_bound
        with lock:
            if shortest:
                sooner = best_finish is None or finish < best_finish
                higher = bound is not None and (
                    best_bound is None or bound > best_bound
                )
                if not (sooner or higher):
                    return
                if sooner:
                    best_finish = finish
                elif best_finish is not None:
                    finish = best_finish
                if higher:
                    best_bound = bound
                bound = best_bound
            report(finish, bound, time.perf_counter() - started)

    return passed_on


#: The first goal solve gets this share of the goal's time (at most
#: PROBE_MAX seconds): enough to prove most small networks optimal at once.
PROBE_SHARE = 0.1
PROBE_MAX = 1.0
#: The genetic search and the local search after it may use up to this share
#: of the goal's time left after the first solve; with two workers or more,
#: a search from the finish back (TURNED_SIDE) or CP-SAT on all but one
#: (SIDE_SOLVE) runs beside them.
GENETIC_SHARE = 0.9
#: ... and at most this many seconds; CP-SAT's neighbourhood searches from
#: their schedule take the rest of a long limit. With the local search the
#: share pays (first instances of the PSPLIB groups, 2 workers, this
#: machine): J60 44, 44, 45 and 44 of 48 at the best known in four benchmark
#: runs and 45 in a script run, where the genetic search alone settled
#: within a second and had 0.6 of the time (at most 6 s) for 42-43/48; J120
#: at 10 s 1.04 % and 0.99 % above the best known against 1.35-1.48 %, and
#: at 60 s 0.92 % against 1.27 %. On J60 groups 9, 13, 25, 29, 41 and 45
#: (seeds 0-1), a local search of 0.5, 0.7 or 0.85 of this time made no
#: difference.
GENETIC_MAX_SECONDS = 20.0
#: The same where the passes run in Python (a network with relations or crews
#: the compiled passes cannot read, see :mod:`.passes`): a hundred times fewer
#: schedules a second, and the split measured for them before the local
#: search (PSPLIB J120 in Python passes, 10 s: 3.26 % above the best known).
PYTHON_GENETIC_SHARE = 0.6
PYTHON_GENETIC_MAX_SECONDS = 6.0
SIDE_SOLVE = True
#: Where the problem can be turned round (:func:`.improve.turns`: compiled
#: passes, no work fixed by progress, no ``not_before`` later than the rest,
#: one position axis), the worker beside the genetic search runs a second
#: genetic and local search that decodes its lists from the finish back, in
#: place of CP-SAT. On the hardest first instances of PSPLIB J60 (groups 13,
#: 25, 29, 45; 10 s, 2 workers, seeds 0-3, this machine) the levelling ended
#: 15 days over the best known values summed, against 22 with CP-SAT beside
#: (and 18 with both beside, three threads on two cores); group 29 reached
#: its best known 103 in 3 of 4 runs against 1. J60 benchmark: 44, 45, 45, 45
#: of 48 in four runs (44, 44, 45, 44 with CP-SAT beside). J120 gives some
#: back at 10 s, 1.21 % above the best known against 1.04 % (both within the
#: 2 % target), and gains at 60 s: 0.90 % and 31/60 at the best known against
#: 0.92 % and 29/60. Tried and left out: the two searches leaving their
#: best schedules for each other (each taking up the other's when sooner,
#: into its population or as its local search's current schedule): on J60
#: groups 9, 13, 25, 29 and 45 (seeds 0-7, 10 s) 32 days over the best known
#: summed and 15 of 40 at it, against 31 and 13 apart, within seed noise;
#: both workers searching from the finish back (seeds apart): on groups 9,
#: 13, 21, 25, 29, 45 (seeds 0-3) 17 days and 10 of 24, against 14 and 11.
TURNED_SIDE = True
#: Generations of the genetic search: a cap well above what the time allows
#: (the wall limit ends it). Compiled, the search makes 8,000-20,000
#: schedules a second; a population of 40 or 100 then converges within a
#: second. 250 did best on the hardest PSPLIB instances in 3-4 s runs: J120
#: groups 6, 11, 26, 31, 36, 51 at 148, 179, 173, 205, 218, 212 against
#: 152, 179, 176, 205, 220, 217 with 100, and J60 no worse.
#: Tried and left out: the shift move of the local search in half the
#: children instead (J60 43, 44, 43 of 48 at the best known against 43;
#: J120 1.47 % and 1.58 % above it against 1.44 % and 1.48 %, before the
#: population kept out copies). On the search alone, tournament selection of
#: parents, elitist generational replacement, seeding with every solution of
#: the first solve instead of its last, and in the local search taking a
#: schedule one day longer now and then (with a return to the best after 3,000
#: steps without gain) did no better than seed noise.
GENETIC_GENERATIONS = 1 << 20
GENETIC_POPULATION = 250
#: Forward-backward rounds per schedule of the genetic search.
GENETIC_ROUNDS = 1 << 30
GENETIC = True
#: After the genetic search, its best schedule goes to the local search of
#: :func:`.improve.shift_search` for this share of the time (a cap on its
#: steps well above what the time allows), each step moving one to
#: LOCAL_MOVES activities. Tried and left out: the local search taking
#: turns, chunk by chunk, among the three best schedules of the genetic
#: search instead of walking from the best alone (on PSPLIB J60 groups 9, 13,
#: 25, 29, 45, seeds 0-5, 10 s, 2 workers: 19 days over the best known values
#: summed and 12 of 30 runs at them, against 20 and 12); nor did each of
#: the two searches as three short ones in turn, seeds apart, a third of
#: the time each (same groups, seeds 0-11: 32 days and 31 of 60 runs at the
#: best known, against 34 and 29; j6025_1 reached its 114 in 2 of 12 runs
#: against 1).
LOCAL_SHARE = 0.7
LOCAL_STEPS = 1 << 40
LOCAL_MOVES = 6


#: Above this many activities the genetic search is left out: one schedule
#: costs too much in Python for a population to evolve within the time.
GENETIC_MAX_ACTIVITIES = 400
#: Below this many, CP-SAT alone does better with the whole time: on PSPLIB
#: J30 (32 activities) the split solve proved 467 of 480 optima in 10 s, one
#: solve 471 (2 workers, this machine, under load).
GENETIC_MIN_ACTIVITIES = 50


def _genetic_fits(goal: str, size: int) -> bool:
    """Whether the genetic search takes part for ``goal`` on ``size``
    activities (the shortest finish only)."""
    return (
        GENETIC
        and goal == "shortest"
        and GENETIC_MIN_ACTIVITIES <= size <= GENETIC_MAX_ACTIVITIES
    )


def _use_genetic(plan: _Plan) -> bool:
    return plan.heuristic is not None and _genetic_fits(plan.goal, plan.tl.size)


def _genetic_time(plan: _Plan) -> tuple[float, float]:
    """The share of the goal's time left and the most seconds the genetic
    and local search may take on ``plan``."""
    if compiles(plan.tl):
        return GENETIC_SHARE, GENETIC_MAX_SECONDS
    return PYTHON_GENETIC_SHARE, PYTHON_GENETIC_MAX_SECONDS


def _probe_time(plan: _Plan, goal_time: float) -> float:
    if not _use_genetic(plan):
        return goal_time
    return min(goal_time * PROBE_SHARE, PROBE_MAX)


def _worth_improving(plan: _Plan, first: _Solved) -> bool:
    """Whether a first, short goal solve leaves the shortest finish open."""
    return _use_genetic(plan) and first.status not in (cp.OPTIMAL, cp.INFEASIBLE)


def _genetic_hint(
    plan: _Plan,
    seeds: list[list[int]],
    wall: float,
    seed: int,
    *,
    target: int,
    stop: Callable[[], bool] | None = None,
    turn: bool = False,
    on_better: Callable[[int], None] | None = None,
) -> tuple[list[int], int] | None:
    """A schedule from the genetic search (:mod:`.improve`) started from
    ``seeds``, as positions of the plan's timeline, and its finish day; ``None``
    when it does not beat the best seed or leaves the model's windows.

    The search runs on a timeline twice as long as the model's, so that a
    poor list can still be decoded (and improved) before it is judged; work
    done or under way is pinned there as in the model (without the pins every
    schedule of a progressed network that moved such work fell outside the
    windows and was thrown away).
    """
    tl = plan.tl
    net = plan.network
    n = tl.size
    cap = plan.limit if plan.limit is not None else 2 * plan.finish_max + 2
    wide = tl if plan.limit is not None else _pinned_timeline(net, cap + 1, plan.pinned)

    def to_wide(pos: list[int]) -> list[int]:
        return [wide.pos(wide.cal[i], tl.day(tl.cal[i], pos[i])) for i in range(n)]

    start = [to_wide(p) for p in seeds]
    late = [wide.pos(wide.cal[i], tl.day(tl.cal[i], plan.ls[i])) for i in range(n)]
    lft = [float(wide.finish_day(i, late[i])) for i in range(n)]
    limit = wide.horizon if plan.limit is None else plan.limit + 1
    got = genetic_schedule(
        wide,
        lft,
        limit=limit,
        seeds=start,
        generations=GENETIC_GENERATIONS,
        population=GENETIC_POPULATION,
        rounds=GENETIC_ROUNDS,
        local_steps=LOCAL_STEPS,
        local_share=LOCAL_SHARE,
        local_moves=LOCAL_MOVES,
        seed=seed,
        wall_limit=wall,
        target=target,
        stop=stop,
        turn=turn,
        on_better=on_better,
    )
    if got is None:
        return None
    pos = [tl.pos(tl.cal[i], wide.day(wide.cal[i], got.pos[i])) for i in range(n)]
    if any(not plan.es[i] <= pos[i] <= plan.ls[i] for i in range(n)):
        return None
    finish = max(tl.finish_day(i, pos[i]) for i in range(n))
    seeded = [max(tl.finish_day(i, p[i]) for i in range(n)) for p in seeds]
    if seeded and finish >= min(seeded):
        return None
    return pos, finish


def _search_stats(
    phase: str, found: tuple[list[int], int] | None, seconds: float
) -> SolveStats:
    """The ``stats`` row of a genetic search: its finish day as the
    objective, no bound, no branches."""
    return SolveStats(
        phase,
        "FEASIBLE" if found is not None else "UNKNOWN",
        seconds,
        0,
        0,
        found[1] if found is not None else None,
        None,
    )


def _better(a: _Solved, b: _Solved) -> _Solved:
    """Two solves of one goal as one: the better schedule, the higher bound."""
    if b.status == cp.INFEASIBLE and a.pos is None:
        return b
    pick = b if b.pos is not None else a
    if a.pos is not None and b.pos is not None:
        assert a.objective is not None and b.objective is not None
        pick = b if b.objective <= a.objective else a
    bounds = [x for x in (a.bound, b.bound) if x is not None]
    bound = max(bounds) if bounds else None
    status = pick.status
    if pick.objective is not None and bound is not None and bound >= pick.objective:
        status = int(cp.OPTIMAL)
    return _Solved(status, pick.pos, pick.objective, bound, pick.stats)


def _any_schedule(plan: _Plan) -> list[int]:
    """The heuristic without the finish limit: a schedule to show, late."""
    net = plan.network
    cap = plan.logic_finish + 1
    while True:
        tl, es = _timeline(
            net,
            cap,
            [plan.tl.day(plan.tl.cal[i], p) for i, p in enumerate(plan.es)],
            plan.pinned,
        )
        got, _, _ = best_heuristic(tl, es, es, limit=cap)
        if got is not None:
            # Back onto the plan's tables: the same days, the plan's positions.
            return [
                plan.tl.pos(tl.cal[i], min(tl.day(tl.cal[i], p), plan.tl.horizon))
                for i, p in enumerate(got.pos)
            ]
        if cap > MAX_HORIZON_DAYS:
            raise LevellingInfeasible([_no_schedule(plan)])
        cap *= 2


def _none_by_limit(plan: _Plan, time_limit: float) -> Problem:
    net = plan.network
    assert plan.limit is not None
    limit = net.start + dt.timedelta(days=plan.limit)
    return Problem(
        "/finish",
        "no_schedule_by_finish_in_time",
        f"no schedule that keeps every crew within its capacity and finishes by "
        f"{limit} was found in {time_limit:g} s, and the priority rules find "
        f"none either; give the solver more time or a later finish (the logic "
        f"alone finishes {net.start + dt.timedelta(days=plan.logic_finish)})",
    )


def _no_schedule(plan: _Plan) -> Problem:
    net = plan.network
    crews = sorted({net.crews[k].key for k in net.dem_crew.tolist()})
    limit = net.start + dt.timedelta(days=plan.limit if plan.limit is not None else 0)
    return Problem(
        "/crews",
        "crews_need_longer",
        f"no schedule keeps every crew ({', '.join(crews)}) within its capacity "
        f"and finishes by {limit}; the logic alone finishes "
        f"{net.start + dt.timedelta(days=plan.logic_finish)}",
    )


def _result(
    plan: _Plan,
    m: _Model,
    pos: list[int],
    links: list[_Link],
    over: list[int],
    status: str,
    first: _Solved,
    stats: list[SolveStats],
    started: float,
    message: str,
) -> LevelResult:
    tl, net = plan.tl, plan.network
    n = tl.size
    fin = [tl.finish_day(i, pos[i]) for i in range(n)]
    finish_day = max(fin)
    # The project end, read as the critical path reads it: the latest end
    # instant, or the end of the project deadline's day.
    last_end = max(tl.end(i, pos[i]) for i in range(n))
    project_end = last_end
    if net.deadline is not None:
        project_end = (net.deadline - net.start).days + 1
    # Float asks how far work could slip, started work included: no pins.
    ls = late_positions(replace(tl, pinned={}), None, links, end=project_end)
    ff = _free_float(tl, pos, links, last_end)
    tf = [ls[i] - pos[i] for i in range(n)]
    path = _driving_path(tl, pos, links, tf)
    starts = {net.keys[i]: tl.date(tl.day(tl.cal[i], pos[i])) for i in range(n)}
    finishes = {net.keys[i]: tl.date(fin[i]) for i in range(n)}
    rw = plan.rewrite
    given = net if rw is None else rw.source
    state = status_of(given)
    if rw is not None:
        starts, finishes, path = _as_given(rw, starts, finishes, path)
    problems = check_schedule(
        given,
        starts,
        finishes=finishes,
        finish=tl.date(plan.limit) if plan.limit is not None else None,
        over_capacity={net.crews[k].key: v for k, v in enumerate(over) if v},
    )
    if problems:
        raise ScheduleRejected(
            "the levelled schedule fails the independent check:\n"
            + "\n".join(problems[:20])
        )
    activities = tuple(
        _activity(plan, i, state[i], starts, finishes, ls, tf, ff, fin)
        for i in range(given.size)
    )
    weight = m.goal_weight
    if plan.goal == "shortest":
        objective = finish_day
        raw = first.bound if first.bound is not None else plan.logic_finish * weight
        objective_bound = min(max(raw // weight, plan.logic_finish), objective)
        bound: dt.date | None = tl.date(objective_bound)
    else:
        objective = sum(over)
        raw = first.bound if first.bound is not None else 0
        objective_bound = min(max(raw // weight, 0), objective)
        bound = None
    gap = 100.0 * (objective - objective_bound) / objective if objective else 0.0
    if status == "optimal" and objective != objective_bound:
        raise ScheduleRejected("an optimal schedule that misses its own bound")
    key_of = (lambda k: k) if rw is None else rw.source_key
    crew_links = tuple(
        CrewLink(
            net.crews[link.crew].key,
            key_of(net.keys[link.pred]) if link.pred is not None else None,
            key_of(net.keys[link.succ]) if link.succ is not None else None,
            link.units,
            (tl.date(link.block[0]), tl.date(link.block[1] - 1))
            if link.block is not None and (link.pred is None or link.succ is None)
            else None,
        )
        for link in links
    )
    heuristic_finish = (
        tl.date(plan.heuristic.finish) if plan.heuristic is not None else None
    )
    return LevelResult(
        status=status,
        goal=plan.goal,
        finish=tl.date(finish_day),
        bound=bound,
        gap_percent=gap,
        objective=objective,
        objective_bound=objective_bound,
        activities=activities,
        moved=_moves_as_given(plan, _move_reasons(tl, plan, pos), starts),
        crew_links=crew_links,
        critical_path=path,
        over_capacity=tuple((net.crews[k].key, v) for k, v in enumerate(over)),
        heuristic_finish=heuristic_finish,
        stats=tuple(stats),
        wall_time=time.perf_counter() - started,
        message=message,
    )


def _activity(
    plan: _Plan,
    i: int,
    state: str,
    starts: dict[str, dt.date],
    finishes: dict[str, dt.date],
    ls: list[int],
    tf: list[int],
    ff: list[int],
    fin: list[int],
) -> LevelledActivity:
    """Activity ``i`` as given: finished work keeps its dates, without float."""
    tl = plan.tl
    key = plan.network.keys[i]
    done = state == FINISHED
    return LevelledActivity(
        key=key,
        start=starts[key],
        finish=finishes[key],
        late_start=(
            starts[key] if state != NOT_STARTED else tl.date(tl.day(tl.cal[i], ls[i]))
        ),
        late_finish=finishes[key] if done else tl.date(tl.finish_day(i, ls[i])),
        total_float=0 if done else tf[i],
        free_float=0 if done else ff[i],
        critical=not done and tf[i] <= 0,
        lateness=(max(0, fin[i] - plan.deadline[i]) if i in plan.deadline else None),
    )


def _as_given(
    rw: Rewrite,
    starts: dict[str, dt.date],
    finishes: dict[str, dt.date],
    path: tuple[LevelStep, ...],
) -> tuple[dict[str, dt.date], dict[str, dt.date], tuple[LevelStep, ...]]:
    """Work-network dates and driving path as the activities given.

    A started activity starts on its actual start and finishes with its
    remaining work; finished work shows its actual dates; the work done of a
    started activity is named after it.
    """
    net = rw.source
    prog = net.progress
    assert prog is not None
    s_out: dict[str, dt.date] = {}
    f_out: dict[str, dt.date] = {}
    a_s, a_f = prog.actual_start.tolist(), prog.actual_finish.tolist()
    for i, key in enumerate(net.keys):
        s_out[key], f_out[key] = starts[key], finishes[key]
        if rw.status[i] != NOT_STARTED:
            s_out[key] = net.start + dt.timedelta(days=a_s[i])
        if rw.status[i] == FINISHED:
            f_out[key] = net.start + dt.timedelta(days=a_f[i])
    steps: list[LevelStep] = []
    index = {k: i for i, k in enumerate(net.keys)}
    for step in path:
        owner = rw.source_key(step.key)
        assert owner is not None
        if steps and steps[-1].key == owner:
            continue
        d = step.driver
        if d.pred is not None:
            d = replace(d, pred=rw.source_key(d.pred))
        steps.append(LevelStep(owner, net.names[index[owner]], d))
    return s_out, f_out, tuple(steps)


def _moves_as_given(
    plan: _Plan, moves: tuple[Move, ...], starts: dict[str, dt.date]
) -> tuple[Move, ...]:
    """Moves of work done or under way are moves to its actual start."""
    rw = plan.rewrite
    if rw is None:
        return moves
    tl = plan.tl
    index = {k: i for i, k in enumerate(rw.source.keys)}
    out = []
    for mv in moves:
        i = index[mv.key]
        if rw.status[i] == NOT_STARTED:
            out.append(mv)
            continue
        start = starts[mv.key]
        if start == mv.previous:
            continue
        c = tl.cal[i]
        days = tl.pos(c, (start - tl.network.start).days) - tl.pos(
            c, _clamp_day(tl, (mv.previous - tl.network.start).days)
        )
        out.append(Move(mv.key, mv.previous, start, days, "progress"))
    return tuple(out)


__all__ = [
    "GOALS",
    "CrewLink",
    "LevelDriver",
    "LevelResult",
    "LevelStep",
    "LevelledActivity",
    "LevellingInfeasible",
    "LevellingStopped",
    "Move",
    "ScheduleRejected",
    "SolveStats",
    "build_model",
    "crew_flow",
    "late_positions",
    "left_justify",
    "level",
    "read_out",
    "solve",
]
