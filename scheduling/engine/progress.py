"""Progress from site: finished and started work, scheduled from the data date.

The passes (:mod:`.cpm`, :mod:`.levelling`) do not read progress themselves.
:func:`rewrite` turns a network with progress into an equivalent *work*
network that they schedule as usual, and the results are read back onto the
activities as given:

* a **finished** activity is fixed at its actual dates: its start is fixed,
  its duration is the working days from actual start to actual finish, its
  crews are released (the work is in the past) and the relations into it no
  longer bind it;
* a **started** activity is split in two. The *work done* (from the actual
  start up to the data date) is fixed, holds no crew and carries the
  activity's start: SS and SF relations out of the activity read it. The
  *remaining work* keeps the activity's key, its crews and its deadline, has
  the remaining duration and starts no earlier than the data date; FS and FF
  relations out of the activity read its end;
* nothing unstarted starts before the data date (as without progress).

The remaining duration is ``remaining`` when given; else, from
``percent_complete``, the duration times the share not yet done, rounded up;
else the duration less the working days since the actual start, at least one
day (common practice for duration-based progress).

Work started before its predecessors allow is *out of sequence*. With
``retained_logic`` (the default) the remaining work still waits for its
predecessors; with ``progress_override`` started work ignores the relations
into it and runs on from the data date. Either way each out-of-sequence pair
is listed as a warning. A pair is out of sequence when the successor's actual
dates already break the relation's order (lags aside — common practice):
FS, the successor started before the predecessor finished; SS, before the
predecessor started; FF, the successor finished before the predecessor; SF,
the successor finished before the predecessor started.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, replace

import numpy as np

from .calendars import CalendarTables
from .network import FF, FS, NO_DATE, RELATION_TYPES, SF, SS, Network, build_network
from .problems import Problem, pointer

RETAINED_LOGIC = "retained_logic"
PROGRESS_OVERRIDE = "progress_override"
MODES = (RETAINED_LOGIC, PROGRESS_OVERRIDE)
NOT_STARTED, STARTED, FINISHED = "not_started", "started", "finished"


@dataclass(frozen=True, slots=True)
class OutOfSequence:
    """Relation ``pred → succ`` whose order the successor's actual dates break."""

    pred: str
    succ: str
    type: str
    relation: int  # index in the network's relations


@dataclass(frozen=True)
class Rewrite:
    """A network with progress and the work network the passes schedule.

    The work network's first ``source.size`` activities are the source's, in
    the same order and with the same keys (for a started activity: its
    remaining work); the work done of started activities follows, one each.
    ``rel_source[j]`` is the source relation of work relation ``j``.
    """

    source: Network
    work: Network
    status: tuple[str, ...]
    remaining: tuple[int | None, ...]
    done_of: dict[int, int]
    owner: tuple[int, ...]  # work activity -> its source activity
    rel_source: np.ndarray
    out_of_sequence: tuple[OutOfSequence, ...]
    key_owner: dict[str, str]  # work key of work done -> source key

    def source_key(self, work_key: str | None) -> str | None:
        """The source key of a work activity's key (``None`` stays ``None``)."""
        if work_key is None:
            return None
        return self.key_owner.get(work_key, work_key)

    def fixed(self, i: int) -> bool:
        """Whether source activity ``i`` has its start fixed (started or finished)."""
        return self.status[i] != NOT_STARTED


def status_of(network: Network) -> tuple[str, ...]:
    """Each activity's progress state: not started, started or finished."""
    n = network.size
    prog = network.progress
    if prog is None:
        return (NOT_STARTED,) * n
    a_s, a_f = prog.actual_start.tolist(), prog.actual_finish.tolist()
    return tuple(
        FINISHED if f != NO_DATE else STARTED if a != NO_DATE else NOT_STARTED
        for a, f in zip(a_s, a_f, strict=True)
    )


def out_of_sequence(network: Network) -> tuple[OutOfSequence, ...]:
    """Every relation whose order the actual dates of its successor break."""
    prog = network.progress
    if prog is None:
        return ()
    a_s, a_f = prog.actual_start.tolist(), prog.actual_finish.tolist()
    found = []
    for e, (p, s, t) in enumerate(
        zip(
            network.rel_pred.tolist(),
            network.rel_succ.tolist(),
            network.rel_type.tolist(),
            strict=True,
        )
    ):
        if a_s[s] == NO_DATE:
            continue
        if t == FS:
            broken = a_f[p] == NO_DATE or a_s[s] <= a_f[p]
        elif t == SS:
            broken = a_s[p] == NO_DATE or a_s[s] < a_s[p]
        elif t == FF:
            broken = a_f[s] != NO_DATE and (a_f[p] == NO_DATE or a_f[s] < a_f[p])
        else:  # SF
            broken = a_f[s] != NO_DATE and (a_s[p] == NO_DATE or a_f[s] < a_s[p])
        if broken:
            found.append(
                OutOfSequence(network.keys[p], network.keys[s], RELATION_TYPES[t], e)
            )
    return tuple(found)


def _remaining(duration: int, done: int, remaining: int, percent: int) -> int:
    if remaining >= 0:
        return remaining
    if percent >= 0:
        return (duration * (100 - percent) + 99) // 100
    if duration == 0:
        return 0
    return max(duration - done, 1)


def rewrite(network: Network) -> Rewrite:
    """The work network of ``network`` (see the module docstring).

    ``network.progress`` must hold progress and ``network.data_date`` be set
    (the document reader refuses progress without a data date).
    """
    net = network
    prog = net.progress
    if prog is None or net.data_date is None:
        raise ValueError("rewrite needs progress and a data date")
    n = net.size
    dd = (net.data_date - net.start).days
    tables = CalendarTables.build(net.calendars, net.start, dd + 2)
    status = status_of(net)
    a_s, a_f = prog.actual_start.tolist(), prog.actual_finish.tolist()
    rem_in, pct_in = prog.remaining.tolist(), prog.percent.tolist()
    dur = net.duration.astype(np.int64).tolist()
    acal = net.act_calendar.tolist()
    not_before = net.not_before.astype(np.int64).tolist()
    deadline = net.act_deadline.astype(np.int64).tolist()
    fixed = [NO_DATE] * n
    keys, names = list(net.keys), list(net.names)
    taken = set(keys)
    extras: list[dict[str, object]] = list(net.extras) if net.extras else [{}] * n
    remaining: list[int | None] = [None] * n
    done_of: dict[int, int] = {}

    def position(c: int, day: int) -> int:
        return tables.position(c, day)

    for i in range(n):
        if status[i] == NOT_STARTED:
            continue
        c = acal[i]
        not_before[i] = NO_DATE
        if status[i] == FINISHED:
            worked = position(c, a_f[i] + 1) - position(c, a_s[i])
            dur[i] = max(worked, 1) if dur[i] > 0 else 0
            fixed[i] = a_s[i]
            deadline[i] = NO_DATE
            continue
        done = max(position(c, dd) - position(c, a_s[i]), 0)
        left = _remaining(dur[i], done, rem_in[i], pct_in[i])
        remaining[i] = left
        dur[i] = left
        key = f"{keys[i]} (work done)"
        while key in taken:
            key += "'"
        taken.add(key)
        done_of[i] = len(keys)
        keys.append(key)
        names.append(f"{names[i]} (work done)")
        dur.append(done)
        acal.append(c)
        not_before.append(NO_DATE)
        deadline.append(NO_DATE)
        fixed.append(a_s[i])
        extras.append({})

    preds, succs, types, lags, caldays, rel_source = [], [], [], [], [], []
    override = prog.mode == PROGRESS_OVERRIDE
    for e, (p, s, t, lag, cd) in enumerate(
        zip(
            net.rel_pred.tolist(),
            net.rel_succ.tolist(),
            net.rel_type.tolist(),
            net.rel_lag.tolist(),
            net.rel_calendar_days.tolist(),
            strict=True,
        )
    ):
        if status[s] == FINISHED or (status[s] == STARTED and override):
            continue
        if status[p] == STARTED and t in (SS, SF):
            p = done_of[p]
        preds.append(p)
        succs.append(s)
        types.append(t)
        lags.append(lag)
        caldays.append(cd)
        rel_source.append(e)

    keep = [status[a] != FINISHED for a in net.dem_activity.tolist()]
    oos = out_of_sequence(net)
    warnings = list(net.warnings)
    for o in oos:
        later = (
            "its remaining work runs from the data date regardless (progress override)"
            if override
            else "its remaining work still waits for the predecessor (retained logic)"
        )
        warnings.append(
            Problem(
                pointer("relations", o.relation),
                "out_of_sequence",
                f"activity {o.succ} started out of sequence: relation {o.pred} → "
                f"{o.succ} ({o.type}) is not yet met by the actual dates; {later}",
            )
        )
    work = build_network(
        name=net.name,
        start=net.start,
        calendars=net.calendars,
        calendar=net.calendar,
        keys=keys,
        names=names,
        duration=dur,
        act_calendar=acal,
        not_before=not_before,
        act_deadline=deadline,
        deadline=net.deadline,
        data_date=net.data_date,
        crews=net.crews,
        dem_activity=net.dem_activity[keep],
        dem_crew=net.dem_crew[keep],
        dem_units=net.dem_units[keep],
        rel_pred=preds,
        rel_succ=succs,
        rel_type=types,
        rel_lag=lags,
        rel_calendar_days=caldays,
        extras=extras,
        warnings=warnings,
        fixed_start=fixed,
    )
    return Rewrite(
        source=net,
        work=work,
        status=status,
        remaining=tuple(remaining),
        done_of=done_of,
        owner=tuple(range(n)) + tuple(sorted(done_of, key=done_of.__getitem__)),
        rel_source=np.asarray(rel_source, dtype=np.int64),
        out_of_sequence=oos,
        key_owner={keys[w]: net.keys[s] for s, w in done_of.items()},
    )


def with_progress_warnings(network: Network, rw: Rewrite) -> Network:
    """``network`` carrying the work network's warnings (out of sequence)."""
    return replace(network, warnings=rw.work.warnings)


def actual_date(network: Network, offset: int) -> dt.date | None:
    """A day offset of a progress column as a date."""
    return None if offset == NO_DATE else network.start + dt.timedelta(days=offset)


__all__ = [
    "FINISHED",
    "MODES",
    "NOT_STARTED",
    "PROGRESS_OVERRIDE",
    "RETAINED_LOGIC",
    "STARTED",
    "OutOfSequence",
    "Rewrite",
    "actual_date",
    "out_of_sequence",
    "rewrite",
    "status_of",
]
