"""The integer timeline of a network, and a serial schedule-generation heuristic.

:class:`Timeline` is the form both the levelling model and the heuristic read:
time is counted in calendar days from the project start (day 0), and each
calendar has two tables over one range of days (see :mod:`.calendars`):
``W[t]``, the position of instant ``t``, and ``D[p]``, the day of position
``p``. Table cell ``t + pad`` holds day ``t``, so that days before the project
start — reached by negative lags — stay inside the tables.

The relation semantics are exactly those of the critical path (:mod:`.cpm`):
a relation reads the predecessor's start instant, or for FS/FF its end instant
(the day after its finish; a milestone's end is its start), shifts it by a
``calendar_days`` lag, takes the successor-calendar position of that instant
(the first successor working day at or after it), adds a working-day lag and
bounds the successor's start position (FS/SS) or end position (FF/SF).

:func:`serial_schedule` is the serial schedule-generation scheme (Kelley 1963;
in the form surveyed by Kolisch & Hartmann, "Heuristic algorithms for the
resource-constrained project scheduling problem", 1999): take the eligible
activity of best priority, put it at the earliest position its relations allow
at which every crew it needs has room over its whole span. It then improves
the schedule by forward-backward justification (Valls, Ballestín & Quintanilla,
"Justification and RCPSP: a technique that pays", EJOR 165, 2005): shift every
activity as late as it can go without moving the finish, then as early as it
can go, which never lengthens the schedule. Crews are counted on the same
axis as in the model's cumulative constraints (see :class:`Timeline`).
"""

from __future__ import annotations

import datetime as dt
import heapq
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .calendars import CalendarTables, days_needed
from .network import FF, FS, NO_DATE, SF, Network


@dataclass(frozen=True, slots=True)
class Relation:
    """One relation in integer form (``wl`` working days, ``cl`` calendar days)."""

    index: int
    pred: int
    succ: int
    type: int
    wl: int
    cl: int

    @property
    def from_end(self) -> bool:
        return self.type in (FS, FF)

    @property
    def to_end(self) -> bool:
        return self.type in (FF, SF)


@dataclass(frozen=True)
class Timeline:
    """A network on an integer day axis, with its calendar tables.

    Invariants: every instant the levelling can reach — from ``-pad`` to
    ``horizon + pad`` days — has a table cell; ``W[c][t + pad]`` is the position
    of day ``t`` on calendar ``c`` and ``D[c][p] - pad`` the day of position
    ``p``. ``identity[c]`` is true when every day of the range is a working day
    of ``c`` (then position and table cell coincide). ``lb_day`` is each
    activity's earliest start day (project start, data date, ``not_before``).
    ``blocks[k]`` lists crew ``k``'s unavailable periods as day ranges
    ``[a, b)``, clipped to ``[0, horizon)``.

    Each crew is counted on an *axis*: ``axis[k]`` is the calendar that all
    its activities share, when they do — then its load is counted per working
    day of that calendar, positions ``[p, p + duration)``, which is exact —
    or ``None``, when its activities mix calendars — then per calendar day
    over whole spans, weekends included, which is cautious. ``axis_blocks[k]``
    are the unavailable periods on that axis (positions or days; periods
    without a working day of the axis calendar vanish).
    """

    network: Network
    tables: CalendarTables
    pad: int
    horizon: int
    W: tuple[np.ndarray, ...]
    D: tuple[np.ndarray, ...]
    Wl: tuple[list[int], ...]
    Dl: tuple[list[int], ...]
    identity: tuple[bool, ...]
    dur: tuple[int, ...]
    cal: tuple[int, ...]
    lb_day: tuple[int, ...]
    relations: tuple[Relation, ...]
    preds: tuple[tuple[Relation, ...], ...]
    succs: tuple[tuple[Relation, ...], ...]
    demands: tuple[tuple[tuple[int, int], ...], ...]
    capacity: tuple[int, ...]
    blocks: tuple[tuple[tuple[int, int], ...], ...]
    order: tuple[int, ...]
    axis: tuple[int | None, ...]
    axis_blocks: tuple[tuple[tuple[int, int], ...], ...]
    #: Activities that may not move, with their start position: work done or
    #: under way (see :mod:`.progress`). Set by the levelling after the
    #: critical path has placed them.
    pinned: dict[int, int] = field(default_factory=dict)

    @property
    def size(self) -> int:
        return len(self.dur)

    # Conversions; ``p`` is a position, ``t`` a day (instant) from the start.

    def pos(self, c: int, t: int) -> int:
        """Working days of calendar ``c`` before instant ``t`` (from the table)."""
        return self.Wl[c][t + self.pad]

    def day(self, c: int, p: int) -> int:
        """The day of position ``p`` on calendar ``c``."""
        return self.Dl[c][p] - self.pad

    def end(self, i: int, p: int) -> int:
        """End instant of activity ``i`` started at position ``p``."""
        d = self.dur[i]
        c = self.cal[i]
        if d == 0:
            return self.Dl[c][p] - self.pad
        return self.Dl[c][p + d - 1] - self.pad + 1

    def finish_day(self, i: int, p: int) -> int:
        """Finish day (inclusive) of activity ``i`` started at position ``p``."""
        return self.Dl[self.cal[i]][p + max(self.dur[i] - 1, 0)] - self.pad

    def forward(self, r: Relation, p_pred: int) -> int:
        """The least start position of ``r.succ`` allowed by ``r``."""
        point = (
            self.end(r.pred, p_pred)
            if r.from_end
            else self.Dl[self.cal[r.pred]][p_pred] - self.pad
        )
        q = self.Wl[self.cal[r.succ]][point + r.cl + self.pad] + r.wl
        return q - self.dur[r.succ] if r.to_end else q

    def backward(self, r: Relation, p_succ: int) -> int:
        """The greatest start position of ``r.pred`` allowed by ``r``.

        The exact inverse of :meth:`forward`: ``forward(r, p) <= q`` holds
        exactly when ``p <= backward(r, q)``.
        """
        x = p_succ + (self.dur[r.succ] if r.to_end else 0) - r.wl
        use_end = r.from_end and self.dur[r.pred] >= 1
        t = self.Dl[self.cal[r.succ]][x] - r.cl + (0 if use_end else 1)
        skip = self.dur[r.pred] - 1 if use_end else 0
        return self.Wl[self.cal[r.pred]][t] - skip - 1

    def latest_for_finish(self, i: int, finish_day: int) -> int:
        """The greatest start position of ``i`` that finishes by ``finish_day``."""
        if i in self.pinned:
            return self.pinned[i]
        return self.Wl[self.cal[i]][finish_day + 1 + self.pad] - max(self.dur[i], 1)

    def latest_for_end(self, i: int, end: int) -> int:
        """The greatest start position of ``i`` whose end is at or before the
        instant ``end``: work ends by it, a milestone's day is at or before it
        (the critical path's reading of the project end)."""
        if self.dur[i] == 0:
            return self.Wl[self.cal[i]][end + 1 + self.pad] - 1
        return self.Wl[self.cal[i]][end + self.pad] - self.dur[i]

    def on_axis(self, k: int, i: int, p: int) -> tuple[int, int]:
        """Activity ``i`` at position ``p`` as a range of crew ``k``'s axis."""
        if self.axis[k] is not None:
            return p, p + self.dur[i]
        return self.day(self.cal[i], p), self.end(i, p)

    def axis_limit(self, k: int, limit: int) -> int:
        """The end instant ``limit`` (days) on crew ``k``'s axis."""
        c = self.axis[k]
        return limit if c is None else self.Wl[c][limit + self.pad]

    def date(self, t: int) -> dt.date:
        return self.network.start + dt.timedelta(days=t)


def build_timeline(network: Network, horizon: int) -> Timeline:
    """The timeline of ``network`` with tables reaching ``horizon`` days and past.

    ``horizon`` is the last end instant any activity may take (days from the
    project start). The tables reach far enough either side for the longest
    duration and lag, as the critical path's own tables do.
    """
    net = network
    cl = net.rel_lag * net.rel_calendar_days
    wl = net.rel_lag - cl
    sparse = min(net.calendars, key=lambda c: c.days_per_week or 7)
    reach = int(net.duration.max(initial=0) + np.abs(wl).max(initial=0) + 2)
    pad = days_needed(sparse, reach) + int(np.abs(cl).max(initial=0)) + 2
    n_days = horizon + 2 * pad + 1
    origin = net.start - dt.timedelta(days=pad)
    tables = CalendarTables.build(net.calendars, origin, n_days)
    W = tuple(
        tables.W[tables.w_off[c] : tables.w_off[c] + n_days + 1]
        for c in range(len(net.calendars))
    )
    D = tuple(
        tables.D[tables.d_off[c] : tables.d_off[c] + tables.n_work[c]]
        for c in range(len(net.calendars))
    )
    identity = tuple(len(d) == n_days for d in D)
    n = net.size
    lb = np.zeros(n, dtype=np.int64)
    if net.data_date is not None:
        lb[:] = max((net.data_date - net.start).days, 0)
    nb = net.not_before
    lb = np.where(nb != NO_DATE, np.maximum(lb, nb), lb)
    if net.fixed_start is not None:
        # Work done or under way starts where it did, before the data date.
        lb = np.where(net.fixed_start != NO_DATE, net.fixed_start, lb)
    rels = tuple(
        Relation(r, int(p), int(s), int(t), int(w), int(c))
        for r, (p, s, t, w, c) in enumerate(
            zip(
                net.rel_pred.tolist(),
                net.rel_succ.tolist(),
                net.rel_type.tolist(),
                wl.tolist(),
                cl.tolist(),
                strict=True,
            )
        )
    )
    preds: list[list[Relation]] = [[] for _ in range(n)]
    succs: list[list[Relation]] = [[] for _ in range(n)]
    for r in rels:
        preds[r.succ].append(r)
        succs[r.pred].append(r)
    demands: list[list[tuple[int, int]]] = [[] for _ in range(n)]
    for a, k, u in zip(
        net.dem_activity.tolist(),
        net.dem_crew.tolist(),
        net.dem_units.tolist(),
        strict=True,
    ):
        demands[a].append((k, u))
    acal = net.act_calendar.tolist()
    dur_arr = net.duration.tolist()
    dem_act = net.dem_activity.tolist()
    dem_crew = net.dem_crew.tolist()
    blocks = []
    for crew in net.crews:
        spans = []
        for first, last in crew.unavailable:
            a = max((first - net.start).days, 0)
            b = min((last - net.start).days + 1, horizon)
            if a < b:
                spans.append((a, b))
        blocks.append(tuple(sorted(spans)))
    axis: list[int | None] = []
    axis_blocks = []
    for k in range(len(net.crews)):
        used = {
            int(acal[a])
            for a, kk in zip(dem_act, dem_crew, strict=True)
            if kk == k and dur_arr[a] > 0
        }
        c = used.pop() if len(used) == 1 else None
        axis.append(c)
        if c is None:
            axis_blocks.append(blocks[k])
        else:
            w = W[c]
            axis_blocks.append(
                tuple(
                    (int(w[a + pad]), int(w[b + pad]))
                    for a, b in blocks[k]
                    if w[a + pad] < w[b + pad]
                )
            )
    return Timeline(
        network=net,
        tables=tables,
        pad=pad,
        horizon=horizon,
        W=W,
        D=D,
        Wl=tuple(w.tolist() for w in W),
        Dl=tuple(d.tolist() for d in D),
        identity=identity,
        dur=tuple(net.duration.tolist()),
        cal=tuple(net.act_calendar.tolist()),
        lb_day=tuple(lb.tolist()),
        relations=rels,
        preds=tuple(tuple(x) for x in preds),
        succs=tuple(tuple(x) for x in succs),
        demands=tuple(tuple(x) for x in demands),
        capacity=tuple(c.capacity for c in net.crews),
        blocks=tuple(blocks),
        order=tuple(net.topology.order.tolist()),
        axis=tuple(axis),
        axis_blocks=tuple(axis_blocks),
    )


@dataclass(frozen=True, slots=True)
class Schedule:
    """Start positions of every activity (each on its own calendar).

    ``finish`` is the latest finish day of any activity (days from the
    project start, inclusive), the measure the levelling minimises.
    """

    pos: tuple[int, ...]
    finish: int


@dataclass(frozen=True, slots=True)
class Stuck:
    """The heuristic could not place ``activity``: ``crew`` had no room before
    ``limit`` (an end instant, days from the project start)."""

    activity: int
    crew: int | None
    limit: int


class _Profile:
    """Free units per crew along its axis (see :class:`Timeline`).

    Unavailable periods are pre-filled at full capacity, so any demand
    conflicts with them; with ``extra`` units per crew a smoothing run may go
    over the nominal capacity. ``limit`` is the last end instant (days).
    """

    def __init__(self, tl: Timeline, limit: int, extra: Sequence[int] | None = None):
        self.tl = tl
        self.limit = limit
        self.free = []
        for k, cap in enumerate(tl.capacity):
            size = tl.axis_limit(k, limit) + 1
            row = np.full(size, cap + (extra[k] if extra else 0), dtype=np.int64)
            for a, b in tl.axis_blocks[k]:
                row[a : min(b, size)] -= cap
            self.free.append(row)

    def next_start(self, i: int, p: int) -> tuple[int, int] | None:
        """Where ``i`` must move to, at the least, to clear the conflicts of
        position ``p`` (and the crew that asks the most); ``None`` when it fits.
        """
        tl = self.tl
        worst: tuple[int, int] | None = None
        for k, u in tl.demands[i]:
            a, b = tl.on_axis(k, i, p)
            short = np.flatnonzero(self.free[k][a:b] < u)
            if not len(short):
                continue
            last = a + int(short[-1])
            to = last + 1 if tl.axis[k] is not None else tl.pos(tl.cal[i], last + 1)
            if worst is None or to > worst[0]:
                worst = (to, k)
        return worst

    def latest_before(self, i: int, p: int) -> int | None:
        """The latest position before ``p`` that ends before the first conflict
        of position ``p``; ``None`` when ``p`` fits."""
        tl = self.tl
        best: int | None = None
        for k, u in tl.demands[i]:
            a, b = tl.on_axis(k, i, p)
            short = np.flatnonzero(self.free[k][a:b] < u)
            if not len(short):
                continue
            first = a + int(short[0])
            # Work must end by the conflicting unit: finish before it.
            if tl.axis[k] is not None:
                to = first - tl.dur[i]
            else:
                to = tl.pos(tl.cal[i], first) - tl.dur[i]
            best = to if best is None else min(best, to)
        return best

    def take(self, i: int, p: int, sign: int = 1) -> None:
        for k, u in self.tl.demands[i]:
            a, b = self.tl.on_axis(k, i, p)
            self.free[k][a:b] -= sign * u


def _earliest(
    tl: Timeline, prof: _Profile, i: int, p: int
) -> tuple[int | None, int | None]:
    """The first position at or after ``p`` where ``i`` fits its crews.

    Returns ``(position, None)``, or ``(None, crew)`` when no position ends
    within the profile's limit; ``crew`` is the one that blocked last.
    """
    blocker = None
    while True:
        if tl.end(i, p) > prof.limit:
            return None, blocker
        if tl.dur[i] == 0 or not tl.demands[i]:
            return p, None
        hit = prof.next_start(i, p)
        if hit is None:
            return p, None
        blocker = hit[1]
        if i in tl.pinned:
            return None, blocker  # work under way cannot wait for its crew
        p = max(p + 1, hit[0])


def _lower(tl: Timeline, i: int, pos: Sequence[int]) -> int:
    """The least start position of ``i`` given its predecessors' positions."""
    if i in tl.pinned:
        return tl.pinned[i]
    c = tl.cal[i]
    p = tl.pos(c, tl.lb_day[i])
    for r in tl.preds[i]:
        p = max(p, tl.forward(r, pos[r.pred]))
    return p


def serial_schedule(
    tl: Timeline,
    priority: Sequence[float],
    *,
    limit: int,
    extra: Sequence[int] | None = None,
) -> Schedule | Stuck:
    """One pass of the serial scheme: least ``priority`` value first.

    Activities become eligible when all their predecessors are placed; among
    the eligible, the least priority value (then the lower activity number)
    goes next, at the earliest feasible position. ``limit`` is the last end
    instant allowed (days). Returns the schedule, or :class:`Stuck` naming the
    activity and crew that found no room before ``limit``.
    """
    n = tl.size
    waiting = [len(tl.preds[i]) for i in range(n)]
    # Work done or under way goes first: it cannot move, the rest fits round it.
    rank = [-np.inf if i in tl.pinned else priority[i] for i in range(n)]
    heap = [(rank[i], i) for i in range(n) if waiting[i] == 0]
    heapq.heapify(heap)
    pos = [0] * n
    prof = _Profile(tl, limit, extra)
    finish = 0
    while heap:
        _, i = heapq.heappop(heap)
        p, crew = _earliest(tl, prof, i, _lower(tl, i, pos))
        if p is None:
            return Stuck(i, crew, limit)
        pos[i] = p
        if tl.dur[i] and tl.demands[i]:
            prof.take(i, p)
        finish = max(finish, tl.finish_day(i, p))
        for r in tl.succs[i]:
            waiting[r.succ] -= 1
            if waiting[r.succ] == 0:
                heapq.heappush(heap, (rank[r.succ], r.succ))
    return Schedule(tuple(pos), finish)


def justify(
    tl: Timeline, schedule: Schedule, *, extra: Sequence[int] | None = None
) -> Schedule:
    """Forward-backward justification: right-shift, then left-shift, each
    activity in turn. Never lengthens the schedule; repeats while it helps.

    The right shift visits activities latest finish first, each only after all
    its successors, and moves each as late as relations, crews and the
    current finish allow; the left shift mirrors it. Both keep the schedule
    feasible at every step, so the result is feasible too.
    """
    best = schedule
    while True:
        late = _shift(tl, best, right=True, extra=extra)
        early = _shift(tl, late, right=False, extra=extra)
        if early.finish >= best.finish:
            return best if early.finish > best.finish else early
        best = early


def _shift(
    tl: Timeline, schedule: Schedule, *, right: bool, extra: Sequence[int] | None
) -> Schedule:
    n = tl.size
    pos = list(schedule.pos)
    limit = schedule.finish + 1
    prof = _Profile(tl, max(limit, tl.horizon), extra)
    for i in range(n):
        if tl.dur[i] and tl.demands[i]:
            prof.take(i, pos[i])
    # Visit in time order, each activity after everything it constrains.
    waits_on = tl.succs if right else tl.preds
    frees = tl.preds if right else tl.succs
    waiting = [len(waits_on[i]) for i in range(n)]
    key = (
        (lambda i: (-tl.finish_day(i, pos[i]), -i))
        if right
        else (lambda i: (tl.day(tl.cal[i], pos[i]), i))
    )
    heap = [(key(i), i) for i in range(n) if waiting[i] == 0]
    heapq.heapify(heap)
    while heap:
        _, i = heapq.heappop(heap)
        held = bool(tl.dur[i] and tl.demands[i])
        if held:
            prof.take(i, pos[i], sign=-1)
        if right:
            ub = tl.latest_for_finish(i, schedule.finish)
            for r in tl.succs[i]:
                ub = min(ub, tl.backward(r, pos[r.succ]))
            p = ub
            while p > pos[i] and held:
                to = prof.latest_before(i, p)
                if to is None:
                    break
                p = max(pos[i], min(p - 1, to))
            pos[i] = max(p, pos[i])
        else:
            p = _lower(tl, i, pos)
            while p < pos[i] and held:
                hit = prof.next_start(i, p)
                if hit is None:
                    break
                p = min(pos[i], max(p + 1, hit[0]))
            pos[i] = min(p, pos[i])
        if held:
            prof.take(i, pos[i])
        for r in frees[i]:
            j = r.pred if right else r.succ
            waiting[j] -= 1
            if waiting[j] == 0:
                heapq.heappush(heap, (key(j), j))
    finish = max(tl.finish_day(i, pos[i]) for i in range(n))
    return Schedule(tuple(pos), finish)


def priority_rules(
    tl: Timeline, early: Sequence[int], late: Sequence[int]
) -> dict[str, list[float]]:
    """Priority values (least first) of the classic rules.

    ``early``/``late`` are the critical-path early and late start positions.
    ``lft``: latest finish first (Kolisch & Hartmann 1999 rank it among the
    best single-pass rules); ``lst``: latest start; ``min_float``: least total
    float, then latest finish.
    """
    n = tl.size
    lft = [float(tl.finish_day(i, late[i])) for i in range(n)]
    lst = [float(tl.day(tl.cal[i], late[i])) for i in range(n)]
    scale = float(max(lft, default=0) + 1)
    slack = [float(late[i] - early[i]) * scale + lft[i] for i in range(n)]
    return {"lft": lft, "lst": lst, "min_float": slack}


def best_heuristic(
    tl: Timeline,
    early: Sequence[int],
    late: Sequence[int],
    *,
    limit: int,
    extra: Sequence[int] | None = None,
    first: Sequence[float] | None = None,
) -> tuple[Schedule | None, Stuck | None, str]:
    """The shortest of the rule-based serial schedules, each justified.

    ``first`` is an extra priority list tried first (e.g. the previous starts,
    for a schedule that stays close to them). Returns the best schedule (or
    ``None``), the last :class:`Stuck` seen, and the name of the winning rule.
    """
    rules = priority_rules(tl, early, late)
    if first is not None:
        rules = {"previous": list(first), **rules}
    best: Schedule | None = None
    best_rule = ""
    stuck: Stuck | None = None
    for name, prio in rules.items():
        got = serial_schedule(tl, prio, limit=limit, extra=extra)
        if isinstance(got, Stuck):
            stuck = got
            continue
        got = justify(tl, got, extra=extra)
        if best is None or got.finish < best.finish:
            best, best_rule = got, name
    return best, stuck, best_rule
