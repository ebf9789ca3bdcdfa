"""``manage.py schedule NETWORK.json [--output OUT.json]``: the critical path."""

from __future__ import annotations

from django.core.management.base import BaseCommand

from scheduling.engine import (
    NetworkInvalid,
    critical_path,
    parse_network,
    schedule_document,
)
from scheduling.files import DocumentUnreadable, document_read, document_write


class Command(BaseCommand):
    help = (
        "Read a sitepace.network/1 document and write its sitepace.schedule/1 "
        "result (to standard output without --output). Exit status 2 on bad input."
    )

    def add_arguments(self, parser):
        parser.add_argument("network", help="network document (JSON), or - for stdin")
        parser.add_argument("--output", "-o", help="write the schedule to this file")

    def handle(self, *args, network, output=None, **options):
        try:
            net = parse_network(document_read(network))
            result = critical_path(net)
        except DocumentUnreadable as exc:
            self._fail(f"schedule: {exc}")
        except NetworkInvalid as exc:
            count = len(exc.problems)
            plural = "s" if count != 1 else ""
            lines = [f"schedule: {count} problem{plural} in {network}:"]
            lines += [f"  {p}" for p in exc.problems]
            self._fail("\n".join(lines))
        for warning in net.warnings:
            self.stderr.write(f"schedule: note: {warning}")
        document_write(schedule_document(net, result), output, self.stdout)

    def _fail(self, message: str) -> None:
        self.stderr.write(message)
        raise SystemExit(2)
