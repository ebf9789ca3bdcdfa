"""Hand-worked cases on work calendars (March 2027: the 1st is a Monday).

Conventions checked (DESIGN.md): a start date is the first working day of the
work, a finish date the last (inclusive); working-day lags count on the
successor's calendar, ``calendar_days`` lags count elapsed days.
"""

from scheduling.engine import critical_path, parse_network

from .builders import SIX_DAYS, WEEKDAYS, dates_by_key, doc

TWO_CALENDARS = [
    {"key": "weekdays", "workdays": WEEKDAYS, "holidays": ["2027-04-02"]},
    {"key": "sixday", "workdays": SIX_DAYS},
]


def run(document):
    net = parse_network(document)
    return net, critical_path(net), dates_by_key(net, critical_path(net))


def test_five_days_from_monday_finish_on_friday_and_successor_starts_monday():
    _, result, d = run(doc([("A", 5), ("B", 1)], [("A", "B")]))
    assert d["A"][:2] == ("2027-03-01", "2027-03-05")
    assert d["B"][:2] == ("2027-03-08", "2027-03-08")
    assert str(result.finish) == "2027-03-08"


def test_holiday_is_skipped_inside_an_activity():
    # Good Friday 2027-04-02 is a holiday of this calendar (common practice in
    # Germany and elsewhere); 5 days from Monday 29 March end on Monday 5 April.
    _, _, d = run(doc([("A", 5)], start="2027-03-29", calendars=TWO_CALENDARS))
    assert d["A"][:2] == ("2027-03-29", "2027-04-05")


def test_calendar_day_lag_counts_the_weekend_and_workday_lag_does_not():
    # A pours Mon–Wed (1–3 March). Curing 7 calendar days from the end of
    # Wednesday: Thursday 4 + 7 = Thursday 11. Seven working days from the
    # same point: Thu 4, Fri 5, Mon 8 … Fri 12 are the seven; start Mon 15.
    _, _, d = run(
        doc(
            [("A", 3), ("B", 1), ("C", 1)],
            [("A", "B", "FS", 7, "calendar_days"), ("A", "C", "FS", 7)],
        )
    )
    assert d["B"][0] == "2027-03-11"
    assert d["C"][0] == "2027-03-15"


def test_calendar_day_lag_ending_on_a_weekend_rolls_to_the_next_working_day():
    # A ends Friday 5 March; +2 calendar days → Sunday 7 → Monday 8.
    _, _, d = run(doc([("A", 5), ("B", 1)], [("A", "B", "FS", 2, "calendar_days")]))
    assert d["B"][0] == "2027-03-08"


def test_six_day_crew_hands_over_to_five_day_crew_on_monday():
    # A (6-day week) starts Thu 4, works Thu, Fri, Sat → finishes Sat 6 March;
    # B (5-day week) can start Monday 8.
    acts = [
        {"key": "A", "duration": 3, "calendar": "sixday", "not_before": "2027-03-04"},
        {"key": "B", "duration": 2},
    ]
    _, _, d = run(doc(acts, [("A", "B")], calendars=TWO_CALENDARS))
    assert d["A"][:2] == ("2027-03-04", "2027-03-06")
    assert d["B"][:2] == ("2027-03-08", "2027-03-09")


def test_five_day_crew_hands_over_to_six_day_crew_on_saturday():
    acts = [
        {"key": "A", "duration": 5},
        {"key": "B", "duration": 2, "calendar": "sixday"},
    ]
    net, result, d = run(doc(acts, [("A", "B")], calendars=TWO_CALENDARS))
    assert d["B"][:2] == ("2027-03-06", "2027-03-08")
    assert str(result.finish) == "2027-03-08"


def test_six_day_predecessor_has_a_saturday_of_float_before_five_day_work():
    # A (6-day) finishes Friday 5 March at early dates; B (5-day) starts Monday.
    # A may slip to Saturday without moving B: one working day of A's float.
    acts = [
        {"key": "A", "duration": 5, "calendar": "sixday"},
        {"key": "B", "duration": 5},
    ]
    net, result, d = run(doc(acts, [("A", "B")], calendars=TWO_CALENDARS))
    tf = dict(zip(net.keys, result.total_float.tolist(), strict=True))
    assert d["A"] == ("2027-03-01", "2027-03-05", "2027-03-02", "2027-03-06")
    assert tf == {"A": 1, "B": 0}


def test_workday_lag_counts_on_the_successors_calendar():
    # A (5-day) ends Fri 5; 2 working days of B's 6-day calendar: Sat 6, Mon 8;
    # B starts Tue 9.
    acts = [
        {"key": "A", "duration": 5},
        {"key": "B", "duration": 1, "calendar": "sixday"},
    ]
    _, _, d = run(doc(acts, [("A", "B", "FS", 2)], calendars=TWO_CALENDARS))
    assert d["B"][0] == "2027-03-09"


def test_ss_lag_and_ff_lag():
    # B starts 2 working days after A starts (Wed 3); C must finish 1 working
    # day after A finishes (Fri 5 → Mon 8): 3 days ending Mon 8 start Thu 4.
    _, _, d = run(
        doc([("A", 5), ("B", 2), ("C", 3)], [("A", "B", "SS", 2), ("A", "C", "FF", 1)])
    )
    assert d["B"][:2] == ("2027-03-03", "2027-03-04")
    assert d["C"][:2] == ("2027-03-04", "2027-03-08")


def test_sf_relation_bounds_the_successors_finish_by_the_predecessors_start():
    # A may not start before Wed 10 March; B (2 days) must not finish before A
    # starts: B may finish Tuesday 9 at the earliest working-time point "end of
    # Tuesday = start of Wednesday", so B runs Mon 8 – Tue 9.
    acts = [{"key": "A", "duration": 3, "not_before": "2027-03-10"}, ("B", 2)]
    _, _, d = run(doc(acts, [("A", "B", "SF")]))
    assert d["B"][:2] == ("2027-03-08", "2027-03-09")


def test_lead_overlaps_but_never_before_the_project_start():
    _, _, d = run(
        doc(
            [("A", 2), ("B", 2), ("C", 1)], [("A", "B", "FS", -1), ("A", "C", "SS", -5)]
        )
    )
    assert d["B"][0] == "2027-03-02"
    assert d["C"][0] == "2027-03-01"


def test_milestone_after_friday_work_is_dated_the_next_working_day():
    net, result, d = run(doc([("A", 5), ("M", 0)], [("A", "M")]))
    assert d["M"] == ("2027-03-08",) * 4
    assert str(result.finish) == "2027-03-08"
    assert [s.key for s in result.critical_path] == ["A", "M"]


def test_not_before_drives_the_start_and_shows_as_the_driver():
    acts = [("A", 5), {"key": "B", "duration": 2, "not_before": "2027-03-10"}]
    net, result, d = run(doc(acts, [("A", "B")]))
    assert d["B"][:2] == ("2027-03-10", "2027-03-11")
    assert [(s.key, s.driver.kind) for s in result.critical_path] == [
        ("B", "not_before")
    ]
    tf = dict(zip(net.keys, result.total_float.tolist(), strict=True))
    assert tf == {"A": 2, "B": 0}


def test_project_deadline_before_the_early_finish_gives_negative_float():
    # 10 working days from Mon 1 March end Fri 12; a deadline of Wed 10 is
    # two working days short.
    net, result, _ = run(doc([("A", 4), ("B", 6)], [("A", "B")], deadline="2027-03-10"))
    assert result.total_float.tolist() == [-2, -2]
    assert result.critical.tolist() == [True, True]


def test_activity_deadline_limits_its_late_finish():
    acts = [{"key": "A", "duration": 2, "deadline": "2027-03-03"}, ("B", 10)]
    net, result, d = run(doc(acts))
    assert d["A"][3] == "2027-03-03"
    assert result.total_float.tolist() == [1, 0]


def test_free_float_and_total_float_differ_on_a_feeding_chain():
    # A(2) → B(1) → D, C(8) → D: B may slip 5 days freely; A has no free
    # float (it would push B) but 5 days of total float.
    net, result, _ = run(
        doc(
            [("A", 2), ("B", 1), ("C", 8), ("D", 1)],
            [("A", "B"), ("B", "D"), ("C", "D")],
        )
    )
    ff = dict(zip(net.keys, result.free_float.tolist(), strict=True))
    tf = dict(zip(net.keys, result.total_float.tolist(), strict=True))
    assert tf == {"A": 5, "B": 5, "C": 0, "D": 0}
    assert ff == {"A": 0, "B": 5, "C": 0, "D": 0}


def test_open_ends_list_activities_missing_a_predecessor_or_successor():
    net, result, _ = run(
        doc(
            [("START", 0), ("A", 3), ("B", 2), ("LOOSE", 1), ("END", 0)],
            [("START", "A"), ("A", "END"), ("B", "END")],
        )
    )
    assert result.no_predecessor == ("B", "LOOSE")
    assert result.no_successor == ("LOOSE",)


def test_driving_path_names_each_relation():
    net, result, _ = run(
        doc([("A", 2), ("B", 3), ("C", 1)], [("A", "B", "SS", 1), ("B", "C", "FS", 2)])
    )
    assert [s.driver.describe() for s in result.critical_path] == [
        "project start",
        "SS +1 workdays from A",
        "FS +2 workdays from B",
    ]


def test_nothing_starts_before_the_data_date():
    _, _, d = run(doc([("A", 2), ("B", 1)], [("A", "B")], data_date="2027-03-03"))
    assert d["A"][:2] == ("2027-03-03", "2027-03-04")
