"""The network in compact, column form, its structural checks and its topology.

Activities are numbered ``0 .. n-1`` in document order and every per-activity
or per-relation fact is one NumPy column, so the critical path never builds a
Python object per activity. :func:`build_network` checks a set of columns as a
whole (ranges, self-relations, duplicate relations, cycles) and orders the
activities with Kahn's algorithm, one generation of the in-degree queue at a
time.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .calendars import WorkCalendar
from .problems import NetworkInvalid, Problem, pointer

# Relation types, as stored in ``rel_type``.
FS, SS, FF, SF = 0, 1, 2, 3
RELATION_TYPES = ("FS", "SS", "FF", "SF")

#: Longest accepted duration, in working days (about 40 years of 5-day weeks).
MAX_DURATION = 10_000
#: Largest accepted lag or lead, in days of its unit (about 4 years of working
#: days). Longer waits are modelled as a ``not_before`` date, not as a lag.
MAX_LAG = 1_000
#: "No date" in the integer date columns.
NO_DATE = np.iinfo(np.int64).min


@dataclass(frozen=True, slots=True)
class Crew:
    key: str
    name: str
    capacity: int
    calendar: int
    unavailable: tuple[tuple[dt.date, dt.date], ...] = ()


@dataclass(frozen=True, slots=True)
class Topology:
    """Kahn's order: ``order[gen_ptr[g]:gen_ptr[g+1]]`` is generation ``g``.

    Generation 0 holds the activities without predecessors; every activity of
    generation ``g > 0`` has at least one predecessor in generation ``g - 1``
    and all of them in earlier generations.
    """

    order: np.ndarray
    gen_ptr: np.ndarray
    rank: np.ndarray  # rank[activity] = its place in ``order``

    @property
    def generations(self) -> int:
        return len(self.gen_ptr) - 1


@dataclass(frozen=True, slots=True)
class Progress:
    """What happened on site, one column per field, in activity order.

    Dates are day offsets from the project start (``NO_DATE`` where absent);
    ``remaining`` (working days) and ``percent`` are ``-1`` where absent.
    ``mode`` is how work started out of sequence is scheduled:
    ``"retained_logic"`` (its remaining work still waits for its
    predecessors) or ``"progress_override"`` (started work ignores them).
    See :mod:`.progress`.
    """

    mode: str
    actual_start: np.ndarray
    actual_finish: np.ndarray
    remaining: np.ndarray
    percent: np.ndarray

    @property
    def any(self) -> bool:
        return bool(np.any(self.actual_start != NO_DATE))


@dataclass(frozen=True, slots=True)
class Network:
    """A checked network, ready for the critical path.

    Dates are stored as day offsets from ``start`` (``NO_DATE`` where absent).
    ``rel_calendar_days`` marks lags counted in elapsed days; all other lags are
    working days of the successor's calendar.
    """

    name: str
    start: dt.date
    calendar: int
    deadline: dt.date | None
    data_date: dt.date | None
    calendars: tuple[WorkCalendar, ...]
    crews: tuple[Crew, ...]
    keys: tuple[str, ...]
    names: tuple[str, ...]
    duration: np.ndarray
    act_calendar: np.ndarray
    not_before: np.ndarray
    act_deadline: np.ndarray
    rel_pred: np.ndarray
    rel_succ: np.ndarray
    rel_type: np.ndarray
    rel_lag: np.ndarray
    rel_calendar_days: np.ndarray
    dem_activity: np.ndarray
    dem_crew: np.ndarray
    dem_units: np.ndarray
    topology: Topology
    extras: tuple[dict[str, object], ...] = field(default=())
    warnings: tuple[Problem, ...] = field(default=())
    #: Progress recorded on site, as given (``None``: nothing recorded).
    progress: Progress | None = None
    #: Starts fixed by progress (day offsets, ``NO_DATE`` where free): such an
    #: activity starts exactly there, data date or not. Set only on the
    #: network that :mod:`.progress` derives for the passes.
    fixed_start: np.ndarray | None = None

    @property
    def size(self) -> int:
        return len(self.keys)


def _column(values: object, dtype: Any) -> np.ndarray:
    arr = np.array(values, dtype=dtype)
    arr.flags.writeable = False
    return arr


def build_network(
    *,
    name: str,
    start: dt.date,
    calendars: Sequence[WorkCalendar],
    keys: Sequence[str],
    duration: object,
    rel_pred: object,
    rel_succ: object,
    rel_type: object,
    rel_lag: object,
    rel_calendar_days: object | None = None,
    calendar: int = 0,
    act_calendar: object | None = None,
    names: Sequence[str] | None = None,
    not_before: object | None = None,
    act_deadline: object | None = None,
    deadline: dt.date | None = None,
    data_date: dt.date | None = None,
    crews: Sequence[Crew] = (),
    dem_activity: object = (),
    dem_crew: object = (),
    dem_units: object = (),
    extras: Sequence[dict[str, object]] = (),
    warnings: Sequence[Problem] = (),
    problems: Sequence[Problem] = (),
    rel_pointers: Sequence[str] | None = None,
    progress: Progress | None = None,
    fixed_start: object | None = None,
) -> Network:
    """Check columns as a whole and return a :class:`Network`.

    ``problems`` already found by a caller (the document reader) are reported
    together with the structural ones, so one answer lists everything. Raises
    :class:`NetworkInvalid` when anything is wrong.
    """
    found = list(problems)
    n = len(keys)
    dur = np.asarray(duration, dtype=np.int64)
    pred = np.asarray(rel_pred, dtype=np.int64)
    succ = np.asarray(rel_succ, dtype=np.int64)
    rtype = np.asarray(rel_type, dtype=np.int64)
    lag = np.asarray(rel_lag, dtype=np.int64)
    m = len(pred)
    caldays = (
        np.zeros(m, dtype=bool)
        if rel_calendar_days is None
        else np.asarray(rel_calendar_days, dtype=bool)
    )
    acal = (
        np.full(n, calendar, dtype=np.int64)
        if act_calendar is None
        else np.asarray(act_calendar, dtype=np.int64)
    )
    nb = (
        np.full(n, NO_DATE, dtype=np.int64)
        if not_before is None
        else np.asarray(not_before, dtype=np.int64)
    )
    dl = (
        np.full(n, NO_DATE, dtype=np.int64)
        if act_deadline is None
        else np.asarray(act_deadline, dtype=np.int64)
    )
    if not (len(dur) == len(acal) == len(nb) == len(dl) == n):
        raise ValueError("activity columns differ in length")
    if not (len(succ) == len(rtype) == len(lag) == len(caldays) == m):
        raise ValueError("relation columns differ in length")

    def rel_ptr(i: int) -> str:
        return rel_pointers[i] if rel_pointers is not None else pointer("relations", i)

    def label(i: int) -> str:
        return f"{keys[pred[i]]} → {keys[succ[i]]}"

    if n == 0:
        found.append(
            Problem("/activities", "no_activities", "the network has no activities")
        )
    for i in np.flatnonzero((dur < 0) | (dur > MAX_DURATION)).tolist():
        found.append(
            Problem(
                pointer("activities", i, "duration"),
                "negative_duration" if dur[i] < 0 else "duration_too_long",
                f"activity {keys[i]}: duration must be 0 to {MAX_DURATION} working "
                f"days, got {dur[i]}",
            )
        )
    bad_cal = (acal < 0) | (acal >= len(calendars))
    for i in np.flatnonzero(bad_cal).tolist():
        found.append(
            Problem(
                pointer("activities", i, "calendar"),
                "unknown_calendar",
                f"activity {keys[i]}: calendar number {acal[i]} does not exist",
            )
        )
    for c, cal in enumerate(calendars):
        if cal.days_per_week == 0 and not cal.extra_workdays:
            found.append(
                Problem(
                    pointer("calendars", c, "workdays"),
                    "no_working_days",
                    f"calendar {cal.key}: it has no working weekday",
                )
            )

    in_range = (pred >= 0) & (pred < n) & (succ >= 0) & (succ < n)
    for i in np.flatnonzero(~in_range).tolist():
        found.append(
            Problem(
                rel_ptr(i),
                "unknown_activity",
                "relation names an activity that does not exist",
            )
        )
    ok = in_range.copy()
    for i in np.flatnonzero(in_range & (pred == succ)).tolist():
        found.append(
            Problem(
                rel_ptr(i),
                "self_relation",
                f"relation {label(i)}: an activity cannot follow itself",
            )
        )
    ok &= pred != succ
    for i in np.flatnonzero((rtype < 0) | (rtype > 3)).tolist():
        found.append(
            Problem(
                rel_ptr(i) + "/type",
                "unknown_relation_type",
                "relation type must be FS, SS, FF or SF",
            )
        )
    for i in np.flatnonzero(np.abs(lag) > MAX_LAG).tolist():
        found.append(
            Problem(
                rel_ptr(i) + "/lag",
                "lag_out_of_range",
                f"relation {label(i) if in_range[i] else i}: lag {lag[i]} is outside "
                f"-{MAX_LAG}..{MAX_LAG} days; use a not_before date for long waits",
            )
        )
    # One sort of the (pred, succ) pairs finds duplicates and, as it groups the
    # relations by predecessor, gives Kahn's out-lists for free.
    width = max(n, 1)
    pair = (
        np.where(ok, pred * width + succ, -1 - np.arange(m))
        if not ok.all()
        else (pred * width + succ)
    )
    sorted_pair = np.sort(pair)
    if np.any((sorted_pair[1:] == sorted_pair[:-1]) & (sorted_pair[1:] >= 0)):
        by_pair = np.argsort(pair, kind="stable")
        again_at = np.flatnonzero(
            (pair[by_pair][1:] == pair[by_pair][:-1]) & (pair[by_pair][1:] >= 0)
        )
        for j in again_at:
            first, again = int(by_pair[j]), int(by_pair[j + 1])
            found.append(
                Problem(
                    rel_ptr(again),
                    "duplicate_relation",
                    f"relation {label(again)} is given twice "
                    f"(also at {rel_ptr(first)}); keep one relation per pair",
                )
            )
            ok[again] = False
        sorted_pair = np.unique(pair[ok])
    kept = sorted_pair[sorted_pair >= 0] if not ok.all() else sorted_pair

    topology = None
    if n:
        topology, cycles = kahn_generations(n, kept // width, kept % width)
        for cycle in cycles:
            path = " → ".join(keys[i] for i in [*cycle, cycle[0]])
            found.append(
                Problem(
                    pointer("activities", cycle[0]),
                    "cycle",
                    f"the relations form a loop: {path}",
                )
            )
    if found:
        raise NetworkInvalid(found)
    assert topology is not None
    return Network(
        name=name,
        start=start,
        calendar=calendar,
        deadline=deadline,
        data_date=data_date,
        calendars=tuple(calendars),
        crews=tuple(crews),
        keys=tuple(keys),
        names=tuple(names) if names is not None else tuple(keys),
        duration=_column(dur, np.int32),
        act_calendar=_column(acal, np.int32),
        not_before=_column(nb, np.int64),
        act_deadline=_column(dl, np.int64),
        rel_pred=_column(pred, np.int32),
        rel_succ=_column(succ, np.int32),
        rel_type=_column(rtype, np.int8),
        rel_lag=_column(lag, np.int32),
        rel_calendar_days=_column(caldays, bool),
        dem_activity=_column(dem_activity, np.int64),
        dem_crew=_column(dem_crew, np.int64),
        dem_units=_column(dem_units, np.int64),
        topology=topology,
        extras=tuple(extras),
        warnings=tuple(warnings),
        progress=progress,
        fixed_start=None if fixed_start is None else _column(fixed_start, np.int64),
    )


def kahn_generations(
    n: int, pred: np.ndarray, succ: np.ndarray
) -> tuple[Topology, list[list[int]]]:
    """Kahn's algorithm, taking the whole in-degree queue one generation at a time.

    ``pred`` must be sorted (relations grouped by predecessor).

    Returns the topology of the activities that could be ordered and, when some
    could not, the loops among the rest (each as activities in relation order).
    Work is linear in activities plus relations; the NumPy calls per generation
    are a constant handful.
    """
    indeg = np.bincount(succ, minlength=n)
    out_succ = succ
    out_ptr = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(pred, minlength=n), out=out_ptr[1:])

    frontier = np.flatnonzero(indeg == 0)
    slot = np.zeros(n, dtype=np.int64)
    gens = []
    while len(frontier):
        gens.append(frontier)
        starts = out_ptr[frontier]
        counts = out_ptr[frontier + 1] - starts
        total = int(counts.sum())
        if total == 0:
            break
        # Concatenate the out-edge ranges of the whole frontier in one go.
        shift = np.repeat(starts - (np.cumsum(counts) - counts), counts)
        targets = out_succ[shift + np.arange(total)]
        np.subtract.at(indeg, targets, 1)
        ready = targets[indeg[targets] == 0]
        # An activity freed by several relations at once appears several
        # times: keep the place its last copy wrote.
        here = np.arange(len(ready))
        slot[ready] = here
        frontier = ready[slot[ready] == here]

    order = np.concatenate(gens) if gens else np.zeros(0, dtype=np.int64)
    gen_ptr = np.zeros(len(gens) + 1, dtype=np.int64)
    np.cumsum([len(g) for g in gens], out=gen_ptr[1:])
    rank = np.full(n, -1, dtype=np.int32)
    rank[order] = np.arange(len(order))
    cycles: list[list[int]] = []
    if len(order) < n:
        cycles = _find_loops(n, pred, succ, rank >= 0)
    return Topology(order, gen_ptr, rank), cycles


def _find_loops(
    n: int, pred: np.ndarray, succ: np.ndarray, ordered: np.ndarray
) -> list[list[int]]:
    """Loops among the activities Kahn could not order.

    Each such activity keeps an unordered predecessor, so walking from one to an
    unordered predecessor must come back on itself. Distinct loops are reported
    once, each starting at its smallest activity number.
    """
    keep = ~ordered[pred] & ~ordered[succ]
    some_pred: dict[int, int] = {}
    for p, s in zip(pred[keep].tolist(), succ[keep].tolist(), strict=True):
        some_pred.setdefault(s, p)
    seen: set[int] = set()
    loops: list[list[int]] = []
    for begin in np.flatnonzero(~ordered).tolist():
        if begin in seen:
            continue
        walk: list[int] = []
        place: dict[int, int] = {}
        node = begin
        while node not in seen and node not in place:
            place[node] = len(walk)
            walk.append(node)
            node = some_pred[node]
        seen.update(walk)
        if node in place:
            loop = walk[place[node] :][::-1]  # walked backwards along relations
            first = loop.index(min(loop))
            loops.append(loop[first:] + loop[:first])
    return loops
