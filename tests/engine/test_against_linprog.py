"""Early and late starts, checked against SciPy's linear programming solver.

The four relation types are difference constraints on the start positions
(S the start, E = S + d, lag L in working days):

    FS: S_j >= S_i + d_i + L      SS: S_j >= S_i + L
    FF: S_j >= S_i + d_i - d_j + L    SF: S_j >= S_i - d_j + L

With every start at or after the project start the feasible starts form a
lattice; its least element is the earliest schedule and, with every end at or
before the project end, its greatest element is the latest schedule. SciPy
(``scipy.optimize.linprog`` with the HiGHS solver, a general-purpose
reference) finds both independently, by minimising and by maximising the sum
of the starts. The constraint matrix is a network matrix, so the optimal
vertex is integral.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from scipy.optimize import linprog

from scheduling.engine import (
    FF,
    FS,
    SF,
    SS,
    WorkCalendar,
    build_network,
    critical_path,
    parse_network,
)

from .builders import ALL_DAYS, WEEKDAYS, doc

SEVEN_DAYS = WorkCalendar.from_names("all", ALL_DAYS)
START = dt.date(2027, 3, 1)  # a Monday
SEEDS = range(25)


def random_network(seed: int, calendar: WorkCalendar, start: dt.date = START):
    """A random DAG with all four relation types and leads and lags."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 80))
    duration = rng.integers(0, 12, size=n)
    topo = rng.permutation(n)
    pairs = set()
    for k in range(1, n):
        for _ in range(int(rng.integers(0, 4))):
            j = int(rng.integers(max(0, k - 12), k))
            pairs.add((int(topo[j]), int(topo[k])))
    pairs = sorted(pairs)
    m = len(pairs)
    pred = np.array([p for p, _ in pairs], dtype=np.int64)
    succ = np.array([s for _, s in pairs], dtype=np.int64)
    rtype = rng.integers(0, 4, size=m)
    lag = rng.integers(-6, 9, size=m)
    net = build_network(
        name=f"linprog seed {seed}",
        start=start,
        calendars=[calendar],
        keys=[f"A{i}" for i in range(n)],
        duration=duration,
        rel_pred=pred,
        rel_succ=succ,
        rel_type=rtype,
        rel_lag=lag,
        rel_calendar_days=np.zeros(m, dtype=bool),
        act_calendar=np.zeros(n, dtype=np.int64),
    )
    return net


def relation_rows(net):
    """The relations as rows of ``A_ub @ S <= b_ub`` (S_i - S_j <= -c)."""
    n, m = net.size, len(net.rel_pred)
    d = net.duration.astype(np.int64)
    a_ub = np.zeros((m, n))
    b_ub = np.zeros(m)
    for r in range(m):
        i, j = int(net.rel_pred[r]), int(net.rel_succ[r])
        t, lag = int(net.rel_type[r]), int(net.rel_lag[r])
        c = {
            FS: d[i] + lag,
            SS: lag,
            FF: d[i] - d[j] + lag,
            SF: -d[j] + lag,
        }[t]
        a_ub[r, i] += 1.0
        a_ub[r, j] -= 1.0
        b_ub[r] = -c
    return a_ub, b_ub


def least_starts(net) -> list[int]:
    a_ub, b_ub = relation_rows(net)
    # Reference: scipy.optimize.linprog (HiGHS), minimise the sum of starts.
    lp = linprog(
        np.ones(net.size),
        A_ub=a_ub if len(b_ub) else None,
        b_ub=b_ub if len(b_ub) else None,
        bounds=[(0, None)] * net.size,
        method="highs",
    )
    assert lp.status == 0, lp.message
    return np.rint(lp.x).astype(int).tolist()


def greatest_starts(net, project_end: int) -> list[int]:
    a_ub, b_ub = relation_rows(net)
    n = net.size
    # Every end at or before the project end: S_i <= project_end - d_i.
    a_ub = np.vstack([a_ub, np.eye(n)])
    b_ub = np.concatenate([b_ub, project_end - net.duration.astype(float)])
    # Reference: scipy.optimize.linprog (HiGHS), maximise the sum of starts.
    lp = linprog(
        -np.ones(n), A_ub=a_ub, b_ub=b_ub, bounds=[(None, None)] * n, method="highs"
    )
    assert lp.status == 0, lp.message
    return np.rint(lp.x).astype(int).tolist()


def start_position(result) -> int:
    t = result.tables
    return t.position(0, t.day_index(result.network.start))


@pytest.mark.parametrize("seed", SEEDS)
def test_early_starts_equal_the_least_linprog_solution(seed):
    net = random_network(seed, SEVEN_DAYS)
    result = critical_path(net)
    early = (result.early_start_pos - start_position(result)).tolist()
    assert early == least_starts(net)


@pytest.mark.parametrize("seed", SEEDS)
def test_late_starts_equal_the_greatest_linprog_solution(seed):
    net = random_network(seed, SEVEN_DAYS)
    result = critical_path(net)
    first = start_position(result)
    # The project end: the latest early end, from the LP's own early starts.
    early = np.array(least_starts(net))
    project_end = int((early + net.duration).max())
    assert int((result.early_start_pos - first + net.duration).max()) == project_end
    late = (result.late_start_pos - first).tolist()
    assert late == greatest_starts(net, project_end)


@pytest.mark.parametrize("seed", SEEDS)
def test_total_float_equals_the_gap_between_linprog_solutions(seed):
    net = random_network(seed, SEVEN_DAYS)
    result = critical_path(net)
    early = np.array(least_starts(net))
    late = np.array(greatest_starts(net, int((early + net.duration).max())))
    assert result.total_float.tolist() == (late - early).tolist()


HOLIDAYS = [
    dt.date(2027, 3, 26),
    dt.date(2027, 3, 29),
    dt.date(2027, 4, 14),
    dt.date(2027, 5, 3),
    dt.date(2027, 5, 4),
    dt.date(2027, 6, 1),
]
FIVE_DAYS = WorkCalendar.from_names("weekdays", WEEKDAYS, holidays=HOLIDAYS)


@pytest.mark.parametrize("seed", SEEDS)
def test_early_starts_on_five_day_calendar_equal_the_least_linprog_solution(seed):
    # On one calendar the forward pass is linear in working-day positions, so
    # holidays and weekends change the dates but not the positions.
    rng = np.random.default_rng(1000 + seed)
    start = dt.date(2027, 3, 1) + dt.timedelta(days=int(rng.integers(0, 40)))
    net = random_network(seed, FIVE_DAYS, start=start)
    result = critical_path(net)
    early = (result.early_start_pos - start_position(result)).tolist()
    assert early == least_starts(net)
    # Each early start is a working day of the calendar.
    for day in result.dates(result.early_start_day):
        assert FIVE_DAYS.is_workday(dt.date.fromisoformat(day))


# The public precedence-diagram training network of REFERENCES.md: durations
# in days, "(SS)" a start-to-start link, all others FS with zero lag.
TRAINING = (
    "A 2 -;B 10 A(SS);C 13 A;D 12 A;E 12 B;F 7 B;G 10 D;H 16 D;I 6 F;"
    "J 12 C,G(SS);K 5 I(SS);L 8 E,I,K;M 5 H;N 3 G,J,L,M"
)


def test_training_network_early_and_late_starts_equal_linprog_solutions():
    acts, rels = [], []
    for part in TRAINING.split(";"):
        key, duration, preds = part.split()
        acts.append((key, int(duration)))
        for p in [] if preds == "-" else preds.split(","):
            rels.append((p[0], key, "SS" if p.endswith("(SS)") else "FS"))
    seven = [{"key": "weekdays", "workdays": ALL_DAYS}]
    net = parse_network(doc(acts, rels, calendars=seven))
    result = critical_path(net)
    first = start_position(result)
    early = least_starts(net)
    project_end = int((np.array(early) + net.duration).max())
    assert (result.early_start_pos - first).tolist() == early
    assert (result.late_start_pos - first).tolist() == greatest_starts(net, project_end)
    # The length checked by hand in REFERENCES.md (A-D-H-M-N).
    assert project_end == result.length == 38
