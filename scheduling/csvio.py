"""Activities and relations as CSV, for schedulers who live in spreadsheets.

Export writes one row per entry; import reads the same columns back, checks
every row, and reports each bad row by its line number. The rows then join the
network (matched by activity key, or by the pair of keys for relations) and the
whole network is checked before anything is stored.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
from typing import Any

from scheduling.engine import Problem

ACTIVITY_COLUMNS = (
    "key",
    "name",
    "duration",
    "calendar",
    "demands",
    "not_before",
    "deadline",
    "zone",
    "trade",
    "planned_value",
    "quantity",
    "unit",
)
RELATION_COLUMNS = ("pred", "succ", "type", "lag", "lag_unit")
REQUIRED = {"activities": ("key", "duration"), "relations": ("pred", "succ")}
COLUMNS = {"activities": ACTIVITY_COLUMNS, "relations": RELATION_COLUMNS}
MAX_ROWS = 50_000


def _demands_text(demands: dict[str, int]) -> str:
    return "; ".join(f"{crew}:{units}" for crew, units in sorted(demands.items()))


def csv_export(document: dict[str, Any], section: str) -> str:
    """The section's entries as CSV text with a header row."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    columns = COLUMNS[section]
    writer.writerow(columns)
    for entry in document[section]:
        row = []
        for col in columns:
            value = entry.get(col)
            if col == "demands":
                value = _demands_text(value or {})
            row.append("" if value is None else value)
        writer.writerow(row)
    return out.getvalue()


class RowProblems(ValueError):
    def __init__(self, problems: list[Problem]):
        super().__init__(f"{len(problems)} problem(s) in the CSV")
        self.problems = problems


def csv_rows(
    text: str, section: str
) -> tuple[list[tuple[int, dict[str, Any]]], list[Problem]]:
    """Parse CSV text into (line number, network entry) pairs and row problems.

    Rows with problems are left out of the pairs. A CSV whose header is wrong
    raises RowProblems: no row can be read then.
    """
    reader = csv.DictReader(io.StringIO(text))
    header = reader.fieldnames or []
    problems: list[Problem] = []
    missing = [c for c in REQUIRED[section] if c not in header]
    unknown = [c for c in header if c not in COLUMNS[section]]
    for col in missing:
        problems.append(
            Problem("/header", "missing_column", f"the CSV has no column {col!r}")
        )
    for col in unknown:
        problems.append(
            Problem(
                "/header",
                "unknown_column",
                f"unknown column {col!r}; columns are {', '.join(COLUMNS[section])}",
            )
        )
    if problems:
        raise RowProblems(problems)
    rows: list[tuple[int, dict[str, Any]]] = []
    for record in reader:
        line = reader.line_num
        if len(rows) >= MAX_ROWS:
            raise RowProblems(
                [Problem("/rows", "too_many_rows", f"more than {MAX_ROWS} rows")]
            )
        if None in record:
            problems.append(
                Problem(f"/rows/{line}", "extra_cells", f"row {line}: too many cells")
            )
            continue
        if not any((v or "").strip() for v in record.values()):
            continue
        entry, bad = _entry(record, section, line)
        problems += bad
        if not bad:
            rows.append((line, entry))
    return rows, problems


def _entry(
    record: dict[str, str], section: str, line: int
) -> tuple[dict[str, Any], list[Problem]]:
    bad: list[Problem] = []
    label = record.get("key") or f"{record.get('pred')} → {record.get('succ')}"

    def fail(col: str, code: str, message: str) -> None:
        bad.append(
            Problem(f"/rows/{line}/{col}", code, f"row {line} ({label}): {message}")
        )

    def integer(col: str) -> int | None:
        raw = (record.get(col) or "").strip()
        if not raw:
            return None
        try:
            return int(raw)
        except ValueError:
            fail(col, "not_integer", f"{col} must be a whole number, got {raw!r}")
            return None

    def number(col: str) -> float | None:
        raw = (record.get(col) or "").strip()
        if not raw:
            return None
        try:
            return float(raw)
        except ValueError:
            fail(col, "not_number", f"{col} must be a number, got {raw!r}")
            return None

    def day(col: str) -> str | None:
        raw = (record.get(col) or "").strip()
        if not raw:
            return None
        try:
            return dt.date.fromisoformat(raw).isoformat()
        except ValueError:
            fail(col, "bad_date", f"{col}: {raw!r} is not a date YYYY-MM-DD")
            return None

    def text(col: str) -> str | None:
        raw = (record.get(col) or "").strip()
        return raw or None

    entry: dict[str, Any]
    if section == "activities":
        demands: dict[str, int] = {}
        for part in filter(
            None, (p.strip() for p in (record.get("demands") or "").split(";"))
        ):
            crew, sep, units = part.partition(":")
            try:
                demands[crew.strip()] = int(units) if sep else 1
            except ValueError:
                fail("demands", "bad_demand", f"demand {part!r} is not crew:units")
        entry = {
            "key": text("key"),
            "name": text("name"),
            "duration": integer("duration"),
            "calendar": text("calendar"),
            "demands": demands,
            "not_before": day("not_before"),
            "deadline": day("deadline"),
            "zone": text("zone"),
            "trade": text("trade"),
            "planned_value": number("planned_value"),
            "quantity": number("quantity"),
            "unit": text("unit"),
        }
        if entry["duration"] is None and not any(
            p.pointer.endswith("/duration") for p in bad
        ):
            fail("duration", "missing", "duration is required")
        if not entry["key"]:
            fail("key", "missing", "key is required")
    else:
        entry = {
            "pred": text("pred"),
            "succ": text("succ"),
            "type": (text("type") or "FS").upper(),
            "lag": integer("lag") or 0,
            "lag_unit": text("lag_unit") or "workdays",
        }
        for col in ("pred", "succ"):
            if not entry[col]:
                fail(col, "missing", f"{col} is required")
    return {k: v for k, v in entry.items() if v is not None}, bad
