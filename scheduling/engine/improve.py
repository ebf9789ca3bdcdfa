"""A genetic algorithm for the shortest crew-feasible schedule.

The levelling's CP-SAT search (:mod:`.levelling`) starts from a hint; a
better hint lets its neighbourhood searches start nearer the optimum. This
module builds that hint with the activity-list genetic algorithm of Hartmann
("A competitive genetic algorithm for resource-constrained project
scheduling", Naval Research Logistics 45, 1998):

* an individual is a precedence-feasible activity list, decoded by the serial
  schedule-generation scheme in list order (each activity at the earliest
  position its relations and crews allow);
* the first population comes from regret-based biased random sampling on the
  latest-finish priority (Drexl, "Scheduling of project networks by job
  assignment", Management Science 37, 1991; Kolisch, "Project scheduling under
  resource constraints", 1995), plus the rule-based schedules of
  :func:`.heuristic.best_heuristic`;
* two-point crossover that keeps the lists precedence-feasible, mutation by
  swapping neighbours that no relation joins, ranking selection over parents
  and children (Hartmann 1998);
* a schedule already in the population is not taken in again, so that copies
  of the best do not crowd out the rest (duplicate elimination, a common
  practice of population searches; without it the population of 250 settled
  within a second on PSPLIB J60 groups 9, 13, 25, 29 and 45, this machine);
* every decoded schedule is improved by forward-backward improvement, a
  backward then a forward serial pass in the order of the current finishes and
  starts, repeated while it shortens the schedule (Tormos & Lova, "A
  competitive heuristic solution technique for resource-constrained project
  scheduling", Annals of Operations Research 102, 2001; the justification of
  Valls, Ballestín & Quintanilla, "Justification and RCPSP: a technique that
  pays", EJOR 165, 2005), and the individual takes the improved schedule's
  start order as its list (Valls et al. 2005).

After the genetic search, its best schedule goes to a local search
(:func:`shift_search`) that moves a few activities of its list at a time to
other places between their predecessors and successors, decodes and improves
the list, and keeps the result when it finishes no later; so it walks across
schedules of equal finish until one finishes sooner. On the first instances of
PSPLIB J60 groups 9, 13, 25, 29, 41 and 45 (5 s each, seeds 0-2, one core),
the search alone ended 39 days over the best known values summed; without
copies in the population 29; with the local search for 70 % of the time 23.

The same search can run on the problem turned round in time
(:meth:`Decoder.turned`, ``turn=True``): its lists are then decoded from the
finish back, and it meets other schedules than the search from the start. On
the first instances of PSPLIB J60 groups 13, 25, 29 and 45 (8 s, seeds 0-3,
one core) the two directions ended 28 and 17 days over the best known values
summed, and each was the better one on some instance (the turned search
reached 103 on group 29 in three runs of four, the search from the start in
none; the search from the start did better on group 45).

Time and relations are those of :class:`.heuristic.Timeline` (positions on
each activity's calendar, crews on their axes); relations that are linear in
positions — both ends on one calendar without a calendar-day lag, or two
calendars that work every day — are read as offsets, the others through the
timeline's tables. When every relation is such an offset and every crew
counts on its activities' own positions, the passes and whole generations
(crossover, mutation, decoding, improvement) run compiled (:mod:`.passes`):
on PSPLIB J120 groups 1, 2, 6 and 11, 7,700 to 13,400 schedules a second
against 60 to 230 with the passes in Python (this machine, one core). The run is
deterministic for a seed: it stops after a number of generations, or earlier
at a wall-clock cap (then it depends on the machine's speed); a compiled
generation draws from Numba's own generator, seeded from the run's. On
such timelines the local search runs compiled too, a chunk of steps at a time
without Python's lock: beside the search from the finish (two threads, PSPLIB
J60 group 13, this machine) it made 27,400 and 23,000 steps in 4 s against
18,900 and 18,200 with its loop in Python.
"""

from __future__ import annotations

import heapq
import random
import time
from collections.abc import Callable, Sequence
from typing import NamedTuple

import numpy as np

from . import passes
from .heuristic import Relation, Schedule, Timeline

_INF = 1 << 60

#: Use the compiled passes (:mod:`.passes`) for flat timelines. Off, every
#: pass runs in Python (the tests compare the two).
COMPILED = passes.njit is not None


def _is_offset(tl: Timeline, r: Relation) -> bool:
    """Whether relation ``r`` is a fixed offset between positions: both ends
    on one calendar without a calendar-day lag, or two every-day calendars."""
    cp, cs = tl.cal[r.pred], tl.cal[r.succ]
    return (cp == cs and r.cl == 0) or (tl.identity[cp] and tl.identity[cs])


def _flat(tl: Timeline) -> bool:
    """Whether ``tl`` is *flat*: every relation an offset and every crew of a
    working activity counted on its own calendar's positions (then the
    passes can run compiled)."""
    return (
        tl.size > 0
        and all(_is_offset(tl, r) for r in tl.relations)
        and all(
            tl.axis[k] is not None
            for i in range(tl.size)
            if tl.dur[i]
            for k, _ in tl.demands[i]
        )
    )


def compiles(tl: Timeline) -> bool:
    """Whether a :class:`Decoder` on ``tl`` runs its passes compiled, found
    without building one."""
    return COMPILED and _flat(tl)


def turns(tl: Timeline) -> bool:
    """Whether a :class:`Decoder` on ``tl`` can be turned round
    (:meth:`Decoder.turned`; the room's end is checked there), found without
    building one: compiled passes, nothing fixed, one earliest start for
    every activity and one position axis."""
    cals = set(tl.cal)
    return (
        compiles(tl)
        and not tl.pinned
        and len(set(tl.lb_day)) == 1
        and (len(cals) == 1 or all(tl.identity[c] for c in cals))
    )


def _rows(lists: Sequence[list[tuple[int, int]]]) -> tuple[np.ndarray, ...]:
    """Pairs per activity as compressed rows (see :mod:`.passes`)."""
    ptr = np.zeros(len(lists) + 1, dtype=np.int64)
    ptr[1:] = np.cumsum([len(x) for x in lists])
    a = np.array([x for row in lists for x, _ in row], dtype=np.int64)
    b = np.array([y for row in lists for _, y in row], dtype=np.int64)
    return ptr, a, b


class _Arc(NamedTuple):
    """A relation of a turned decoder, as the list operators read it."""

    pred: int
    succ: int


class _Turned(NamedTuple):
    """What a turned decoder's ``tl`` holds: its relations, for the list
    operators, and no padding."""

    size: int
    preds: list[list[_Arc]]
    succs: list[list[_Arc]]
    pad: int = 0


class Decoder:
    """Fast serial passes over one timeline, up to the end instant ``limit``.

    Crew profiles are rows of free units per unit of the crew's axis, with
    unavailable periods taken out at full capacity (as in the heuristic).

    The backward and forward passes place activities on an empty profile, in
    the order of the current finishes (starts): then the current position is
    always still free when an activity's turn comes, so nothing moves the
    wrong way. Relations that force another order (a start-to-start lead, a
    finish-to-finish link) can break that; a pass that meets such a case
    gives the schedule back unchanged.

    On a *flat* timeline — every relation read as an offset and every crew
    counted on its activities' own positions — the passes run compiled
    (:mod:`.passes`), with the same results; ``compiled`` says which.
    """

    def __init__(self, tl: Timeline, limit: int, compiled: bool | None = None) -> None:
        self.tl = tl
        self.limit = limit
        n = tl.size
        self.n = n
        self.dur = list(tl.dur)
        self.cal = list(tl.cal)
        self.lb = [tl.pos(tl.cal[i], tl.lb_day[i]) for i in range(n)]
        # (pred, offset) for linear relations, (pred, relation) otherwise.
        self.lin_in: list[list[tuple[int, int]]] = [[] for _ in range(n)]
        self.tab_in: list[list[tuple[int, object]]] = [[] for _ in range(n)]
        self.lin_out: list[list[tuple[int, int]]] = [[] for _ in range(n)]
        self.tab_out: list[list[tuple[int, object]]] = [[] for _ in range(n)]
        for r in tl.relations:
            p, s = r.pred, r.succ
            if _is_offset(tl, r):
                use_end = r.from_end and tl.dur[p] >= 1
                off = (tl.dur[p] if use_end else 0) + r.cl + r.wl
                off -= tl.dur[s] if r.to_end else 0
                self.lin_in[s].append((p, off))
                self.lin_out[p].append((s, off))
            else:
                self.tab_in[s].append((p, r))
                self.tab_out[p].append((s, r))
        self.n_pred = [len(tl.preds[i]) for i in range(n)]
        self.n_succ = [len(tl.succs[i]) for i in range(n)]
        self.pred_set = [
            {r.pred for r in tl.preds[i]} | {r.succ for r in tl.succs[i]}
            for i in range(n)
        ]
        # Demands as (crew, units, on the crew's own calendar axis).
        self.need: list[list[tuple[int, int, bool]]] = [
            [(k, u, tl.axis[k] is not None) for k, u in tl.demands[i]]
            if tl.dur[i]
            else []
            for i in range(n)
        ]
        #: Every crew of the activity counts on its own calendar's positions.
        self.plain = [all(ax for _, _, ax in need) for need in self.need]
        self.pinned = tl.pinned
        # The latest start of each activity within the limit. A pinned
        # activity (work done or under way) may start nowhere but on its pin:
        # a list that would push it later decodes to nothing.
        self.hi = [
            min(tl.latest_for_end(i, limit), tl.pinned.get(i, _INF)) for i in range(n)
        ]
        self.base: list[list[int]] = []
        for k, cap in enumerate(tl.capacity):
            size = tl.axis_limit(k, limit) + 1
            row = [cap] * size
            for a, b in tl.axis_blocks[k]:
                for t in range(a, min(b, size)):
                    row[t] -= cap
            self.base.append(row)
        use = COMPILED if compiled is None else compiled
        self.compiled = bool(use and _flat(tl))
        if self.compiled:
            self._arrays()

    def _arrays(self) -> None:
        """The flat arrays of :mod:`.passes` (see its module text)."""
        tl = self.tl
        n = self.n

        def table(lists: Sequence[list[int]]) -> np.ndarray:
            width = max(len(x) for x in lists)
            out = np.full((len(lists), width), _INF, dtype=np.int64)
            for c, x in enumerate(lists):
                out[c, : len(x)] = x
            return out

        i64 = np.int64
        self.a_dur = np.array(self.dur, dtype=i64)
        self.a_cal = np.array(self.cal, dtype=i64)
        self.a_lb = np.array(self.lb, dtype=i64)
        self.a_hi = np.array(self.hi, dtype=i64)
        self.a_pin = np.array([tl.pinned.get(i, -1) for i in range(n)], dtype=i64)
        self.in_ptr, self.in_src, self.in_off = _rows(self.lin_in)
        self.out_ptr, self.out_dst, self.out_off = _rows(self.lin_out)
        self.need_ptr, self.need_k, self.need_u = _rows(
            [[(k, u) for k, u, _ in need] for need in self.need]
        )
        self.a_base = table(self.base) if self.base else np.zeros((1, 1), dtype=i64)
        self.row_len = np.array([len(r) for r in self.base] or [0], dtype=i64)
        self.dtab = table(list(tl.Dl))
        self.wtab = table(list(tl.Wl))
        self.related = np.zeros((n, n), dtype=np.bool_)
        for i, near in enumerate(self.pred_set):
            for j in near:
                self.related[i, j] = True

    def turned(self) -> Decoder | None:
        """The same problem with time running backwards, for a search that
        builds schedules from the finish (see :func:`genetic_schedule`);
        ``None`` where that is not the same problem.

        Position ``x`` of an activity of duration ``d`` becomes ``E − x − d``,
        where ``E`` is the end of the room (every activity's latest end):
        each relation ``x_s ≥ x_p + off`` becomes ``x'_p ≥ x'_s + off + d_s −
        d_p`` (the successor goes first), each crew row is read from its end,
        and the room's end becomes the earliest start. Only for a compiled
        decoder with nothing fixed (no work done or under way), one earliest
        start for every activity (a later ``not_before`` would become a
        deadline, which the passes do not hold) and one position axis (one
        calendar, or calendars that work every day). The turned decoder keeps
        the compiled passes only: its ``tl`` holds just the turned relations
        for the list operators.
        """
        if not (self.compiled and turns(self.tl)):
            return None
        end = self._end()
        if end <= 0 or end > int(self.row_len.min()) - 1:
            return None
        n = self.n
        twin = object.__new__(Decoder)
        twin.n = n
        twin.limit = end
        twin.compiled = True
        twin.dur = self.dur
        twin.cal = [0] * n
        twin.lb = [end - self.dur[i] - int(self.a_hi[i]) for i in range(n)]
        twin.lin_in = [[] for _ in range(n)]
        twin.lin_out = [[] for _ in range(n)]
        for s_, ins in enumerate(self.lin_in):
            for p_, off in ins:
                back = off + self.dur[s_] - self.dur[p_]
                twin.lin_in[p_].append((s_, back))
                twin.lin_out[s_].append((p_, back))
        twin.tab_in = [[] for _ in range(n)]
        twin.tab_out = [[] for _ in range(n)]
        twin.n_pred, twin.n_succ = self.n_succ, self.n_pred
        twin.pred_set = self.pred_set
        twin.need = self.need
        twin.plain = self.plain
        twin.base = [row[end - 1 :: -1] for row in self.base]
        twin.tl = _Turned(  # type: ignore[assignment]
            n,
            [[_Arc(s_, p_) for s_, _ in twin.lin_in[p_]] for p_ in range(n)],
            [[_Arc(s_, p_) for p_, _ in twin.lin_out[s_]] for s_ in range(n)],
        )
        i64 = np.int64
        twin.a_dur = self.a_dur
        twin.a_cal = np.zeros(n, dtype=i64)
        twin.a_lb = np.array(twin.lb, dtype=i64)
        twin.a_hi = end - self.a_dur - self.a_lb
        twin.hi = twin.a_hi.tolist()
        twin.pinned = {}
        twin.a_pin = np.full(n, -1, dtype=i64)
        twin.in_ptr, twin.in_src, twin.in_off = _rows(twin.lin_in)
        twin.out_ptr, twin.out_dst, twin.out_off = _rows(twin.lin_out)
        twin.need_ptr, twin.need_k, twin.need_u = (
            self.need_ptr,
            self.need_k,
            self.need_u,
        )
        twin.a_base = np.ascontiguousarray(self.a_base[:, end - 1 :: -1])
        twin.row_len = np.full_like(self.row_len, end)
        twin.dtab = np.arange(end + 2, dtype=i64)[None, :]
        twin.wtab = twin.dtab
        twin.related = self.related
        return twin

    def turn(self, pos: Sequence[int]) -> list[int]:
        """Positions on the turned decoder (:meth:`turned`) of a schedule on
        this one; on the turned decoder, the way back (the map is its own
        inverse, with ``E`` the turned decoder's ``limit``)."""
        end = self.limit if isinstance(self.tl, _Turned) else self._end()
        return [end - pos[i] - self.dur[i] for i in range(self.n)]

    def _end(self) -> int:
        return int((self.a_hi + self.a_dur).max())

    # -- pieces --------------------------------------------------------------

    def _span(self, i: int, k_axis: bool, p: int) -> tuple[int, int]:
        if k_axis:
            return p, p + self.dur[i]
        tl = self.tl
        return tl.day(self.cal[i], p), tl.end(i, p)

    def _fits_from(self, free: list[list[int]], i: int, p: int) -> int:
        """``p`` when ``i`` fits there, else the least position worth trying
        (for an activity on its crews' own calendars: the first that fits)."""
        if self.plain[i]:
            d = self.dur[i]
            need = self.need[i]
            moved = True
            while moved:
                moved = False
                for k, u, _ in need:
                    row = free[k]
                    e = p + d
                    if e > len(row):
                        return _INF
                    if min(row[p:e]) < u:
                        t = e - 1
                        while row[t] >= u:
                            t -= 1
                        p = t + 1
                        moved = True
            return p
        to = p
        for k, u, on_axis in self.need[i]:
            a, b = self._span(i, on_axis, p)
            row = free[k]
            if b > len(row):
                return _INF
            if min(row[a:b], default=u) >= u:
                continue
            t = b - 1
            while row[t] >= u:
                t -= 1
            nxt = t + 1 if on_axis else self.tl.pos(self.cal[i], t + 1)
            to = max(to, nxt)
        return to

    def _latest(self, free: list[list[int]], i: int, p: int, lo: int) -> int:
        """The latest position in ``[lo, p]`` where ``i`` fits, or ``lo``."""
        while p > lo:
            q = self._fits_before(free, i, p)
            if q == p:
                return p
            p = q
        return lo

    def _fits_before(self, free: list[list[int]], i: int, p: int) -> int:
        """``p`` when ``i`` fits there, else the greatest position worth trying."""
        if self.plain[i]:
            d = self.dur[i]
            need = self.need[i]
            moved = True
            while moved:
                moved = False
                for k, u, _ in need:
                    row = free[k]
                    if p < 0:
                        return p
                    if min(row[p : p + d]) < u:
                        t = p
                        while row[t] >= u:
                            t += 1
                        p = t - d
                        moved = True
            return p
        to = p
        for k, u, on_axis in self.need[i]:
            a, b = self._span(i, on_axis, p)
            row = free[k]
            if min(row[a:b], default=u) >= u:
                continue
            t = a
            while row[t] >= u:
                t += 1
            if on_axis:
                prev = t - self.dur[i]
            else:
                prev = self.tl.pos(self.cal[i], t) - self.dur[i]
            to = min(to, prev)
        return to

    def _fits(self, free: list[list[int]], i: int, p: int) -> bool:
        for k, u, on_axis in self.need[i]:
            a, b = self._span(i, on_axis, p)
            if min(free[k][a:b], default=u) < u:
                return False
        return True

    def _take(self, free: list[list[int]], i: int, p: int) -> None:
        if self.plain[i]:
            d = self.dur[i]
            for k, u, _ in self.need[i]:
                row = free[k]
                row[p : p + d] = [x - u for x in row[p : p + d]]
            return
        for k, u, on_axis in self.need[i]:
            a, b = self._span(i, on_axis, p)
            row = free[k]
            for t in range(a, b):
                row[t] -= u

    def _lower(self, i: int, pos: list[int]) -> int:
        p = self.lb[i]
        for j, off in self.lin_in[i]:
            q = pos[j] + off
            if q > p:
                p = q
        for j, r in self.tab_in[i]:
            q = self.tl.forward(r, pos[j])  # type: ignore[arg-type]
            if q > p:
                p = q
        return p

    def _upper(self, i: int, pos: list[int], finish: int) -> int:
        p = self.tl.latest_for_finish(i, finish)
        for j, off in self.lin_out[i]:
            q = pos[j] - off
            if q < p:
                p = q
        for j, r in self.tab_out[i]:
            q = self.tl.backward(r, pos[j])  # type: ignore[arg-type]
            if q < p:
                p = q
        return p

    def _back_args(self) -> tuple[object, ...]:
        return (
            self.a_dur,
            self.a_cal,
            self.a_pin,
            self.in_ptr,
            self.in_src,
            self.out_ptr,
            self.out_dst,
            self.out_off,
            self.need_ptr,
            self.need_k,
            self.need_u,
            self.a_base,
            self.row_len,
            self.dtab,
            self.wtab,
            self.tl.pad,
        )

    def _fwd_args(self) -> tuple[object, ...]:
        return (
            self.a_dur,
            self.a_cal,
            self.a_lb,
            self.in_ptr,
            self.in_src,
            self.in_off,
            self.out_ptr,
            self.out_dst,
            self.need_ptr,
            self.need_k,
            self.need_u,
            self.a_base,
            self.row_len,
            self.dtab,
            self.tl.pad,
        )

    def _all_args(self) -> tuple[object, ...]:
        return (
            self.a_dur,
            self.a_cal,
            self.a_lb,
            self.a_pin,
            self.in_ptr,
            self.in_src,
            self.in_off,
            self.out_ptr,
            self.out_dst,
            self.out_off,
            self.need_ptr,
            self.need_k,
            self.need_u,
            self.a_base,
            self.row_len,
            self.dtab,
            self.wtab,
            self.tl.pad,
        )

    def finish_of(self, pos: Sequence[int]) -> int:
        tl = self.tl
        return max(tl.finish_day(i, pos[i]) for i in range(self.n))

    # -- passes --------------------------------------------------------------

    def decode(self, order: Sequence[int]) -> list[int] | None:
        """Serial scheme in list order; ``None`` when an activity finds no
        room before the limit. ``order`` must be precedence-feasible."""
        if self.compiled:
            got = passes.decode(
                np.asarray(order, dtype=np.int64),
                self.a_dur,
                self.a_lb,
                self.a_hi,
                self.in_ptr,
                self.in_src,
                self.in_off,
                self.need_ptr,
                self.need_k,
                self.need_u,
                self.a_base,
                self.row_len,
            )
            return None if got[0] == -passes.INF else got.tolist()
        free = [row[:] for row in self.base]
        pos = [0] * self.n
        hi = self.hi
        for i in order:
            p = self._lower(i, pos)
            if self.need[i]:
                while True:
                    if p > hi[i]:
                        return None
                    q = self._fits_from(free, i, p)
                    if q == p:
                        break
                    if q >= _INF:
                        return None
                    p = q
                self._take(free, i, p)
            elif p > hi[i]:
                return None
            pos[i] = p
        return pos

    def backward(self, pos: list[int], finish: int) -> list[int]:
        """Every activity as late as it fits, latest finish first, the
        finish held; never earlier than now (so the result stays feasible)."""
        if self.compiled:
            return passes.backward(
                np.asarray(pos, dtype=np.int64), finish, *self._back_args()
            ).tolist()
        tl = self.tl
        n = self.n
        free = [row[:] for row in self.base]
        new = list(pos)
        waiting = list(self.n_succ)
        fin = [tl.finish_day(i, pos[i]) for i in range(n)]
        heap = [(-fin[i], -i) for i in range(n) if waiting[i] == 0]
        heapq.heapify(heap)
        while heap:
            _, mi = heapq.heappop(heap)
            i = -mi
            lo = pos[i]
            p = self._upper(i, new, finish)
            if self.need[i]:
                p = self._latest(free, i, p, lo) if p > lo else lo
                if p == lo and not self._fits(free, i, lo):
                    return list(pos)  # see the class text
                self._take(free, i, p)
            else:
                p = max(p, lo)
            new[i] = p
            for r in tl.preds[i]:
                j = r.pred
                waiting[j] -= 1
                if waiting[j] == 0:
                    heapq.heappush(heap, (-fin[j], -j))
        return new

    def forward(self, pos: list[int]) -> list[int]:
        """Every activity as early as it fits, earliest start first; never
        later than now."""
        if self.compiled:
            return passes.forward(
                np.asarray(pos, dtype=np.int64), *self._fwd_args()
            ).tolist()
        tl = self.tl
        n = self.n
        free = [row[:] for row in self.base]
        new = list(pos)
        waiting = list(self.n_pred)
        start = [tl.day(self.cal[i], pos[i]) for i in range(n)]
        heap = [(start[i], i) for i in range(n) if waiting[i] == 0]
        heapq.heapify(heap)
        while heap:
            _, i = heapq.heappop(heap)
            hi = pos[i]
            p = self._lower(i, new)
            if self.need[i]:
                while p < hi:
                    q = self._fits_from(free, i, p)
                    if q == p:
                        break
                    p = q
                if p >= hi:
                    p = hi
                    if not self._fits(free, i, hi):
                        return list(pos)  # see the class text
                self._take(free, i, p)
            else:
                p = min(p, hi)
            new[i] = p
            for r in tl.succs[i]:
                j = r.succ
                waiting[j] -= 1
                if waiting[j] == 0:
                    heapq.heappush(heap, (start[j], j))
        return new

    def improve(self, pos: list[int], rounds: int = 1 << 30) -> tuple[list[int], int]:
        """Forward-backward improvement, repeated while it shortens (at most
        ``rounds`` times)."""
        if self.compiled:
            got, finish = passes.improve(
                np.asarray(pos, dtype=np.int64), min(rounds, 1 << 62), *self._all_args()
            )
            return got.tolist(), int(finish)
        finish = self.finish_of(pos)
        for _ in range(rounds):
            late = self.backward(pos, finish)
            early = self.forward(late)
            got = self.finish_of(early)
            if got >= finish:
                return (early, got) if got == finish else (pos, finish)
            pos, finish = early, got
        return pos, finish

    def breed(
        self, parents: Sequence[Sequence[int]], rate: float, rounds: int, seed: int
    ) -> list[tuple[list[int], list[int], int]]:
        """One compiled generation (:func:`.passes.breed`): for each child
        that fits the limit, its list in start order, its positions and its
        finish day. Only for a ``compiled`` decoder."""
        orders, places, finish, ok = passes.breed(
            np.array(parents, dtype=np.int64),
            rate,
            self.related,
            min(rounds, 1 << 62),
            seed,
            self.a_hi,
            *self._all_args(),
        )
        return [
            (orders[c].tolist(), places[c].tolist(), int(finish[c]))
            for c in np.flatnonzero(ok)
        ]

    def order_of(self, pos: Sequence[int]) -> list[int]:
        """A precedence-feasible list in order of start day (ties: number)."""
        if self.compiled:
            return passes.order_of(
                np.asarray(pos, dtype=np.int64),
                self.a_dur,
                self.a_cal,
                self.in_ptr,
                self.out_ptr,
                self.out_dst,
                self.dtab,
                self.tl.pad,
            ).tolist()
        tl = self.tl
        waiting = list(self.n_pred)
        key = [tl.day(self.cal[i], pos[i]) for i in range(self.n)]
        heap = [(key[i], i) for i in range(self.n) if waiting[i] == 0]
        heapq.heapify(heap)
        out = []
        while heap:
            _, i = heapq.heappop(heap)
            out.append(i)
            for r in tl.succs[i]:
                j = r.succ
                waiting[j] -= 1
                if waiting[j] == 0:
                    heapq.heappush(heap, (key[j], j))
        return out


#: The latest finish :func:`_sample` reads for pinned work: so far ahead of
#: the rest that it is drawn as soon as it is eligible.
_PINNED_FIRST = 1e12


def _sample(dec: Decoder, lft: Sequence[float], rng: random.Random) -> list[int]:
    """A list by regret-based biased random sampling on ``lft`` (least first):
    an eligible activity is drawn with weight ``(max − own + 1)``, the regret
    against the worst eligible value (Drexl 1991). Work done or under way
    (pinned) is drawn first, as the serial heuristic takes it: drawn later, it
    finds its crews taken and the list decodes to nothing."""
    tl = dec.tl
    if dec.pinned:
        lft = [-_PINNED_FIRST if i in dec.pinned else x for i, x in enumerate(lft)]
    waiting = list(dec.n_pred)
    eligible = [i for i in range(dec.n) if waiting[i] == 0]
    out = []
    while eligible:
        worst = max(lft[i] for i in eligible)
        weights = [worst - lft[i] + 1.0 for i in eligible]
        at = rng.choices(range(len(eligible)), weights)[0]
        i = eligible[at]
        eligible[at] = eligible[-1]
        eligible.pop()
        out.append(i)
        for r in tl.succs[i]:
            j = r.succ
            waiting[j] -= 1
            if waiting[j] == 0:
                eligible.append(j)
    return out


def _crossover(
    dec: Decoder, mother: list[int], father: list[int], rng: random.Random
) -> list[int]:
    """Two-point crossover of activity lists (Hartmann 1998): the mother's
    first part, then the father's activities not yet taken up to the second
    cut, then the rest in the mother's order. Precedence-feasible when both
    parents are."""
    n = len(mother)
    q1, q2 = sorted(rng.sample(range(n + 1), 2))
    child = mother[:q1]
    taken = set(child)
    for i in father:
        if len(child) >= q2:
            break
        if i not in taken:
            child.append(i)
            taken.add(i)
    child.extend(i for i in mother if i not in taken)
    return child


def _mutate(dec: Decoder, order: list[int], rate: float, rng: random.Random) -> None:
    """Swap neighbours that no relation joins, each with probability ``rate``."""
    for at in range(len(order) - 1):
        if rng.random() < rate:
            a, b = order[at], order[at + 1]
            if b not in dec.pred_set[a]:
                order[at], order[at + 1] = b, a


def _shift(dec: Decoder, order: list[int], rng: random.Random) -> None:
    """Move one activity, drawn at random, to a random other place between
    its last predecessor and its first successor in ``order`` (in place; the
    list stays precedence-feasible)."""
    n = len(order)
    at = rng.randrange(n)
    i = order[at]
    tl = dec.tl
    lo = max((order.index(r.pred, 0, at) for r in tl.preds[i]), default=-1) + 1
    hi = min((order.index(r.succ, at + 1) for r in tl.succs[i]), default=n)
    if hi - lo <= 1:
        return
    to = rng.randrange(lo, hi - 1)
    to += to >= at  # its new index: any in [lo, hi) but its own
    del order[at]
    order.insert(to, i)


def shift_search(
    dec: Decoder,
    pos: list[int],
    finish: int,
    rng: random.Random,
    *,
    steps: int,
    moves: int = 6,
    rounds: int = 1 << 30,
    done: Callable[[int], bool] | None = None,
    better: Callable[[list[int], int], None] | None = None,
) -> tuple[list[int], int]:
    """Local search on one schedule: each step moves one to ``moves``
    activities of the current list (:func:`_shift`), decodes and improves the
    list, and takes the result when it finishes no later than the current
    schedule, so that the search also walks across schedules of equal finish.
    Returns the best schedule found and its finish day after ``steps`` steps,
    or sooner when ``done(best finish)`` turns true (asked before each step:
    one step on Python passes can take tens of milliseconds; on compiled
    passes the steps run compiled, :data:`SHIFT_CHUNK` at a time, and
    ``done`` is asked before each chunk).
    ``better(positions, finish)`` hears of each sooner finish.

    Tried and left out: among schedules of equal finish, taking only those
    no worse by a second key, the sum of the activities' ends, or the
    number of activities that end on the last day before that sum (the
    levelling on PSPLIB J60 groups 9, 13, 21, 25, 29 and 45, seeds 0-3,
    10 s: 24 and 20 days over the best known values summed, against 14 with
    any schedule of equal finish taken)."""
    if dec.compiled:
        return _shift_search_compiled(
            dec,
            pos,
            finish,
            rng,
            steps=steps,
            moves=moves,
            rounds=rounds,
            done=done,
            better=better,
        )
    best, best_finish = pos, finish
    order = dec.order_of(pos)
    for _ in range(steps):
        if done is not None and done(best_finish):
            break
        child = list(order)
        for _ in range(rng.randint(1, moves)):
            _shift(dec, child, rng)
        got = dec.decode(child)
        if got is None:
            continue
        got, got_finish = dec.improve(got, rounds)
        if got_finish <= finish:
            pos, finish = got, got_finish
            order = dec.order_of(pos)
            if finish < best_finish:
                best, best_finish = pos, finish
                if better is not None:
                    better(best, best_finish)
    return best, best_finish


#: Steps of the compiled local search between two looks at ``done``: about
#: 30 ms on PSPLIB J60 (100-150 µs a step, this machine).
SHIFT_CHUNK = 256


def _shift_search_compiled(
    dec: Decoder,
    pos: list[int],
    finish: int,
    rng: random.Random,
    *,
    steps: int,
    moves: int,
    rounds: int,
    done: Callable[[int], bool] | None,
    better: Callable[[list[int], int], None] | None,
) -> tuple[list[int], int]:
    """:func:`shift_search` on compiled passes: the steps run in chunks of
    :data:`SHIFT_CHUNK` (:func:`.passes.shift_steps`, which holds no Python
    lock, so a search beside it runs at full speed), each chunk seeded from
    ``rng``; ``done`` is asked before each chunk."""
    best, best_finish = pos, finish
    order = np.asarray(dec.order_of(pos), dtype=np.int64)
    now = np.asarray(pos, dtype=np.int64)
    arrays = (dec.a_hi, *dec._all_args())
    left = steps
    while left > 0:
        if done is not None and done(best_finish):
            break
        taken, order, now, got = passes.shift_steps(
            order,
            now,
            finish,
            min(left, SHIFT_CHUNK),
            moves,
            rng.getrandbits(32),
            min(rounds, 1 << 62),
            *arrays,
        )
        left -= int(taken)
        finish = int(got)
        if finish < best_finish:
            best, best_finish = now.tolist(), finish
            if better is not None:
                better(best, best_finish)
    return best, best_finish


def genetic_schedule(
    tl: Timeline,
    lft: Sequence[float],
    *,
    limit: int,
    seeds: Sequence[Sequence[int]] = (),
    population: int = 40,
    generations: int = 25,
    mutation: float = 0.05,
    seed: int = 0,
    wall_limit: float | None = None,
    target: int | None = None,
    rounds: int = 1 << 30,
    stop: Callable[[], bool] | None = None,
    local_steps: int = 0,
    local_share: float = 0.0,
    local_moves: int = 6,
    turn: bool = False,
    on_better: Callable[[int], None] | None = None,
) -> Schedule | None:
    """The best schedule the genetic algorithm finds (see the module text),
    then improved by :func:`shift_search`.

    ``lft``: latest-finish priorities (least first) for the sampling;
    ``seeds``: start positions of feasible schedules already in hand, put
    into the first population (each also as its start order, decoded);
    ``limit``: the last end instant allowed. The genetic search stops after
    ``generations``, at ``(1 - local_share) × wall_limit`` seconds, or on
    reaching ``target`` (a finish day no schedule can beat) or when
    ``stop()`` turns true; then the local search takes its best schedule for
    ``local_steps`` steps of up to ``local_moves`` moves, within the same
    ``wall_limit``, ``target`` and ``stop()``. ``rounds`` caps the
    forward-backward rounds per schedule. ``None`` when no individual fits
    the limit.

    With ``turn``, the search runs on the problem with time turned round
    (:meth:`Decoder.turned`): its lists are decoded from the finish back, so
    it meets other schedules than the search that decodes from the start
    (building schedules in both directions: Li & Willis, "An iterative
    scheduling technique for resource-constrained project scheduling", EJOR
    56, 1992; Hartmann, "A self-adapting genetic algorithm for project
    scheduling under resource constraints", Naval Research Logistics 49,
    2002). Its best schedule is turned back and justified to the start.
    ``target`` is then not read, and ``None`` comes back where the problem
    cannot be turned.

    ``on_better(finish day)`` hears of each sooner finish the search finds
    (with ``turn``, of the schedule turned back and justified), from the
    thread the search runs on.

    A schedule the search has met before is not taken again (a set of
    hashes of the start positions, a few megabytes in 20 s): without that,
    copies of the best fill the population within a second and the search
    stands still.
    """
    started = time.perf_counter()
    rng = random.Random(seed)
    dec = Decoder(tl, limit)
    ahead = dec
    if turn:
        twin = dec.turned()
        if twin is None:
            return None
        # The latest finishes of the turned problem: the earliest starts.
        lft = [-float(x) for x in _earliest(dec)]
        seeds = [dec.turn(p) for p in seeds]
        target = None
        dec = twin
    pool: list[tuple[int, int, list[int], list[int]]] = []
    seen: set[int] = set()
    born = 0
    genetic_wall = None if wall_limit is None else wall_limit * (1.0 - local_share)

    def fresh(pos: list[int]) -> bool:
        key = hash(tuple(pos))
        if key in seen:
            return False
        seen.add(key)
        return True

    def keep(pos: list[int]) -> None:
        nonlocal born
        pos, finish = dec.improve(pos, rounds)
        if fresh(pos):
            born += 1
            pool.append((finish, born, dec.order_of(pos), pos))

    def add(order: list[int]) -> None:
        pos = dec.decode(order)
        if pos is not None:
            keep(pos)

    def past(wall: float | None, best: int | None) -> bool:
        if target is not None and best is not None and best <= target:
            return True
        if stop is not None and stop():
            return True
        return wall is not None and time.perf_counter() - started > wall

    def out_of_time() -> bool:
        return past(genetic_wall, min(pool)[0] if pool else None)

    told = [_INF, _INF]  # the best finish met: on this search, turned back
    kept: list[list[int]] = []  # with turn: that schedule, turned back

    def tell(pos: list[int], finish: int) -> None:
        if finish >= told[0] or (on_better is None and not turn):
            return
        told[0] = finish
        if turn:
            pos, finish = ahead.improve(dec.turn(pos), rounds)
        if finish < told[1]:
            told[1] = finish
            kept[:] = [pos]
            if on_better is not None:
                on_better(finish)

    for pos in seeds:
        keep(list(pos))
        add(dec.order_of(pos))
    for _ in range(4 * population):
        if len(pool) >= population or out_of_time():
            break
        add(_sample(dec, lft, rng))
    if not pool:
        return None
    pool.sort()
    for _ in range(generations):
        tell(pool[0][3], pool[0][0])
        if out_of_time():
            break
        parents = pool[:population]
        if dec.compiled:
            mixed = dec.breed(
                [p[2] for p in parents], mutation, rounds, rng.getrandbits(32)
            )
            for order, pos, finish in mixed:
                if fresh(pos):
                    born += 1
                    pool.append((finish, born, order, pos))
            pool.sort()
            del pool[population:]
            continue
        rng.shuffle(parents)
        for a in range(0, len(parents) - 1, 2):
            if out_of_time():
                break
            mother, father = parents[a][2], parents[a + 1][2]
            for one, two in ((mother, father), (father, mother)):
                child = _crossover(dec, one, two, rng)
                _mutate(dec, child, mutation, rng)
                add(child)
        pool.sort()
        del pool[population:]
    best = min(pool)
    pos, finish = best[3], best[0]
    tell(pos, finish)
    if local_steps > 0:
        pos, finish = shift_search(
            dec,
            pos,
            finish,
            rng,
            steps=local_steps,
            moves=local_moves,
            rounds=rounds,
            done=lambda got: past(wall_limit, got),
            better=tell,
        )
    if turn:
        # The best of the schedules met, each turned back and justified: the
        # one reported last (a sooner finish on the turned problem need not
        # justify to a sooner one).
        pos, finish = kept[0], told[1]
    return Schedule(tuple(pos), finish)


def _earliest(dec: Decoder) -> list[int]:
    """Each activity's earliest start position by the relations alone (the
    offsets of a compiled decoder), in an order the relations allow."""
    waiting = list(dec.n_pred)
    ready = [i for i in range(dec.n) if waiting[i] == 0]
    es = list(dec.lb)
    while ready:
        i = ready.pop()
        for j, off in dec.lin_out[i]:
            es[j] = max(es[j], es[i] + off)
            waiting[j] -= 1
            if waiting[j] == 0:
                ready.append(j)
    return es


__all__ = ["Decoder", "compiles", "genetic_schedule", "shift_search", "turns"]
