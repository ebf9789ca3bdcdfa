"""Progress from site: finished and started work, the data date, out-of-sequence
work, in the critical path, the levelling and the independent checker.

Every expected date here is worked by hand on a Monday–Friday calendar from the
conventions in ../shared/DESIGN.md ("Time and dates"): 2027-03-01 is a Monday,
a finish is the last working day, FS means the successor starts on the first
working day after the predecessor's finish. The two out-of-sequence treatments
(retained logic, progress override) and "remaining = duration × share not yet
done" for percent complete are common practice in the trade.
"""

from __future__ import annotations

import datetime as dt

import pytest

from scheduling.engine import NetworkInvalid, critical_path, parse_network
from scheduling.engine.checker import check_schedule
from scheduling.engine.levelling import LevellingInfeasible, level
from scheduling.engine.output import crew_daily_demand, schedule_document

from .builders import doc

D = dt.date.fromisoformat


def network(activities, relations=(), crews=(), **project):
    document = doc(activities, list(relations), **project)
    document["crews"] = list(crews)
    return parse_network(document)


def schedule(net):
    out = schedule_document(net, critical_path(net))
    return out, {a["key"]: a for a in out["activities"]}


def test_started_work_runs_on_from_the_data_date():
    # A done; B started Monday 8 March with 3 days left on Wednesday 10 March
    # (the data date): Wed, Thu, Fri. C follows B: Mon 15 – Tue 16. D is SS+1
    # from B's actual start (Tue 9), held to the data date: Wed 10 – Mon 15.
    net = network(
        [
            {
                "key": "A",
                "duration": 5,
                "actual_start": "2027-03-01",
                "actual_finish": "2027-03-05",
            },
            {"key": "B", "duration": 5, "actual_start": "2027-03-08", "remaining": 3},
            ("C", 2),
            ("D", 4),
        ],
        [("A", "B"), ("B", "C"), ("B", "D", "SS", 1)],
        data_date="2027-03-10",
    )
    out, by = schedule(net)
    assert (by["A"]["early_start"], by["A"]["early_finish"]) == (
        "2027-03-01",
        "2027-03-05",
    )
    assert by["A"]["status"] == "finished" and by["A"]["total_float"] == 0
    assert by["A"]["critical"] is False
    assert (by["B"]["early_start"], by["B"]["early_finish"]) == (
        "2027-03-08",
        "2027-03-12",
    )
    assert by["B"]["status"] == "started" and by["B"]["remaining"] == 3
    assert (by["C"]["early_start"], by["C"]["early_finish"]) == (
        "2027-03-15",
        "2027-03-16",
    )
    assert (by["D"]["early_start"], by["D"]["early_finish"]) == (
        "2027-03-10",
        "2027-03-15",
    )
    assert by["D"]["total_float"] == 1  # late finish Tue 16
    assert out["project"]["finish"] == "2027-03-16"
    # The path starts at B's remaining work, held by the data date.
    path = out["critical_path"]
    assert [s["key"] for s in path] == ["B", "C"]
    assert path[0]["driver"] == {"kind": "data_date", "date": "2027-03-10"}


def test_percent_complete_and_elapsed_days_give_the_remaining_work():
    # Both started Monday 1 March; data date Monday 8 March (5 days elapsed).
    # P: 10 days at 40 % -> 6 left: Mon 8 – Mon 15. Q: 10 days, nothing said
    # -> 10 - 5 = 5 left: Mon 8 – Fri 12.
    net = network(
        [
            {
                "key": "P",
                "duration": 10,
                "actual_start": "2027-03-01",
                "percent_complete": 40,
            },
            {"key": "Q", "duration": 10, "actual_start": "2027-03-01"},
        ],
        data_date="2027-03-08",
    )
    _, by = schedule(net)
    assert by["P"]["remaining"] == 6 and by["P"]["early_finish"] == "2027-03-15"
    assert by["Q"]["remaining"] == 5 and by["Q"]["early_finish"] == "2027-03-12"


def _out_of_sequence(mode):
    # A: 10 days from Mon 1 March, under way, 5 left on Mon 8 (data date):
    # Mon 8 – Fri 12. B follows A (FS) but started Thu 4 March, 2 days left.
    return network(
        [
            {"key": "A", "duration": 10, "actual_start": "2027-03-01"},
            {"key": "B", "duration": 4, "actual_start": "2027-03-04", "remaining": 2},
            ("C", 1),
        ],
        [("A", "B"), ("B", "C")],
        data_date="2027-03-08",
        out_of_sequence=mode,
    )


def test_retained_logic_keeps_the_rest_of_out_of_sequence_work_waiting():
    net = _out_of_sequence("retained_logic")
    out, by = schedule(net)
    # B's remaining two days wait for A: Mon 15 – Tue 16; C Wed 17.
    assert by["B"]["early_start"] == "2027-03-04"
    assert by["B"]["early_finish"] == "2027-03-16"
    assert by["C"]["early_start"] == "2027-03-17"
    warn = [w for w in out["warnings"] if w["code"] == "out_of_sequence"]
    assert len(warn) == 1 and "A → B" in warn[0]["message"]
    assert warn[0]["pointer"] == "/relations/0"


def test_progress_override_lets_started_work_run_on():
    net = _out_of_sequence("progress_override")
    out, by = schedule(net)
    # B's remaining two days run from the data date: Mon 8 – Tue 9; C Wed 10.
    assert by["B"]["early_finish"] == "2027-03-09"
    assert by["C"]["early_start"] == "2027-03-10"
    assert out["project"]["out_of_sequence"] == "progress_override"
    assert [w["code"] for w in out["warnings"]] == ["out_of_sequence"]
    # A is now the longest: it ends the job on Fri 12.
    assert out["project"]["finish"] == "2027-03-12"


@pytest.mark.parametrize(
    ("entry", "pointer", "code"),
    [
        (
            {"actual_start": "2027-03-20"},
            "/activities/0/actual_start",
            "actual_after_data_date",
        ),
        (
            {"actual_start": "2027-03-03", "actual_finish": "2027-03-02"},
            "/activities/0/actual_finish",
            "finish_before_start",
        ),
        ({"remaining": 3}, "/activities/0/remaining", "progress_without_start"),
        (
            {"percent_complete": 50},
            "/activities/0/percent_complete",
            "progress_without_start",
        ),
        (
            {"actual_start": "2027-03-01", "percent_complete": 101},
            "/activities/0/percent_complete",
            "out_of_range",
        ),
        (
            {"actual_start": "2027-03-01", "remaining": -1},
            "/activities/0/remaining",
            "negative",
        ),
        (
            {
                "actual_start": "2027-03-01",
                "actual_finish": "2027-03-03",
                "remaining": 2,
            },
            "/activities/0/remaining",
            "remaining_after_finish",
        ),
        (
            {
                "actual_start": "2027-03-01",
                "actual_finish": "2027-03-03",
                "percent_complete": 60,
            },
            "/activities/0/percent_complete",
            "percent_after_finish",
        ),
        (
            {"actual_start": "2027-02-26"},
            "/activities/0/actual_start",
            "actual_before_start",
        ),
    ],
)
def test_bad_progress_is_refused_with_the_field_named(entry, pointer, code):
    with pytest.raises(NetworkInvalid) as caught:
        network([{"key": "A", "duration": 3, **entry}], data_date="2027-03-10")
    got = {(p.pointer, p.code) for p in caught.value.problems}
    assert (pointer, code) in got, got
    assert all("activity A" in p.message for p in caught.value.problems)


def test_progress_needs_a_data_date_and_a_known_mode():
    with pytest.raises(NetworkInvalid) as caught:
        network([{"key": "A", "duration": 3, "actual_start": "2027-03-01"}])
    assert [p.code for p in caught.value.problems] == ["progress_without_data_date"]
    with pytest.raises(NetworkInvalid) as caught:
        network([("A", 3)], out_of_sequence="whatever")
    assert [p.pointer for p in caught.value.problems] == ["/project/out_of_sequence"]


CREW = [{"key": "crane", "capacity": 1}]


def test_crews_carry_only_remaining_work():
    # A finished, B under way (3 left from Wed 10), C not started: only B's
    # Wed–Fri and C's days load the crane.
    net = network(
        [
            {
                "key": "A",
                "duration": 2,
                "demands": {"crane": 1},
                "actual_start": "2027-03-01",
                "actual_finish": "2027-03-02",
            },
            {
                "key": "B",
                "duration": 5,
                "demands": {"crane": 1},
                "actual_start": "2027-03-08",
                "remaining": 3,
            },
        ],
        crews=CREW,
        data_date="2027-03-10",
    )
    result = critical_path(net)
    load = crew_daily_demand(net, result)[0]
    loaded = sorted(result.tables.date_of(int(d)) for d in load.nonzero()[0])
    assert loaded == [D("2027-03-10"), D("2027-03-11"), D("2027-03-12")]


def test_levelling_keeps_work_under_way_and_fits_the_rest_round_it():
    # One crane. B is under way (3 days left from Wed 10: Wed–Fri); C and E
    # need the crane for 2 days each and have no logic: they follow B, one
    # after the other: Mon 15 – Tue 16 and Wed 17 – Thu 18.
    net = network(
        [
            {
                "key": "B",
                "duration": 5,
                "demands": {"crane": 1},
                "actual_start": "2027-03-08",
                "remaining": 3,
            },
            {"key": "C", "duration": 2, "demands": {"crane": 1}},
            {"key": "E", "duration": 2, "demands": {"crane": 1}},
        ],
        crews=CREW,
        data_date="2027-03-10",
    )
    got = level(net, time_limit=5, seed=1)
    assert got.status == "optimal"
    by = {a.key: a for a in got.activities}
    assert (by["B"].start, by["B"].finish) == (D("2027-03-08"), D("2027-03-12"))
    later = sorted((by["C"].start, by["E"].start))
    assert later == [D("2027-03-15"), D("2027-03-17")]
    assert got.finish == D("2027-03-18")
    assert check_schedule(net, got.starts, finishes=got.finishes) == []


def test_started_work_over_a_crew_is_named_before_the_solve():
    net = network(
        [
            {
                "key": "B",
                "duration": 5,
                "demands": {"crane": 1},
                "actual_start": "2027-03-08",
            },
            {
                "key": "F",
                "duration": 5,
                "demands": {"crane": 1},
                "actual_start": "2027-03-09",
            },
        ],
        crews=CREW,
        data_date="2027-03-10",
    )
    with pytest.raises(LevellingInfeasible) as caught:
        level(net, time_limit=2)
    (problem,) = caught.value.problems
    assert problem.code == "started_work_over_capacity"
    assert "crane" in problem.message and "B, F" in problem.message


def test_the_checker_holds_progress():
    net = network(
        [
            {
                "key": "A",
                "duration": 2,
                "actual_start": "2027-03-01",
                "actual_finish": "2027-03-02",
            },
            {"key": "B", "duration": 5, "actual_start": "2027-03-08", "remaining": 3},
            ("C", 2),
        ],
        [("A", "B"), ("B", "C")],
        data_date="2027-03-10",
    )
    good_starts = {"A": D("2027-03-01"), "B": D("2027-03-08"), "C": D("2027-03-15")}
    good_finishes = {
        "A": D("2027-03-02"),
        "B": D("2027-03-12"),
        "C": D("2027-03-16"),
    }
    assert check_schedule(net, good_starts, finishes=good_finishes) == []
    # B "restarted" on the data date; its remaining work squeezed before it;
    # C before the data date and before B ends.
    moved = check_schedule(
        net, {**good_starts, "B": D("2027-03-10")}, finishes=good_finishes
    )
    assert any("not on its actual start 2027-03-08" in m for m in moved)
    early = check_schedule(
        net, good_starts, finishes={**good_finishes, "B": D("2027-03-11")}
    )
    assert any("before the data date" in m for m in early)
    c_early = check_schedule(
        net,
        {**good_starts, "C": D("2027-03-09")},
        finishes={**good_finishes, "C": D("2027-03-10")},
    )
    assert any("before the data date" in m for m in c_early)
    assert any("A → B" not in m and "B → C" in m for m in c_early)


def test_a_plan_overtaken_by_progress_says_so():
    # The previous plan had B start on Mon 1 March; B started on Mon 8 and
    # C, which followed B, moves with it.
    net = network(
        [
            {"key": "B", "duration": 5, "actual_start": "2027-03-08", "remaining": 3},
            {"key": "C", "duration": 2, "demands": {"crane": 1}},
        ],
        [("B", "C")],
        crews=CREW,
        data_date="2027-03-10",
    )
    previous = {"B": D("2027-03-01"), "C": D("2027-03-08")}
    got = level(net, previous=previous, time_limit=5, seed=1)
    moves = {m.key: m for m in got.moved}
    assert moves["B"].reason == "progress" and moves["B"].start == D("2027-03-08")
    assert moves["B"].days == 5
    assert moves["C"].reason == "progress" and moves["C"].start == D("2027-03-15")
