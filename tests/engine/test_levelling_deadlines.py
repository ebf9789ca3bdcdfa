"""Activity deadlines far from the levelled dates, on either side.

A deadline weeks after the levelled finish never binds; one long before the
project start makes the activity late by every day in between. Both once
indexed past the timeline's tables; the expected lateness is counted by hand
(calendar days past the deadline, as the levelling reports it).
"""

from __future__ import annotations

import datetime as dt

from scheduling.engine import parse_network
from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import level

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
