"""The critical path method on work calendars.

Forward pass, backward pass, floats and the driving path over a checked
:class:`~.network.Network`. Activities are visited in Kahn's order one
generation at a time: within a generation no activity depends on another, so
the relations into (forward) or out of (backward) a whole generation are
evaluated with a few NumPy calls. Total work is linear in activities plus
relations.

Each activity's start is kept as a *position* of its own calendar (see
:mod:`.calendars`); an activity at position ``s`` with duration ``d`` works the
positions ``s .. s+d-1``. A relation ``pred → succ`` reads a point of the
predecessor — its start, or for FS/FF its end — as an instant, shifts it by a
``calendar_days`` lag, converts it to a position of the successor's calendar
(the first successor working day at or after it), adds a working-day lag, and
bounds the successor's start (FS/SS) or end (FF/SF). With one calendar this is
exactly ``S_succ ≥ E_pred + lag`` and its three siblings. A milestone
(duration 0) is the point at the start of its working day.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, replace

import numpy as np

from .calendars import CalendarTables, days_needed
from .network import FF, FS, NO_DATE, RELATION_TYPES, SF, Network
from .problems import NetworkInvalid, Problem
from .progress import FINISHED, STARTED, Rewrite, rewrite


@dataclass(frozen=True, slots=True)
class Driver:
    """What sets an activity's start: a relation, a crew, or a date bound.

    ``kind``: ``"relation"`` (a logic relation from ``pred``),
    ``"project_start"``, ``"data_date"``, ``"not_before"``, ``"actual_start"``
    (work done or under way starts where it did); after levelling also
    ``"crew"`` (``pred`` hands units of ``crew`` on), ``"crew_unavailable"``
    (``crew`` is back on ``date``) and ``"levelling"`` (nothing forces the
    date: the goal or the stability solve chose it).
    """

    kind: str
    pred: str | None = None
    type: str | None = None
    lag: int = 0
    lag_unit: str = "workdays"
    date: dt.date | None = None
    crew: str | None = None

    def describe(self) -> str:
        if self.kind == "relation":
            lag = (
                f" {self.lag:+d} {self.lag_unit.replace('_', ' ')}" if self.lag else ""
            )
            return f"{self.type}{lag} from {self.pred}"
        if self.kind == "crew":
            return f"crew {self.crew} from {self.pred}"
        if self.kind == "crew_unavailable":
            return f"crew {self.crew} back on {self.date}"
        if self.kind == "not_before":
            return f"not before {self.date}"
        if self.kind == "actual_start":
            return f"started {self.date}"
        if self.kind == "levelling":
            return f"held to {self.date} by the levelling"
        return self.kind.replace("_", " ")

    def as_dict(self) -> dict[str, object]:
        out: dict[str, object] = {"kind": self.kind}
        if self.kind == "relation":
            out.update(
                pred=self.pred, type=self.type, lag=self.lag, lag_unit=self.lag_unit
            )
        elif self.kind == "crew":
            out.update(pred=self.pred, crew=self.crew)
        else:
            if self.crew is not None:
                out["crew"] = self.crew
            if self.date is not None:
                out["date"] = self.date.isoformat()
        return out


def date_bound(net: Network, i: int) -> Driver:
    """The date bound on activity ``i``'s start that binds first.

    Work done or under way: its actual start; else a ``not_before`` after the
    data date and the project start, the data date, or the project start.
    """
    if net.fixed_start is not None and net.fixed_start[i] != NO_DATE:
        day = net.start + dt.timedelta(days=int(net.fixed_start[i]))
        return Driver("actual_start", date=day)
    nb = int(net.not_before[i])
    if nb != NO_DATE:
        day = net.start + dt.timedelta(days=nb)
        if (net.data_date is None or day > net.data_date) and day > net.start:
            return Driver("not_before", date=day)
    if net.data_date is not None and net.data_date > net.start:
        return Driver("data_date", date=net.data_date)
    return Driver("project_start", date=net.start)


@dataclass(frozen=True, slots=True)
class PathStep:
    key: str
    name: str
    driver: Driver


@dataclass(frozen=True, slots=True)
class CpmResult:
    """Early and late dates, floats and the driving path of a network.

    Per-activity arrays follow the network's activity order. ``*_day`` arrays
    are day indices of ``tables`` (use :meth:`dates`); finish days are
    inclusive (the last working day). Floats are working days of each
    activity's own calendar. ``driving`` marks, per relation, whether it sets
    its successor's early start.
    """

    network: Network
    tables: CalendarTables
    early_start_pos: np.ndarray
    late_start_pos: np.ndarray
    early_start_day: np.ndarray
    early_finish_day: np.ndarray
    late_start_day: np.ndarray
    late_finish_day: np.ndarray
    total_float: np.ndarray
    free_float: np.ndarray
    critical: np.ndarray
    driving: np.ndarray
    finish: dt.date
    critical_path: tuple[PathStep, ...]
    no_predecessor: tuple[str, ...]
    no_successor: tuple[str, ...]
    #: With progress: the work network the passes ran on and each activity's
    #: state (see :mod:`.progress`); ``early_start_pos`` of a started
    #: activity is then the start of its remaining work.
    progress: Rewrite | None = None

    def dates(self, days: np.ndarray) -> list[str]:
        """ISO dates of an array of table day indices."""
        origin = np.datetime64(self.tables.origin, "D")
        return (origin + days.astype("timedelta64[D]")).astype(str).tolist()

    @property
    def length(self) -> int:
        """Working days of the project calendar from start to finish, inclusive."""
        t = self.tables
        c = self.network.calendar
        first = t.position(c, t.day_index(self.network.start))
        return t.position(c, t.day_index(self.finish) + 1) - first


class _Grow(Exception):
    """The calendar tables were too short for this network; build longer ones."""

    def __init__(self, left: bool, right: bool):
        self.left, self.right = left, right


def critical_path(network: Network) -> CpmResult:
    """Compute early/late dates, total and free float and the driving path.

    Unit of every float: working days of the activity's calendar. The project
    finish is the latest early finish, or the project deadline when set (then
    float may be negative). Every activity starts no earlier than the project
    start (and the data date, when set) and ends no later than the project
    finish; ``not_before`` bounds the start, an activity ``deadline`` the late
    finish. Progress (actual dates, remaining work) is applied as
    :mod:`.progress` describes: finished work keeps its actual dates (no
    float, never critical), started work its actual start, and its remaining
    work runs from the data date.
    """
    if network.progress is not None and network.progress.any:
        rw = rewrite(network)
        return _read_back(rw, _critical_path(rw.work))
    return _critical_path(network)


def _critical_path(network: Network) -> CpmResult:
    plan = _Plan(network)
    left, right = plan.initial_extent()
    # Python dates end with the year 9999; the tables never reach past it.
    most_left = (network.start - dt.date(1, 1, 2)).days
    most_right = (dt.date(9999, 12, 30) - network.start).days
    left, right = min(left, most_left), min(right, most_right)
    while True:
        try:
            return plan.run(left, right)
        except (_Grow, IndexError) as grow:
            grow_left = not isinstance(grow, _Grow) or grow.left
            grow_right = not isinstance(grow, _Grow) or grow.right
            if (grow_left and left == most_left) or (
                grow_right and right == most_right
            ):
                raise NetworkInvalid(
                    [
                        Problem(
                            "/activities",
                            "schedule_too_long",
                            "the schedule would run beyond the year 9999; check "
                            "the durations, lags and dates",
                        )
                    ]
                ) from None
            left = min(left * 2, most_left) if grow_left else left
            right = min(right * 2, most_right) if grow_right else right


class _Plan:
    """Static arrays of one network, in Kahn's order, shared by the passes.

    Activities are addressed by their place in Kahn's order ("rank") inside the
    passes, so each generation is a contiguous slice. Relations are kept twice:
    sorted by successor rank for the forward pass and by predecessor rank for
    the backward pass; the latter has one extra relation "to the project
    finish" for each activity without successor, so that no activity has an
    empty slice.
    """

    def __init__(self, net: Network):
        self.net = net
        topo = net.topology
        self.order = topo.order
        self.gen_ptr = topo.gen_ptr
        rank = topo.rank
        n = net.size
        self.d = net.duration[self.order]
        self.cal = net.act_calendar[self.order]
        r_pred, r_succ = rank[net.rel_pred], rank[net.rel_succ]

        in_count = np.bincount(r_succ, minlength=n)
        self.fwd = np.argsort(r_succ)
        self.f_pred = r_pred[self.fwd]
        self.in_count = in_count
        self.in_ptr = _pointers(in_count)

        out_count = np.bincount(r_pred, minlength=n)
        self.sinks = np.flatnonzero(out_count == 0)
        real = np.argsort(r_pred)
        at = _pointers(out_count)[self.sinks]
        m = len(r_pred)
        self.bwd = np.insert(real, at, m + np.arange(len(self.sinks)))
        self.b_succ = np.insert(r_succ[real], at, n)
        out_count[self.sinks] = 1
        self.out_ptr = _pointers(out_count)

        lag = net.rel_lag
        self.cl = lag * net.rel_calendar_days
        self.wl = lag - self.cl
        self.pad = int(
            self.d.max(initial=0)
            + max(self.wl.max(initial=0), -self.wl.min(initial=0))
            + max(self.cl.max(initial=0), -self.cl.min(initial=0))
            + 2
        )

    def initial_extent(self) -> tuple[int, int]:
        """Days before and after the project start that the tables must hold.

        The right side uses an upper bound of the project length: a path takes
        at most one activity from each generation, so the longest duration and
        the longest lag of each generation, summed, bound every path.
        """
        net = self.net
        sparse = min(net.calendars, key=lambda c: c.days_per_week or 7)
        starts = self.gen_ptr[:-1]
        d_bound = int(np.maximum.reduceat(self.d, starts).sum()) if len(starts) else 0
        lag_bound = 0
        if len(starts) > 1 and len(self.fwd):
            # Relations into generation g are one slice of the forward order.
            lags = np.abs(net.rel_lag[self.fwd])
            lag_bound = int(np.maximum.reduceat(lags, self.in_ptr[starts[1:]]).sum())
        dates = np.concatenate([net.not_before, net.act_deadline])
        dates = dates[dates != NO_DATE]
        extra = [0]
        if net.deadline is not None:
            extra.append((net.deadline - net.start).days)
        if net.data_date is not None:
            extra.append((net.data_date - net.start).days)
        latest = max(int(dates.max(initial=0)), *extra)
        earliest = min(int(dates.min(initial=0)), *extra)
        pad_days = days_needed(sparse, self.pad + 1)
        work = d_bound + lag_bound + self.pad
        right = days_needed(sparse, work) + max(latest, 0) + pad_days
        left = pad_days + max(-earliest, 0)
        return left, right

    def run(self, left: int, right: int) -> CpmResult:
        net = self.net
        tables = CalendarTables.build(
            net.calendars, net.start - dt.timedelta(days=left), left + right
        )
        self._edge_terms(tables)
        W, D = tables.W, tables.D
        w_off, d_off = tables.w_off[self.cal], tables.d_off[self.cal]
        n_work = tables.n_work[self.cal]
        n = net.size
        d = self.d
        ended = d >= 1  # has an end distinct from its start

        # Lower bounds: project start, data date, not_before.
        lb_day = np.full(n, left, dtype=np.int64)
        if net.data_date is not None:
            lb_day = np.maximum(lb_day, left + (net.data_date - net.start).days)
        nb = net.not_before[self.order]
        lb_day = np.where(nb != NO_DATE, np.maximum(lb_day, left + nb), lb_day)
        fixed = None
        if net.fixed_start is not None:
            # Work under way or done starts where it did, data date or not
            # (nothing leads into it: see progress.rewrite).
            fs = net.fixed_start[self.order]
            fixed = fs != NO_DATE
            lb_day = np.where(fixed, left + np.where(fixed, fs, 0), lb_day)
        lb = W[w_off + lb_day]

        es = self._forward(W, D, lb)
        if np.any(es < self.pad) or np.any(es >= n_work - self.pad):
            raise _Grow(left=False, right=True)

        # Project end instant T: the latest end, or the end of the deadline day.
        last = np.maximum(d - 1, 0)
        finish_days = D[d_off + es + last]
        end_day = finish_days + ended
        T = int(end_day.max())
        finish_day = int(finish_days.max())
        if net.deadline is not None:
            T = left + (net.deadline - net.start).days + 1
            finish_day = T - 1
        a = np.where(ended, 0, 1)
        g = np.where(ended, d, 1)
        ub_project = W[w_off + T + a] - g
        ub = ub_project
        dl = net.act_deadline[self.order]
        if np.any(dl != NO_DATE):
            # A deadline is the latest finish day: its end for work, its start
            # for a milestone.
            limit = left + np.where(dl != NO_DATE, dl, 0) + ended
            ub = np.where(dl != NO_DATE, np.minimum(ub, W[w_off + limit + a] - g), ub)

        D_fin = np.append(D, T)  # the finish cell read by the extra relations
        ls = self._backward(W, D_fin, ub)
        if fixed is not None:
            ls = np.where(fixed, es, ls)
        if np.any(ls < self.pad) or np.any(ls >= n_work - self.pad):
            raise _Grow(left=bool(np.any(ls < self.pad)), right=True)

        # Free float: the least slack over the outgoing relations at early
        # dates (the backward formula read at the successors' early starts),
        # never past the project finish.
        bD, bW, bG = self.b_terms
        bound = np.append(es, 0)[self.b_succ]
        bound += bD
        bound = D_fin[bound]
        bound += bW
        bound = W[bound]
        bound -= bG
        slack = np.minimum.reduceat(bound, self.out_ptr[:-1])
        free_float = np.minimum(slack, ub_project) - es

        fD, fW, fK = self.f_terms
        cand = es[self.f_pred]
        cand += fD
        cand = D[cand]
        cand += fW
        cand = W[cand]
        cand += fK
        driving_f = cand == np.repeat(es, self.in_count)

        total_float = ls - es
        final = self._final(finish_days, end_day, total_float)
        path = self._driving_path(final, es, total_float, driving_f)
        return self._result(
            tables, es, ls, free_float, driving_f, finish_day, path, final
        )

    def _edge_terms(self, tables: CalendarTables) -> None:
        """Per-relation offsets for both passes on these tables.

        forward:  succ_start >= W[D[pred_start + fD] + fW] + fK
        backward: pred_start <= W[D[succ_start + bD] + bW] - bG

        Written with in-place arithmetic: on large networks fresh arrays, not
        arithmetic, are what costs.
        """
        net = self.net
        p, s, rt = net.rel_pred, net.rel_succ, net.rel_type
        m, k = len(p), len(self.sinks)
        d_off = tables.d_off[net.act_calendar]
        w_off = tables.w_off[net.act_calendar]
        use_end = ((rt == FS) | (rt == FF)) & (net.duration[p] >= 1)
        end_target = (rt == FF) | (rt == SF)
        # skip: the predecessor's last working position past its start, for
        # relations read from its end; target: the successor's duration, for
        # relations bounding its end.
        skip = net.duration[p]
        skip -= 1
        skip *= use_end
        target = net.duration[s]
        target *= end_target

        fD = d_off[p]
        fD += skip
        fW = w_off[s]
        fW += self.cl
        fW += use_end
        fK = np.subtract(self.wl, target)
        f = self.fwd
        self.f_terms = (fD[f], fW[f], fK[f])

        # The extra relations to the project finish read a single cell of D
        # (index len(D), appended with T) at position 0.
        sink_d = self.d[self.sinks]
        sink_ended = sink_d >= 1
        bD = np.empty(m + k, dtype=np.int32)
        bW = np.empty(m + k, dtype=np.int32)
        bG = np.empty(m + k, dtype=np.int32)
        np.add(d_off[s], target, out=bD[:m])
        bD[:m] -= self.wl
        bD[m:] = len(tables.D)
        np.subtract(w_off[p], self.cl, out=bW[:m])
        bW[:m] += ~use_end
        bW[m:] = tables.w_off[self.cal[self.sinks]] + ~sink_ended
        np.add(skip, 1, out=bG[:m])
        bG[m:] = 1 + sink_ended * (sink_d - 1)
        b = self.bwd
        self.b_terms = (bD[b], bW[b], bG[b])

    def _forward(self, W: np.ndarray, D: np.ndarray, lb: np.ndarray) -> np.ndarray:
        fD, fW, fK = self.f_terms
        f_pred, in_ptr, gp = self.f_pred, self.in_ptr, self.gen_ptr
        es = lb.copy()
        for g in range(1, len(gp) - 1):
            a, b = gp[g], gp[g + 1]
            lo, hi = in_ptr[a], in_ptr[b]
            cand = W[D[es[f_pred[lo:hi]] + fD[lo:hi]] + fW[lo:hi]] + fK[lo:hi]
            best = np.maximum.reduceat(cand, in_ptr[a:b] - lo)
            np.maximum(best, lb[a:b], out=es[a:b])
        return es

    def _backward(self, W: np.ndarray, D: np.ndarray, ub: np.ndarray) -> np.ndarray:
        bD, bW, bG = self.b_terms
        b_succ, out_ptr, gp = self.b_succ, self.out_ptr, self.gen_ptr
        ls = np.append(ub, 0)  # the extra relations read position 0 of cell T
        for g in range(len(gp) - 2, -1, -1):
            a, b = gp[g], gp[g + 1]
            lo, hi = out_ptr[a], out_ptr[b]
            cand = W[D[ls[b_succ[lo:hi]] + bD[lo:hi]] + bW[lo:hi]] - bG[lo:hi]
            best = np.minimum.reduceat(cand, out_ptr[a:b] - lo)
            np.minimum(best, ub[a:b], out=ls[a:b])
        return ls[:-1]

    def _final(
        self, finish_days: np.ndarray, end_day: np.ndarray, total_float: np.ndarray
    ) -> int:
        """Rank of the project's last activity.

        The latest finish date, then the latest end (work ending on a
        milestone's day comes before the milestone), then an activity without
        successor, the least float, and the latest in Kahn's order.
        """
        ranks = np.flatnonzero(finish_days == finish_days.max())
        ranks = ranks[end_day[ranks] == end_day[ranks].max()]
        sinks = np.intersect1d(ranks, self.sinks)
        ranks = sinks if len(sinks) else ranks
        ranks = ranks[total_float[ranks] == total_float[ranks].min()]
        return int(ranks.max())

    def _driving_path(
        self,
        final: int,
        es: np.ndarray,
        total_float: np.ndarray,
        driving_f: np.ndarray,
    ) -> tuple[PathStep, ...]:
        """Walk back from ``final`` along driving relations to a date bound.

        Where several relations drive an activity, the one from the predecessor
        with the least total float is taken (then the first in the document).
        """
        net = self.net
        order, in_ptr = self.order, self.in_ptr
        steps: list[PathStep] = []
        node = final
        seen: set[int] = set()
        while node not in seen:
            seen.add(node)
            lo, hi = int(in_ptr[node]), int(in_ptr[node + 1])
            options = [
                (int(total_float[p]), int(order[p]), lo + j)
                for j, (p, drives) in enumerate(
                    zip(
                        self.f_pred[lo:hi].tolist(),
                        driving_f[lo:hi].tolist(),
                        strict=True,
                    )
                )
                if drives
            ]
            doc = int(order[node])
            if not options:
                steps.append(
                    PathStep(net.keys[doc], net.names[doc], date_bound(net, doc))
                )
                break
            _, pred_doc, edge_f = min(options)
            e = int(self.fwd[edge_f])
            driver = Driver(
                "relation",
                pred=net.keys[pred_doc],
                type=RELATION_TYPES[int(net.rel_type[e])],
                lag=int(net.rel_lag[e]),
                lag_unit="calendar_days" if net.rel_calendar_days[e] else "workdays",
            )
            steps.append(PathStep(net.keys[doc], net.names[doc], driver))
            node = int(self.f_pred[edge_f])
        return tuple(reversed(steps))

    def _result(
        self,
        tables: CalendarTables,
        es_t: np.ndarray,
        ls_t: np.ndarray,
        ff_t: np.ndarray,
        driving_f: np.ndarray,
        finish_day: int,
        path: tuple[PathStep, ...],
        final: int,
    ) -> CpmResult:
        net = self.net
        D = tables.D
        rank = net.topology.rank
        es, ls = es_t[rank], ls_t[rank]
        d_off = tables.d_off[net.act_calendar]
        last = np.maximum(net.duration - 1, 0)
        total_float = ls - es
        driving = np.empty(len(net.rel_pred), dtype=bool)
        driving[self.fwd] = driving_f

        has_pred = np.diff(self.in_ptr) > 0
        first_candidates = np.flatnonzero(~has_pred)  # ranks
        first = int(first_candidates[np.argmin(es_t[first_candidates])])
        keys, order = net.keys, self.order
        no_pred = np.sort(order[first_candidates[first_candidates != first]])
        sinks = self.sinks[self.sinks != final]
        return CpmResult(
            network=net,
            tables=tables,
            early_start_pos=es,
            late_start_pos=ls,
            early_start_day=D[d_off + es],
            early_finish_day=D[d_off + es + last],
            late_start_day=D[d_off + ls],
            late_finish_day=D[d_off + ls + last],
            total_float=total_float,
            free_float=ff_t[rank],
            critical=total_float <= 0,
            driving=driving,
            finish=tables.date_of(finish_day),
            critical_path=path,
            no_predecessor=tuple(keys[i] for i in no_pred.tolist()),
            no_successor=tuple(keys[i] for i in np.sort(order[sinks]).tolist()),
        )


def _read_back(rw: Rewrite, work: CpmResult) -> CpmResult:
    """The work network's result as the result of the network as given.

    Started activities show their actual start as early and late start and
    the float of their remaining work; finished ones their actual dates, no
    float, and are not critical. The driving path and the open ends name the
    activities as given.
    """
    net = rw.source
    n = net.size
    tables = work.tables
    prog = net.progress
    assert prog is not None
    es_day = work.early_start_day[:n].copy()
    ef_day = work.early_finish_day[:n].copy()
    ls_day = work.late_start_day[:n].copy()
    lf_day = work.late_finish_day[:n].copy()
    tf = work.total_float[:n].copy()
    ff = work.free_float[:n].copy()
    off = (net.start - tables.origin).days
    status = np.array(rw.status)
    started = status == STARTED
    finished = status == FINISHED
    a_s = prog.actual_start.astype(np.int64) + off
    a_f = prog.actual_finish.astype(np.int64) + off
    es_day[started | finished] = a_s[started | finished]
    ls_day[started | finished] = a_s[started | finished]
    ef_day[finished] = lf_day[finished] = a_f[finished]
    tf[finished] = ff[finished] = 0
    critical = (tf <= 0) & ~finished
    driving = np.zeros(len(net.rel_pred), dtype=bool)
    driving[rw.rel_source] = work.driving
    steps: list[PathStep] = []
    for step in work.critical_path:
        key = rw.source_key(step.key)
        assert key is not None
        d = step.driver
        if d.pred is not None:
            d = replace(d, pred=rw.source_key(d.pred))
        if steps and steps[-1].key == key:
            continue  # the work done, then its own remaining work
        steps.append(PathStep(key, net.names[net.keys.index(key)], d))
    has_pred = set(net.rel_succ.tolist())
    has_succ = set(net.rel_pred.tolist())
    index = {k: i for i, k in enumerate(net.keys)}
    return CpmResult(
        network=net,
        tables=tables,
        early_start_pos=work.early_start_pos[:n],
        late_start_pos=work.late_start_pos[:n],
        early_start_day=es_day,
        early_finish_day=ef_day,
        late_start_day=ls_day,
        late_finish_day=lf_day,
        total_float=tf,
        free_float=ff,
        critical=critical,
        driving=driving,
        finish=work.finish,
        critical_path=tuple(steps),
        no_predecessor=tuple(
            k for k in work.no_predecessor if k in index and index[k] not in has_pred
        ),
        no_successor=tuple(
            k for k in work.no_successor if k in index and index[k] not in has_succ
        ),
        progress=rw,
    )


def _pointers(counts: np.ndarray) -> np.ndarray:
    """Segment starts (and the end) of consecutive groups of the given sizes."""
    ptr = np.zeros(len(counts) + 1, dtype=np.int64)
    np.cumsum(counts, out=ptr[1:])
    return ptr
