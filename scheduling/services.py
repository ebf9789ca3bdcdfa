"""Services (writes) and selectors (reads) of stored projects.

Every write checks the whole resulting network with the engine before any row
changes, then writes inside one transaction and moves the project's network
revision on. Views, tasks and commands call these functions and nothing lower.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from typing import Any

from django.contrib.auth import get_user_model
from django.db import transaction
from django.db.models import F

from scheduling.engine import (
    NetworkInvalid,
    Problem,
    critical_path,
    parse_network,
    schedule_document,
)
from scheduling.engine.network import Network

from .bridge import network_document, network_rows_store
from .errors import Invalid, NotFound, PreconditionFailed, PreconditionRequired
from .models import (
    Activity,
    Calendar,
    ComputedSchedule,
    Crew,
    Membership,
    Project,
    Relation,
    Role,
    ScheduleVersion,
)
from .progress_entries import progress_overlay

MODELS = {"calendars": Calendar, "crews": Crew, "activities": Activity}
SINGULAR = {"calendars": "calendar", "crews": "crew", "activities": "activity"}

WEEKDAYS = ["mon", "tue", "wed", "thu", "fri"]

#: The sections of the network document that hold keyed entries.
SECTIONS = ("calendars", "crews", "activities")


def network_check(document: Any) -> Network:
    """The engine's verdict on a whole document: a Network, or Invalid."""
    try:
        return parse_network(document)
    except NetworkInvalid as exc:
        raise Invalid(
            f"the network has {len(exc.problems)} problem(s); nothing was stored",
            exc.problems,
        ) from None


def _require_version(expected: int | None, current: int, what: str) -> None:
    if expected is None:
        raise PreconditionRequired(
            f"send If-Match with the {what}'s current ETag to change it"
        )
    if expected != current:
        raise PreconditionFailed(
            f"the {what} changed since you read it (yours: {expected}, "
            f"now: {current}); read it again and re-apply your change"
        )


def _claim(queryset: Any, field: str, expected: int | None, what: str) -> None:
    """Check the version inside the transaction, holding the row for the write.

    A no-op conditional UPDATE takes the row lock (PostgreSQL) or the write
    lock (SQLite) and tells whether the version still matches, so of two
    writers that read the same version exactly one gets through.
    """
    if expected is None:
        _require_version(expected, 0, what)
    held = queryset.filter(**{field: expected}).update(**{field: F(field)})
    if held != 1:
        current = queryset.values_list(field, flat=True).first()
        if current is None:
            raise NotFound(f"the {what} no longer exists")
        _require_version(expected, current, what)


def _locked(project: Project) -> Project:
    return Project.objects.select_for_update().get(pk=project.pk)


def project_create(*, user: Any, name: str, start: Any, **fields: Any) -> Project:
    """A new project with a Monday-to-Friday calendar; its creator schedules it."""
    document = {
        "format": "sitepace.network/1",
        "project": {
            "name": name,
            "start": start.isoformat() if hasattr(start, "isoformat") else start,
            "calendar": "weekdays",
            "data_date": fields.pop("data_date", None),
            "deadline": fields.pop("deadline", None),
            "out_of_sequence": fields.pop("out_of_sequence", None),
        },
        "calendars": [
            {"key": "weekdays", "name": "Monday to Friday", "workdays": WEEKDAYS}
        ],
        "crews": [],
        "activities": [],
        "relations": [],
    }
    for k in ("data_date", "deadline"):
        v = document["project"][k]
        if v is not None and hasattr(v, "isoformat"):
            document["project"][k] = v.isoformat()
    _check_project_only(document)
    with transaction.atomic():
        project = Project.objects.create(name=name, start=start, **fields)
        network_rows_store(project, document)
        Membership.objects.create(user=user, project=project, role=Role.SCHEDULER)
    return project


def _check_project_only(document: dict[str, Any]) -> None:
    """Check a document that may have no activity yet (a new project)."""
    try:
        parse_network(document)
    except NetworkInvalid as exc:
        real = [p for p in exc.problems if p.code != "no_activities"]
        if real:
            raise Invalid(
                "the project is not valid; nothing was stored", real
            ) from None


def network_replace(
    *, project: Project, document: Any, expected_revision: int | None
) -> Project:
    """Replace the whole network atomically, after checking all of it."""
    _require_version(expected_revision, project.revision, "network")
    # Progress comes from site entries; the document's progress fields are
    # read-only and the check sees the recorded progress.
    document = progress_overlay(project=project, document=document)
    if isinstance(document, dict) and not document.get("activities"):
        _check_project_only(document)
    else:
        network_check(document)
    with transaction.atomic():
        _claim(
            Project.objects.filter(pk=project.pk),
            "revision",
            expected_revision,
            "network",
        )
        locked = _locked(project)
        network_rows_store(locked, document)
        locked.revision += 1
        locked.save(update_fields=["revision", "updated_at"])
    return locked


Change = Callable[[dict[str, Any]], tuple[str, int] | None]


def network_edit(
    *, project: Project, change: Change, claim: Callable[[], None] | None = None
) -> Project:
    """Apply ``change`` to the project's document, check it, store it.

    ``change`` edits the document in place and returns the (section, index) of
    the entry it is about, so that problems with that entry are reported
    relative to it (``/duration`` rather than ``/activities/57/duration``).
    ``claim`` checks the client's version inside the transaction.
    """
    with transaction.atomic():
        if claim is not None:
            claim()
        locked = _locked(project)
        document = network_document(locked)
        before = copy.deepcopy(document)
        entry = change(document)
        if document == before:
            return locked
        try:
            if document["activities"]:
                parse_network(document)
            else:
                _check_project_only(document)
        except NetworkInvalid as exc:
            raise Invalid(
                "the change would make the network invalid; nothing was stored",
                _relative(exc.problems, document, entry),
            ) from None
        network_rows_store(locked, document)
        locked.revision += 1
        locked.save(update_fields=["revision", "updated_at"])
    return locked


def _relative(
    problems: tuple[Problem, ...],
    document: dict[str, Any],
    entry: tuple[str, int] | None,
) -> list[Problem]:
    if entry is None:
        return list(problems)
    section, index = entry
    prefix = f"/{section}/{index}"
    out = []
    for p in problems:
        if p.pointer == prefix or p.pointer.startswith(prefix + "/"):
            out.append(Problem(p.pointer[len(prefix) :] or "/", p.code, p.message))
        else:
            out.append(p)
    return out


def entry_index(document: dict[str, Any], section: str, key: str) -> int:
    for i, e in enumerate(document[section]):
        if e["key"] == key:
            return i
    raise NotFound(f"no {SINGULAR[section]} {key!r} in this project")


def keyed_save(
    *,
    project: Project,
    section: str,
    key: str | None,
    values: dict[str, Any],
    expected_version: int | None,
    current_version: int | None,
) -> Project:
    """Create (``key`` None) or change one calendar, crew or activity.

    A change of key carries over to every reference (relations, demands,
    calendars in use).
    """
    if key is not None:
        _require_version(expected_version, current_version or 0, SINGULAR[section])

    def change(doc: dict[str, Any]) -> tuple[str, int]:
        entries = doc[section]
        if key is None:
            if any(e["key"] == values.get("key") for e in entries):
                taken = f"key {values.get('key')!r} is taken"
                raise Invalid(
                    f"{SINGULAR[section]} {values.get('key')!r} exists already",
                    [Problem("/key", "duplicate_key", taken)],
                )
            entries.append(values)
            return section, len(entries) - 1
        i = entry_index(doc, section, key)
        new_key = values.get("key", key)
        entries[i] = {**entries[i], **values}
        if new_key != key:
            _rename(doc, section, key, new_key)
        return section, i

    claim = None
    if key is not None:
        rows = MODELS[section].objects.filter(project=project, key=key)
        claim = lambda: _claim(rows, "version", expected_version, SINGULAR[section])  # noqa: E731
    return network_edit(project=project, change=change, claim=claim)


def _rename(doc: dict[str, Any], section: str, old: str, new: str) -> None:
    if section == "activities":
        for r in doc["relations"]:
            r["pred"] = new if r["pred"] == old else r["pred"]
            r["succ"] = new if r["succ"] == old else r["succ"]
    elif section == "crews":
        for a in doc["activities"]:
            if old in (a.get("demands") or {}):
                a["demands"] = {
                    new if k == old else k: v for k, v in a["demands"].items()
                }
    elif section == "calendars":
        if doc["project"].get("calendar") == old:
            doc["project"]["calendar"] = new
        for e in doc["crews"] + doc["activities"]:
            if e.get("calendar") == old:
                e["calendar"] = new


def keyed_delete(
    *,
    project: Project,
    section: str,
    key: str,
    expected_version: int | None,
    current_version: int,
) -> Project:
    """Delete one calendar, crew or activity (an activity takes its relations)."""
    _require_version(expected_version, current_version, SINGULAR[section])

    def change(doc: dict[str, Any]) -> None:
        del doc[section][entry_index(doc, section, key)]
        if section == "activities":
            doc["relations"] = [
                r for r in doc["relations"] if key not in (r["pred"], r["succ"])
            ]
        return None

    rows = MODELS[section].objects.filter(project=project, key=key)
    return network_edit(
        project=project,
        change=change,
        claim=lambda: _claim(rows, "version", expected_version, SINGULAR[section]),
    )


def relation_save(
    *,
    project: Project,
    pair: tuple[str, str] | None,
    values: dict[str, Any],
    expected_version: int | None,
    current_version: int | None,
) -> Project:
    """Create (``pair`` None) or change one relation, named by its pair of keys."""
    if pair is not None:
        _require_version(expected_version, current_version or 0, "relation")

    def change(doc: dict[str, Any]) -> tuple[str, int]:
        if pair is None:
            doc["relations"].append(values)
            return "relations", len(doc["relations"]) - 1
        i = _relation_index(doc, pair)
        doc["relations"][i] = {**doc["relations"][i], **values}
        return "relations", i

    claim = None
    if pair is not None:
        rows = _relation_rows(project, pair)
        claim = lambda: _claim(rows, "version", expected_version, "relation")  # noqa: E731
    return network_edit(project=project, change=change, claim=claim)


def relation_delete(
    *,
    project: Project,
    pair: tuple[str, str],
    expected_version: int | None,
    current_version: int,
) -> Project:
    _require_version(expected_version, current_version, "relation")

    def change(doc: dict[str, Any]) -> None:
        del doc["relations"][_relation_index(doc, pair)]
        return None

    rows = _relation_rows(project, pair)
    return network_edit(
        project=project,
        change=change,
        claim=lambda: _claim(rows, "version", expected_version, "relation"),
    )


def _relation_rows(project: Project, pair: tuple[str, str]) -> Any:
    return Relation.objects.filter(
        project=project, pred__key=pair[0], succ__key=pair[1]
    )


def _relation_index(doc: dict[str, Any], pair: tuple[str, str]) -> int:
    for i, r in enumerate(doc["relations"]):
        if (r["pred"], r["succ"]) == pair:
            return i
    raise NotFound(f"no relation {pair[0]} → {pair[1]} in this project")


def project_update(
    *, project: Project, values: dict[str, Any], expected_revision: int | None
) -> Project:
    """Change the project's own fields; dates go through the network check."""
    _require_version(expected_revision, project.revision, "project")
    plain = {k: values.pop(k) for k in ("time_zone", "nightly_hour") if k in values}

    def change(doc: dict[str, Any]) -> None:
        for k, v in values.items():
            doc["project"][k] = v.isoformat() if hasattr(v, "isoformat") else v
        return None

    project = network_edit(
        project=project,
        change=change,
        claim=lambda: _claim(
            Project.objects.filter(pk=project.pk),
            "revision",
            expected_revision,
            "project",
        ),
    )
    if plain:
        for k, v in plain.items():
            setattr(project, k, v)
        project.save(update_fields=[*plain, "updated_at"])
    return project


def member_add(*, project: Project, username: str, role: str) -> Membership:
    user = get_user_model().objects.filter(username=username).first()
    if user is None:
        raise Invalid(
            f"no user {username!r}",
            [Problem("/username", "unknown_user", f"no user {username!r}")],
        )
    membership, _ = Membership.objects.update_or_create(
        user=user, project=project, defaults={"role": role}
    )
    return membership


def member_remove(*, membership: Membership) -> None:
    project = membership.project
    schedulers = project.members.filter(role=Role.SCHEDULER)
    if membership.role == Role.SCHEDULER and schedulers.count() == 1:
        raise Invalid(
            "a project keeps at least one scheduler",
            [Problem("/role", "last_scheduler", "the last scheduler cannot leave")],
        )
    membership.delete()


def schedule_get(*, project: Project) -> dict[str, Any]:
    """The schedule readers work from: the latest published version, or, while
    nothing is published, the critical path of the current revision and
    progress.

    ``published`` says which version it is (number, run, the revision and data
    date it was computed from, whether the network changed since), and its
    ``forecast`` sums up the critical path of the current network with the
    latest progress (see :func:`forecast_get`), so the forecast finish is
    current as soon as an entry is stored. ``published`` is None for the
    on-demand critical path, which is itself that forecast.
    """
    latest = ScheduleVersion.objects.filter(project=project).order_by("-number").first()
    if latest is not None:
        return {
            **latest.document,
            "published": {
                **version_summary(latest, project),
                "forecast": _forecast_summary(project),
            },
        }
    return {**schedule_cpm_get(project=project), "published": None}


def forecast_get(*, project: Project) -> dict[str, Any]:
    """The critical path of the current network with the latest progress.

    It is the on-demand schedule (:func:`schedule_cpm_get`), cached per
    (network revision, progress revision): an entry from site makes the next
    read compute it afresh, in well under a second for a site-sized network.
    """
    return schedule_cpm_get(project=project)


def _forecast_summary(project: Project) -> dict[str, Any] | None:
    try:
        return _summary_of(schedule_cpm_get(project=project))
    except Invalid:
        return None


def _summary_of(schedule: dict[str, Any]) -> dict[str, Any]:
    head = schedule["project"]
    return {
        "finish": head["finish"],
        "data_date": head.get("data_date"),
        "out_of_sequence": head.get("out_of_sequence"),
        "revision": schedule.get("revision"),
        "progress_revision": schedule.get("progress_revision", 0),
        "critical_path": [s["key"] for s in schedule.get("critical_path", [])],
        "out_of_sequence_pairs": [
            w for w in schedule.get("warnings", []) if w["code"] == "out_of_sequence"
        ],
    }


def version_summary(version: ScheduleVersion, project: Project) -> dict[str, Any]:
    return {
        "version": version.number,
        "kind": version.kind,
        "goal": version.goal or None,
        "run": version.run_id,
        "published_at": version.published_at.isoformat(),
        "revision": version.revision,
        "data_date": version.data_date.isoformat() if version.data_date else None,
        "network_revision": project.revision,
        "up_to_date": version.revision == project.revision,
    }


def versions_list(*, project: Project) -> Any:
    """The project's published versions, newest first, without their documents."""
    return (
        ScheduleVersion.objects.filter(project=project)
        .defer("document", "progress")
        .order_by("-number", "-id")
    )


def version_get(*, project: Project, number: Any) -> ScheduleVersion:
    try:
        return ScheduleVersion.objects.get(project=project, number=int(number))
    except (ScheduleVersion.DoesNotExist, TypeError, ValueError):
        raise NotFound(f"no schedule version {number} in this project") from None


def schedule_cpm_get(*, project: Project) -> dict[str, Any]:
    """The critical-path schedule of the current revision and progress, cached
    per (revision, progress_revision)."""
    # The counters as the caller read the project, before the network below:
    # a result is never labelled newer than what it was computed from.
    revision, progress_revision = project.revision, project.progress_revision
    cached = ComputedSchedule.objects.filter(project=project).first()
    if (
        cached is not None
        and cached.revision == revision
        and cached.document.get("progress_revision", 0) == progress_revision
    ):
        return cached.document
    document = network_document(project)
    if not document["activities"]:
        raise Invalid(
            "the project has no activities yet",
            [Problem("/activities", "no_activities", "add activities first")],
        )
    net = network_check(document)
    try:
        result = critical_path(net)
    except NetworkInvalid as exc:
        raise Invalid("the network cannot be scheduled", exc.problems) from None
    schedule = schedule_document(net, result)
    schedule["revision"] = revision
    schedule["progress_revision"] = progress_revision
    ComputedSchedule.objects.update_or_create(
        project=project, defaults={"revision": revision, "document": schedule}
    )
    return schedule


def csv_import(
    *, project: Project, section: str, text: str, expected_revision: int | None
) -> tuple[Project, dict[str, int]]:
    """Merge CSV rows into the network, all or nothing.

    Activities are matched by key, relations by their pair of keys: a matching
    entry is replaced, a new one added; nothing is deleted. Problems point at
    the CSV line (``/rows/<line>/<column>``).
    """
    from .csvio import RowProblems, csv_rows

    _require_version(expected_revision, project.revision, "network")
    try:
        rows, row_problems = csv_rows(text, section)
    except RowProblems as exc:
        raise Invalid(
            f"{len(exc.problems)} problem(s) in the CSV; nothing was stored",
            exc.problems,
        ) from None
    counts = {"added": 0, "changed": 0}
    line_of: dict[int, int] = {}

    def change(doc: dict[str, Any]) -> None:
        entries = doc[section]
        if section == "activities":
            where = {e["key"]: i for i, e in enumerate(entries)}
            ident = lambda e: e["key"]  # noqa: E731
        else:
            where = {(e["pred"], e["succ"]): i for i, e in enumerate(entries)}
            ident = lambda e: (e["pred"], e["succ"])  # noqa: E731
        for line, entry in rows:
            i = where.get(ident(entry))
            if i is None:
                entries.append(entry)
                i = where[ident(entry)] = len(entries) - 1
                counts["added"] += 1
            else:
                entries[i] = {**entries[i], **entry}
                counts["changed"] += 1
            line_of[i] = line
        if row_problems:
            # Report the network's problems with the readable rows too, then
            # refuse the whole file.
            try:
                parse_network(doc)
                found: tuple[Problem, ...] = ()
            except NetworkInvalid as exc:
                found = exc.problems
            every = [*row_problems, *_to_rows(found, section, line_of)]
            raise Invalid(
                f"{len(every)} problem(s) in the CSV; nothing was stored", every
            )
        return None

    with transaction.atomic():
        _claim(
            Project.objects.filter(pk=project.pk),
            "revision",
            expected_revision,
            "network",
        )
        try:
            project = network_edit(project=project, change=change)
        except Invalid as exc:
            if exc.problems and exc.problems[0].pointer.startswith("/rows"):
                raise
            raise Invalid(
                exc.message, _to_rows(exc.problems, section, line_of)
            ) from None
    return project, counts


def _to_rows(problems, section: str, line_of: dict[int, int]) -> list[Problem]:
    """Point problems of imported entries at their CSV lines."""
    out = []
    for p in problems:
        parts = p.pointer.split("/")
        if len(parts) > 2 and parts[1] == section and parts[2].isdigit():
            line = line_of.get(int(parts[2]))
            if line is not None:
                rest = "/".join(parts[3:])
                pointer = f"/rows/{line}" + (f"/{rest}" if rest else "")
                out.append(Problem(pointer, p.code, f"row {line}: {p.message}"))
                continue
        out.append(p)
    return out


def csv_export_section(*, project: Project, section: str) -> str:
    from .csvio import csv_export

    return csv_export(network_document(project), section)


def crew_peaks_get(*, project: Project) -> list[Any]:
    """Each crew's peak daily demand at early dates (engine ``crew_peaks``)."""
    from scheduling.engine import crew_peaks

    net = network_check(network_document(project))
    return crew_peaks(net, critical_path(net))


def demo_load(*, document: dict[str, Any], passwords: dict[str, str]) -> Project:
    """Load the demo network as a project with one user per role.

    ``passwords`` maps role → the password to set for that role's demo user
    (``demo-scheduler``, ``demo-site-manager``, ``demo-owner``); an existing
    demo project is brought up to date instead of duplicated.
    """
    users = {}
    model = get_user_model()
    for role in Role.values:
        user, _ = model.objects.get_or_create(username=DEMO_USERS[role])
        user.set_password(passwords[role])
        user.save(update_fields=["password"])
        users[role] = user
    name = document["project"]["name"]
    project = (
        Project.objects.filter(
            name=name,
            members__user=users[Role.SCHEDULER],
            members__role=Role.SCHEDULER,
        )
        .order_by("id")
        .first()
    )
    if project is None:
        project = project_create(
            user=users[Role.SCHEDULER], name=name, start=document["project"]["start"]
        )
    project = network_replace(
        project=project, document=document, expected_revision=project.revision
    )
    for role in (Role.SITE_MANAGER, Role.OWNER):
        member_add(project=project, username=DEMO_USERS[role], role=role)
    return project


DEMO_USERS = {
    Role.SCHEDULER: "demo-scheduler",
    Role.SITE_MANAGER: "demo-site-manager",
    Role.OWNER: "demo-owner",
}
