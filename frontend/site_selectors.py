"""What the site page reads: the look-ahead of the crews' work and each
activity's progress, through the services. Nothing here writes."""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from typing import Any

from scheduling.bridge import network_document
from scheduling.engine.progress import FINISHED, STARTED
from scheduling.models import DelayReason, Project
from scheduling.progress_entries import EMPTY, progress_states_get, site_today
from scheduling.services import schedule_get

#: Today and the next three weeks.
LOOK_AHEAD_DAYS = 21
NO_CREW = ""


@dataclass
class Job:
    key: str
    name: str
    crew: str
    crew_name: str
    start: str
    finish: str
    critical: bool
    state: dict[str, Any]


@dataclass
class CrewGroup:
    crew: str
    name: str
    jobs: list[Job] = field(default_factory=list)


@dataclass
class Section:
    slug: str
    title: str
    day: dt.date | None
    crews: list[CrewGroup] = field(default_factory=list)

    @property
    def count(self) -> int:
        return sum(len(c.jobs) for c in self.crews)


def site_page_get(*, project: Project, crew: str = "") -> dict[str, Any]:
    """The look-ahead for today (the project's time zone) and the next 21 days.

    Planned dates come from the schedule readers work from (the published
    version: levelled ``start``/``finish`` when present, else the early
    dates), progress from the entries. Sections: work under way, work due to
    have started, then one per day with work planned to start, each grouped
    by crew (an activity needing two crews is listed under both).
    """
    today = site_today(project)
    last = today + dt.timedelta(days=LOOK_AHEAD_DAYS)
    schedule = schedule_get(project=project)
    published = schedule.get("published")
    forecast = (published or {}).get("forecast") or {
        "finish": schedule["project"]["finish"],
        "data_date": schedule["project"].get("data_date"),
    }
    network = network_document(project)
    crew_names = {c["key"]: c.get("name") or c["key"] for c in network["crews"]}
    demands = {a["key"]: sorted(a.get("demands") or {}) for a in network["activities"]}
    states = progress_states_get(project=project)
    ids = dict(project.activities.values_list("key", "id"))

    under_way = Section("under-way", "Under way", None)
    due = Section("due", "Due to have started", None)
    days: dict[dt.date, Section] = {}
    for a in schedule["activities"]:
        if a["key"] not in ids:
            continue
        state = states.get(ids[a["key"]], EMPTY)
        if state.status == FINISHED:
            continue
        start = dt.date.fromisoformat(a.get("start") or a["early_start"])
        finish = dt.date.fromisoformat(a.get("finish") or a["early_finish"])
        if state.status == STARTED:
            section = under_way
        elif start < today:
            section = due
        elif start <= last:
            section = days.setdefault(
                start, Section(f"day-{start.isoformat()}", _day_title(start), start)
            )
        else:
            continue
        for c in demands.get(a["key"]) or [NO_CREW]:
            if crew and c != crew:
                continue
            job = Job(
                key=a["key"],
                name=a.get("name") or "",
                crew=c,
                crew_name=crew_names.get(c, "No crew named"),
                start=start.isoformat(),
                finish=finish.isoformat(),
                critical=bool(a.get("critical")),
                state=state.as_dict(),
            )
            _group(section, c, job.crew_name).jobs.append(job)
    sections = [under_way, due, *(days[d] for d in sorted(days))]
    return {
        "today": today,
        "last_day": last,
        "sections": [s for s in sections if s.count],
        "crews": sorted(crew_names.items(), key=lambda kv: kv[1]),
        "crew": crew,
        "forecast": forecast,
        "published": published,
        "data_date": project.data_date,
        "delay_reasons": DelayReason.choices,
    }


def _group(section: Section, crew: str, name: str) -> CrewGroup:
    for g in section.crews:
        if g.crew == crew:
            return g
    group = CrewGroup(crew, name)
    section.crews.append(group)
    section.crews.sort(key=lambda g: (g.crew == NO_CREW, g.name))
    return group


def _day_title(day: dt.date) -> str:
    return f"{day:%a} {day.day} {day:%b}"
