"""PSPLIB J30 (Kolisch & Sprecher, "PSPLIB – a project scheduling problem
library", EJOR 96, 1996/97): the shortest finish reaches the published optimum.

One instance of each of the 48 parameter groups (``j30<group>_<n>.sm``), taken
among those a plain model solves well under a second, so the default run stays
quick; the reference is the proven optimum in ``j30opt.sm`` (Demeulemeester &
Herroelen's branch and bound, as listed there). The whole set runs in
``tests/bench/test_bench_levelling.py``. The data set is read in place (see
``shared/datasets/SOURCES.md``, or set ``SITEPACE_DATASETS``) and never copied.
"""

from __future__ import annotations

import pytest

from scheduling.engine import critical_path
from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import level
from scheduling.engine.psplib import (
    datasets_dir,
    instance_path,
    load_instance,
    load_solutions,
    makespan,
    parse_sm,
    parse_solutions,
)

SAMPLE = [
    (1, 2), (2, 3), (3, 4), (4, 5), (5, 6), (6, 7), (7, 8), (8, 9),
    (9, 5), (10, 1), (11, 2), (12, 3), (13, 9), (14, 5), (15, 6), (16, 7),
    (17, 8), (18, 9), (19, 10), (20, 1), (21, 2), (22, 3), (23, 4), (24, 5),
    (25, 9), (26, 7), (27, 8), (28, 9), (29, 10), (30, 1), (31, 2), (32, 3),
    (33, 4), (34, 5), (35, 6), (36, 7), (37, 2), (38, 9), (39, 10), (40, 1),
    (41, 9), (42, 3), (43, 4), (44, 5), (45, 3), (46, 7), (47, 8), (48, 9),
]  # fmt: skip

needs_data = pytest.mark.skipif(
    not (datasets_dir() / "solutions" / "j30opt.sm").is_file(),
    reason=f"PSPLIB data set not found at {datasets_dir()} (set SITEPACE_DATASETS)",
)


@pytest.fixture(scope="module")
def optimum():
    return load_solutions("j30opt.sm")


SMALL = """\
************************************************************************
jobs (incl. supersource/sink ):  4
horizon                       :  7
RESOURCES
************************************************************************
PROJECT INFORMATION:
pronr.  #jobs rel.date duedate tardcost  MPM-Time
    1      2      0       4        1        4
************************************************************************
PRECEDENCE RELATIONS:
jobnr.    #modes  #successors   successors
   1        1          2           2   3
   2        1          1           4
   3        1          1           4
   4        1          0
************************************************************************
REQUESTS/DURATIONS:
jobnr. mode duration  R 1  R 2  R 3  R 4
------------------------------------------------------------------------
  1      1     0       0    0    0    0
  2      1     3       2    0    0    0
  3      1     4       1    1    0    0
  4      1     0       0    0    0    0
************************************************************************
RESOURCEAVAILABILITIES:
  R 1  R 2  R 3  R 4
    2    1    1    1
************************************************************************
"""


def test_reader_keeps_dummy_jobs_as_milestones_and_makes_four_crews():
    inst = parse_sm(SMALL, "small")
    net = inst.network
    assert net.keys == ("J1", "J2", "J3", "J4")
    assert net.duration.tolist() == [0, 3, 4, 0]
    assert [(c.key, c.capacity) for c in net.crews] == [
        ("R1", 2),
        ("R2", 1),
        ("R3", 1),
        ("R4", 1),
    ]
    assert inst.mpm_time == 4
    assert makespan(net, critical_path(net).finish) == 4
    # J2 (2 of R1) and J3 (1 of R1) cannot overlap: 3 + 4 days.
    result = level(net, time_limit=5)
    assert makespan(net, result.finish) == 7
    assert result.status == "optimal"
    assert check_schedule(net, result.starts, finishes=result.finishes) == []


def test_solution_lists_are_read_by_group_and_instance():
    text = "Par Inst Makespan\n-----\n1       1         43       0.30\n48 10 54 0.01\n"
    assert parse_solutions(text) == {(1, 1): 43, (48, 10): 54}


def test_reader_refuses_a_truncated_file():
    with pytest.raises(ValueError, match="RESOURCEAVAILABILITIES"):
        parse_sm(SMALL.split("RESOURCEAVAILABILITIES")[0], "cut")


@needs_data
def test_sample_spans_every_parameter_group():
    assert sorted({g for g, _ in SAMPLE}) == list(range(1, 49))
    assert all(instance_path(30, g, i).is_file() for g, i in SAMPLE)


@needs_data
@pytest.mark.parametrize(("group", "number"), SAMPLE)
def test_j30_reaches_the_published_optimum(group, number, optimum):
    inst = load_instance(30, group, number)
    net = inst.network
    assert makespan(net, critical_path(net).finish) == inst.mpm_time
    result = level(net, time_limit=10, workers=2)
    # Reference: j30opt.sm (PSPLIB), proven optimal makespans.
    assert makespan(net, result.finish) == optimum[(group, number)]
    assert result.status == "optimal"
    assert check_schedule(net, result.starts, finishes=result.finishes) == []
