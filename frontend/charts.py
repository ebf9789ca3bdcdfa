"""Bar charts and crew histograms as SVG text, from plain data.

Pure Python, no Django: the pages and the PDF report share it. The inputs are
the ``sitepace.schedule/1`` document (critical path or levelled), the
``sitepace.network/1`` document (calendars, crews, demands, relations) and an
optional baseline (activity key → (start, finish) dates). Every text that
reaches the SVG goes through :func:`html.escape`. The marks, colours and
patterns are those of :mod:`frontend.look`.

Geometry: a date axis counts calendar days from ``Axis.origin`` (a Monday);
day ``d`` spans ``[x(d), x(d) + px_per_day)``. A bar covers its start day to
its finish day inclusive, so ``x = x(start)`` and
``width = (finish − start + 1 day) · px_per_day``; a milestone is the point
at the start of its day, ``x(start)``.
"""

from __future__ import annotations

import datetime as dt
from collections import defaultdict
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from html import escape
from typing import Any

from scheduling.engine.calendars import WorkCalendar, calendars_from_document

from . import look

Baseline = Mapping[str, tuple[dt.date, dt.date]]

#: Pixels per calendar day at each zoom of the bar chart.
ZOOMS: dict[str, int] = {"days": 24, "weeks": 8, "months": 3}
GROUPINGS: dict[str, str] = {
    "zone": "zone",
    "trade": "trade",
    "crew": "crew",
    "none": "no grouping",
}
#: Histogram periods: one column per day, or per week (Monday to Sunday).
PERIODS: dict[str, str] = {"day": "daily demand", "week": "weekly totals"}

ROW_H = 28
LABEL_W = 300
HEAD_H = 44
HIST_PX_PER_DAY = 4
HIST_H = 120
HIST_PAD_TOP = 14
_DAY = dt.timedelta(days=1)
_MONTHS = "Jan Feb Mar Apr May Jun Jul Aug Sep Oct Nov Dec".split()


def _d(value: Any) -> dt.date | None:
    if value in (None, ""):
        return None
    if isinstance(value, dt.date):
        return value
    return dt.date.fromisoformat(str(value))


def _fmt(day: dt.date) -> str:
    return f"{day.day} {_MONTHS[day.month - 1]} {day.year}"


def is_levelled(schedule: Mapping[str, Any]) -> bool:
    """True when the document carries levelled dates (``start``/``finish``)."""
    acts = schedule.get("activities") or []
    return schedule.get("kind") == "levelled" or bool(acts and "start" in acts[0])


# --- calendars -------------------------------------------------------------


def _default_calendar(network: Mapping[str, Any]) -> WorkCalendar | None:
    cals = calendars_from_document(network)
    key = (network.get("project") or {}).get("calendar")
    if key in cals:
        return cals[key]
    return next(iter(cals.values()), None)


# --- axis ------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class Axis:
    """A date axis: ``origin`` (a Monday) at x = 0, ``days`` days long."""

    origin: dt.date
    days: int
    px_per_day: int

    def x(self, day: dt.date) -> int:
        return (day - self.origin).days * self.px_per_day

    @property
    def width(self) -> int:
        return self.days * self.px_per_day

    @property
    def end(self) -> dt.date:
        return self.origin + dt.timedelta(days=self.days)

    def dates(self) -> Iterable[dt.date]:
        for i in range(self.days):
            yield self.origin + dt.timedelta(days=i)


def axis_for(dates: Iterable[dt.date], px_per_day: int, pad_days: int = 7) -> Axis:
    """An axis from the Monday on or before the earliest date to a little past
    the latest, rounded up to whole weeks."""
    days = [d for d in dates if d is not None]
    if not days:
        days = [dt.date.today()]
    first, last = min(days), max(days)
    origin = first - dt.timedelta(days=first.weekday())
    span = (last - origin).days + 1 + pad_days
    span = -(-span // 7) * 7
    return Axis(origin, span, px_per_day)


# --- rows ------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class BarRow:
    """One activity as the bar chart draws it (dates inclusive)."""

    key: str
    name: str
    start: dt.date
    finish: dt.date
    early_start: dt.date
    early_finish: dt.date
    late_finish: dt.date
    total_float: int
    free_float: int
    critical: bool
    milestone: bool
    done: float
    status: str
    drivers: tuple[str, ...]
    zone: str
    trade: str
    crew: str
    baseline: tuple[dt.date, dt.date] | None = None


def activity_share_done(entry: Mapping[str, Any]) -> float:
    """Share of an activity's work done: 1 when finished, (duration − remaining)
    / duration when started, else 0."""
    status = entry.get("status") or "not_started"
    if status == "finished":
        return 1.0
    duration = int(entry.get("duration") or 0)
    if status != "started" or duration <= 0:
        return 0.0
    remaining = entry.get("remaining")
    if remaining is None:
        return 0.0
    return min(max((duration - float(remaining)) / duration, 0.0), 1.0)


def percent_complete(schedule: Mapping[str, Any]) -> float:
    """Project percent complete, weighted by duration in working days."""
    total = done = 0.0
    for a in schedule.get("activities") or []:
        duration = float(a.get("duration") or 0)
        total += duration
        done += duration * activity_share_done(a)
    return 100.0 * done / total if total else 0.0


def _main_crew(demands: Mapping[str, Any]) -> str:
    best, units = "", 0
    for crew, u in demands.items():
        if int(u) > units:
            best, units = crew, int(u)
    return best


def bar_rows(
    schedule: Mapping[str, Any],
    network: Mapping[str, Any],
    baseline: Baseline | None = None,
) -> list[BarRow]:
    """One row per activity, in the schedule's order, with the dates to draw."""
    levelled = is_levelled(schedule)
    demands = {
        a["key"]: a.get("demands") or {} for a in network.get("activities") or []
    }
    rows = []
    for a in schedule.get("activities") or []:
        es, ef = _d(a["early_start"]), _d(a["early_finish"])
        assert es is not None and ef is not None
        if levelled:
            start, finish = _d(a.get("start")) or es, _d(a.get("finish")) or ef
            lf = _d(a.get("level_late_finish")) or _d(a["late_finish"])
            tf = a.get("level_total_float", a["total_float"])
            ff = a.get("level_free_float", a["free_float"])
            crit = bool(a.get("level_critical", a["critical"]))
        else:
            start, finish, lf = es, ef, _d(a["late_finish"])
            tf, ff, crit = a["total_float"], a["free_float"], bool(a["critical"])
        assert lf is not None
        rows.append(
            BarRow(
                key=a["key"],
                name=a.get("name") or "",
                start=start,
                finish=finish,
                early_start=es,
                early_finish=ef,
                late_finish=lf,
                total_float=int(tf),
                free_float=int(ff),
                critical=crit,
                milestone=int(a.get("duration") or 0) == 0,
                done=activity_share_done(a),
                status=a.get("status") or "not_started",
                drivers=tuple(a.get("drivers") or ()),
                zone=a.get("zone") or "",
                trade=a.get("trade") or "",
                crew=_main_crew(demands.get(a["key"], {})),
                baseline=(baseline or {}).get(a["key"]),
            )
        )
    return rows


def group_rows(
    rows: Sequence[BarRow], by: str, crew_names: Mapping[str, str] | None = None
) -> list[tuple[str, list[BarRow]]]:
    """Rows grouped by zone, trade or main crew, groups in order of first start."""
    if by not in GROUPINGS:
        raise ValueError(f"group must be one of {', '.join(GROUPINGS)}, got {by!r}")
    if by == "none":
        return [("All activities", list(rows))]
    names = crew_names or {}
    groups: dict[str, list[BarRow]] = defaultdict(list)
    for r in rows:
        value = getattr(r, by)
        if by == "crew":
            title = names.get(value, value) if value else "No crew"
        else:
            title = value or f"No {by}"
        groups[title].append(r)
    return sorted(groups.items(), key=lambda g: (min(r.start for r in g[1]), g[0]))


# --- shared SVG pieces -----------------------------------------------------


def _a(value: Any) -> str:
    return escape(str(value), quote=True)


def defs() -> str:
    """Patterns shared by every chart (one ``<defs>``, put once on a page)."""
    return (
        "<defs>"
        f'<pattern id="{look.CRITICAL_PATTERN}" width="6" height="6" '
        'patternUnits="userSpaceOnUse" patternTransform="rotate(45)">'
        f'<rect width="6" height="6" fill="{look.CRITICAL}"/>'
        f'<rect width="2" height="6" fill="{look.INK}"/></pattern>'
        f'<pattern id="{look.OVER_PATTERN}" width="6" height="6" '
        'patternUnits="userSpaceOnUse">'
        f'<rect width="6" height="6" fill="{look.CRITICAL}"/>'
        f'<path d="M0 0L6 6M6 0L0 6" stroke="{look.INK}" stroke-width="1.2"/>'
        "</pattern>"
        f'<pattern id="{look.BAND_PATTERN}" width="10" height="{2 * ROW_H}" '
        'patternUnits="userSpaceOnUse">'
        f'<rect y="{ROW_H}" width="10" height="{ROW_H}" fill="{look.ROW_BAND}"/>'
        "</pattern></defs>"
    )


def defs_svg() -> str:
    """The shared patterns in a zero-size SVG for a page (not display:none:
    patterns inside a hidden SVG do not paint)."""
    return (
        '<svg class="sp-defs" width="0" height="0" aria-hidden="true" '
        'style="position:absolute" xmlns="http://www.w3.org/2000/svg">'
        f"{defs()}</svg>"
    )


def _non_working(axis: Axis, calendar: WorkCalendar | None, height: int | str) -> str:
    """Grey columns for each run of non-working days of ``calendar``; a height
    of ``"100%"`` fills whatever SVG viewport holds them, so one string serves
    every group."""
    if calendar is None:
        return ""
    out, run = [], None
    ppd = axis.px_per_day
    for i, day in enumerate(axis.dates()):
        off = not calendar.is_workday(day)
        if off and run is None:
            run = i
        elif not off and run is not None:
            out.append((run, i))
            run = None
    if run is not None:
        out.append((run, axis.days))
    return "".join(
        f'<rect class="nw" x="{a * ppd}" width="{(b - a) * ppd}" height="{height}" '
        f'fill="{look.NON_WORKING}"/>'
        for a, b in out
    )


def _data_date_line(axis: Axis, data_date: dt.date | None, height: int) -> str:
    if data_date is None or not axis.origin <= data_date <= axis.end:
        return ""
    x = axis.x(data_date)
    return (
        f'<line class="data-date" data-date="{data_date.isoformat()}" x1="{x}" '
        f'x2="{x}" y1="0" y2="{height}" stroke="{look.INK}" stroke-width="2"/>'
    )


def _svg(width: int, height: int, body: str, cls: str, label: str = "") -> str:
    aria = f' role="img" aria-label="{_a(label)}"' if label else ""
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" class="{cls}" width="{width}" '
        f'height="{height}" viewBox="0 0 {width} {height}"{aria}>{body}</svg>'
    )


def axis_body(axis: Axis, calendar: WorkCalendar | None, zoom: str) -> str:
    """The date header: months (or years) above, days / weeks / months below."""
    h = HEAD_H
    parts = [
        f'<rect width="{axis.width}" height="{h}" fill="{look.PAPER}"/>',
        _non_working(axis, calendar, h) if zoom == "days" else "",
    ]
    text = f'font-family="{look.FONT}" fill="{look.INK}"'
    ppd = axis.px_per_day
    day = axis.origin
    # Upper tier: a label and a rule at each month start (years at month zoom).
    while day < axis.end:
        if zoom == "months":
            nxt = dt.date(day.year + 1, 1, 1)
            label = str(day.year)
        else:
            nxt = (day.replace(day=1) + dt.timedelta(days=32)).replace(day=1)
            label = f"{_MONTHS[day.month - 1]} {day.year}"
        x = axis.x(day)
        parts.append(
            f'<line x1="{x}" x2="{x}" y1="0" y2="{h}" stroke="{look.INK}"/>'
            f'<text x="{x + 4}" y="16" font-size="13" font-weight="600" {text}>'
            f"{_a(label)}</text>"
        )
        day = nxt
    # Lower tier.
    for i, day in enumerate(axis.dates()):
        x = i * ppd
        if zoom == "days":
            parts.append(
                f'<text x="{x + ppd / 2:g}" y="37" font-size="11" '
                f'text-anchor="middle" {text}>{day.day}</text>'
            )
        elif zoom == "weeks" and day.weekday() == 0:
            parts.append(
                f'<line x1="{x}" x2="{x}" y1="24" y2="{h}" stroke="{look.MUTED}"/>'
                f'<text x="{x + 3}" y="38" font-size="11" {text}>{day.day}</text>'
            )
        elif zoom == "months" and day.day == 1:
            parts.append(
                f'<text x="{x + 3}" y="38" font-size="11" {text}>'
                f"{_MONTHS[day.month - 1]}</text>"
            )
    parts.append(
        f'<line x1="0" x2="{axis.width}" y1="{h - 0.5}" y2="{h - 0.5}" '
        f'stroke="{look.INK}"/>'
    )
    return "".join(parts)


# --- the bar chart ---------------------------------------------------------


def _bar_label(r: BarRow, levelled: bool) -> str:
    kind = "levelled" if levelled else "early"
    when = (
        f"{kind} date {_fmt(r.start)}"
        if r.milestone
        else f"{kind} dates {_fmt(r.start)} to {_fmt(r.finish)}"
    )
    what = ("critical " if r.critical else "") + ("milestone, " if r.milestone else "")
    if r.critical and not r.milestone:
        what = "critical, "
    drive = f", driven by {', '.join(r.drivers)}" if r.drivers else ""
    return (
        f"{r.key} {r.name}: {what}{when}, total float {r.total_float} working "
        f"days{drive}"
    )


def _bar(r: BarRow, axis: Axis, y0: int, levelled: bool) -> str:
    ppd = axis.px_per_day
    x = axis.x(r.start)
    parts = [
        f'<g class="bar" tabindex="0" role="img" data-activity="{_a(r.key)}" '
        f'data-name="{_a(r.name)}" data-critical="{str(r.critical).lower()}" '
        f'data-milestone="{str(r.milestone).lower()}" '
        f'data-start="{r.start.isoformat()}" data-finish="{r.finish.isoformat()}" '
        f'data-early-start="{r.early_start.isoformat()}" '
        f'data-early-finish="{r.early_finish.isoformat()}" '
        f'data-late-finish="{r.late_finish.isoformat()}" '
        f'data-total-float="{r.total_float}" data-free-float="{r.free_float}" '
        f'data-done="{round(r.done * 100)}" data-status="{_a(r.status)}" '
        f'data-drivers="{_a(" ".join(r.drivers))}" '
        f'aria-label="{_a(_bar_label(r, levelled))}">'
    ]
    if levelled and (r.early_start, r.early_finish) != (r.start, r.finish):
        ex = axis.x(r.early_start)
        ew = max(((r.early_finish - r.early_start).days + 1) * ppd, 2)
        if r.milestone:
            ex, ew = ex - 1, 2
        parts.append(
            f'<rect class="early-track" x="{ex}" y="{y0 + 3}" width="{ew}" '
            f'height="4" fill="none" stroke="{look.INK}" stroke-width="1"/>'
        )
    if r.baseline is not None:
        bs, bf = r.baseline
        bw = max(((bf - bs).days + 1) * ppd, 2)
        parts.append(
            f'<rect class="baseline" x="{axis.x(bs)}" y="{y0 + 22}" width="{bw}" '
            f'height="3" fill="{look.BASELINE}" data-baseline-start="{bs}" '
            f'data-baseline-finish="{bf}"/>'
        )
    if r.milestone:
        fill = f"url(#{look.CRITICAL_PATTERN})" if r.critical else look.PLAN
        mark = ' class="pennant mark-critical"' if r.critical else ' class="pennant"'
        parts.append(
            f'<rect class="milestone" x="{x - 1}" y="{y0 + 4}" width="2" '
            f'height="19" fill="{look.INK}"/>'
            f'<path{mark} d="M{x + 1} {y0 + 4}L{x + 13} {y0 + 9}L{x + 1} {y0 + 14}Z" '
            f'fill="{fill}" stroke="{look.INK}" stroke-width="1"/>'
        )
        end = x
    else:
        width = ((r.finish - r.start).days + 1) * ppd
        fill = f"url(#{look.CRITICAL_PATTERN})" if r.critical else look.PLAN
        cls = "plan mark-critical" if r.critical else "plan"
        parts.append(
            f'<rect class="{cls}" x="{x}" y="{y0 + 8}" width="{width}" height="12" '
            f'fill="{fill}" stroke="{look.INK}" stroke-width="1"/>'
        )
        if r.done > 0:
            parts.append(
                f'<rect class="done" x="{x}" y="{y0 + 12}" '
                f'width="{round(width * r.done)}" height="4" fill="{look.INK}"/>'
            )
        end = x + width
    if r.total_float > 0 and r.late_finish > r.finish:
        fx = axis.x(r.late_finish) + (0 if r.milestone else ppd)
        parts.append(
            f'<path class="float" d="M{end} {y0 + 14}H{fx}M{fx} {y0 + 10}V{y0 + 18}" '
            f'stroke="{look.INK}" stroke-width="1.5" stroke-dasharray="2 2" '
            'fill="none"/>'
        )
    parts.append("</g>")
    return "".join(parts)


def _relations(
    rows: Sequence[BarRow], axis: Axis, network: Mapping[str, Any], y_off: int = 0
) -> str:
    where = {r.key: (i, r) for i, r in enumerate(rows)}
    parts = []
    for rel in network.get("relations") or []:
        a, b = where.get(rel["pred"]), where.get(rel["succ"])
        if a is None or b is None:
            continue
        (ia, pa), (ib, pb) = a, b
        kind = rel.get("type", "FS")
        ppd = axis.px_per_day
        pend = axis.x(pa.finish) + (0 if pa.milestone else ppd)
        sx = axis.x(pa.start) if kind in ("SS", "SF") else pend
        send = axis.x(pb.finish) + (0 if pb.milestone else ppd)
        tx = axis.x(pb.start) if kind in ("FS", "SS") else send
        y1 = y_off + ia * ROW_H + 14
        y2 = y_off + ib * ROW_H + 14
        parts.append(
            f'<path class="relation" data-pred="{_a(pa.key)}" data-succ="{_a(pb.key)}"'
            f' d="M{sx} {y1}H{sx + 4}V{y2}H{tx}"'
            f' stroke="{look.RELATION}" fill="none" stroke-width="1"/>'
        )
    return f'<g class="relations" aria-hidden="true">{"".join(parts)}</g>'


def _labels(rows: Sequence[BarRow], y_off: int = 0) -> str:
    parts = []
    for i, r in enumerate(rows):
        y = y_off + i * ROW_H
        name = r.name if len(r.name) <= 24 else r.name[:23] + "…"
        wedge = (
            f'<path class="mark-critical" d="M4 {y + 7}L14 {y + 14}L4 {y + 21}Z" '
            f'fill="{look.INK}"/>'
            if r.critical
            else ""
        )
        parts.append(
            f'<g class="label" data-activity="{_a(r.key)}">{wedge}'
            f'<text x="18" y="{y + 18}" font-size="12" font-family="{look.MONO}" '
            f'font-weight="700" fill="{look.INK}">{_a(r.key)}</text>'
            f'<text x="128" y="{y + 18}" font-size="12" font-family="{look.FONT}" '
            f'fill="{look.INK}"><title>{_a(r.name)}</title>{_a(name)}</text></g>'
        )
    return "".join(parts)


def _bars_body(
    rows: Sequence[BarRow],
    axis: Axis,
    shading: str,
    data_date: dt.date | None,
    levelled: bool,
    network: Mapping[str, Any] | None,
) -> str:
    """One group's bars; ``shading`` is its non-working-day columns."""
    h = len(rows) * ROW_H
    return "".join(
        [
            f'<rect width="{axis.width}" height="{h}" fill="{look.PAPER}"/>',
            f'<rect width="{axis.width}" height="{h}" '
            f'fill="url(#{look.BAND_PATTERN})"/>',
            shading,
            _relations(rows, axis, network) if network is not None else "",
            *(_bar(r, axis, i * ROW_H, levelled) for i, r in enumerate(rows)),
            _data_date_line(axis, data_date, h),
        ]
    )


@dataclass(frozen=True, slots=True)
class BarGroup:
    title: str
    count: int
    critical: int
    labels_svg: str
    bars_svg: str


@dataclass(frozen=True, slots=True)
class BarChart:
    """A bar chart in parts for a page: header, groups, legend."""

    axis: Axis
    zoom: str
    levelled: bool
    axis_svg: str
    groups: list[BarGroup]
    legend_svg: str
    rows: int
    data_date: dt.date | None = None
    has_baseline: bool = False
    notes: list[str] = field(default_factory=list)


def bar_chart(
    schedule: Mapping[str, Any],
    network: Mapping[str, Any],
    *,
    zoom: str = "weeks",
    group: str = "zone",
    baseline: Baseline | None = None,
    relations: bool = False,
) -> BarChart:
    """The bar chart of ``schedule`` as SVG parts (one labels and one bars SVG
    per group, sharing one axis). Raises ValueError for an unknown zoom or
    grouping."""
    if zoom not in ZOOMS:
        raise ValueError(f"zoom must be one of {', '.join(ZOOMS)}, got {zoom!r}")
    levelled = is_levelled(schedule)
    rows = bar_rows(schedule, network, baseline)
    crew_names = {c["key"]: c.get("name") or c["key"] for c in network["crews"]}
    groups = group_rows(rows, group, crew_names)
    project = schedule.get("project") or {}
    data_date = _d(project.get("data_date"))
    axis = axis_for(_row_dates(rows, data_date), ZOOMS[zoom])
    calendar = _default_calendar(network)
    shading = _non_working(axis, calendar, "100%")
    parts = []
    for title, members in groups:
        h = len(members) * ROW_H
        label = f"{title}: {len(members)} activities"
        parts.append(
            BarGroup(
                title=title,
                count=len(members),
                critical=sum(r.critical for r in members),
                labels_svg=_svg(LABEL_W, h, _labels(members), "sp-labels"),
                bars_svg=_svg(
                    axis.width,
                    h,
                    _bars_body(
                        members,
                        axis,
                        shading,
                        data_date,
                        levelled,
                        network if relations else None,
                    ),
                    "sp-bars",
                    label,
                ),
            )
        )
    has_baseline = baseline is not None
    return BarChart(
        axis=axis,
        zoom=zoom,
        levelled=levelled,
        axis_svg=_svg(axis.width, HEAD_H, axis_body(axis, calendar, zoom), "sp-axis"),
        groups=parts,
        legend_svg=bar_legend(
            levelled=levelled,
            baseline=has_baseline,
            data_date=data_date,
            relations=relations,
        ),
        rows=len(rows),
        data_date=data_date,
        has_baseline=has_baseline,
    )


def _row_dates(rows: Sequence[BarRow], data_date: dt.date | None) -> list[dt.date]:
    out: list[dt.date] = [data_date] if data_date else []
    for r in rows:
        out += [r.start, r.finish, r.early_start, r.early_finish, r.late_finish]
        if r.baseline:
            out += list(r.baseline)
    return out


def bar_chart_svg(
    schedule: Mapping[str, Any],
    network: Mapping[str, Any],
    *,
    zoom: str = "weeks",
    group: str = "zone",
    baseline: Baseline | None = None,
    relations: bool = False,
    caution: str | None = None,
) -> str:
    """The whole bar chart as one standalone SVG document (for reports):
    labels at the left, the axis on top, group titles, legend and caution."""
    if zoom not in ZOOMS:
        raise ValueError(f"zoom must be one of {', '.join(ZOOMS)}, got {zoom!r}")
    levelled = is_levelled(schedule)
    rows = bar_rows(schedule, network, baseline)
    crew_names = {c["key"]: c.get("name") or c["key"] for c in network["crews"]}
    groups = group_rows(rows, group, crew_names)
    data_date = _d((schedule.get("project") or {}).get("data_date"))
    axis = axis_for(_row_dates(rows, data_date), ZOOMS[zoom])
    calendar = _default_calendar(network)
    body = [defs()]
    body.append(
        f'<g transform="translate({LABEL_W},0)">{axis_body(axis, calendar, zoom)}</g>'
    )
    y = HEAD_H
    for title, members in groups:
        body.append(
            f'<text class="group" x="6" y="{y + 19}" font-size="14" font-weight="700" '
            f'font-family="{look.FONT}" fill="{look.INK}">{_a(title)}</text>'
        )
        y += ROW_H
        body.append(f'<g transform="translate(0,{y})">{_labels(members)}</g>')
        body.append(
            f'<g transform="translate({LABEL_W},{y})">'
            + _bars_body(
                members,
                axis,
                _non_working(axis, calendar, len(members) * ROW_H),
                data_date,
                levelled,
                network if relations else None,
            )
            + "</g>"
        )
        y += len(members) * ROW_H
    legend, legend_h = _legend_body(
        _bar_legend_items(levelled, baseline is not None, data_date, relations)
    )
    body.append(f'<g transform="translate(0,{y + 12})">{legend}</g>')
    y += 12 + legend_h
    if caution:
        body.append(
            f'<text class="caution" x="6" y="{y + 18}" font-size="12" '
            f'font-family="{look.FONT}" fill="{look.INK}">Caution: {_a(caution)}'
            "</text>"
        )
        y += 28
    width = LABEL_W + axis.width
    return _svg(width, y, "".join(body), "sp-barchart", "Bar chart")


# --- legends ---------------------------------------------------------------

LEGEND_COL_W = 450
LEGEND_ROW_H = 26


def _swatch(kind: str) -> str:
    """A 40×20 sample of a mark."""
    ink = look.INK
    crit = f"url(#{look.CRITICAL_PATTERN})"
    plan = (
        f'<rect x="2" y="5" width="36" height="12" fill="{look.PLAN}" stroke="{ink}"/>'
    )
    if kind in ("plan_early", "plan_levelled"):
        return plan
    if kind == "critical":
        return (
            f'<rect x="2" y="5" width="36" height="12" fill="{crit}" stroke="{ink}"/>'
        )
    if kind in ("milestone", "milestone_critical"):
        fill = crit if kind == "milestone_critical" else look.PLAN
        return (
            f'<rect x="13" y="1" width="2" height="19" fill="{ink}"/>'
            f'<path d="M15 1L27 6L15 11Z" fill="{fill}" stroke="{ink}"/>'
        )
    if kind == "progress":
        return plan + f'<rect x="2" y="9" width="22" height="4" fill="{ink}"/>'
    if kind == "float":
        return (
            f'<path d="M2 11H36M36 7V15" stroke="{ink}" stroke-width="1.5" '
            'stroke-dasharray="2 2" fill="none"/>'
        )
    if kind == "early_track":
        return f'<rect x="2" y="8" width="36" height="4" fill="none" stroke="{ink}"/>'
    if kind == "baseline":
        return f'<rect x="2" y="9" width="36" height="3" fill="{look.BASELINE}"/>'
    if kind == "non_working":
        return f'<rect x="10" y="0" width="20" height="20" fill="{look.NON_WORKING}"/>'
    if kind == "data_date":
        return f'<line x1="20" x2="20" y1="0" y2="20" stroke="{ink}" stroke-width="2"/>'
    if kind == "relations":
        return f'<path d="M2 4H10V16H36" stroke="{look.RELATION}" fill="none"/>'
    if kind == "before":
        return (
            f'<rect x="10" y="4" width="20" height="16" fill="{look.PLAN_LIGHT}" '
            f'stroke="{look.PLAN}"/>'
        )
    if kind == "after":
        return f'<rect x="10" y="4" width="20" height="16" fill="{look.PLAN}"/>'
    if kind == "over":
        return (
            f'<rect x="10" y="2" width="20" height="12" '
            f'fill="url(#{look.OVER_PATTERN})" stroke="{ink}"/>'
            f'<rect x="10" y="17" width="20" height="3" fill="{ink}"/>'
        )
    if kind == "capacity":
        return (
            f'<path d="M2 14H20V8H38" stroke="{ink}" stroke-width="2.5" '
            'stroke-dasharray="6 3" fill="none"/>'
        )
    return ""


def _legend_body(items: Sequence[tuple[str, str]], columns: int = 2) -> tuple[str, int]:
    """Legend entries (mark kind or "" for a plain note, text) in columns."""
    parts = []
    for n, (kind, text) in enumerate(items):
        x = (n % columns) * LEGEND_COL_W
        y = (n // columns) * LEGEND_ROW_H
        swatch = (
            f'<g transform="translate({x + 4},{y + 2})">{_swatch(kind)}</g>'
            if kind
            else ""
        )
        parts.append(
            f'<g class="legend-item" data-mark="{_a(kind or "note")}">{swatch}'
            f'<text x="{x + 50}" y="{y + 16}" font-size="12.5" '
            f'font-family="{look.FONT}" fill="{look.INK}">{_a(text)}</text></g>'
        )
    rows = -(-len(items) // columns)
    return "".join(parts), rows * LEGEND_ROW_H


def _bar_legend_items(
    levelled: bool, baseline: bool, data_date: dt.date | None, relations: bool
) -> list[tuple[str, str]]:
    m = look.BAR_MARKS
    items = [
        ("plan_levelled", m["plan_levelled"])
        if levelled
        else ("plan_early", m["plan_early"]),
        ("critical", m["critical"]),
        ("milestone", m["milestone"]),
        ("milestone_critical", m["milestone_critical"]),
        ("progress", m["progress"]),
        ("float", m["float"]),
    ]
    if levelled:
        items.append(("early_track", m["early_track"]))
    else:
        items.append(("", "no levelled schedule published yet"))
    items.append(
        ("baseline", m["baseline"]) if baseline else ("", "no baseline captured yet")
    )
    items.append(("non_working", m["non_working"]))
    if data_date:
        items.append(("data_date", f"{m['data_date']}: {_fmt(data_date)}"))
    else:
        items.append(("", "no data date set: no progress recorded"))
    if relations:
        items.append(("relations", m["relations"]))
    return items


def bar_legend(
    *,
    levelled: bool,
    baseline: bool,
    data_date: dt.date | None = None,
    relations: bool = False,
) -> str:
    body, h = _legend_body(_bar_legend_items(levelled, baseline, data_date, relations))
    return _svg(2 * LEGEND_COL_W, h, body, "sp-legend", "Legend")


def crew_legend(*, levelled: bool, period: str) -> str:
    m = look.CREW_MARKS
    items = [("before", m["before"])]
    items.append(
        ("after", m["after"])
        if levelled
        else ("", "no levelled schedule published yet")
    )
    items += [("over", m["over"]), ("capacity", m["capacity"])]
    if period == "week":
        items.append(("", "weekly: unit-days; capacity × the crew's working days"))
    else:
        items.append(("", "daily: units on each day"))
    body, h = _legend_body(items)
    return _svg(2 * LEGEND_COL_W, h, body, "sp-legend", "Legend")


# --- crew histograms -------------------------------------------------------


def crew_demand(
    schedule: Mapping[str, Any], network: Mapping[str, Any], *, levelled: bool
) -> dict[str, dict[dt.date, int]]:
    """Units of each crew per date: early dates, or levelled ``start``/``finish``.

    An activity loads its crews on the working days of its own calendar from
    its start to its finish (the checker's rule); milestones and finished work
    load nothing, and started work only from the data date on.
    """
    cals = calendars_from_document(network)
    default = (network.get("project") or {}).get("calendar")
    acts = {a["key"]: a for a in network.get("activities") or []}
    data_date = _d((schedule.get("project") or {}).get("data_date"))
    load: dict[str, dict[dt.date, int]] = {
        c["key"]: defaultdict(int) for c in network.get("crews") or []
    }
    for s in schedule.get("activities") or []:
        a = acts.get(s["key"])
        if not a or not a.get("demands") or int(s.get("duration") or 0) <= 0:
            continue
        status = s.get("status") or "not_started"
        if status == "finished":
            continue
        first = _d(s["start"] if levelled else s["early_start"])
        last = _d(s["finish"] if levelled else s["early_finish"])
        assert first is not None and last is not None
        if status == "started" and data_date is not None:
            first = max(first, data_date)
        cal = cals.get(str(s.get("calendar") or a.get("calendar") or default))
        day = first
        while day <= last:
            if cal is None or cal.is_workday(day):
                for crew, units in a["demands"].items():
                    if crew in load:
                        load[crew][day] += int(units)
            day += _DAY
    return load


def crew_capacity(crew: Mapping[str, Any], day: dt.date) -> int:
    """The crew's capacity on ``day``: none on the dates it is away."""
    for away in crew.get("unavailable") or []:
        if _d(away["from"]) <= day <= _d(away["to"]):  # type: ignore[operator]
            return 0
    return int(crew.get("capacity") or 0)


@dataclass(frozen=True, slots=True)
class Column:
    day: dt.date
    days: int
    demand: int
    capacity: int


def crew_columns(
    crew: Mapping[str, Any],
    demand: Mapping[dt.date, int],
    axis: Axis,
    period: str,
    calendar: WorkCalendar | None,
) -> list[Column]:
    """Daily columns, or weekly totals (Monday to Sunday): demand in unit-days
    and capacity × the crew's working days in the week."""
    if period not in PERIODS:
        raise ValueError(f"period must be one of {', '.join(PERIODS)}, got {period!r}")
    out = []
    if period == "day":
        for day in axis.dates():
            out.append(Column(day, 1, demand.get(day, 0), crew_capacity(crew, day)))
        return out
    for week in range(axis.days // 7):
        first = axis.origin + dt.timedelta(days=7 * week)
        days = [first + dt.timedelta(days=i) for i in range(7)]
        cap = sum(
            crew_capacity(crew, d)
            for d in days
            if calendar is None or calendar.is_workday(d)
        )
        out.append(Column(first, 7, sum(demand.get(d, 0) for d in days), cap))
    return out


def _histogram_body(
    crew: Mapping[str, Any],
    columns: Sequence[Column],
    axis: Axis,
    top: int,
    plan: str,
    shading: str,
) -> str:
    """One panel: columns, over-capacity parts, the capacity step line;
    ``shading`` is the crew calendar's non-working-day columns (daily only)."""
    h = HIST_H
    unit = (h - HIST_PAD_TOP) / max(top, 1)
    ppd = axis.px_per_day
    parts = [
        f'<rect width="{axis.width}" height="{h}" fill="{look.PAPER}"/>',
        shading,
    ]
    # Unit rules, so heights can be read off.
    step = 1 if top <= 8 else (2 if top <= 16 else 5)
    for u in range(step, top + 1, step):
        y = round(h - u * unit, 1)
        parts.append(
            f'<line x1="0" x2="{axis.width}" y1="{y}" y2="{y}" '
            f'stroke="{look.NON_WORKING}" stroke-width="1"/>'
        )
    solid = plan == "levelled"
    for c in columns:
        if c.demand <= 0:
            continue
        x = axis.x(c.day)
        w = c.days * ppd - (1 if c.days > 1 else 0)
        within = min(c.demand, c.capacity)
        over = c.demand - within
        hy = round(h - within * unit, 1)
        fill = look.PLAN if solid else look.PLAN_LIGHT
        stroke = "" if solid else f' stroke="{look.PLAN}" stroke-width="1"'
        parts.append(
            f'<g class="col" data-crew="{_a(crew["key"])}" data-day="{c.day}" '
            f'data-days="{c.days}" data-demand="{c.demand}" '
            f'data-capacity="{c.capacity}" data-plan="{plan}" '
            f'data-over="{str(over > 0).lower()}">'
        )
        if within:
            parts.append(
                f'<rect x="{x}" y="{hy}" width="{w}" '
                f'height="{round(within * unit, 1)}" fill="{fill}"{stroke}/>'
            )
        if over:
            oy = round(h - c.demand * unit, 1)
            parts.append(
                f'<rect class="over" x="{x}" y="{oy}" width="{w}" '
                f'height="{round(over * unit, 1)}" fill="url(#{look.OVER_PATTERN})" '
                f'stroke="{look.INK}" stroke-width="0.6"/>'
                f'<rect class="over-base" x="{x}" y="{h - 3}" width="{w}" height="3" '
                f'fill="{look.INK}"/>'
            )
        parts.append("</g>")
    # Capacity as a step line over every column.
    path: list[str] = []
    for c in columns:
        x = axis.x(c.day)
        y = round(h - c.capacity * unit, 1)
        path.append(f"{'M' if not path else 'L'}{x} {y}H{x + c.days * ppd}")
    parts.append(
        f'<path class="capacity" d="{"".join(path)}" stroke="{look.INK}" '
        'stroke-width="2.5" stroke-dasharray="6 3" fill="none"/>'
    )
    parts.append(
        f'<line x1="0" x2="{axis.width}" y1="{h - 0.5}" y2="{h - 0.5}" '
        f'stroke="{look.INK}"/>'
    )
    return "".join(parts)


@dataclass(frozen=True, slots=True)
class CrewPanel:
    plan: str
    title: str
    peak: int
    peak_day: dt.date | None
    over_columns: int
    svg: str


@dataclass(frozen=True, slots=True)
class CrewChart:
    key: str
    name: str
    capacity: int
    panels: list[CrewPanel]


@dataclass(frozen=True, slots=True)
class Histograms:
    axis: Axis
    axis_svg: str
    period: str
    levelled: bool
    crews: list[CrewChart]
    legend_svg: str


def crew_histograms(
    schedule: Mapping[str, Any], network: Mapping[str, Any], *, period: str = "day"
) -> Histograms:
    """Per crew: demand against capacity before levelling (early dates) and,
    when the schedule is levelled, after levelling."""
    if period not in PERIODS:
        raise ValueError(f"period must be one of {', '.join(PERIODS)}, got {period!r}")
    levelled = is_levelled(schedule)
    before = crew_demand(schedule, network, levelled=False)
    after = crew_demand(schedule, network, levelled=True) if levelled else None
    dates: list[dt.date] = [d for load in before.values() for d in load]
    if after:
        dates += [d for load in after.values() for d in load]
    start = _d((schedule.get("project") or {}).get("start"))
    finish = _d((schedule.get("project") or {}).get("finish"))
    dates += [d for d in (start, finish) if d]
    axis = axis_for(dates, HIST_PX_PER_DAY)
    cals = calendars_from_document(network)
    default = _default_calendar(network)
    crews = []
    shading: dict[str, str] = {}
    for crew in network.get("crews") or []:
        cal = cals.get(crew.get("calendar") or "") or default
        cal_key = cal.key if cal else ""
        if cal_key not in shading:
            shading[cal_key] = (
                _non_working(axis, cal, HIST_H) if period == "day" else ""
            )
        plans = [("early", "Before levelling (early dates)", before[crew["key"]])]
        if after is not None:
            plans.append(("levelled", "After levelling", after[crew["key"]]))
        cols = {
            plan: crew_columns(crew, load, axis, period, cal) for plan, _, load in plans
        }
        top = max(
            [c.demand for cs in cols.values() for c in cs]
            + [c.capacity for cs in cols.values() for c in cs]
            + [1]
        )
        panels = []
        for plan, title, _load in plans:
            cs = cols[plan]
            peak_col = max(cs, key=lambda c: c.demand, default=None)
            peak = peak_col.demand if peak_col else 0
            over = sum(c.demand > c.capacity for c in cs)
            label = (
                f"{crew.get('name') or crew['key']}, {title.lower()}: peak {peak} "
                f"against capacity {crew['capacity']}"
                + (f", over capacity in {over} {period}s" if over else "")
            )
            panels.append(
                CrewPanel(
                    plan=plan,
                    title=title,
                    peak=peak,
                    peak_day=peak_col.day if peak_col and peak else None,
                    over_columns=over,
                    svg=_svg(
                        axis.width,
                        HIST_H,
                        _histogram_body(crew, cs, axis, top, plan, shading[cal_key]),
                        "sp-hist",
                        label,
                    ),
                )
            )
        crews.append(
            CrewChart(
                crew["key"],
                crew.get("name") or crew["key"],
                int(crew["capacity"]),
                panels,
            )
        )
    zoom = "weeks" if period == "day" else "months"
    return Histograms(
        axis=axis,
        axis_svg=_svg(axis.width, HEAD_H, axis_body(axis, default, zoom), "sp-axis"),
        period=period,
        levelled=levelled,
        crews=crews,
        legend_svg=crew_legend(levelled=levelled, period=period),
    )
