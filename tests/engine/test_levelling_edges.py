"""Levelling at its edges: deadlines far from the levelled dates, and stopping.

A deadline weeks after the levelled finish never binds; one long before the
project start makes the activity late by every day in between. Both once
indexed past the timeline's tables; the expected lateness is counted by hand
(calendar days past the deadline, as the levelling reports it). A stop asked
for while the solver works ends the run within a moment.
"""

from __future__ import annotations

import datetime as dt
import time

import pytest

from scheduling.engine import parse_network
from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import LevellingStopped, level
from scheduling.engine.psplib import datasets_dir, load_instance

from .builders import doc


def _network(deadline: str):
    document = doc(
        [
            {"key": "A", "duration": 3, "demands": {"crew": 1}},
            {"key": "B", "duration": 2, "demands": {"crew": 1}},
            {"key": "END", "duration": 0, "deadline": deadline},
        ],
        [("A", "END"), ("B", "END")],
    )
    document["crews"] = [{"key": "crew", "capacity": 1}]
    return parse_network(document)


def test_a_deadline_long_after_the_finish_does_not_bind():
    net = _network("2027-12-31")
    got = level(net, time_limit=5, seed=1)
    # A and B one after the other: five working days, Mon 1 – Fri 5 March;
    # END is the point at the start of Monday 8 March.
    assert got.finish == dt.date(2027, 3, 8)
    assert got.activity("END").lateness == 0
    assert check_schedule(net, got.starts, finishes=got.finishes) == []


def test_a_deadline_before_the_start_is_late_by_every_day_since():
    net = _network("2027-01-15")
    got = level(net, time_limit=5, seed=1)
    # END on 8 March, deadline 15 January: 52 calendar days late.
    assert (
        got.activity("END").lateness
        == (dt.date(2027, 3, 8) - dt.date(2027, 1, 15)).days
    )
    assert got.activity("END").total_float < 0


def test_a_stop_request_ends_the_run_at_once():
    if not (datasets_dir() / "j120").is_dir():
        pytest.skip(f"PSPLIB J120 not found at {datasets_dir()}")
    # A J120 instance is not proven within a second: the stop, asked for
    # after half a second of a 30 s budget, must end the run well before.
    net = load_instance(120, 1, 1).network
    began = time.perf_counter()
    with pytest.raises(LevellingStopped):
        level(net, time_limit=30, should_stop=lambda: time.perf_counter() - began > 0.5)
    assert time.perf_counter() - began < 5
