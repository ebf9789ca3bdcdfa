"""The report's figures, recomputed here by plain code from the demo network,
its baseline and the entries recorded, at three data dates.

Nothing here calls the report module's helpers: working days are counted
with NumPy's business-day functions (a reference library) on the demo's
project calendar, and the earned value and earned schedule sums are written
out below (formulas: PMI Practice Standard for EVM; Lipke 2003).
"""

from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np
import pytest

from scheduling import baselines, report, services

from .conftest import demo_document, publish, record, set_data_date

pytestmark = pytest.mark.django_db

DATA_DATES = (dt.date(2027, 4, 5), dt.date(2027, 5, 3), dt.date(2027, 6, 7))
HALF = 50


def _holidays() -> list[str]:
    doc = demo_document()
    cal = next(c for c in doc["calendars"] if c["key"] == doc["project"]["calendar"])
    assert cal["workdays"] == ["mon", "tue", "wed", "thu", "fri"]
    return cal["holidays"]


HOLIDAYS = _holidays()


def busdays(a: str | dt.date, b: str | dt.date) -> int:
    """Working days of the project calendar in [a, b) (negative if b < a);
    numpy's busday_count as the reference."""
    return int(np.busday_count(str(a), str(b), holidays=HOLIDAYS))


def next_day(day: str) -> str:
    return (dt.date.fromisoformat(day) + dt.timedelta(days=1)).isoformat()


def expected_pv_curve(base: dict[str, Any], origin: str, pd: int) -> list[float]:
    """Cumulative planned value at instants 0..pd: each activity's duration
    spread evenly over its baseline working days, a zero-day span earned at
    the end of its day."""
    curve = []
    for k in range(pd + 1):
        total = 0.0
        for a in base.values():
            first = busdays(origin, a["start"])
            n = busdays(a["start"], next_day(a["finish"]))
            if n > 0:
                total += a["duration"] * min(max((k - first) / n, 0.0), 1.0)
            elif k >= first + 1:
                total += a["duration"]
        curve.append(total)
    return curve


def expected_es(curve: list[float], ev: float) -> float:
    top = max(curve)
    end = curve.index(top)
    if ev >= top:
        return float(end)
    c = max(i for i in range(end + 1) if curve[i] <= ev)
    return c + (ev - curve[c]) / (curve[c + 1] - curve[c])


def test_report_figures_match_an_independent_count_at_three_data_dates(
    demo, users, monkeypatch
):
    first = publish(demo)
    captured = baselines.baseline_capture(
        project=demo, user=users["scheduler"], name="Contract"
    )
    base = {
        a["key"]: {
            "start": a["early_start"],
            "finish": a["early_finish"],
            "duration": a["duration"],
        }
        for a in first.document["activities"]
    }
    order = sorted(base, key=lambda k: (base[k]["start"], k))
    # Every seventh activity in start order never starts: it is late.
    idle = {k for i, k in enumerate(order) if i % 7 == 3}
    origin = min(a["start"] for a in base.values())
    pd = busdays(origin, next_day(first.document["project"]["finish"]))
    curve = expected_pv_curve(base, origin, pd)
    bac = float(sum(a["duration"] for a in base.values()))
    state: dict[str, str] = {}  # key -> "started" | "finished"
    previous: dict[str, Any] | None = None

    for day in DATA_DATES:
        demo = set_data_date(demo, day)
        for key in order:
            b = base[key]
            if key in idle or b["start"] >= day.isoformat():
                continue
            start = dt.date.fromisoformat(b["start"])
            if b["finish"] < day.isoformat():
                if state.get(key) != "finished":
                    record(
                        demo,
                        users["site_manager"],
                        key,
                        monkeypatch,
                        actual_start=start,
                        actual_finish=dt.date.fromisoformat(b["finish"]),
                    )
                    state[key] = "finished"
            elif key not in state:
                record(
                    demo,
                    users["site_manager"],
                    key,
                    monkeypatch,
                    actual_start=start,
                    percent_complete=HALF,
                )
                state[key] = "started"
        version = publish(demo)
        demo.refresh_from_db()
        got = report.report_build(project=demo, use_cache=False)
        forecast = services.forecast_get(project=demo)

        share = {
            k: {"finished": 1.0, "started": HALF / 100}.get(state.get(k, ""), 0.0)
            for k in base
        }
        ev = sum(base[k]["duration"] * share[k] for k in base)
        at = busdays(origin, day)
        pv = curve[min(at, pd)]
        es = expected_es(curve, ev)

        # Percent complete by duration (no planned values in the demo).
        pc = got["percent_complete"]
        assert pc["by_duration"] == pytest.approx(100 * ev / bac, abs=0.01)
        assert pc["by_value"] is None
        assert pc["finished"] == sum(1 for s in state.values() if s == "finished")

        # Earned value, duration basis (PMI Practice Standard for EVM formulas).
        evs = got["earned_value"]
        assert evs["basis"] == "duration"
        assert evs["bac"] == pytest.approx(bac)
        assert evs["pv"] == pytest.approx(pv, abs=0.01)
        assert evs["ev"] == pytest.approx(ev, abs=0.01)
        assert evs["sv"] == pytest.approx(ev - pv, abs=0.01)
        assert evs["spi"] == pytest.approx(ev / pv, abs=1e-4)
        assert evs["ac"] is None and evs["cpi"] is None and evs["ac_reason"]

        # Earned schedule (Lipke 2003): ES, SV(t), SPI(t), IEAC(t) = PD/SPI(t).
        ess = got["earned_schedule"]
        assert ess["at"] == at and ess["pd"] == pd
        assert ess["es"] == pytest.approx(es, abs=0.01)
        assert ess["sv_t"] == pytest.approx(es - at, abs=0.01)
        assert ess["spi_t"] == pytest.approx(es / at, abs=1e-4)
        assert ess["ieac_t"] == pytest.approx(pd / (es / at), abs=0.01)
        # The finish it implies: the last of IEAC(t) working days (rounded up)
        # counted from the baseline start.
        whole = int(np.ceil(ess["ieac_t"]))
        assert ess["ieac_t_finish"] == str(
            np.busday_offset(origin, whole - 1, roll="forward", holidays=HOLIDAYS)
        )

        # Forecast finish against the baseline and the previous report.
        fin = got["finish"]
        assert fin["forecast"] == forecast["project"]["finish"]
        assert fin["baseline"] == captured.finish.isoformat()
        assert fin["variance_to_baseline"] == busdays(captured.finish, fin["forecast"])
        if previous is None:
            assert fin["previous_report"] is None
        else:
            assert fin["previous_report"] == previous["finish"]
            assert fin["variance_to_previous"] == busdays(
                previous["finish"], fin["forecast"]
            )
        assert [s["key"] for s in fin["driving_path"]] == [
            s["key"] for s in forecast["critical_path"]
        ]

        # Since the previous data date, and late against the baseline.
        since = got["since_previous"]
        lower = previous["day"].isoformat() if previous else ""
        assert {r["key"] for r in since["started"]} == {
            k for k in state if base[k]["start"] >= lower
        }
        assert {r["key"] for r in since["finished"]} == {
            k
            for k, s in state.items()
            if s == "finished" and base[k]["finish"] >= lower
        }
        late = got["late"]
        assert {r["key"] for r in late["to_start"]} == {
            k for k in idle if base[k]["start"] < day.isoformat()
        }
        assert {r["key"] for r in late["to_finish"]} == {
            k
            for k in base
            if base[k]["finish"] < day.isoformat() and state.get(k) != "finished"
        }
        for r in late["to_start"]:
            assert r["days_late"] == busdays(r["baseline_start"], day)

        # Critical and near-critical: total float of the forecast up to 5 days.
        assert {r["key"] for r in got["critical"]["activities"]} == {
            a["key"]
            for a in forecast["activities"]
            if a["total_float"] <= 5 and a.get("status") != "finished"
        }

        # Milestones: slipped ones first, variances in working days.
        ms = got["milestones"]
        assert {m["key"] for m in ms} == {k for k in base if base[k]["duration"] == 0}
        flags = [m["slipped"] for m in ms]
        assert flags == sorted(flags, reverse=True)
        for m in ms:
            when = m["actual"] or m["forecast"]
            assert m["variance"] == busdays(base[m["key"]]["finish"], when)
        previous = {"finish": version.finish.isoformat(), "day": day}

    # Every entry so far moved the percent complete on.
    assert got["s_curve"]["earned"][-1]["value"] == pytest.approx(ev, abs=0.01)
    assert len(got["s_curve"]["earned"]) == len(DATA_DATES)
