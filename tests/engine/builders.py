"""Small network documents for engine tests."""

from __future__ import annotations

from typing import Any

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]
SIX_DAYS = [*WEEKDAYS, "sat"]
ALL_DAYS = [*SIX_DAYS, "sun"]


def doc(
    activities: list[dict[str, Any]],
    relations: list[dict[str, Any]] = (),  # type: ignore[assignment]
    *,
    start: str = "2027-03-01",  # a Monday
    calendars: list[dict[str, Any]] | None = None,
    **project: Any,
) -> dict[str, Any]:
    """A network document; activities may be written as ``("KEY", duration)``."""
    acts = [
        {"key": a[0], "duration": a[1]} if isinstance(a, tuple) else a
        for a in activities
    ]
    rels = [
        {
            "pred": r[0],
            "succ": r[1],
            "type": r[2] if len(r) > 2 else "FS",
            "lag": r[3] if len(r) > 3 else 0,
            "lag_unit": r[4] if len(r) > 4 else "workdays",
        }
        if isinstance(r, tuple)
        else r
        for r in relations
    ]
    return {
        "format": "sitepace.network/1",
        "project": {
            "name": "Test job",
            "start": start,
            "calendar": "weekdays",
            **project,
        },
        "calendars": calendars
        or [{"key": "weekdays", "workdays": WEEKDAYS, "holidays": []}],
        "crews": [],
        "activities": acts,
        "relations": rels,
    }


def dates_by_key(network: Any, result: Any) -> dict[str, tuple[str, str, str, str]]:
    es, ef = result.dates(result.early_start_day), result.dates(result.early_finish_day)
    ls, lf = result.dates(result.late_start_day), result.dates(result.late_finish_day)
    return {k: (es[i], ef[i], ls[i], lf[i]) for i, k in enumerate(network.keys)}
