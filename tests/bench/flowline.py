"""A generated flow-line network: zones worked through by a sequence of trades.

Shaped like a large building programme: inside a zone the trades follow one
another (mostly FS, with SS and FF overlaps and the odd lead); each trade moves
from one zone to the next (the crew hand-over); and some extra links tie
activities of neighbouring zones. Half the zones work a 6-day week. Deterministic
for a given seed.
"""

from __future__ import annotations

import datetime as dt

import numpy as np

from scheduling.engine import FS, WorkCalendar, build_network
from scheduling.engine.network import Network


def flowline_columns(
    zones: int, trades: int, relations: int, seed: int = 7
) -> dict[str, object]:
    rng = np.random.default_rng(seed)
    n = zones * trades
    z = np.arange(n) // trades
    t = np.arange(n) % trades
    within = np.flatnonzero(t < trades - 1)
    handover = np.flatnonzero(z < zones - 1)
    pred = [within, handover]
    succ = [within + 1, handover + trades]
    have = len(within) + len(handover)
    extra_needed = max(relations - have, 0)
    seen = set((pred[0] * n + succ[0]).tolist()) | set((pred[1] * n + succ[1]).tolist())
    ep, es = [], []
    while len(ep) < extra_needed:
        k = (extra_needed - len(ep)) * 2
        a = rng.integers(0, n, k)
        dz = rng.integers(0, 3, k)
        dt_ = rng.integers(1, 6, k)
        b_z, b_t = z[a] + dz, t[a] + dt_
        ok = (b_z < zones) & (b_t < trades)
        a, b = a[ok], (b_z * trades + b_t)[ok]
        for x, y in zip(a.tolist(), b.tolist(), strict=True):
            if x * n + y not in seen:
                seen.add(x * n + y)
                ep.append(x)
                es.append(y)
                if len(ep) == extra_needed:
                    break
    pred.append(np.array(ep, dtype=np.int64))
    succ.append(np.array(es, dtype=np.int64))
    p = np.concatenate(pred)
    s = np.concatenate(succ)
    m = len(p)
    rtype = rng.choice(4, size=m, p=[0.7, 0.15, 0.1, 0.05])
    lag = np.where(rng.random(m) < 0.25, rng.integers(-2, 8, m), 0)
    caldays = (lag > 0) & (rng.random(m) < 0.3)
    duration = rng.integers(1, 21, n)
    duration[rng.random(n) < 0.03] = 0
    calendar = (z % 2).astype(np.int64)
    return {
        "keys": [f"Z{zi}-T{ti}" for zi, ti in zip(z.tolist(), t.tolist(), strict=True)],
        "duration": duration,
        "act_calendar": calendar,
        "rel_pred": p,
        "rel_succ": s,
        "rel_type": rtype,
        "rel_lag": lag,
        "rel_calendar_days": caldays,
    }


CALENDARS = (
    WorkCalendar.from_names(
        "weekdays",
        ["mon", "tue", "wed", "thu", "fri"],
        holidays=[dt.date(2027, 4, 2), dt.date(2027, 12, 24), dt.date(2027, 12, 31)],
    ),
    WorkCalendar.from_names("sixday", ["mon", "tue", "wed", "thu", "fri", "sat"]),
)


def flowline_network(columns: dict[str, object]) -> Network:
    return build_network(
        name="Flow-line programme",
        start=dt.date(2027, 3, 1),
        calendars=CALENDARS,
        **columns,  # type: ignore[arg-type]
    )


def fs_only(columns: dict[str, object]) -> dict[str, object]:
    m = len(columns["rel_pred"])  # type: ignore[arg-type]
    return {
        **columns,
        "rel_type": np.full(m, FS),
        "rel_lag": np.zeros(m, dtype=np.int64),
        "rel_calendar_days": np.zeros(m, dtype=bool),
    }
