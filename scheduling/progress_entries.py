"""Progress from site: append-only entries, the state they fold to, and the
service that records one safely over a weak signal.

**Derived state.** An activity's progress is the fold of its entries in server
order (ascending id). An entry overrides the fields it sets; ``percent_complete``
and ``remaining`` are two measures of one thing, so an entry that gives one
drops the other; an entry that gives ``actual_finish`` makes the activity
100 % complete with nothing remaining unless it says otherwise; a correction
may empty fields explicitly (``cleared``). The latest crew count, note and
delay reason win, and so does the latest ``actual_cost`` (the cost of the
work so far, cumulative). The state's ``version`` is the number of entries folded in:
the activity's *progress version*, which the device sends back as
``activity_version``.

**Records and corrections.** A record adds what happened: it may not change a
date already recorded, nor the progress of a finished activity. A correction
(an entry that names the entry it ``corrects``) may do both, and may clear
fields. Neither rewrites history: both are new entries.

**Conflicts.** An entry whose ``activity_version`` is older than the server's
was made without seeing what arrived since. It is refused with 409 and the
current state when it clashes with that news:

1. it gives an actual date that differs from the server's, and the server's
   value was set or changed after the device's version;
2. the server emptied an actual date since (a correction) and the entry gives
   an actual date;
3. the activity was finished since, and the entry would change its progress.

Anything else cannot clash and is accepted even when older: a note, a crew
count, a delay, a percent or remaining update on started work, values the
server already has, or a first date the server does not have yet.

**Idempotency.** ``Idempotency-Key`` is optional and unique per project and
user. A request with a key already used by the same user on the same project
gets the first answer again (nothing new is stored) when its body is the same,
and 422 when it is not. Only accepted entries are kept: a refused request
stores nothing, so its retry is judged afresh.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import re
import zoneinfo
from collections.abc import Callable, Iterable
from dataclasses import dataclass, replace
from decimal import Decimal
from typing import Any

from django.db import IntegrityError, transaction
from django.db.models import F, QuerySet
from django.utils import timezone

from scheduling.engine import NetworkInvalid, Problem, parse_network
from scheduling.engine.progress import FINISHED, NOT_STARTED, STARTED

from .errors import Conflict, Invalid, NotFound, ServiceError
from .models import (
    PROGRESS_FIELDS,
    Activity,
    DelayReason,
    EntryKind,
    ProgressEntry,
    Project,
)

DATES = ("actual_start", "actual_finish")
MAX_CREW = 1000
#: The largest actual cost an entry stores (14 digits, 2 after the point).
MAX_COST = Decimal("999999999999.99")
KEY_PATTERN = re.compile(r"^[A-Za-z0-9._:~-]{1,100}$")


@dataclass(frozen=True)
class ProgressState:
    """An activity's progress as its entries say, after ``version`` entries."""

    actual_start: dt.date | None = None
    actual_finish: dt.date | None = None
    percent_complete: int | None = None
    remaining: int | None = None
    crew_count: int | None = None
    actual_cost: Decimal | None = None
    note: str = ""
    delay_reason: str = ""
    delay_note: str = ""
    version: int = 0
    last_entry: int | None = None
    last_recorded_at: dt.datetime | None = None

    @property
    def status(self) -> str:
        if self.actual_finish is not None:
            return FINISHED
        return STARTED if self.actual_start is not None else NOT_STARTED

    def progress(self) -> dict[str, Any]:
        """The four progress fields, as the network document holds them."""
        return {f: getattr(self, f) for f in PROGRESS_FIELDS}

    def document_fields(self) -> dict[str, Any]:
        """The progress fields that are set, ISO dates (for the network document)."""
        out = {}
        for f, v in self.progress().items():
            if v is not None:
                out[f] = v.isoformat() if isinstance(v, dt.date) else v
        return out

    def as_dict(self) -> dict[str, Any]:
        def iso(v: Any) -> Any:
            return v.isoformat() if isinstance(v, dt.date | dt.datetime) else v

        return {
            "status": self.status,
            **{f: iso(v) for f, v in self.progress().items()},
            "crew_count": self.crew_count,
            "actual_cost": (
                None if self.actual_cost is None else float(self.actual_cost)
            ),
            "note": self.note,
            "delay_reason": self.delay_reason,
            "delay_note": self.delay_note,
            "version": self.version,
            "last_entry": self.last_entry,
            "last_recorded_at": iso(self.last_recorded_at),
        }


EMPTY = ProgressState()


def step(state: ProgressState, entry: ProgressEntry) -> ProgressState:
    """``state`` with one more entry folded in (see the module docstring)."""
    values = state.progress()
    for f in entry.cleared or ():
        if f in values:
            values[f] = None
    given = {f: getattr(entry, f) for f in PROGRESS_FIELDS}
    given = {f: v for f, v in given.items() if v is not None}
    if "percent_complete" in given and "remaining" not in given:
        values["remaining"] = None
    if "remaining" in given and "percent_complete" not in given:
        values["percent_complete"] = None
    if "actual_finish" in given:
        if "remaining" not in given:
            values["remaining"] = None
        if "percent_complete" not in given:
            values["percent_complete"] = 100
    values.update(given)
    extra: dict[str, Any] = {}
    if entry.crew_count is not None:
        extra["crew_count"] = entry.crew_count
    if entry.actual_cost is not None:
        extra["actual_cost"] = entry.actual_cost
    if entry.note:
        extra["note"] = entry.note
    if entry.delay_reason or entry.delay_note:
        extra["delay_reason"] = entry.delay_reason
        extra["delay_note"] = entry.delay_note
    return replace(
        state,
        **values,
        **extra,
        version=state.version + 1,
        last_entry=entry.pk,
        last_recorded_at=entry.recorded_at,
    )


def fold(entries: Iterable[ProgressEntry]) -> ProgressState:
    """The state after ``entries``, taken in the order given (server order)."""
    state = EMPTY
    for entry in entries:
        state = step(state, entry)
    return state


# ---------------------------------------------------------------------------
# Selectors


def progress_states_get(*, project: Project) -> dict[int, ProgressState]:
    """Activity id → its derived progress, for every activity with entries."""
    states: dict[int, ProgressState] = {}
    rows = (
        ProgressEntry.objects.filter(project=project, activity__isnull=False)
        .order_by("id")
        .only(
            "id",
            "activity_id",
            "recorded_at",
            "cleared",
            "crew_count",
            "actual_cost",
            "note",
            "delay_reason",
            "delay_note",
            *PROGRESS_FIELDS,
        )
    )
    for entry in rows:
        assert entry.activity_id is not None
        states[entry.activity_id] = step(states.get(entry.activity_id, EMPTY), entry)
    return states


def progress_list(*, project: Project, activity: str | None = None) -> QuerySet:
    """The project's entries in server order, optionally of one activity key."""
    qs = ProgressEntry.objects.filter(project=project).select_related("recorded_by")
    if activity:
        qs = qs.filter(activity_key=activity)
    return qs.order_by("id")


def progress_get(*, project: Project, entry_id: Any) -> ProgressEntry:
    try:
        return ProgressEntry.objects.select_related("recorded_by").get(
            project=project, pk=int(entry_id)
        )
    except (ProgressEntry.DoesNotExist, TypeError, ValueError):
        raise NotFound("no such progress entry in this project") from None


def site_today(project: Project) -> dt.date:
    """Today's date where the project is (its ``time_zone``)."""
    try:
        zone = zoneinfo.ZoneInfo(project.time_zone)
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        zone = zoneinfo.ZoneInfo("UTC")
    return timezone.now().astimezone(zone).date()


# ---------------------------------------------------------------------------
# Recording


class KeyReused(ServiceError):
    """An Idempotency-Key sent again with a different request."""

    status = 422
    code = "idempotency_key_reused"


class ProgressConflict(Conflict):
    """The entry clashes with progress the device had not seen; ``details``
    carries the activity's current state for the answer."""

    code = "progress_conflict"

    def __init__(self, message: str, problems: Iterable[Problem], current: dict):
        super().__init__(message, problems)
        self.details = {"current": current}


@dataclass(frozen=True)
class Recorded:
    answer: dict[str, Any]
    status: int
    replayed: bool
    entry_id: int


Render = Callable[[ProgressEntry, ProgressState], dict[str, Any]]


def progress_record(
    *,
    project: Project,
    user: Any,
    values: dict[str, Any],
    idempotency_key: str | None,
    render: Render,
) -> Recorded:
    """Check and store one entry; or replay the answer of an earlier request.

    ``values`` holds the entry's fields as validated input (``activity`` is
    the activity's key; dates as ``datetime.date``). ``render`` turns the
    stored entry and the state after it into the answer's body, which is kept
    with the entry so a retry gets exactly the same answer.

    Raises :class:`Invalid` (400) with one problem per bad field, naming the
    field and the activity; :class:`ProgressConflict` (409) for a clash with
    progress the device had not seen; :class:`KeyReused` (422). Nothing is
    stored on any error.
    """
    key = (idempotency_key or "").strip()
    if key and not KEY_PATTERN.match(key):
        raise Invalid(
            "the Idempotency-Key must be 1 to 100 letters, digits or ._:~-",
            [Problem("/idempotency_key", "bad_key", "use a UUID, for example")],
        )
    fingerprint = _fingerprint(values)
    if key:
        earlier = _replay(project, user, key, fingerprint)
        if earlier is not None:
            return earlier
    try:
        with transaction.atomic():
            # The activity's row lock orders concurrent entries on one activity;
            # entries on different activities go on side by side.
            activity = _locked_activity(project, values.get("activity"))
            if key:
                earlier = _replay(project, user, key, fingerprint)
                if earlier is not None:
                    return earlier
            recorded = _record(project, user, activity, values, key, fingerprint)
            answer = render(recorded[0], recorded[1])
            ProgressEntry.objects.filter(pk=recorded[0].pk).update(answer=answer)
            # Last, so the project row is held only for the commit.
            Project.objects.filter(pk=project.pk).update(
                progress_revision=F("progress_revision") + 1
            )
    except IntegrityError:
        # The same key from a request that committed just before this one.
        earlier = _replay(project, user, key, fingerprint) if key else None
        if earlier is not None:
            return earlier
        raise
    return Recorded(answer, 201, False, recorded[0].pk)


def _fingerprint(values: dict[str, Any]) -> str:
    text = json.dumps(values, sort_keys=True, default=str, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


def _replay(project: Project, user: Any, key: str, fingerprint: str) -> Recorded | None:
    earlier = (
        ProgressEntry.objects.filter(
            project=project, recorded_by=user, idempotency_key=key
        )
        .only("id", "fingerprint", "answer")
        .first()
    )
    if earlier is None:
        return None
    if earlier.fingerprint != fingerprint:
        raise KeyReused(
            f"the Idempotency-Key {key!r} was used for another entry (entry "
            f"{earlier.pk}); a retry must send the same request, a new entry a "
            "new key",
            [Problem("/idempotency_key", "key_reused", f"used by entry {earlier.pk}")],
        )
    return Recorded(earlier.answer, 201, True, earlier.pk)


def _locked_activity(project: Project, key: Any) -> Activity:
    found = (
        Activity.objects.select_for_update().filter(project=project, key=key).first()
        if isinstance(key, str)
        else None
    )
    if found is None:
        raise Invalid(
            f"no activity {key!r} in this project; nothing was stored",
            [Problem("/activity", "unknown_activity", f"no activity {key!r}")],
        )
    return found


def _record(
    project: Project,
    user: Any,
    activity: Activity,
    values: dict[str, Any],
    key: str,
    fingerprint: str,
) -> tuple[ProgressEntry, ProgressState]:
    entries = list(activity.progress_entries.order_by("id"))
    now = fold(entries)
    label = f"activity {activity.key}"
    corrects = _corrected(values.get("corrects"), entries, label)
    cleared = list(dict.fromkeys(values.get("cleared") or ()))
    entry = ProgressEntry(
        project=project,
        activity=activity,
        activity_key=activity.key,
        kind=EntryKind.CORRECTION if corrects else EntryKind.RECORD,
        corrects=corrects,
        actual_start=values.get("actual_start"),
        actual_finish=values.get("actual_finish"),
        percent_complete=values.get("percent_complete"),
        remaining=values.get("remaining"),
        cleared=cleared,
        crew_count=values.get("crew_count"),
        actual_cost=values.get("actual_cost"),
        note=values.get("note") or "",
        delay_reason=values.get("delay_reason") or "",
        delay_note=values.get("delay_note") or "",
        recorded_by=user,
        device_time=values.get("device_time"),
        recorded_at=timezone.now(),
        activity_version=values.get("activity_version"),
        idempotency_key=key,
        fingerprint=fingerprint,
    )
    after = step(now, entry)
    _check_conflict(entry, entries, now, after, label)
    _check_rules(project, entry, now, after, label)
    _check_with_engine(project, activity, after)
    entry.save(force_insert=True)
    after = replace(after, last_entry=entry.pk)
    return entry, after


def _corrected(
    target: Any, entries: list[ProgressEntry], label: str
) -> ProgressEntry | None:
    if target is None:
        return None
    for e in entries:
        if e.pk == target:
            return e
    raise Invalid(
        f"{label}: entry {target} is not an entry of this activity; nothing was stored",
        [
            Problem(
                "/corrects",
                "not_this_activity",
                f"{label}: corrects must name one of its own entries, got {target}",
            )
        ],
    )


def _changed(now: ProgressState, after: ProgressState) -> list[str]:
    return [f for f in PROGRESS_FIELDS if getattr(now, f) != getattr(after, f)]


def _check_conflict(
    entry: ProgressEntry,
    entries: list[ProgressEntry],
    now: ProgressState,
    after: ProgressState,
    label: str,
) -> None:
    seen = entry.activity_version
    if seen is None or seen == now.version:
        return
    if seen > now.version:
        raise Invalid(
            f"{label}: activity_version {seen} is newer than the server's "
            f"{now.version}; nothing was stored",
            [
                Problem(
                    "/activity_version",
                    "version_unknown",
                    f"{label}: the progress version is {now.version}, got {seen}",
                )
            ],
        )
    then = fold(entries[:seen])
    changed = _changed(now, after)
    problems = []
    for f in DATES:
        mine = getattr(entry, f)
        ours, before = getattr(now, f), getattr(then, f)
        if mine is not None and ours is not None and ours != before and mine != ours:
            problems.append(
                Problem(
                    f"/{f}",
                    "conflict",
                    f"{label}: {f} is {ours} on the server since your device read "
                    f"it; yours says {mine}",
                )
            )
    gives_date = any(getattr(entry, f) is not None for f in DATES)
    emptied = [f for f in DATES if getattr(then, f) and getattr(now, f) is None]
    if not problems and gives_date and emptied:
        problems.append(
            Problem(
                f"/{emptied[0]}",
                "conflict",
                f"{label}: a correction emptied {emptied[0]} since your device read it",
            )
        )
    if not problems and changed and now.status == FINISHED and then.status != FINISHED:
        problems.append(
            Problem(
                "/actual_finish",
                "conflict",
                f"{label}: it was recorded finished on {now.actual_finish} since "
                "your device read it",
            )
        )
    if problems:
        raise ProgressConflict(
            f"{label} changed since your device read it (progress version {seen}, "
            f"now {now.version}): {problems[0].message}. Nothing was stored; look "
            "at the current state and enter again",
            problems,
            current={"activity": entry.activity_key, **now.as_dict()},
        )


def _check_rules(
    project: Project,
    entry: ProgressEntry,
    now: ProgressState,
    after: ProgressState,
    label: str,
) -> None:
    """The rules the engine does not know (it checks the resulting state)."""
    problems: list[Problem] = []
    records = [
        entry.actual_start,
        entry.actual_finish,
        entry.percent_complete,
        entry.remaining,
        entry.crew_count,
        entry.actual_cost,
        entry.note,
        entry.delay_reason,
        entry.delay_note,
        entry.cleared,
    ]
    if all(v in (None, "", []) for v in records):
        problems.append(
            Problem(
                "/",
                "empty_entry",
                f"{label}: the entry records nothing; give a date, percent_complete, "
                "remaining, crew_count, actual_cost, a note or a delay",
            )
        )
    if entry.cleared and entry.kind != EntryKind.CORRECTION:
        problems.append(
            Problem(
                "/cleared",
                "clear_needs_correction",
                f"{label}: only a correction (corrects: <entry id>) may clear fields",
            )
        )
    today = site_today(project)
    for f in DATES:
        day = getattr(entry, f)
        if day is not None and day > today + dt.timedelta(days=1):
            problems.append(
                Problem(
                    f"/{f}",
                    "in_future",
                    f"{label}: {f} {day} is in the future (today on site is {today}, "
                    f"{project.time_zone})",
                )
            )
    if entry.crew_count is not None and not 0 <= entry.crew_count <= MAX_CREW:
        problems.append(
            Problem(
                "/crew_count",
                "out_of_range",
                f"{label}: crew_count must be 0 to {MAX_CREW} people, got "
                f"{entry.crew_count}",
            )
        )
    if entry.actual_cost is not None and not 0 <= entry.actual_cost <= MAX_COST:
        problems.append(
            Problem(
                "/actual_cost",
                "out_of_range",
                f"{label}: actual_cost is the cost of the work so far, 0 to "
                f"{MAX_COST:,}, got {entry.actual_cost}",
            )
        )
    if entry.delay_reason == DelayReason.OTHER and not entry.delay_note.strip():
        problems.append(
            Problem(
                "/delay_note",
                "delay_note_missing",
                f"{label}: a delay for another reason needs a delay_note saying what",
            )
        )
    if entry.kind == EntryKind.RECORD:
        changed = _changed(now, after)
        if now.status == FINISHED and changed:
            problems.append(
                Problem(
                    f"/{changed[0]}",
                    "already_finished",
                    f"{label}: it finished on {now.actual_finish}; progress on a "
                    f"finished activity needs a correction (corrects: "
                    f"{now.last_entry})",
                )
            )
        else:
            for f in DATES:
                mine, ours = getattr(entry, f), getattr(now, f)
                if mine is not None and ours is not None and mine != ours:
                    problems.append(
                        Problem(
                            f"/{f}",
                            "recorded_date_differs",
                            f"{label}: {f} is recorded as {ours}; to change a "
                            f"recorded date send a correction (corrects: "
                            f"{now.last_entry})",
                        )
                    )
    if problems:
        raise Invalid(
            f"{problems[0].message}; nothing was stored"
            + (f" ({len(problems)} problems)" if len(problems) > 1 else ""),
            problems,
        )


def _check_with_engine(
    project: Project, activity: Activity, after: ProgressState
) -> None:
    """The activity with the entry applied, checked by the engine; its
    problems point at the entry's fields.

    The engine's checks of progress are per activity (dates against the data
    date and the project start, finish after start, remaining and percent
    against the status, on the activity's calendar); what involves relations
    (work out of sequence) is a warning, never a refusal. So the document
    holds the project, its calendars and crews and this one activity: the
    check costs the same with ten activities or ten thousand, ten entries or
    ten thousand.
    """
    from .bridge import network_document

    document = network_document(project, states={activity.pk: after}, only=activity)
    index = 0
    try:
        parse_network(document)
    except NetworkInvalid as exc:
        prefix = f"/activities/{index}/"
        problems = [
            Problem("/" + p.pointer[len(prefix) :], p.code, p.message)
            if p.pointer.startswith(prefix)
            else p
            for p in exc.problems
        ]
        raise Invalid(f"{problems[0].message}; nothing was stored", problems) from None


def progress_overlay(*, project: Project, document: Any) -> Any:
    """``document`` with each activity's progress replaced by the recorded one.

    Progress comes from entries only: a network PUT carries progress fields
    read-only, and the check of the new network sees the recorded progress (so
    a data date moved before a recorded actual date is refused, naming the
    activity). Malformed parts are left for the engine to report.
    """
    if not isinstance(document, dict) or not isinstance(
        document.get("activities"), list
    ):
        return document
    states = progress_states_get(project=project)
    by_key = {a.key: states[a.pk] for a in project.activities.all() if a.pk in states}
    out = dict(document)
    acts = []
    for a in document["activities"]:
        if isinstance(a, dict):
            a = {k: v for k, v in a.items() if k not in PROGRESS_FIELDS}
            key = a.get("key")
            if isinstance(key, str) and key in by_key:
                a.update(by_key[key].document_fields())
        acts.append(a)
    out["activities"] = acts
    return out
