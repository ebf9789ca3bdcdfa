"""Generated networks for the worker tests, as ``sitepace.network/1`` documents.

``crowded`` has many activities competing for a few small crews, so the
levelling keeps improving and proving for seconds: a worker can be stopped in
the middle of it. Deterministic for a given seed.
"""

from __future__ import annotations

import random
from typing import Any

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]


def crowded(activities: int = 90, seed: int = 5) -> dict[str, Any]:
    rng = random.Random(seed)
    crews = [
        {"key": f"crew{c}", "name": f"Crew {c}", "capacity": 2 + c % 2}
        for c in range(4)
    ]
    acts = []
    for i in range(activities):
        need = rng.sample(range(len(crews)), k=rng.choice((1, 1, 2)))
        acts.append(
            {
                "key": f"A{i:03d}",
                "name": f"Work package {i}",
                "duration": rng.randint(1, 9),
                "demands": {f"crew{c}": rng.randint(1, 2) for c in need},
            }
        )
    relations = []
    for i in range(1, activities):
        for j in rng.sample(
            range(max(0, i - 12), i), k=min(i, rng.choice((0, 1, 1, 2)))
        ):
            relations.append({"pred": f"A{j:03d}", "succ": f"A{i:03d}", "type": "FS"})
    return {
        "format": "sitepace.network/1",
        "project": {
            "name": "Generated depot",
            "start": "2027-03-01",
            "calendar": "weekdays",
        },
        "calendars": [{"key": "weekdays", "workdays": WEEKDAYS}],
        "crews": crews,
        "activities": acts,
        "relations": relations,
    }
