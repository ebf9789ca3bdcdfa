"""The one bridge between stored rows and the engine's network document.

``network_document`` turns a project's rows into a ``sitepace.network/1``
document; ``network_rows_store`` writes a checked document back into rows,
matching activities, crews and calendars by key and relations by their pair,
so unchanged rows keep their ids and versions. Nothing else builds engine
input from rows.
"""

from __future__ import annotations

from decimal import Decimal
from typing import Any

from scheduling.engine.document import FORMAT

from .models import Activity, Calendar, Crew, OutOfSequence, Project, Relation


def _num(value: Decimal | None) -> float | None:
    return None if value is None else float(value)


def _date(value: Any) -> str | None:
    return None if value is None else value.isoformat()


def network_document(
    project: Project,
    *,
    states: dict[int, Any] | None = None,
    only: Activity | None = None,
) -> dict[str, Any]:
    """The project's network as a document; entries in the order they were made.

    Each activity carries the progress its entries fold to (``actual_start``,
    ``actual_finish``, ``percent_complete``, ``remaining``: only those set), and
    the project its ``out_of_sequence`` treatment when it is not the default
    ``retained_logic``. ``states`` (activity id → progress state) replaces the
    recorded progress, for checking an entry before it is stored. ``only``
    keeps that one activity and no relations: the engine's checks of an
    activity's own fields and progress, at a cost that does not grow with the
    network.
    """
    if states is None:
        from .progress_entries import progress_states_get

        states = progress_states_get(project=project)
    calendars = list(project.calendars.order_by("id"))
    cal_key = {c.id: c.key for c in calendars}
    default_cal = cal_key.get(project.calendar_id)
    activities = [only] if only is not None else list(project.activities.order_by("id"))
    act_key = {a.id: a.key for a in activities}
    relations = [] if only is not None else project.relations.order_by("id")
    head: dict[str, Any] = {
        "name": project.name,
        "start": _date(project.start),
        "calendar": default_cal,
        "data_date": _date(project.data_date),
        "deadline": _date(project.deadline),
    }
    if project.out_of_sequence != OutOfSequence.RETAINED_LOGIC:
        head["out_of_sequence"] = project.out_of_sequence
    return {
        "format": FORMAT,
        "project": head,
        "calendars": [
            {
                "key": c.key,
                "name": c.name,
                "workdays": c.workdays,
                "holidays": c.holidays,
                "extra_workdays": c.extra_workdays,
            }
            for c in calendars
        ],
        "crews": [
            {
                "key": c.key,
                "name": c.name,
                "capacity": c.capacity,
                "calendar": cal_key.get(c.calendar_id),
                "unavailable": c.unavailable,
            }
            for c in project.crews.order_by("id")
        ],
        "activities": [
            {
                "key": a.key,
                "name": a.name,
                "duration": a.duration,
                "calendar": cal_key.get(a.calendar_id),
                "demands": a.demands,
                "not_before": _date(a.not_before),
                "deadline": _date(a.deadline),
                "zone": a.zone or None,
                "trade": a.trade or None,
                "planned_value": _num(a.planned_value),
                "quantity": _num(a.quantity),
                "unit": a.unit or None,
                **(states[a.id].document_fields() if a.id in states else {}),
            }
            for a in activities
        ],
        "relations": [
            {
                "pred": act_key[r.pred_id],
                "succ": act_key[r.succ_id],
                "type": r.type,
                "lag": r.lag,
                "lag_unit": r.lag_unit,
            }
            for r in relations
        ],
    }


_CAL_FIELDS = ("name", "workdays", "holidays", "extra_workdays")
_ACT_FIELDS = (
    "name",
    "duration",
    "demands",
    "not_before",
    "deadline",
    "zone",
    "trade",
    "planned_value",
    "quantity",
    "unit",
)


def _sync(model, existing: dict[str, Any], wanted: list[dict[str, Any]], fields, build):
    """Create, update (bumping the version when anything changed) and delete.

    New rows go in with one bulk insert; changed rows are saved one by one
    (an edit usually changes few).
    """
    keep = set()
    rows = {}
    fresh = []
    for entry in wanted:
        key = entry["key"]
        keep.add(key)
        values = build(entry)
        row = existing.get(key)
        if row is None:
            row = model(key=key, **values)
            fresh.append(row)
        else:
            changed = [f for f, v in values.items() if getattr(row, f) != v]
            if changed:
                for f in changed:
                    setattr(row, f, values[f])
                row.version += 1
                row.save(update_fields=[*changed, "version"])
        rows[key] = row
    model.objects.bulk_create(fresh, batch_size=1000)
    gone = [row.pk for key, row in existing.items() if key not in keep]
    return rows, gone


def network_rows_store(project: Project, document: dict[str, Any]) -> None:
    """Write a document that ``parse_network`` accepted into the project's rows.

    Call inside a transaction. Optional fields absent from the document are
    stored empty. Progress fields are not stored here: progress comes from
    entries (``scheduling/progress_entries.py``).
    """
    from datetime import date

    def day(value: str | None) -> date | None:
        return date.fromisoformat(value) if value else None

    def dec(value: Any) -> Decimal | None:
        return None if value is None else Decimal(str(value))

    p = document["project"]
    old_cals = {c.key: c for c in project.calendars.all()}
    cals, gone_cals = _sync(
        Calendar,
        old_cals,
        document.get("calendars") or [],
        _CAL_FIELDS,
        lambda e: {
            "project": project,
            "name": e.get("name") or "",
            "workdays": list(e.get("workdays") or []),
            "holidays": sorted(e.get("holidays") or []),
            "extra_workdays": sorted(e.get("extra_workdays") or []),
        },
    )
    default = cals.get(p.get("calendar"))

    def cal_of(e: dict[str, Any]) -> Calendar | None:
        key = e.get("calendar")
        return cals[key] if key else None

    old_crews = {c.key: c for c in project.crews.all()}
    _, gone_crews = _sync(
        Crew,
        old_crews,
        document.get("crews") or [],
        ("name", "capacity", "calendar", "unavailable"),
        lambda e: {
            "project": project,
            "name": e.get("name") or "",
            "capacity": e["capacity"],
            "calendar": cal_of(e),
            "unavailable": list(e.get("unavailable") or []),
        },
    )
    old_acts = {a.key: a for a in project.activities.all()}
    acts, gone_acts = _sync(
        Activity,
        old_acts,
        document.get("activities") or [],
        _ACT_FIELDS,
        lambda e: {
            "project": project,
            "name": e.get("name") or "",
            "duration": e["duration"],
            "calendar": cal_of(e),
            "demands": dict(e.get("demands") or {}),
            "not_before": day(e.get("not_before")),
            "deadline": day(e.get("deadline")),
            "zone": e.get("zone") or "",
            "trade": e.get("trade") or "",
            "planned_value": dec(e.get("planned_value")),
            "quantity": dec(e.get("quantity")),
            "unit": e.get("unit") or "",
        },
    )
    old_rels = {(r.pred_id, r.succ_id): r for r in project.relations.all()}
    keep = set()
    fresh: list[Relation] = []
    for e in document.get("relations") or []:
        pair = (acts[e["pred"]].pk, acts[e["succ"]].pk)
        keep.add(pair)
        values = {
            "type": e.get("type", "FS"),
            "lag": e.get("lag", 0) or 0,
            "lag_unit": e.get("lag_unit", "workdays") or "workdays",
        }
        row = old_rels.get(pair)
        if row is None:
            fresh.append(
                Relation(project=project, pred_id=pair[0], succ_id=pair[1], **values)
            )
        elif any(getattr(row, f) != v for f, v in values.items()):
            for f, v in values.items():
                setattr(row, f, v)
            row.version += 1
            row.save()
    Relation.objects.filter(
        pk__in=[r.pk for pair, r in old_rels.items() if pair not in keep]
    ).delete()
    Relation.objects.bulk_create(fresh, batch_size=1000)
    Activity.objects.filter(pk__in=gone_acts).delete()
    Crew.objects.filter(pk__in=gone_crews).delete()

    project.name = p.get("name") or project.name
    project.start = day(p["start"])
    project.calendar = default
    project.data_date = day(p.get("data_date"))
    project.deadline = day(p.get("deadline"))
    # Absent means the default, as network_document leaves the default out.
    project.out_of_sequence = p.get("out_of_sequence") or OutOfSequence.RETAINED_LOGIC
    # Not progress_revision: progress entries move it on their own.
    project.save(
        update_fields=[
            "name",
            "start",
            "calendar",
            "data_date",
            "deadline",
            "out_of_sequence",
            "updated_at",
        ]
    )
    Calendar.objects.filter(pk__in=gone_cals).delete()
