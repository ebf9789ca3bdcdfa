"""Build the Sitepace demo project and write it as a network document.

The job is invented: a six-storey mixed-use block with one basement level,
shops on the ground floor and flats on five upper floors. Every name in it is
made up. Run from the repository root::

    .venv/bin/python seed_data/make_demo.py

The output is deterministic: the same ``holidays`` data gives the same file.
"""

from __future__ import annotations

import json
from collections import Counter, deque
from pathlib import Path

import holidays

OUTPUT = Path(__file__).with_name("demo_network.json")

SCENARIO = [
    (
        "Invented demo job: Birkenwend Yard, a six-storey block over one basement car"
        " park, with shops on the ground floor and 40 flats on five upper floors, in"
        " the fictional town of Ostervenn."
    ),
    (
        "Built by the fictional contractor Marbeck & Tiedt Bau for the fictional"
        " Ostervenn Housing Cooperative; frame crews work six days a week, all other"
        " crews five, and both calendars keep the Bavarian public holidays."
    ),
]

PROJECT = {
    "name": "Birkenwend Yard, Ostervenn",
    "start": "2027-03-01",
    "calendar": "weekdays",
    "data_date": None,
    "deadline": None,
}

# Public holidays of Bavaria, Germany (country "DE", subdivision "BY"), for every
# year the job spans, as the `holidays` package lists them at generation time.
HOLIDAY_COUNTRY = "DE"
HOLIDAY_SUBDIV = "BY"
HOLIDAY_YEARS = (2027, 2028)

WORKDAYS = {
    "weekdays": ["mon", "tue", "wed", "thu", "fri"],
    "sixday": ["mon", "tue", "wed", "thu", "fri", "sat"],
}

# key: (name, capacity, calendar, trade)
CREWS = {
    "earthworks": ("Earthworks crew", 2, "sixday", "Earthworks"),
    "piling": ("Piling rig crew", 1, "sixday", "Piling"),
    "formwork": ("Formwork crew", 2, "sixday", "Formwork"),
    "rebar": ("Reinforcement crew", 2, "sixday", "Reinforcement"),
    "concrete": ("Concrete placing crew", 1, "sixday", "Concrete"),
    "steelmason": ("Steel erection and masonry crew", 2, "weekdays", "Masonry"),
    "roofing": ("Roofing and waterproofing crew", 1, "weekdays", "Roofing"),
    "facade": ("Façade and glazing crew", 2, "weekdays", "Façade"),
    "electrical": ("Electrical crew", 2, "weekdays", "Electrical"),
    "mech": ("Plumbing and HVAC crew", 2, "weekdays", "Plumbing and HVAC"),
    "drywall": ("Drywall and carpentry crew", 3, "weekdays", "Drywall"),
    "flooring": ("Screed and flooring crew", 1, "weekdays", "Flooring"),
    "painting": ("Painting and tiling crew", 3, "weekdays", "Painting"),
}

# Trade label for the steel work of the steel erection and masonry crew.
STEEL = "Steel erection"

# The formwork crew's summer holiday: two weeks away from site.
UNAVAILABLE = {"formwork": [("2027-08-02", "2027-08-14")]}

# Façade panels are made to order; the first batch cannot arrive earlier.
FACADE_PANELS_NOT_BEFORE = "2027-11-22"
# Contractual completion date for handing the building over to the client.
HANDOVER_DEADLINE = "2028-05-26"

# Concrete curing and screed drying, in elapsed days.
STRIP_AFTER_POUR = 7
SCREED_DRYING = 21

UPPER = ["L1", "L2", "L3", "L4", "L5"]
ZONES = {
    "SITE": "Site",
    "B": "Basement",
    "GF": "Ground floor",
    **{level: f"Level {level[1:]}" for level in UPPER},
    "RF": "Roof",
    "ENV": "Envelope",
    "BLDG": "Whole building",
    "EXT": "External works",
}


def _trade_of(demands: dict[str, int]) -> str:
    if set(demands) == {"electrical", "mech"}:
        return "Building services"
    return CREWS[next(iter(demands))][3]


class Builder:
    """Collects activities and relations in reading order."""

    def __init__(self) -> None:
        self.activities: dict[str, dict] = {}
        self.relations: list[dict] = []

    def task(
        self,
        key: str,
        name: str,
        duration: int,
        demands: dict[str, int],
        zone: str,
        *,
        not_before: str | None = None,
        trade: str | None = None,
    ) -> None:
        """Add work for crews that share one calendar, which the work then follows."""
        calendars = {CREWS[crew][2] for crew in demands}
        if len(calendars) != 1:
            raise ValueError(f"{key}: its crews work on different calendars")
        self._add(
            key,
            name,
            duration=duration,
            calendar=calendars.pop(),
            demands=demands,
            zone=zone,
            trade=trade or _trade_of(demands),
            not_before=not_before,
        )

    def milestone(
        self, key: str, name: str, zone: str, *, deadline: str | None = None
    ) -> None:
        self._add(
            key,
            name,
            duration=0,
            calendar="weekdays",
            demands={},
            zone=zone,
            trade="Management",
            deadline=deadline,
        )

    def _add(
        self,
        key: str,
        name: str,
        *,
        duration: int,
        calendar: str,
        demands: dict[str, int],
        zone: str,
        trade: str,
        not_before: str | None = None,
        deadline: str | None = None,
    ) -> None:
        if key in self.activities:
            raise ValueError(f"{key}: defined twice")
        self.activities[key] = {
            "key": key,
            "name": name,
            "duration": duration,
            "calendar": calendar,
            "demands": demands,
            "not_before": not_before,
            "deadline": deadline,
            "zone": ZONES[zone],
            "trade": trade,
            "milestone": duration == 0,
            "actual_start": None,
            "actual_finish": None,
            "remaining": None,
            "percent_complete": None,
        }

    def link(
        self,
        pred: str,
        succ: str,
        kind: str = "FS",
        lag: int = 0,
        *,
        days: bool = False,
    ) -> None:
        """Add one relation; ``days=True`` counts the lag in elapsed calendar days."""
        self.relations.append(
            {
                "pred": pred,
                "succ": succ,
                "type": kind,
                "lag": lag,
                "lag_unit": "calendar_days" if days else "workdays",
            }
        )

    def after(self, succ: str, *preds: str) -> None:
        """Plain finish-to-start links from each of ``preds`` to ``succ``."""
        for pred in preds:
            self.link(pred, succ)


def add_site(b: Builder) -> None:
    b.milestone("M-START", "Start on site", "SITE")
    b.task(
        "SITE-SETUP", "Hoarding, site cabins and welfare", 8, {"earthworks": 1}, "SITE"
    )
    b.task("SITE-POWER", "Temporary power and water", 4, {"electrical": 1}, "SITE")
    b.task("CRANE-BASE", "Tower crane base", 4, {"concrete": 1, "rebar": 1}, "SITE")
    b.task(
        "CRANE-ERECT", "Tower crane erection", 3, {"steelmason": 1}, "SITE", trade=STEEL
    )
    b.after("SITE-SETUP", "M-START")
    b.link("SITE-SETUP", "SITE-POWER", "SS", 2)
    b.after("CRANE-BASE", "SITE-SETUP")
    b.link("CRANE-BASE", "CRANE-ERECT", lag=7, days=True)
    b.after("CRANE-ERECT", "SITE-POWER")


def add_basement(b: Builder) -> None:
    b.task(
        "B-PILE-MOB", "Piling mat, guide walls and rig set-up", 5, {"piling": 1}, "B"
    )
    b.task("B-PILES", "Secant pile retaining wall", 22, {"piling": 1}, "B")
    b.task("B-CAP-BEAM", "Pile capping beam", 6, {"formwork": 1, "rebar": 1}, "B")
    b.task("B-EXCAV", "Bulk excavation to formation level", 18, {"earthworks": 2}, "B")
    b.task("B-DRAIN", "Below-slab drainage and sump pits", 6, {"mech": 1}, "B")
    b.task("B-BLINDING", "Blinding concrete", 2, {"concrete": 1}, "B")
    b.task("B-MEMBRANE", "Raft waterproofing membrane", 5, {"roofing": 1}, "B")
    b.task("B-RAFT-REBAR", "Basement raft reinforcement", 10, {"rebar": 2}, "B")
    b.task("B-RAFT-POUR", "Basement raft pour", 2, {"concrete": 1}, "B")
    b.task("B-WALL-REBAR", "Basement wall reinforcement", 9, {"rebar": 1}, "B")
    b.task("B-WALL-FORM", "Basement wall formwork", 10, {"formwork": 2}, "B")
    b.task("B-WALL-POUR", "Basement wall pours", 3, {"concrete": 1}, "B")
    b.task(
        "B-COL", "Basement columns and core walls", 8, {"formwork": 1, "rebar": 1}, "B"
    )
    b.milestone("M-BASEMENT", "Basement structure complete", "B")
    b.task("B-WALL-TANK", "Basement wall waterproofing", 5, {"roofing": 1}, "B")
    b.task(
        "B-BACKFILL",
        "Backfill and compaction around basement",
        6,
        {"earthworks": 1},
        "B",
    )

    b.after("B-PILE-MOB", "SITE-SETUP")
    b.after("B-PILES", "B-PILE-MOB")
    b.after("B-CAP-BEAM", "B-PILES")
    # The capping beam must gain strength before the dig unloads the pile wall.
    b.link("B-CAP-BEAM", "B-EXCAV", lag=7, days=True)
    # Drainage trenches start in the first bays dug to formation level.
    b.link("B-EXCAV", "B-DRAIN", lag=-3)
    b.after("B-BLINDING", "B-DRAIN")
    b.after("B-MEMBRANE", "B-BLINDING")
    b.after("B-RAFT-REBAR", "B-MEMBRANE", "CRANE-ERECT")
    b.after("B-RAFT-POUR", "B-RAFT-REBAR")
    b.after("B-WALL-REBAR", "B-RAFT-POUR")
    b.link("B-WALL-REBAR", "B-WALL-FORM", "SS", 3)
    b.after("B-WALL-POUR", "B-WALL-FORM")
    b.after("B-COL", "B-RAFT-POUR")
    b.after("M-BASEMENT", "B-WALL-POUR", "B-COL")
    b.link("B-WALL-POUR", "B-WALL-TANK", lag=10, days=True)


# Frame work per slab: (suffix, what, demands, days on the ground slab, days on an
# upper or the roof slab). The columns on a slab carry the slab above it.
FRAME = [
    ("SLAB-FORM", "slab formwork and props", {"formwork": 2}, 8, 6),
    ("SLAB-REBAR", "slab reinforcement", {"rebar": 2}, 7, 5),
    ("SLAB-POUR", "slab pour", {"concrete": 1}, 2, 1),
    ("STRIP", "slab striking and back-propping", {"formwork": 1}, 3, 2),
    ("COL", "columns and core walls", {"formwork": 1, "rebar": 1}, 6, 5),
]


def add_frame(b: Builder) -> None:
    """Ground slab, five suspended slabs, roof slab and the columns between them."""
    levels = ["GF", *UPPER, "RF"]
    for i, level in enumerate(levels):
        for suffix, what, demands, ground_days, upper_days in FRAME:
            if level == "RF" and suffix == "COL":
                continue
            days = ground_days if level == "GF" else upper_days
            b.task(f"{level}-{suffix}", f"{ZONES[level]} {what}", days, demands, level)
        b.after(f"{level}-SLAB-REBAR", f"{level}-SLAB-FORM")
        b.after(f"{level}-SLAB-POUR", f"{level}-SLAB-REBAR")
        b.link(f"{level}-SLAB-POUR", f"{level}-STRIP", lag=STRIP_AFTER_POUR, days=True)
        if level == "GF":
            b.after("GF-SLAB-FORM", "M-BASEMENT")
        else:
            # The struck tables go up to the next slab once the columns stand.
            below = levels[i - 1]
            b.after(f"{level}-SLAB-FORM", f"{below}-COL", f"{below}-STRIP")
        if level != "RF":
            b.after(f"{level}-COL", f"{level}-SLAB-POUR")
    b.milestone("M-TOPPED", "Structure topped out", "RF")
    b.after("M-TOPPED", "RF-SLAB-POUR")
    # The ground slab props the basement walls; backfill only once it has cured.
    b.after("B-BACKFILL", "B-WALL-TANK")
    b.link("GF-SLAB-POUR", "B-BACKFILL", lag=7, days=True)


def add_envelope(b: Builder) -> None:
    floors = ["GF", *UPPER]
    for i, level in enumerate(floors):
        above = floors[i + 1] if i + 1 < len(floors) else "RF"
        b.task(
            f"{level}-BLOCK",
            f"{ZONES[level]} blockwork walls and shafts",
            8,
            {"steelmason": 2},
            level,
        )
        b.after(f"{level}-BLOCK", f"{above}-STRIP")
        if level == "GF":
            b.task(
                "GF-SHOPFRONT",
                "Ground floor shopfronts and entrance doors",
                8,
                {"facade": 1},
                level,
            )
            # The shopfront sills sit on the backfilled ground along the street.
            b.after("GF-SHOPFRONT", "GF-BLOCK", "B-BACKFILL")
        else:
            b.task(
                f"{level}-WIN",
                f"{ZONES[level]} windows and balcony doors",
                6,
                {"facade": 1},
                level,
            )
            b.after(f"{level}-WIN", f"{level}-BLOCK")

    b.task("RF-INSUL", "Roof vapour barrier and insulation", 6, {"roofing": 1}, "RF")
    b.task("RF-MEMB", "Roof membrane", 6, {"roofing": 1}, "RF")
    b.task("RF-PARAPET", "Parapet copings and flashings", 4, {"roofing": 1}, "RF")
    # The roof slab must dry out before the vapour barrier goes down.
    b.link("RF-SLAB-POUR", "RF-INSUL", lag=14, days=True)
    b.after("RF-MEMB", "RF-INSUL")
    b.after("RF-PARAPET", "RF-MEMB")

    b.milestone("M-WATERTIGHT", "Building watertight", "ENV")
    b.after("M-WATERTIGHT", "RF-MEMB", "GF-SHOPFRONT", *(f"{lv}-WIN" for lv in UPPER))

    b.task(
        "STEEL-STAIRS",
        "Steel stairs and balustrades",
        10,
        {"steelmason": 1},
        "BLDG",
        trade=STEEL,
    )
    b.task(
        "STEEL-BALC", "Balcony steel frames", 12, {"steelmason": 1}, "ENV", trade=STEEL
    )
    b.after("STEEL-STAIRS", "M-TOPPED")
    b.after("STEEL-BALC", "STEEL-STAIRS")

    b.task(
        "FAC-PANELS",
        "Façade panel delivery and inspection",
        2,
        {"facade": 1},
        "ENV",
        not_before=FACADE_PANELS_NOT_BEFORE,
    )
    b.after("FAC-PANELS", "L1-WIN")
    elevations = ["north", "east", "south", "west"]
    for i, side in enumerate(elevations):
        key = f"FAC-{side[0].upper()}"
        b.task(key, f"Façade cladding, {side} elevation", 9, {"facade": 2}, "ENV")
        if i == 0:
            # Cladding climbs behind the window fitters and finishes after them.
            b.after(key, "FAC-PANELS", "L3-WIN")
            b.link("L5-WIN", key, "FF", 5)
        else:
            b.after(key, f"FAC-{elevations[i - 1][0].upper()}")
    # Balconies hang on the south elevation, so their frames go up first.
    b.after("FAC-S", "STEEL-BALC")


def add_services(b: Builder) -> None:
    b.task(
        "B-MEP-RI", "Basement plant room and car park services", 10, {"mech": 2}, "B"
    )
    b.task("B-ELEC-RI", "Basement switchroom and sub-mains", 8, {"electrical": 1}, "B")
    b.after("B-MEP-RI", "GF-STRIP")
    b.link("B-MEP-RI", "B-ELEC-RI", "SS", 2)

    b.task(
        "RISERS", "Vertical service risers", 12, {"mech": 1, "electrical": 1}, "BLDG"
    )
    b.after("RISERS", "M-TOPPED", "L5-BLOCK")
    b.task("RF-PLANT", "Rooftop plant installation", 6, {"mech": 1}, "RF")
    b.after("RF-PLANT", "RF-MEMB")
    b.task("RF-SOLAR", "Rooftop solar array", 4, {"electrical": 1}, "RF")
    b.after("RF-SOLAR", "RF-PARAPET")
    b.task(
        "CRANE-DISM",
        "Tower crane dismantling",
        3,
        {"steelmason": 1},
        "SITE",
        trade=STEEL,
    )
    b.after("CRANE-DISM", "RF-PLANT", "STEEL-BALC")

    b.task(
        "LIFT",
        "Lift installation and testing",
        15,
        {"mech": 1, "electrical": 1},
        "BLDG",
        trade="Lift",
    )
    b.after("LIFT", "M-WATERTIGHT")
    b.task(
        "UTIL-CONNECT",
        "Permanent power and water connections",
        5,
        {"electrical": 1},
        "EXT",
    )
    b.after("UTIL-CONNECT", "B-ELEC-RI", "RISERS")
    b.milestone("M-POWER", "Permanent power energised", "BLDG")
    b.after("M-POWER", "UTIL-CONNECT")


# Fit-out work per floor: (suffix, what, demands, days on a floor of flats, days on
# the ground floor, where 0 means the shops are handed over without it).
FIT_OUT = [
    ("MEP-RI", "plumbing and HVAC rough-in", {"mech": 1}, 8, 6),
    ("ELEC-RI", "electrical first fix", {"electrical": 1}, 8, 6),
    ("DRY", "drywall partitions and ceilings", {"drywall": 2}, 14, 6),
    ("SCREED", "floor screed", {"flooring": 1}, 3, 2),
    ("PAINT", "painting", {"painting": 2}, 8, 5),
    ("TILE", "bathroom tiling", {"painting": 1}, 8, 0),
    ("KITCH", "kitchens, doors and joinery", {"drywall": 1}, 6, 0),
    ("2FIX", "services second fix", {"electrical": 1, "mech": 1}, 6, 4),
    ("FLOOR", "floor finishes", {"flooring": 1}, 5, 4),
]


def add_fit_out(b: Builder) -> None:
    """Rough-in, partitions and finishes floor by floor, ground floor first."""
    b.task(
        "B-PAINT",
        "Basement painting and car park line marking",
        6,
        {"painting": 1},
        "B",
    )
    b.after("B-PAINT", "B-ELEC-RI")

    below = "B"
    for level in ["GF", *UPPER]:
        flats = level != "GF"
        for suffix, what, demands, flat_days, shop_days in FIT_OUT:
            days = flat_days if flats else shop_days
            if days:
                b.task(
                    f"{level}-{suffix}", f"{ZONES[level]} {what}", days, demands, level
                )

        here, down = f"{level}-", f"{below}-"
        b.after(here + "MEP-RI", down + "MEP-RI", here + "BLOCK")
        b.link(here + "MEP-RI", here + "ELEC-RI", "SS", 2)
        b.after(here + "ELEC-RI", down + "ELEC-RI")
        # Boarding follows the first-fix electricians around the floor.
        b.link(here + "ELEC-RI", here + "DRY", "SS", 3)
        b.after(here + "DRY", here + ("WIN" if flats else "SHOPFRONT"))
        b.after(here + "SCREED", here + "DRY")
        # The last coat goes on once the boards are finished and taped.
        b.link(here + "DRY", here + "PAINT", "FF", 2)
        if flats:
            b.after(here + "TILE", here + "SCREED")
            b.after(here + "KITCH", here + "PAINT")
            b.after(here + "2FIX", here + "KITCH", here + "TILE")
        else:
            b.after(here + "2FIX", here + "PAINT")
        b.link(here + "SCREED", here + "FLOOR", lag=SCREED_DRYING, days=True)
        b.after(here + "FLOOR", here + "2FIX")
        below = level
    b.after("L5-DRY", "M-WATERTIGHT")


def add_completion(b: Builder) -> None:
    b.task("COM-MEP", "Plumbing and HVAC commissioning", 8, {"mech": 1}, "BLDG")
    b.after("COM-MEP", "M-POWER", "RF-PLANT", "L5-2FIX")
    b.task(
        "COM-ELEC", "Electrical testing and commissioning", 6, {"electrical": 1}, "BLDG"
    )
    b.after("COM-ELEC", "M-POWER", "RF-SOLAR", "L5-2FIX")
    b.task(
        "COM-FIRE",
        "Fire alarm and life-safety tests",
        4,
        {"electrical": 1, "mech": 1},
        "BLDG",
    )
    b.after("COM-FIRE", "COM-MEP", "COM-ELEC", "LIFT", "STEEL-STAIRS")

    b.task("EXT-DRAIN", "External drainage", 8, {"earthworks": 1}, "EXT")
    b.after("EXT-DRAIN", "B-BACKFILL", "FAC-W")
    b.task("EXT-PAVE", "Paving, kerbs and car park ramp", 12, {"earthworks": 2}, "EXT")
    # Paving starts on the stretches where the drains are already in.
    b.link("EXT-DRAIN", "EXT-PAVE", lag=-2)
    b.after("EXT-PAVE", "CRANE-DISM")
    b.task("EXT-LAND", "Soft landscaping and planting", 6, {"earthworks": 1}, "EXT")
    b.after("EXT-LAND", "EXT-PAVE")

    b.task(
        "SNAG",
        "Snagging and defect rectification",
        12,
        {"drywall": 1, "painting": 1},
        "BLDG",
        trade="General",
    )
    b.after("SNAG", "B-PAINT", "FAC-W", *(f"{lv}-FLOOR" for lv in ["GF", *UPPER]))
    b.task("CLEAN", "Builder's clean", 4, {"painting": 2}, "BLDG", trade="General")
    b.after("CLEAN", "SNAG")
    b.milestone("M-INSPECT", "Building authority final inspection", "BLDG")
    b.after("M-INSPECT", "COM-FIRE", "EXT-PAVE")
    b.milestone("M-HANDOVER", "Handover to client", "BLDG", deadline=HANDOVER_DEADLINE)
    b.after("M-HANDOVER", "CLEAN", "M-INSPECT", "EXT-LAND")


def build() -> dict:
    b = Builder()
    for add in (
        add_site,
        add_basement,
        add_frame,
        add_envelope,
        add_services,
        add_fit_out,
        add_completion,
    ):
        add(b)
    public = holidays.country_holidays(
        HOLIDAY_COUNTRY, subdiv=HOLIDAY_SUBDIV, years=HOLIDAY_YEARS
    )
    holiday_dates = sorted(day.isoformat() for day in public)
    return {
        "scenario": SCENARIO,
        "format": "sitepace.network/1",
        "project": PROJECT,
        "calendars": [
            {
                "key": key,
                "workdays": days,
                "holidays": holiday_dates,
                "extra_workdays": [],
            }
            for key, days in WORKDAYS.items()
        ],
        "crews": [
            {
                "key": key,
                "name": name,
                "capacity": capacity,
                "calendar": calendar,
                "unavailable": [
                    {"from": start, "to": end}
                    for start, end in UNAVAILABLE.get(key, [])
                ],
            }
            for key, (name, capacity, calendar, _trade) in CREWS.items()
        ],
        "activities": list(b.activities.values()),
        "relations": b.relations,
    }


def reference_problems(doc: dict) -> list[str]:
    """Unknown calendars, crews or activities, and demands beyond a crew's size."""
    problems = []
    known = {a["key"] for a in doc["activities"]}
    calendars = {c["key"] for c in doc["calendars"]}
    capacity = {c["key"]: c["capacity"] for c in doc["crews"]}
    for act in doc["activities"]:
        if act["calendar"] not in calendars:
            problems.append(f"{act['key']}: unknown calendar")
        for crew, units in act["demands"].items():
            if not 1 <= units <= capacity.get(crew, 0):
                problems.append(f"{act['key']}: bad demand on {crew}")
        if act["duration"] > 0 and not act["demands"]:
            problems.append(f"{act['key']}: work without a crew")
    for rel in doc["relations"]:
        if rel["pred"] not in known or rel["succ"] not in known:
            problems.append(f"{rel['pred']} -> {rel['succ']}: unknown activity")
    return problems


def logic_problems(doc: dict) -> list[str]:
    """Self or duplicate relations, open ends and loops (relations known good)."""
    problems = []
    keys = [a["key"] for a in doc["activities"]]
    preds: dict[str, set[str]] = {k: set() for k in keys}
    succs: dict[str, set[str]] = {k: set() for k in keys}
    for rel in doc["relations"]:
        pred, succ = rel["pred"], rel["succ"]
        if pred == succ or succ in succs[pred]:
            problems.append(f"{pred} -> {succ}: self or duplicate relation")
        preds[succ].add(pred)
        succs[pred].add(succ)
    # Only the first activity may lack a predecessor, only the last a successor.
    if [k for k in keys if not preds[k]] != keys[:1]:
        problems.append("some activity besides the first has no predecessor")
    if [k for k in keys if not succs[k]] != keys[-1:]:
        problems.append("some activity besides the last has no successor")
    # Kahn's algorithm reaches every activity only if there is no loop.
    waiting = {k: len(preds[k]) for k in keys}
    queue = deque(k for k in keys if not waiting[k])
    reached = 0
    while queue:
        reached += 1
        for succ in succs[queue.popleft()]:
            waiting[succ] -= 1
            if not waiting[succ]:
                queue.append(succ)
    if reached != len(keys):
        problems.append("the relations contain a loop")
    return problems


def summary(doc: dict) -> Counter:
    rels = doc["relations"]
    counts = Counter(rel["type"] for rel in rels)
    counts["activities"] = len(doc["activities"])
    counts["milestones"] = sum(a["milestone"] for a in doc["activities"])
    counts["crews"] = len(doc["crews"])
    counts["relations"] = len(rels)
    counts["calendar-day lags"] = sum(r["lag_unit"] == "calendar_days" for r in rels)
    counts["leads"] = sum(r["lag"] < 0 for r in rels)
    return counts


def main() -> None:
    doc = build()
    problems = reference_problems(doc) or logic_problems(doc)
    if problems:
        raise ValueError("\n".join(problems))
    counts = summary(doc)
    OUTPUT.write_text(
        json.dumps(doc, indent=1, ensure_ascii=False) + "\n", encoding="utf-8"
    )
    fs_share = counts["FS"] / counts["relations"]
    print(f"wrote {OUTPUT.name}: " + ", ".join(f"{n} {k}" for k, n in counts.items()))
    print(f"FS share {fs_share:.1%}")


if __name__ == "__main__":
    main()
