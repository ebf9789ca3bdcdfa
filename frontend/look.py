"""Sitepace's visual language, written down once: every chart and page follows it.

Chosen for a tablet read outdoors in daylight and for readers who do not tell
colours apart: dark ink on warm paper, a colour-blind-safe blue and a deep
orange, and every distinction that matters carried by a shape, a pattern or a
line style as well as by colour, so it survives greyscale print too.

Marks on the bar chart (one row per activity, the date axis running right):

* **planned bar** – a solid blue bar from the first to the last working day of
  the work (levelled dates when a levelled schedule is published, else the
  early dates of the critical path).
* **critical work** – the bar turns deep orange *and* carries diagonal ink
  stripes, and its row label starts with a black wedge; stripes and wedge
  say "critical" without colour.
* **milestone** – a post with a triangular pennant at the start of its day;
  a critical milestone has the striped orange pennant.
* **progress** – an ink core through the middle of the bar, as long as the
  share of the work done.
* **float** – a dotted ink line from the end of the bar to the end of the
  late dates, closed by a short upright tick.
* **early-date track** – on a levelled schedule, a thin hollow outline above
  the bar at the early dates, so the levelled shift shows at a glance.
* **baseline** – a thin grey-brown strip below the bar at the baseline dates.
* **non-working days** – light grey-beige columns behind the bars (the
  project's default calendar).
* **data date** – a solid upright ink line across the whole chart, labelled.
* **relation lines** (optional) – thin grey elbows from a predecessor to its
  successor, within one group.

Marks on the crew histogram (per crew, demand in units per day or per week):

* **demand before levelling** – light blue columns with a blue outline (the
  early dates).
* **demand after levelling** – solid blue columns (the levelled dates).
* **over capacity** – the part of a column above capacity is deep orange with
  crossed ink hatching, and the column's base gets an ink bar.
* **capacity** – a heavy dashed ink step line (zero on the crew's days away).
"""

from __future__ import annotations

INK = "#1b1b19"
PAPER = "#fbfaf6"
#: Okabe–Ito blue: distinct from orange for every common colour vision.
PLAN = "#0a64a8"
#: A darker Okabe–Ito vermillion, for contrast on paper in sunlight.
CRITICAL = "#c24a00"
PLAN_LIGHT = "#b9d7ee"
BASELINE = "#7a7062"
NON_WORKING = "#e3dfd4"
ROW_BAND = "#f1eee6"
RELATION = "#8c8a84"
MUTED = "#55524c"

FONT = "system-ui, -apple-system, 'Segoe UI', Roboto, sans-serif"
MONO = "ui-monospace, 'DejaVu Sans Mono', Menlo, monospace"

#: Pattern ids shared by every chart on a page (defined by ``charts.defs``).
CRITICAL_PATTERN = "sp-crit"
OVER_PATTERN = "sp-over"
BAND_PATTERN = "sp-band"

#: Mark → what it means, in the words the legends show.
BAR_MARKS: dict[str, str] = {
    "plan_early": "planned bar: early dates of the critical path",
    "plan_levelled": "planned bar: levelled dates",
    "critical": "critical work: striped orange bar, wedge before the key",
    "milestone": "milestone: post and pennant at the start of its day",
    "milestone_critical": "critical milestone: striped pennant",
    "progress": "work done: ink core, as long as the share done",
    "float": "total float: dotted line to the late finish",
    "early_track": "early dates, before levelling: hollow track above",
    "baseline": "baseline dates: grey strip below",
    "non_working": "non-working day (project calendar)",
    "data_date": "data date",
    "relations": "relation lines (within a group)",
}
CREW_MARKS: dict[str, str] = {
    "before": "demand before levelling (early dates)",
    "after": "demand after levelling (levelled dates)",
    "over": "over capacity: orange with crossed hatching",
    "capacity": "capacity (zero on days away)",
}
