"""Bad networks: every problem is reported at once, each naming its entry."""

import pytest

from scheduling.engine import NetworkInvalid, parse_network

from .builders import doc


def problems_of(document):
    with pytest.raises(NetworkInvalid) as caught:
        parse_network(document)
    return caught.value.problems


def codes(problems):
    return sorted(p.code for p in problems)


def test_all_problems_are_reported_together():
    bad = doc(
        [
            ("A", 3),
            ("A", 2),
            ("B", -1),
            ("C", 2.5),
            {"key": "D", "duration": 1, "calendar": "nights"},
        ],
        [
            ("A", "A"),
            ("A", "Z"),
            ("B", "C", "XY"),
            ("B", "C", "FS", 10_000),
            ("C", "D", "FS", 0, "fortnights"),
        ],
    )
    found = problems_of(bad)
    assert codes(found) == sorted(
        [
            "duplicate_key",
            "negative",
            "not_integer",
            "unknown_calendar",
            "self_relation",
            "unknown_activity",
            "unknown_relation_type",
            "out_of_range",
            "unknown_lag_unit",
        ]
    )
    by_pointer = {p.pointer: p for p in found}
    assert "activity B" in by_pointer["/activities/2/duration"].message
    assert "activity C" in by_pointer["/activities/3/duration"].message
    assert "'nights'" in by_pointer["/activities/4/calendar"].message
    assert "'Z'" in by_pointer["/relations/1/succ"].message
    assert "10000" in by_pointer["/relations/3/lag"].message


def test_cycle_names_its_activities_in_relation_order():
    found = problems_of(
        doc(
            [("A", 1), ("B", 1), ("C", 1), ("D", 1)],
            [("A", "B"), ("B", "C"), ("C", "D"), ("D", "B")],
        )
    )
    assert codes(found) == ["cycle"]
    assert found[0].message == "the relations form a loop: B → C → D → B"


def test_two_separate_cycles_are_both_named():
    found = problems_of(
        doc(
            [("A", 1), ("B", 1), ("C", 1), ("D", 1), ("E", 1)],
            [("A", "B"), ("B", "A"), ("C", "D"), ("D", "E"), ("E", "C")],
        )
    )
    messages = sorted(p.message for p in found)
    assert messages == [
        "the relations form a loop: A → B → A",
        "the relations form a loop: C → D → E → C",
    ]


def test_cycle_is_reported_with_field_problems():
    found = problems_of(doc([("A", 1), ("B", -4)], [("A", "B"), ("B", "A", "SS")]))
    assert codes(found) == ["cycle", "negative"]


def test_duplicate_relation_points_at_the_second_copy():
    found = problems_of(doc([("A", 1), ("B", 1)], [("A", "B"), ("A", "B", "SS")]))
    assert [(p.pointer, p.code) for p in found] == [
        ("/relations/1", "duplicate_relation")
    ]
    assert "also at /relations/0" in found[0].message


@pytest.mark.parametrize(
    ("value", "code"),
    [
        ("2027-02-30", "bad_date"),
        ("02/03/2027", "bad_date"),
        (20270301, "bad_date"),
        ("3027-01-01", "date_out_of_range"),
    ],
)
def test_bad_dates_are_named(value, code):
    found = problems_of(doc([{"key": "A", "duration": 1, "not_before": value}]))
    assert [(p.pointer, p.code) for p in found] == [("/activities/0/not_before", code)]
    assert "activity A" in found[0].message


def test_calendar_without_working_weekday_is_refused():
    cal = [{"key": "weekdays", "workdays": []}]
    found = problems_of(doc([("A", 1)], calendars=cal))
    assert [(p.pointer, p.code) for p in found] == [
        ("/calendars/0/workdays", "no_working_days")
    ]


def test_unknown_weekday_and_unknown_field_are_named():
    cal = [{"key": "weekdays", "workdays": ["mon", "funday"], "colour": "red"}]
    found = problems_of(doc([{"key": "A", "duraton": 1, "duration": 1}], calendars=cal))
    assert {(p.pointer, p.code) for p in found} == {
        ("/calendars/0/workdays/1", "bad_weekday"),
        ("/calendars/0/colour", "unknown_field"),
        ("/activities/0/duraton", "unknown_field"),
    }


def test_wrong_types_do_not_crash():
    for broken in (
        None,
        [],
        "text",
        {"format": "sitepace.network/1", "project": 3},
        {**doc([("A", 1)]), "activities": {"A": 1}},
        {**doc([("A", 1)]), "relations": [["A", "B"]]},
        {**doc([("A", 1)]), "activities": [{"key": 7, "duration": True}]},
    ):
        assert problems_of(broken)


def test_demand_on_unknown_crew_is_named():
    found = problems_of(doc([{"key": "A", "duration": 2, "demands": {"cranes": 1}}]))
    assert [(p.pointer, p.code) for p in found] == [
        ("/activities/0/demands/cranes", "unknown_crew")
    ]


def test_wrong_format_is_refused():
    bad = {**doc([("A", 1)]), "format": "something-else/9"}
    assert [p.code for p in problems_of(bad)] == ["wrong_format"]


def test_a_valid_document_passes_and_keeps_its_order():
    net = parse_network(doc([("A", 2), ("B", 0)], [("A", "B")]))
    assert net.keys == ("A", "B")
    assert net.duration.tolist() == [2, 0]


def test_a_schedule_past_the_year_9999_is_refused_not_crashed():
    from scheduling.engine import critical_path

    acts = [(f"A{i}", 10_000) for i in range(300)]
    rels = [(f"A{i}", f"A{i + 1}") for i in range(299)]
    net = parse_network(doc(acts, rels))
    with pytest.raises(NetworkInvalid, match="beyond the year 9999"):
        critical_path(net)
