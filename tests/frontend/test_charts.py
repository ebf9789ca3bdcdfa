"""The chart module's SVG, checked without a browser.

Expected pixels are worked out by hand from the convention of
``frontend/charts.py``: the axis starts on the Monday on or before the
earliest date; a bar spans its start day to its finish day inclusive, so
x = days from the origin × pixels per day and width = (finish − start + 1) ×
pixels per day; a milestone sits at the start of its day.
"""

from __future__ import annotations

import datetime as dt
import re
import xml.etree.ElementTree as ET

import pytest

from frontend import charts, look

from .conftest import demo_document, levelled_of, schedule_of

SVG = "{http://www.w3.org/2000/svg}"


def parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)


def bars_of(chart: charts.BarChart) -> dict[str, ET.Element]:
    out = {}
    for g in chart.groups:
        for bar in parse(g.bars_svg).iter(f"{SVG}g"):
            if bar.get("class") == "bar":
                out[bar.get("data-activity")] = bar
    return out


def plan_rect(bar: ET.Element) -> ET.Element:
    return next(r for r in bar.iter(f"{SVG}rect") if "plan" in r.get("class", ""))


# Hand-computed from the small network (conftest.SMALL): origin Mon 1 Mar 2027.
# A 1–5 Mar, B 8–10 Mar, C 8–9 Mar (late finish 10 Mar), M 11 Mar.
EXPECTED_DAYS = {"A": (0, 5), "B": (7, 3), "C": (7, 2)}


@pytest.mark.parametrize("zoom", ["days", "weeks", "months"])
def test_bar_positions_match_the_dates_to_the_pixel(small_network, zoom):
    chart = charts.bar_chart(
        schedule_of(small_network), small_network, zoom=zoom, group="none"
    )
    ppd = {"days": 24, "weeks": 8, "months": 3}[zoom]
    assert chart.axis.origin == dt.date(2027, 3, 1)
    assert chart.axis.px_per_day == ppd
    bars = bars_of(chart)
    assert set(bars) == {"A", "B", "C", "M"}
    for key, (offset, days) in EXPECTED_DAYS.items():
        rect = plan_rect(bars[key])
        assert int(rect.get("x")) == offset * ppd, key
        assert int(rect.get("width")) == days * ppd, key
    post = next(
        r for r in bars["M"].iter(f"{SVG}rect") if r.get("class") == "milestone"
    )
    # The 2-pixel post is centred on the start of 11 March (day 10).
    assert int(post.get("x")) == 10 * ppd - 1


def test_float_line_runs_from_the_bar_end_to_the_late_finish(small_network):
    chart = charts.bar_chart(
        schedule_of(small_network), small_network, zoom="days", group="none"
    )
    bars = bars_of(chart)
    path = next(p for p in bars["C"].iter(f"{SVG}path") if p.get("class") == "float")
    # C ends after 9 March (x = 9 × 24 = 216) and may finish by 10 March (240).
    assert path.get("d").startswith("M216 ") and "H240" in path.get("d")
    assert not [p for p in bars["A"].iter(f"{SVG}path") if p.get("class") == "float"]


def test_critical_bars_carry_the_pattern_and_others_do_not(small_network):
    chart = charts.bar_chart(schedule_of(small_network), small_network, group="none")
    for key, bar in bars_of(chart).items():
        marked = [
            e for e in bar.iter() if "mark-critical" in (e.get("class") or "").split()
        ]
        critical = bar.get("data-critical") == "true"
        assert critical == (key != "C")
        assert bool(marked) == critical, key
        if critical:
            assert marked[0].get("fill") == f"url(#{look.CRITICAL_PATTERN})"


def test_bars_say_what_they_show(small_network):
    chart = charts.bar_chart(schedule_of(small_network), small_network, group="none")
    b = bars_of(chart)["B"]
    assert (b.get("data-start"), b.get("data-finish")) == ("2027-03-08", "2027-03-10")
    assert b.get("tabindex") == "0"
    label = b.get("aria-label")
    assert label.startswith("B Walls <&> roof: critical")
    assert "8 Mar 2027 to 10 Mar 2027" in label and "driven by A" in label


def test_text_is_escaped(small_network):
    chart = charts.bar_chart(schedule_of(small_network), small_network, group="none")
    svg = chart.groups[0].labels_svg
    assert "Walls &lt;&amp;&gt; roof" in svg
    assert "<&>" not in svg


def test_non_working_days_are_shaded_from_the_calendar(small_network):
    small_network["calendars"][0]["holidays"] = ["2027-03-03"]
    chart = charts.bar_chart(
        schedule_of(small_network), small_network, zoom="days", group="none"
    )
    shaded = [
        (int(r.get("x")), int(r.get("width")))
        for r in parse(chart.groups[0].bars_svg).iter(f"{SVG}rect")
        if r.get("class") == "nw"
    ]
    # Wednesday 3 March (holiday) and the weekend of 6–7 March.
    assert shaded[:2] == [(2 * 24, 24), (5 * 24, 48)]


def test_grouping_collects_rows_and_refuses_unknown_groupings(small_network):
    schedule = schedule_of(small_network)
    chart = charts.bar_chart(schedule, small_network, group="zone")
    assert [(g.title, g.count) for g in chart.groups] == [
        ("Base", 1),
        ("No zone", 2),
        ("Shell", 1),
    ]
    by_crew = charts.bar_chart(schedule, small_network, group="crew")
    assert {g.title: g.count for g in by_crew.groups} == {
        "No crew": 2,
        "Carpentry crew": 2,
    }
    with pytest.raises(ValueError, match="group must be one of"):
        charts.bar_chart(schedule, small_network, group="colour")
    with pytest.raises(ValueError, match="zoom must be one of"):
        charts.bar_chart(schedule, small_network, zoom="hours")


def test_baseline_and_data_date_are_drawn_and_named_in_the_legend(small_network):
    small_network["project"]["data_date"] = "2027-03-03"
    schedule = schedule_of(small_network)
    baseline = {"A": (dt.date(2027, 3, 2), dt.date(2027, 3, 4))}
    chart = charts.bar_chart(
        schedule, small_network, zoom="days", group="none", baseline=baseline
    )
    a = bars_of(chart)["A"]
    base = next(r for r in a.iter(f"{SVG}rect") if r.get("class") == "baseline")
    assert (int(base.get("x")), int(base.get("width"))) == (24, 3 * 24)
    line = next(
        e
        for e in parse(chart.groups[0].bars_svg).iter(f"{SVG}line")
        if e.get("class") == "data-date"
    )
    assert int(line.get("x1")) == 2 * 24
    assert "baseline dates" in chart.legend_svg
    assert "data date: 3 Mar 2027" in chart.legend_svg
    plain = charts.bar_chart(schedule, small_network, group="none")
    assert "no baseline captured yet" in plain.legend_svg


def test_levelled_bars_show_levelled_dates_over_an_early_track(small_network):
    levelled = levelled_of(small_network)
    chart = charts.bar_chart(levelled, small_network, zoom="days", group="none")
    assert chart.levelled
    c = bars_of(chart)["C"]
    # Crew "carp" (capacity 1) is busy with B until 10 March: C moves to 11–12.
    assert (c.get("data-start"), c.get("data-finish")) == ("2027-03-11", "2027-03-12")
    rect = plan_rect(c)
    assert (int(rect.get("x")), int(rect.get("width"))) == (10 * 24, 2 * 24)
    track = next(r for r in c.iter(f"{SVG}rect") if r.get("class") == "early-track")
    assert (int(track.get("x")), int(track.get("width"))) == (7 * 24, 2 * 24)
    assert "levelled dates" in chart.legend_svg


def test_relation_lines_only_when_asked(small_network):
    schedule = schedule_of(small_network)
    off = charts.bar_chart(schedule, small_network, group="none")
    on = charts.bar_chart(schedule, small_network, group="none", relations=True)
    assert 'class="relation"' not in off.groups[0].bars_svg
    assert on.groups[0].bars_svg.count('class="relation"') == 4


def test_percent_complete_is_weighted_by_duration():
    schedule = {
        "activities": [
            {"duration": 10, "status": "finished"},
            {"duration": 10, "status": "started", "remaining": 5},
            {"duration": 20, "status": "not_started"},
            {"duration": 0, "status": "finished"},
        ]
    }
    # (10 + 5 + 0) / 40 working days.
    assert charts.percent_complete(schedule) == pytest.approx(37.5)
    assert charts.percent_complete({"activities": []}) == 0.0


def columns(svg: str) -> list[ET.Element]:
    return [g for g in parse(svg).iter(f"{SVG}g") if g.get("data-crew")]


def test_histogram_counts_units_on_working_days_and_marks_over_capacity(
    small_network,
):
    hist = charts.crew_histograms(schedule_of(small_network), small_network)
    (carp,) = hist.crews
    assert [p.plan for p in carp.panels] == ["early"]
    cols = {c.get("data-day"): c for c in columns(carp.panels[0].svg)}
    # B (8–10 Mar) and C (8–9 Mar) both need the one carpenter crew.
    assert {d: int(c.get("data-demand")) for d, c in cols.items()} == {
        "2027-03-08": 2,
        "2027-03-09": 2,
        "2027-03-10": 1,
    }
    assert all(c.get("data-capacity") == "1" for c in cols.values())
    assert [d for d, c in cols.items() if c.get("data-over") == "true"] == [
        "2027-03-08",
        "2027-03-09",
    ]
    over = [
        r for r in cols["2027-03-08"].iter(f"{SVG}rect") if r.get("class") == "over"
    ]
    assert over and over[0].get("fill") == f"url(#{look.OVER_PATTERN})"
    assert carp.panels[0].peak == 2 and carp.panels[0].over_columns == 2
    assert "no levelled schedule published yet" in hist.legend_svg


def test_weekly_totals_sum_unit_days_against_weekly_capacity(small_network):
    hist = charts.crew_histograms(
        schedule_of(small_network), small_network, period="week"
    )
    cols = columns(hist.crews[0].panels[0].svg)
    assert [(c.get("data-day"), c.get("data-demand")) for c in cols] == [
        ("2027-03-08", "5")
    ]
    # Capacity 1 on the five working days of that week.
    assert cols[0].get("data-capacity") == "5"
    assert cols[0].get("data-over") == "false"


def test_unavailable_days_have_no_capacity(small_network):
    small_network["crews"][0]["unavailable"] = [
        {"from": "2027-03-10", "to": "2027-03-10"}
    ]
    hist = charts.crew_histograms(schedule_of(small_network), small_network)
    cols = {c.get("data-day"): c for c in columns(hist.crews[0].panels[0].svg)}
    assert cols["2027-03-10"].get("data-capacity") == "0"
    assert cols["2027-03-10"].get("data-over") == "true"


def test_after_levelling_each_demo_crew_is_within_capacity(demo_levelled):
    network = demo_document()
    hist = charts.crew_histograms(demo_levelled, network)
    assert hist.levelled
    over_before = 0
    for crew in hist.crews:
        before, after = crew.panels
        assert (before.plan, after.plan) == ("early", "levelled")
        for col in columns(after.svg):
            assert int(col.get("data-demand")) <= int(col.get("data-capacity")), (
                crew.key,
                col.get("data-day"),
            )
        over_before += before.over_columns
    # The demo books crews twice at early dates: levelling has work to do.
    assert over_before > 0


def test_standalone_svg_holds_every_bar_the_legend_and_the_caution(small_network):
    svg = charts.bar_chart_svg(
        schedule_of(small_network), small_network, caution="Planning estimates."
    )
    root = parse(svg)
    bars = [g for g in root.iter(f"{SVG}g") if g.get("class") == "bar"]
    assert len(bars) == 4
    assert root.find(f"{SVG}defs") is not None
    assert "Caution: Planning estimates." in svg
    assert re.search(r'data-mark="critical"', svg)
