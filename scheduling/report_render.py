"""The status report (``report_build``'s dict) as a zip of CSV files or a PDF.

Both carry the site caution. The CSV zip holds one file per section, named
after the section. The PDF is meant to be forwarded as it is: the headline
figures, a bar chart of the critical and near-critical work, the S-curve
(planned against earned, cumulative), the milestone table and the other
sections as tables. Its marks follow the visual language of
``frontend/look.py`` (critical work orange and striped, a grey-brown baseline
strip below the bar, an ink data-date line).
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import zipfile
from collections.abc import Iterable, Sequence
from typing import Any

from fpdf import FPDF

from frontend import look

# ---------------------------------------------------------------------------
# CSV


def _csv(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> str:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow(["" if v is None else v for v in row])
    return out.getvalue()


def _pairs(section: dict[str, Any], skip: Sequence[str] = ()) -> list[list[Any]]:
    return [
        [k, v]
        for k, v in section.items()
        if k not in skip and not isinstance(v, dict | list)
    ]


def report_csv_files(report: dict[str, Any]) -> dict[str, str]:
    """File name → CSV text, one table per section of the report."""
    p = report["project"]
    files: dict[str, str] = {}
    files["summary.csv"] = _csv(
        ["field", "value"],
        [
            ["project", p["name"]],
            ["data_date", p["data_date"]],
            ["baseline", (report["sources"]["baseline"] or {}).get("name")],
            ["published_version", report["sources"]["published_version"]],
            ["near_critical_threshold", report["sources"]["near_critical_threshold"]],
            ["day_unit", report["sources"]["day_unit"]],
            ["caution", report["caution"]],
        ],
    )
    fin = report["finish"]
    files["finish.csv"] = _csv(["field", "value"], _pairs(fin))
    files["driving_path.csv"] = _csv(
        ["key", "name", "status", "start", "finish", "baseline_finish",
         "finish_variance", "driver"],
        [
            [s["key"], s["name"], s["status"], s["start"], s["finish"],
             s["baseline_finish"], s["finish_variance"], _driver(s.get("driver"))]
            for s in fin["driving_path"]
        ],
    )  # fmt: skip
    files["percent_complete.csv"] = _csv(
        ["field", "value"], _pairs(report["percent_complete"])
    )
    files["earned_value.csv"] = _csv(["field", "value"], _pairs(report["earned_value"]))
    files["earned_schedule.csv"] = _csv(
        ["field", "value"], _pairs(report["earned_schedule"])
    )
    curve = report["s_curve"]
    files["s_curve.csv"] = _csv(
        ["line", "period", "date", "value"],
        [["planned", r["period"], r["date"], r["value"]] for r in curve["planned"]]
        + [["earned", r["period"], r["date"], r["value"]] for r in curve["earned"]],
    )
    files["milestones.csv"] = _csv(
        ["key", "name", "baseline", "forecast", "actual", "variance", "slipped"],
        [
            [m["key"], m["name"], m["baseline"], m["forecast"], m["actual"],
             m["variance"], "yes" if m["slipped"] else "no"]
            for m in report["milestones"]
        ],
    )  # fmt: skip
    files["critical.csv"] = _csv(
        ["key", "name", "start", "finish", "duration", "total_float", "critical",
         "status"],
        [
            [r["key"], r["name"], r["start"], r["finish"], r["duration"],
             r["total_float"], "yes" if r["critical"] else "no", r["status"]]
            for r in report["critical"]["activities"]
        ],
    )  # fmt: skip
    since = report["since_previous"]
    files["since_previous.csv"] = _csv(
        ["change", "key", "name", "date"],
        [["started", r["key"], r["name"], r["actual_start"]] for r in since["started"]]
        + [
            ["finished", r["key"], r["name"], r["actual_finish"]]
            for r in since["finished"]
        ],
    )
    late = report["late"]
    files["late.csv"] = _csv(
        ["late_to", "key", "name", "baseline", "forecast", "days_late"],
        [
            ["start", r["key"], r["name"], r["baseline_start"], r["forecast_start"],
             r["days_late"]]
            for r in late["to_start"]
        ]
        + [
            ["finish", r["key"], r["name"], r["baseline_finish"],
             r["forecast_finish"], r["days_late"]]
            for r in late["to_finish"]
        ],
    )  # fmt: skip
    files["look_ahead.csv"] = _csv(
        ["crew", "key", "name", "start", "finish", "units", "status", "zone"],
        [
            [g["crew"] or "", a["key"], a["name"], a["start"], a["finish"],
             a["units"], a["status"], a["zone"]]
            for g in report["look_ahead"]["crews"]
            for a in g["activities"]
        ],
    )  # fmt: skip
    load = report["crew_load"]
    files["crew_load.csv"] = _csv(
        ["crew", "week", "capacity", "peak", "crew_days", "over_capacity"],
        [
            [c["crew"], week, c["capacity"], c["peak"][w], c["crew_days"][w],
             "yes" if c["peak"][w] > c["capacity"] else "no"]
            for c in load["crews"]
            for w, week in enumerate(load["weeks"])
        ],
    )  # fmt: skip
    nightly = report["nightly"]
    changes = nightly.get("changes") or {}
    files["nightly.csv"] = _csv(
        ["field", "value"],
        _pairs(nightly)
        + _pairs(changes)
        + [
            ["moved", f"{m['key']} {m['from']} -> {m['to']} ({m['shift_days']:+d})"]
            for m in changes.get("moved", [])
        ],
    )
    files["caution.csv"] = _csv(["caution"], [[report["caution"]]])
    return files


def report_csv_zip(report: dict[str, Any]) -> bytes:
    """The CSV files of the report in one zip (fixed timestamps: same report,
    same bytes)."""
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for name, text in report_csv_files(report).items():
            info = zipfile.ZipInfo(name, date_time=(2000, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            zf.writestr(info, text.encode("utf-8"))
    return out.getvalue()


def _driver(driver: Any) -> str:
    """A driving step in words: what holds the activity where it is."""
    if not isinstance(driver, dict):
        return "" if driver is None else str(driver)
    kind = driver.get("kind", "")
    if kind == "relation":
        lag = driver.get("lag") or 0
        text = f"{driver.get('type')} from {driver.get('pred')}"
        if lag:
            unit = (
                "calendar days"
                if driver.get("lag_unit") == "calendar_days"
                else ("working days")
            )
            text += f", lag {lag} {unit}"
        return text
    if kind == "crew":
        return f"crew {driver.get('crew')} after {driver.get('pred')}"
    words = [str(kind).replace("_", " ")]
    if driver.get("crew"):
        words.append(f"crew {driver['crew']}")
    if driver.get("date"):
        words.append(str(driver["date"]))
    return " ".join(words)


# ---------------------------------------------------------------------------
# PDF

_PLAIN = {
    "→": "->",
    "←": "<-",
    "–": "-",
    "—": "-",
    "’": "'",
    "‘": "'",
    "“": '"',
    "”": '"',
    "≤": "<=",
    "≥": ">=",
    "·": ".",
    "…": "...",
    "−": "-",
}


def _text(value: Any) -> str:
    """Text the PDF's built-in font can set (Latin-1), nothing dropped silently."""
    if value is None:
        return "-"
    text = str(value)
    for a, b in _PLAIN.items():
        text = text.replace(a, b)
    return text.encode("latin-1", "replace").decode("latin-1")


def _rgb(colour: str) -> tuple[int, int, int]:
    c = colour.lstrip("#")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def _num(value: Any, places: int = 2) -> str:
    if value is None:
        return "-"
    if isinstance(value, float):
        return f"{value:,.{places}f}"
    if isinstance(value, int):
        return f"{value:,d}"
    return str(value)


def _signed(value: Any) -> str:
    return "-" if value is None else f"{value:+d}"


#: Rows a table shows before it says how many more there are.
TABLE_ROWS = 40
BAR_ROWS = 200
LOAD_WEEKS = 12


class _Pdf(FPDF):
    def __init__(self, report: dict[str, Any]) -> None:
        super().__init__(orientation="landscape", unit="mm", format="A4")
        self.report = report
        self.set_auto_page_break(auto=True, margin=16)
        self.set_margins(12, 12, 12)
        self.set_title(_text(f"Status report - {report['project']['name']}"))
        self.set_creator("Sitepace")

    def footer(self) -> None:
        self.set_y(-12)
        self.set_font("Helvetica", "", 6.5)
        self.set_text_color(*_rgb(look.MUTED))
        p = self.report["project"]
        self.multi_cell(
            0,
            3,
            _text(
                f"{p['name']} - data date {p['data_date']} - page {self.page_no()}. "
                f"{self.report['caution']}"
            ),
        )
        self.set_text_color(*_rgb(look.INK))

    def heading(self, text: str, need: float = 30) -> None:
        """A section heading, on a new page unless ``need`` mm fit below it."""
        if self.get_y() + 12 + need > self.h - 16:
            self.add_page()
        self.ln(2)
        self.set_font("Helvetica", "B", 12)
        self.set_text_color(*_rgb(look.INK))
        self.cell(0, 7, _text(text), new_x="LMARGIN", new_y="NEXT")
        self.set_draw_color(*_rgb(look.PLAN))
        self.set_line_width(0.5)
        self.line(self.l_margin, self.get_y(), self.w - self.r_margin, self.get_y())
        self.ln(1.5)
        self.set_font("Helvetica", "", 8.5)

    def note(self, text: str) -> None:
        self.set_font("Helvetica", "", 8.5)
        self.multi_cell(0, 4.2, _text(text), new_x="LMARGIN", new_y="NEXT")

    def caution_box(self) -> None:
        self.set_fill_color(*_rgb(look.ROW_BAND))
        self.set_draw_color(*_rgb(look.CRITICAL))
        self.set_line_width(0.6)
        self.set_font("Helvetica", "B", 8.5)
        self.multi_cell(
            0,
            4.4,
            _text("Site caution: " + self.report["caution"]),
            border=1,
            fill=True,
            padding=2,
            new_x="LMARGIN",
            new_y="NEXT",
        )
        self.set_line_width(0.2)

    def table(
        self,
        header: Sequence[str],
        rows: Sequence[Sequence[Any]],
        widths: Sequence[float],
        limit: int = TABLE_ROWS,
        what: str = "rows",
    ) -> None:
        if not rows:
            self.note(f"No {what}.")
            return
        self.set_draw_color(*_rgb(look.RELATION))
        self.set_line_width(0.1)

        def head() -> None:
            self.set_font("Helvetica", "B", 7.5)
            self.set_fill_color(*_rgb(look.PLAN_LIGHT))
            for text, w in zip(header, widths, strict=True):
                self.cell(w, 5, _text(text), border=1, fill=True)
            self.ln()
            self.set_font("Helvetica", "", 7.5)

        head()
        for n, row in enumerate(rows[:limit]):
            if self.get_y() > self.h - 22:
                self.add_page()
                head()
            fill = n % 2 == 1
            self.set_fill_color(*_rgb(look.ROW_BAND))
            for value, w in zip(row, widths, strict=True):
                text = _text(value)
                while text and self.get_string_width(text) > w - 1.5:
                    text = text[:-1]
                self.cell(w, 4.6, text, border=1, fill=fill)
            self.ln()
        if len(rows) > limit:
            self.note(
                f"... and {len(rows) - limit} more {what} (all of them are in the "
                "JSON and CSV forms of this report)."
            )

    # -- charts ----------------------------------------------------------

    def bar_chart(self, rows: list[dict[str, Any]], data_date: str) -> None:
        """Critical and near-critical work: one bar per activity on one date
        axis, continued over as many pages as it takes (up to ``BAR_ROWS``)."""
        if not rows:
            self.note("No critical or near-critical work remains.")
            return
        drawn = rows[:BAR_ROWS]
        days = [dt.date.fromisoformat(r["start"]) for r in drawn]
        days += [dt.date.fromisoformat(r["finish"]) for r in drawn]
        days.append(dt.date.fromisoformat(data_date))
        base = self.report["finish"].get("baseline")
        if base:
            days.append(dt.date.fromisoformat(base))
        first, last = min(days), max(days) + dt.timedelta(days=1)
        done = 0
        while done < len(drawn):
            room = int((self.h - 16 - 24 - self.get_y() - 6) // 3.6)
            if room < 8:
                self.add_page()
                continue
            chunk = drawn[done : done + room]
            done += len(chunk)
            self._bars(chunk, first, last, data_date)
        legend = (
            "Orange striped bar and '>' before the key: critical (total float 0 or "
            "less). Blue bar: near-critical (total float up to "
            f"{self.report['critical']['threshold']} working days). Pennant: "
            "milestone. Ink line: data date; dashed grey-brown line: baseline finish."
        )
        if len(rows) > len(drawn):
            legend += f" The first {len(drawn)} of {len(rows)} activities by start."
        self.note(legend)

    def _bars(
        self,
        shown: list[dict[str, Any]],
        first: dt.date,
        last: dt.date,
        data_date: str,
    ) -> None:
        label_w, row_h = 70.0, 3.6
        base = self.report["finish"]
        span = max((last - first).days, 1)
        x0 = self.l_margin + label_w
        width = self.w - self.r_margin - x0
        top = self.get_y() + 6

        def x(day: dt.date) -> float:
            return x0 + width * (day - first).days / span

        # Month ticks on the axis.
        self.set_font("Helvetica", "", 6.5)
        self.set_draw_color(*_rgb(look.NON_WORKING))
        tick = dt.date(first.year, first.month, 1)
        height = row_h * len(shown)
        labelled = -100.0
        while tick <= last:
            if tick >= first:
                self.line(x(tick), top - 1, x(tick), top + height)
                if x(tick) - labelled >= 12:
                    self.text(x(tick) + 0.5, top - 1.5, tick.strftime("%b %y"))
                    labelled = x(tick)
            tick = (tick.replace(day=28) + dt.timedelta(days=4)).replace(day=1)
        baseline = self.report["sources"]["baseline"]
        for i, r in enumerate(shown):
            y = top + i * row_h
            s = dt.date.fromisoformat(r["start"])
            f = dt.date.fromisoformat(r["finish"]) + dt.timedelta(days=1)
            colour = look.CRITICAL if r["critical"] else look.PLAN
            self.set_text_color(*_rgb(look.INK))
            mark = "> " if r["critical"] else "   "
            label = _text(f"{mark}{r['key']} {r['name']}")
            while label and self.get_string_width(label) > label_w - 2:
                label = label[:-1]
            self.text(self.l_margin, y + row_h - 1, label)
            self.set_fill_color(*_rgb(colour))
            self.set_draw_color(*_rgb(colour))
            if r["duration"] == 0:
                cx = x(s)
                self.polygon(
                    [(cx, y + 0.3), (cx + 2.2, y + 1.2), (cx, y + 2.1)],
                    style="F",
                )
                self.line(cx, y + 0.3, cx, y + row_h - 0.3)
            else:
                w = max(x(f) - x(s), 0.6)
                self.rect(x(s), y + 0.4, w, row_h - 1.4, style="F")
                if r["critical"]:
                    # Stripes say "critical" without colour.
                    self.set_draw_color(*_rgb(look.INK))
                    self.set_line_width(0.15)
                    step = 1.6
                    pos = x(s)
                    while pos < x(s) + w:
                        end = min(pos + 1.2, x(s) + w)
                        self.line(pos, y + row_h - 1.0, end, y + 0.4)
                        pos += step
        # Baseline finish and data date as upright lines.
        self.set_line_width(0.4)
        dd = dt.date.fromisoformat(data_date)
        self.set_draw_color(*_rgb(look.INK))
        self.line(x(dd), top - 2, x(dd), top + height + 1)
        self.set_text_color(*_rgb(look.INK))
        self.text(x(dd) + 0.5, top + height + 4, _text(f"data date {data_date}"))
        if baseline and base.get("baseline"):
            bf = dt.date.fromisoformat(base["baseline"]) + dt.timedelta(days=1)
            if first <= bf <= last:
                self.set_draw_color(*_rgb(look.BASELINE))
                self.set_dash_pattern(dash=1, gap=1)
                self.line(x(bf), top - 2, x(bf), top + height + 1)
                self.set_dash_pattern()
                self.set_text_color(*_rgb(look.BASELINE))
                self.text(
                    x(bf) + 0.5,
                    top + height + 7.5,
                    _text(f"baseline finish {base['baseline']}"),
                )
        self.set_line_width(0.2)
        self.set_text_color(*_rgb(look.INK))
        self.set_y(top + height + 9)

    def s_curve(self, curve: dict[str, Any]) -> None:
        """Planned and earned value, cumulative, against working days."""
        planned, earned = curve.get("planned") or [], curve.get("earned") or []
        if not planned:
            self.note("No S-curve: " + _text(curve.get("absent") or "no baseline"))
            return
        w, h = 170.0, 75.0
        if self.get_y() + h + 20 > self.h - 16:
            self.add_page()
        x0, y0 = self.l_margin + 16, self.get_y() + 4
        top_value = max(
            [p["value"] for p in planned] + [e["value"] for e in earned] + [1]
        )
        last_period = max(
            [p["period"] for p in planned] + [e["period"] for e in earned] + [1]
        )

        def xy(period: float, value: float) -> tuple[float, float]:
            return (
                x0 + w * max(period, 0) / last_period,
                y0 + h - h * value / top_value,
            )

        self.set_draw_color(*_rgb(look.INK))
        self.set_line_width(0.3)
        self.line(x0, y0, x0, y0 + h)
        self.line(x0, y0 + h, x0 + w, y0 + h)
        self.set_font("Helvetica", "", 6.5)
        self.set_text_color(*_rgb(look.MUTED))
        for frac in (0, 0.25, 0.5, 0.75, 1):
            _, y = xy(0, top_value * frac)
            self.text(self.l_margin, y + 1, _num(top_value * frac, 0))
            self.set_draw_color(*_rgb(look.NON_WORKING))
            self.line(x0, y, x0 + w, y)
        labels = planned[:: max(len(planned) // 6, 1)]
        for p in labels:
            x, _ = xy(p["period"], 0)
            self.text(x - 6, y0 + h + 4, _text(p["date"]))
        self.set_draw_color(*_rgb(look.PLAN))
        self.set_line_width(0.6)
        for a, b in zip(planned, planned[1:], strict=False):
            self.line(*xy(a["period"], a["value"]), *xy(b["period"], b["value"]))
        self.set_draw_color(*_rgb(look.CRITICAL))
        self.set_fill_color(*_rgb(look.CRITICAL))
        self.set_dash_pattern(dash=1.5, gap=0.8)
        points = [xy(0, 0)] + [xy(e["period"], e["value"]) for e in earned]
        for a, b in zip(points, points[1:], strict=False):
            self.line(*a, *b)
        self.set_dash_pattern()
        for px, py in points[1:]:
            self.rect(px - 0.9, py - 0.9, 1.8, 1.8, style="F")
        self.set_line_width(0.2)
        lx = x0 + w + 6
        self.set_text_color(*_rgb(look.INK))
        self.set_font("Helvetica", "", 8)
        self.set_draw_color(*_rgb(look.PLAN))
        self.set_line_width(0.6)
        self.line(lx, y0 + 4, lx + 8, y0 + 4)
        self.text(lx + 10, y0 + 5, "planned value (baseline), cumulative")
        self.set_draw_color(*_rgb(look.CRITICAL))
        self.set_dash_pattern(dash=1.5, gap=0.8)
        self.line(lx, y0 + 10, lx + 8, y0 + 10)
        self.set_dash_pattern()
        self.rect(lx + 3.1, y0 + 9.1, 1.8, 1.8, style="F")
        self.text(lx + 10, y0 + 11, "earned value at each data date")
        unit = (
            "planned value"
            if curve.get("basis") == "planned_value"
            else ("working days of work (duration-weighted)")
        )
        self.text(lx, y0 + 18, _text(f"Values: {unit}."))
        self.text(lx, y0 + 23, "Across: working days from the baseline start.")
        self.set_line_width(0.2)
        self.set_y(y0 + h + 8)


def report_pdf(report: dict[str, Any]) -> bytes:
    """The report as a PDF an owner can forward without editing."""
    pdf = _Pdf(report)
    pdf.add_page()
    p, fin = report["project"], report["finish"]
    pdf.set_font("Helvetica", "B", 16)
    pdf.cell(0, 9, _text(f"Status report: {p['name']}"), new_x="LMARGIN", new_y="NEXT")
    pdf.set_font("Helvetica", "", 9)
    src = report["sources"]
    base = src["baseline"]
    pdf.note(
        f"Data date {p['data_date']}"
        + ("" if p["data_date_set"] else " (no data date set: the project start)")
        + f". Baseline: {base['name'] if base else 'none captured'}. "
        f"Published schedule version: {src['published_version'] or 'none'}. "
        "Day counts are working days of the project calendar; a positive variance "
        "is later than planned."
    )
    pdf.ln(1)
    pdf.caution_box()

    pdf.heading("Finish")
    pdf.table(
        ["forecast finish", "baseline finish", "variance", "previous report",
         "variance", "published version finish"],
        [[fin["forecast"], fin["baseline"], _signed(fin["variance_to_baseline"]),
          fin["previous_report"], _signed(fin["variance_to_previous"]),
          fin["published"]]],
        [45, 45, 30, 45, 30, 55],
    )  # fmt: skip
    pdf.ln(1)
    if fin["forecast_basis"] == "levelled":
        basis = (
            f"The forecast is the levelled schedule of version "
            f"{fin['forecast_version']}: every crew within its capacity (the "
            f"critical path alone would finish {fin['critical_path_finish']})."
        )
    else:
        basis = (
            "The forecast is the critical path of the current network and "
            "progress: crew limits are not applied until the next levelling."
        )
    pdf.note(basis)
    pdf.note("Why: " + fin["reason"])

    pdf.heading("Progress, earned value and earned schedule")
    pc, ev, es = (
        report["percent_complete"],
        report["earned_value"],
        report["earned_schedule"],
    )
    pdf.note(
        f"Percent complete: {_num(pc['by_duration'])} % weighted by duration; "
        + (
            f"{_num(pc['by_value'])} % weighted by planned value"
            if pc["by_value"] is not None
            else f"by value: - ({pc['by_value_reason']})"
        )
        + f". {pc['finished']} of {pc['activities']} activities finished, "
        f"{pc['started']} under way."
    )
    if "absent" in ev:
        pdf.note("Earned value: - (" + ev["absent"] + ").")
    else:
        pdf.table(
            ["basis", "BAC", "PV", "EV", "SV", "SPI", "AC", "CV", "CPI",
             f"EAC ({ev['eac_variant']})", "TCPI"],
            [[ev["unit"], _num(ev["bac"]), _num(ev["pv"]), _num(ev["ev"]),
              _num(ev["sv"]), _num(ev["spi"], 3), _num(ev["ac"]), _num(ev["cv"]),
              _num(ev["cpi"], 3), _num(ev["eac"]), _num(ev["tcpi"], 3)]],
            [32, 25, 25, 25, 25, 18, 22, 22, 18, 40, 18],
        )  # fmt: skip
        if ev.get("ac_reason"):
            pdf.note("AC, CV, CPI, EAC and TCPI: - (" + ev["ac_reason"] + ").")
        else:
            pdf.note(
                f"EAC by variant: BAC / CPI = {_num(ev['eac'])}; AC + (BAC - EV) = "
                f"{_num(ev['eac_budget_rate'])}; AC + (BAC - EV) / (CPI x SPI) = "
                f"{_num(ev['eac_cpi_spi'])}. VAC (BAC - EAC, BAC / CPI) = "
                f"{_num(ev['vac'])}. AC is the latest recorded cost to date of each "
                "activity, summed."
            )
        pdf.ln(1)
        pdf.table(
            ["ES", "AT", "PD", "SV(t)", "SPI(t)", "IEAC(t) = PD / SPI(t)",
             "IEAC(t) finish"],
            [[_num(es["es"]), _num(es["at"]), _num(es["pd"]), _num(es["sv_t"]),
              _num(es["spi_t"], 3), _num(es["ieac_t"]), es["ieac_t_finish"]]],
            [25, 25, 25, 25, 25, 55, 40],
        )  # fmt: skip
        pdf.note(
            "Earned schedule after Lipke (2003), in working days from the baseline "
            "start."
        )

    pdf.heading("S-curve: planned against earned, cumulative", need=90)
    pdf.s_curve(report["s_curve"])

    pdf.heading("Milestones (slipped first)")
    pdf.table(
        ["key", "milestone", "baseline", "forecast", "actual", "variance"],
        [
            [m["key"], m["name"], m["baseline"], m["forecast"], m["actual"],
             _signed(m["variance"])]
            for m in report["milestones"]
        ],
        [35, 110, 30, 30, 30, 25],
        what="milestones",
    )  # fmt: skip

    crit = report["critical"]
    pdf.heading(
        f"Critical and near-critical work ({crit['critical_count']} critical, "
        f"{crit['near_critical_count']} within {crit['threshold']} working days)",
        need=150,
    )
    pdf.bar_chart(crit["activities"], p["data_date"])

    since = report["since_previous"]
    pdf.heading(
        f"Since the previous data date ({since['from'] or 'the start'} to "
        f"{since['to']})"
    )
    pdf.table(
        ["change", "key", "activity", "date"],
        [["started", r["key"], r["name"], r["actual_start"]] for r in since["started"]]
        + [
            ["finished", r["key"], r["name"], r["actual_finish"]]
            for r in since["finished"]
        ],
        [25, 35, 140, 30],
        what="starts or finishes",
    )
    late = report["late"]
    pdf.heading("Late against the baseline")
    if "absent" in late:
        pdf.note("- (" + late["absent"] + ").")
    else:
        pdf.table(
            ["late to", "key", "activity", "baseline", "forecast", "days late"],
            [["start", r["key"], r["name"], r["baseline_start"], r["forecast_start"],
              r["days_late"]] for r in late["to_start"]]
            + [["finish", r["key"], r["name"], r["baseline_finish"],
                r["forecast_finish"], r["days_late"]] for r in late["to_finish"]],
            [20, 35, 120, 30, 30, 22],
            what="late activities",
        )  # fmt: skip

    ahead = report["look_ahead"]
    pdf.heading(f"Look-ahead by crew ({ahead['from']} to {ahead['to']})")
    pdf.table(
        ["crew", "key", "activity", "start", "finish", "units", "zone"],
        [
            [g["name"], a["key"], a["name"], a["start"], a["finish"], a["units"],
             a["zone"]]
            for g in ahead["crews"]
            for a in g["activities"]
        ],
        [40, 35, 105, 25, 25, 14, 29],
        limit=60,
        what="activities in the look-ahead",
    )  # fmt: skip

    load = report["crew_load"]
    weeks = load["weeks"][:LOAD_WEEKS]
    pdf.heading(
        "Crew load against capacity per week (busiest day's demand / capacity; "
        "* over capacity)",
        need=60,
    )
    src_plan = report["sources"]["plan"]
    pdf.note(
        "Dates: "
        + (
            f"published version {src_plan['version']}"
            + (" (levelled)" if src_plan["levelled"] else "")
            if src_plan["kind"] == "published_version"
            else "the forecast's early dates (no published version for this data date)"
        )
        + (
            f". The first {len(weeks)} of {len(load['weeks'])} weeks."
            if len(load["weeks"]) > len(weeks)
            else "."
        )
    )
    col = (pdf.w - pdf.l_margin - pdf.r_margin - 45) / max(len(weeks), 1)
    pdf.table(
        ["crew", *[w[5:] for w in weeks]],
        [
            [c["name"], *[
                f"{c['peak'][i]}/{c['capacity']}"
                + ("*" if c["peak"][i] > c["capacity"] else "")
                for i in range(len(weeks))
            ]]
            for c in load["crews"]
        ],
        [45, *[col] * len(weeks)],
        what="crews",
    )  # fmt: skip

    nightly = report["nightly"]
    pdf.heading("Last nightly run")
    if "absent" in nightly:
        pdf.note("- (" + nightly["absent"] + ").")
    else:
        ch = nightly["changes"]
        pdf.note(
            f"Version {nightly['version']} published {nightly['published_at'][:16]}: "
            f"finish {ch.get('finish')} (was {ch.get('previous_finish') or '-'}, "
            f"shift {ch.get('finish_shift_days') or 0} calendar days); "
            f"{len(ch.get('moved', []))} activities moved, "
            f"{len(ch.get('crew_peaks', []))} crew peaks changed."
        )
        pdf.table(
            ["moved", "activity", "from", "to", "shift (calendar days)"],
            [[m["key"], m.get("name", ""), m["from"], m["to"], m["shift_days"]]
             for m in ch.get("moved", [])],
            [35, 120, 30, 30, 40],
            limit=20,
            what="moved activities",
        )  # fmt: skip
    pdf.heading("Site caution")
    pdf.caution_box()
    return bytes(pdf.output())
