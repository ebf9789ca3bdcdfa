"""``manage.py schedule NETWORK.json``: the critical path, or a levelled schedule.

``--level`` levels crew usage with constraint programming (``--goal shortest``
or ``smooth``, ``--time-limit`` seconds, ``--previous`` an earlier schedule to
stay close to) and shows the solver's progress on standard error.
"""

from __future__ import annotations

import datetime as dt
import sys
import time

from django.core.management.base import BaseCommand

from scheduling.engine import (
    NetworkInvalid,
    critical_path,
    parse_network,
    schedule_document,
)
from scheduling.engine.output import levelled_document
from scheduling.files import DocumentUnreadable, document_read, document_write


class Command(BaseCommand):
    help = (
        "Read a sitepace.network/1 document and write its sitepace.schedule/1 "
        "result (to standard output without --output). Exit status 2 on bad input."
    )

    def add_arguments(self, parser):
        parser.add_argument("network", help="network document (JSON), or - for stdin")
        parser.add_argument("--output", "-o", help="write the schedule to this file")
        parser.add_argument(
            "--level", action="store_true", help="level crew usage (CP-SAT)"
        )
        parser.add_argument(
            "--goal",
            choices=["shortest", "smooth"],
            default="shortest",
            help="shortest finish, or smooth crews within the critical-path finish",
        )
        parser.add_argument(
            "--time-limit",
            type=float,
            default=10.0,
            metavar="S",
            help="seconds the solver may take (default 10)",
        )
        parser.add_argument(
            "--workers", type=int, default=2, help="solver threads (default 2)"
        )
        parser.add_argument(
            "--previous",
            metavar="OLD_SCHEDULE.json",
            help="an earlier schedule: move as few of its activities as possible",
        )

    def handle(self, *args, network, output=None, level=False, **options):
        try:
            net = parse_network(document_read(network))
            result = critical_path(net)
            previous = (
                self._previous(options["previous"]) if options["previous"] else None
            )
        except DocumentUnreadable as exc:
            self._fail(f"schedule: {exc}")
        except NetworkInvalid as exc:
            self._problems(network, exc)
        for warning in net.warnings:
            self.stderr.write(f"schedule: note: {warning}")
        if not level:
            document_write(schedule_document(net, result), output, self.stdout)
            return
        from scheduling.engine import passes
        from scheduling.engine.levelling import level as level_network
        from scheduling.engine.levelling import needs_warm_up

        limit = options["time_limit"]
        if not 0 < limit <= 3600:
            self._fail("schedule: --time-limit must be between 0 and 3600 seconds")
        if needs_warm_up(net, options["goal"]):
            # Said before the silence, not counted in the time limit.
            self.stderr.write(
                "levelling: preparing the search (about 15 s the first time "
                "after an install, then under a second) ..."
            )
            passes.warm_up()
        progress = _ProgressLine(sys.stderr, limit)
        try:
            levelled = level_network(
                net,
                goal=options["goal"],
                previous=previous,
                time_limit=limit,
                workers=max(1, options["workers"]),
                on_progress=progress,
            )
        except NetworkInvalid as exc:
            progress.close()
            self._problems(network, exc)
        progress.close()
        gap = f"{levelled.gap_percent:.1f} %"
        self.stderr.write(
            f"schedule: {levelled.status}, finish {levelled.finish}, "
            f"bound {levelled.bound or '-'}, gap {gap}"
        )
        document_write(levelled_document(net, result, levelled), output, self.stdout)

    def _previous(self, path: str) -> dict[str, dt.date]:
        doc = document_read(path)
        try:
            return {
                a["key"]: dt.date.fromisoformat(a.get("start") or a["early_start"])
                for a in doc["activities"]
            }
        except (KeyError, TypeError, ValueError):
            self._fail(
                f"schedule: {path} is not a sitepace.schedule/1 document "
                "(each activity needs key and start or early_start)"
            )
            raise  # unreachable: _fail exits

    def _problems(self, network: str, exc: NetworkInvalid) -> None:
        count = len(exc.problems)
        plural = "s" if count != 1 else ""
        lines = [f"schedule: {count} problem{plural} in {network}:"]
        lines += [f"  {p}" for p in exc.problems]
        self._fail("\n".join(lines))

    def _fail(self, message: str) -> None:
        self.stderr.write(message)
        raise SystemExit(2)


class _ProgressLine:
    """Solver progress on stderr: one updating line on a terminal, else lines."""

    def __init__(self, stream, limit: float):
        self.stream = stream
        self.limit = limit
        self.tty = stream.isatty()
        self.started = time.perf_counter()
        self.shown = False

    def __call__(self, finish: dt.date, bound: dt.date | None, elapsed: float) -> None:
        bound_text = bound.isoformat() if bound else "-"
        text = (
            f"levelling: best finish {finish}  bound {bound_text}  "
            f"{elapsed:5.1f} s of {self.limit:.0f} s"
        )
        if self.tty:
            self.stream.write("\r\033[K" + text)
        else:
            self.stream.write(text + "\n")
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        if self.tty and self.shown:
            self.stream.write("\n")
            self.stream.flush()
