"""Smoothing: keep the finish, spread each crew's daily demand."""

from __future__ import annotations

import datetime as dt

import pytest

from scheduling.engine import critical_path
from scheduling.engine import levelling as lv
from scheduling.engine.levelling import level

from .test_levelling import assert_checked, net_of, random_network

D = dt.date


def parallel(first=2, second=2, frame=6):
    # Two short jobs for crew c beside a long frame job; all free of logic.
    return net_of(
        [
            {"key": "A", "duration": first, "demands": {"c": 1}},
            {"key": "B", "duration": second, "demands": {"c": 1}},
            {"key": "F", "duration": frame},
        ],
        crews=[{"key": "c", "capacity": 1}],
    )


def test_smoothing_keeps_the_critical_path_finish_and_fits_the_crew():
    net = parallel()
    result = level(net, goal="smooth", time_limit=5)
    assert result.status == "optimal"
    assert result.finish == critical_path(net).finish == D(2027, 3, 8)
    assert result.over_capacity == (("c", 0),)
    a, b = sorted((result.activity("A"), result.activity("B")), key=lambda x: x.start)
    # No overlap, and back to back: the crew's demand changes only twice.
    assert b.start == a.finish + dt.timedelta(days=1)
    assert [s.objective for s in result.stats if s.phase == "smoothing"] == [2]
    assert_checked(net, result)


def test_smoothing_reports_the_unavoidable_peak_over_capacity():
    # Three days to do two three-day jobs of one crew: one unit over.
    net = parallel(first=3, second=3, frame=3)
    result = level(net, goal="smooth", time_limit=5)
    assert result.finish == D(2027, 3, 3)
    assert result.over_capacity == (("c", 1),)
    assert result.objective == 1 and result.bound is None
    assert_checked(net, result, over_capacity={"c": 1})


def test_smoothing_to_a_later_finish_removes_the_peak():
    net = parallel(first=3, second=3, frame=3)
    result = level(net, goal="smooth", finish=D(2027, 3, 8), time_limit=5)
    assert result.over_capacity == (("c", 0),)
    assert result.finish <= D(2027, 3, 8)
    assert_checked(net, result, finish=D(2027, 3, 8))


@pytest.mark.parametrize("seed", range(10))
def test_smoothing_never_peaks_higher_than_the_early_dates(seed):
    net = random_network(seed, capacity=2)
    cpm = critical_path(net)
    result = level(net, goal="smooth", time_limit=5)
    assert result.finish <= cpm.finish
    over = {k: v for k, v in result.over_capacity if v}
    assert_checked(net, result, over_capacity=over)
    # The early dates are one candidate: the peak over capacity (counted
    # over whole spans, as the model counts it) is never worse than theirs.
    plan = lv._prepare(net, "smooth", None, None)
    assert sum(over.values()) <= sum(lv._over_capacity(plan.tl, plan.es))
