"""Properties of the critical path on generated networks (hypothesis).

The networks mix all four relation types, leads and lags of -3..+5 days in
working days or calendar days, a 5-day calendar with holidays and a 6-day
calendar, durations 0..10 and optional ``not_before`` dates; no deadlines.

Some checks need positions of a calendar independently of the engine's
tables: those come from NumPy's ``busday_count`` / ``busday_offset`` (a
general-purpose reference) with the calendar's weekmask and holidays.
"""

from __future__ import annotations

import copy
import datetime as dt
import itertools

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scheduling.engine import critical_path, parse_network

from .builders import SIX_DAYS, WEEKDAYS, doc

CALENDARS = [
    {
        "key": "weekdays",
        "workdays": WEEKDAYS,
        "holidays": ["2027-03-05", "2027-03-15", "2027-03-16", "2027-04-02"],
    },
    {"key": "sixday", "workdays": SIX_DAYS, "holidays": ["2027-03-20"]},
]
TYPES = ("FS", "SS", "FF", "SF")
STARTS = ("2027-03-01", "2027-03-03", "2027-03-06", "2027-03-15")

PROPERTY = settings(
    max_examples=150,
    deadline=None,
    derandomize=True,
    suppress_health_check=[HealthCheck.too_slow],
)


@st.composite
def documents(draw, fs_only: bool = False):
    """A network document; its activities are listed in a shuffled order."""
    n = draw(st.integers(1, 12))
    keys = [f"K{i}" for i in range(n)]  # K0, K1, ... is a topological order
    activities = []
    for key in keys:
        act = {
            "key": key,
            "duration": draw(st.integers(0, 10)),
            "calendar": draw(st.sampled_from(["weekdays", "sixday"])),
        }
        if draw(st.integers(0, 4)) == 0:
            day = dt.date(2027, 3, 1) + dt.timedelta(days=draw(st.integers(0, 30)))
            act["not_before"] = day.isoformat()
        activities.append(act)
    pairs = draw(
        st.lists(
            st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)).filter(
                lambda p: p[0] < p[1]
            ),
            max_size=3 * n,
            unique=True,
        )
        if n > 1
        else st.just([])
    )
    relations = [
        {
            "pred": keys[i],
            "succ": keys[j],
            "type": "FS" if fs_only else draw(st.sampled_from(TYPES)),
            "lag": draw(st.integers(-3, 5)),
            "lag_unit": draw(st.sampled_from(["workdays", "calendar_days"])),
        }
        for i, j in pairs
    ]
    activities = draw(st.permutations(activities))
    return doc(
        activities,
        relations,
        start=draw(st.sampled_from(STARTS)),
        calendars=copy.deepcopy(CALENDARS),
        calendar=draw(st.sampled_from(["weekdays", "sixday"])),
    )


def run(document):
    net = parse_network(document)
    return net, critical_path(net)


# Independent positions, from NumPy's business-day functions.

WEEK = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")


class Positions:
    """Working-day positions of the document's calendars counted by NumPy."""

    def __init__(self, origin: dt.date):
        self.origin = np.datetime64(origin, "D")
        self.args = {
            c["key"]: {
                "weekmask": [int(d in c["workdays"]) for d in WEEK],
                "holidays": [np.datetime64(h) for h in c.get("holidays", [])],
            }
            for c in CALENDARS
        }

    def of_instant(self, cal: str, day: dt.date) -> int:
        """Working days of ``cal`` before the start of ``day``."""
        # Reference: numpy.busday_count, working days in [origin, day).
        return int(
            np.busday_count(self.origin, np.datetime64(day, "D"), **self.args[cal])
        )

    def day(self, cal: str, position: int) -> dt.date:
        """The working day of ``cal`` at ``position``."""
        # Reference: numpy.busday_offset from the origin, rolled forward.
        found = np.busday_offset(
            self.origin, position, roll="forward", **self.args[cal]
        )
        return found.astype(dt.date)


def relation_gap(pos: Positions, rel, acts, starts) -> int:
    """Slack of a relation (negative: broken) for the given start dates.

    The predecessor's point (its start, or for FS/FF its end, the day after its
    finish) is shifted by a calendar-day lag, turned into a position of the
    successor's calendar, moved by a working-day lag and compared with the
    successor's start (FS, SS) or end (FF, SF) position.
    """
    p, s = acts[rel["pred"]], acts[rel["succ"]]
    p_start, s_start = starts[rel["pred"]], starts[rel["succ"]]
    use_end = rel["type"] in ("FS", "FF") and p["duration"] >= 1
    if use_end:
        last = pos.day(
            p["calendar"], pos.of_instant(p["calendar"], p_start) + p["duration"] - 1
        )
        point = last + dt.timedelta(days=1)
    else:
        point = p_start
    calendar_days = rel["lag_unit"] == "calendar_days"
    point += dt.timedelta(days=rel["lag"] if calendar_days else 0)
    bound = pos.of_instant(s["calendar"], point) + (0 if calendar_days else rel["lag"])
    side = pos.of_instant(s["calendar"], s_start)
    if rel["type"] in ("FF", "SF"):
        side += s["duration"]
    return side - bound


def by_key(net, result, which: str) -> dict[str, dt.date]:
    days = getattr(result, which)
    return {
        k: result.tables.date_of(int(d))
        for k, d in zip(net.keys, days.tolist(), strict=True)
    }


# The properties.


@PROPERTY
@given(documents())
def test_without_deadlines_no_float_is_negative_and_free_float_is_at_most_total(
    document,
):
    _, result = run(document)
    assert (result.total_float >= 0).all()
    assert (result.free_float >= 0).all()
    assert (result.free_float <= result.total_float).all()
    assert (result.early_start_pos <= result.late_start_pos).all()
    assert (result.early_start_day <= result.late_start_day).all()
    assert (result.early_finish_day <= result.late_finish_day).all()


@PROPERTY
@given(documents())
def test_early_and_late_dates_keep_every_relation_and_early_starts_are_least(
    document,
):
    net, result = run(document)
    pos = Positions(result.tables.origin)
    acts = {a["key"]: a for a in document["activities"]}
    early = by_key(net, result, "early_start_day")
    late = by_key(net, result, "late_start_day")
    start = dt.date.fromisoformat(document["project"]["start"])
    tight = {k: False for k in acts}
    for rel in document["relations"]:
        gap = relation_gap(pos, rel, acts, early)
        assert gap >= 0, rel
        tight[rel["succ"]] |= gap == 0
        assert relation_gap(pos, rel, acts, late) >= 0, rel
    for key, act in acts.items():
        cal = act["calendar"]
        lower = max(start, dt.date.fromisoformat(act.get("not_before") or "1900-01-01"))
        at_bound = pos.of_instant(cal, early[key]) == pos.of_instant(cal, lower)
        assert pos.of_instant(cal, early[key]) >= pos.of_instant(cal, lower)
        # Least: nothing earlier is allowed, so a bound or a relation is tight.
        assert at_bound or tight[key], key
        # Every early start is a working day of the activity's calendar.
        assert pos.day(cal, pos.of_instant(cal, early[key])) == early[key]


@PROPERTY
@given(documents())
def test_driving_path_is_continuous_from_a_date_bound_to_the_project_finish(
    document,
):
    net, result = run(document)
    path = result.critical_path
    assert path
    assert path[0].driver.kind in ("project_start", "not_before")
    relations = {(r["pred"], r["succ"]): r for r in document["relations"]}
    acts = {a["key"]: a for a in document["activities"]}
    early = by_key(net, result, "early_start_day")
    pos = Positions(result.tables.origin)
    for before, step in itertools.pairwise(path):
        driver = step.driver
        assert driver.kind == "relation"
        assert driver.pred == before.key
        rel = relations[(before.key, step.key)]
        assert (driver.type, driver.lag, driver.lag_unit) == (
            rel["type"],
            rel["lag"],
            rel["lag_unit"],
        )
        # The driving relation is tight at early dates.
        assert relation_gap(pos, rel, acts, early) == 0
    finish = by_key(net, result, "early_finish_day")
    assert finish[path[-1].key] == result.finish
    assert max(finish.values()) == result.finish


@PROPERTY
@given(documents(fs_only=True))
def test_shortening_a_critical_activity_never_lengthens_an_fs_project(document):
    net, result = run(document)
    for i, key in enumerate(net.keys):
        if not result.critical[i] or net.duration[i] == 0:
            continue
        shorter = copy.deepcopy(document)
        for act in shorter["activities"]:
            if act["key"] == key:
                act["duration"] -= 1
        _, again = run(shorter)
        assert again.length <= result.length, key
        assert again.finish <= result.finish, key


@PROPERTY
@given(documents(), st.randoms(use_true_random=False))
def test_relabelling_the_activities_does_not_change_any_dates(document, rnd):
    net, result = run(document)
    shuffled = copy.deepcopy(document)
    rnd.shuffle(shuffled["activities"])
    rnd.shuffle(shuffled["relations"])
    net2, result2 = run(shuffled)
    for which in (
        "early_start_day",
        "early_finish_day",
        "late_start_day",
        "late_finish_day",
    ):
        assert by_key(net, result, which) == by_key(net2, result2, which), which
    for which in ("total_float", "free_float", "critical"):
        one = dict(zip(net.keys, getattr(result, which).tolist(), strict=True))
        two = dict(zip(net2.keys, getattr(result2, which).tolist(), strict=True))
        assert one == two, which
    assert result.finish == result2.finish
    assert result.length == result2.length
