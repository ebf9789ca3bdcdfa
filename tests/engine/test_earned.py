"""Earned value and earned schedule arithmetic (``scheduling/engine/earned.py``)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from scheduling.engine.calendars import WorkCalendar
from scheduling.engine.earned import (
    Workdays,
    earned_schedule,
    earned_value,
    planned_value_curve,
)


def test_earned_value_matches_the_practice_standard_example():
    # Source: PMI Practice Standard for Earned Value Management (formulas), inputs
    # from the published textbook exercise listed in shared/REFERENCES.md:
    # BAC 200,000, PV 120,000, EV 100,000, AC 90,000.
    got = earned_value(bac=200_000, pv=120_000, ev=100_000, ac=90_000)
    assert got.cpi == pytest.approx(1.1111, abs=1e-4)
    assert got.spi == pytest.approx(0.8333, abs=1e-4)
    assert got.eac_cpi == pytest.approx(180_000)
    assert got.eac_budget_rate == pytest.approx(190_000)
    assert got.eac_cpi_spi == pytest.approx(198_000)
    assert got.tcpi == pytest.approx(0.9091, abs=1e-4)
    assert got.sv == -20_000
    assert got.cv == 10_000
    assert got.vac == pytest.approx(20_000)


def test_earned_value_without_actual_cost_leaves_the_cost_measures_empty():
    got = earned_value(bac=10, pv=4, ev=5)
    assert (got.spi, got.sv) == (1.25, 1)
    assert got.ac is None
    assert (got.cv, got.cpi, got.eac_cpi, got.tcpi, got.vac) == (None,) * 5


def test_ratios_over_zero_are_none_not_infinite():
    got = earned_value(bac=10, pv=0, ev=0, ac=0)
    assert got.spi is None and got.cpi is None
    assert got.eac_cpi is None and got.eac_cpi_spi is None
    assert got.eac_budget_rate == 10
    assert got.tcpi == 1.0


LIPKE_PV = [0, 100, 250, 450, 700, 950, 1150, 1300, 1400]


def test_earned_schedule_matches_lipke_2003():
    # Source: Lipke, "Schedule is Different", The Measurable News, March 2003
    # (formulas); numbers of the check in shared/REFERENCES.md: PD 8, AT 5,
    # EV 600 -> ES 3.6, SPI(t) 0.72, IEAC(t) 11.11.
    got = earned_schedule(pv_cumulative=LIPKE_PV, ev=600, at=5, pd=8)
    assert got.es == pytest.approx(3.6)
    assert got.spi_t == pytest.approx(0.72)
    assert got.sv_t == pytest.approx(-1.4)
    assert got.ieac_t == pytest.approx(11.11, abs=0.005)


def test_earned_schedule_at_a_whole_period_and_at_the_ends():
    assert earned_schedule(pv_cumulative=LIPKE_PV, ev=450, at=3, pd=8).es == 3
    assert earned_schedule(pv_cumulative=LIPKE_PV, ev=0, at=0, pd=8).spi_t is None
    done = earned_schedule(pv_cumulative=LIPKE_PV, ev=1400, at=10, pd=8)
    assert done.es == 8 and done.spi_t == pytest.approx(0.8)


def test_a_flat_tail_does_not_stretch_the_earned_schedule():
    """All earned by period 3 of a curve that runs on flat to period 6."""
    got = earned_schedule(pv_cumulative=[0, 10, 20, 30, 30, 30, 30], ev=30, at=4, pd=3)
    assert got.es == 3
    assert got.ieac_t == pytest.approx(4)


def test_a_flat_stretch_inside_the_curve_takes_the_last_whole_period():
    """C is the last period with PV_C <= EV (Lipke's rule)."""
    got = earned_schedule(pv_cumulative=[0, 10, 10, 10, 20], ev=15, at=4, pd=4)
    assert got.es == pytest.approx(3.5)


def test_planned_value_curve_spreads_evenly_and_lumps_milestones():
    curve = planned_value_curve(
        budget=[100, 30, 50], first=[0, 2, 3], end=[4, 5, 3], periods=6
    )
    # 25 a period over 0..3, 10 a period over 2..4, 50 at the end of period 3.
    assert curve.tolist() == [0, 25, 50, 85, 170, 180, 180]


def test_planned_value_curve_clamps_work_outside_the_periods():
    curve = planned_value_curve(budget=[60], first=[-2], end=[10], periods=4)
    # 5 a period over -2..9: 10 planned before period 0, 20 by instant 4.
    assert np.allclose(curve, [10, 15, 20, 25, 30])
    late = planned_value_curve(budget=[7], first=[9], end=[9], periods=4)
    assert late.tolist() == [0, 0, 0, 0, 0]


def test_workday_variance_skips_weekends_and_holidays():
    cal = WorkCalendar.from_names(
        "w", ["mon", "tue", "wed", "thu", "fri"], [dt.date(2027, 3, 3)]
    )
    days = Workdays.build(cal, dt.date(2027, 3, 1), dt.date(2027, 3, 31))
    # Mon 1 March to Mon 8 March: five weekdays, one of them a holiday.
    assert days.variance(dt.date(2027, 3, 1), dt.date(2027, 3, 8)) == 4
    assert days.variance(dt.date(2027, 3, 8), dt.date(2027, 3, 1)) == -4
    # The third working day from Monday 1 March: Thursday (Wednesday is off).
    assert days.date_at(days.position(dt.date(2027, 3, 1)) + 2) == dt.date(2027, 3, 4)
    # Same count from numpy's business-day function (a reference library).
    assert days.variance(dt.date(2027, 3, 1), dt.date(2027, 3, 29)) == int(
        np.busday_count("2027-03-01", "2027-03-29", holidays=["2027-03-03"])
    )
