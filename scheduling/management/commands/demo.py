"""``manage.py demo [--check]``: the demo project's schedule, in plain words."""

from __future__ import annotations

import textwrap

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError

from scheduling.engine import (
    SITE_CAUTION,
    NetworkInvalid,
    crew_peaks,
    critical_path,
    parse_network,
    schedule_document,
)
from scheduling.files import DocumentUnreadable, document_read

DEMO_FILE = "seed_data/demo_network.json"


class Command(BaseCommand):
    help = "Load the demo project and show its finish, critical path and crew peaks."

    def add_arguments(self, parser):
        parser.add_argument(
            "--check",
            action="store_true",
            help="run non-interactively and exit 0 when everything works (for CI)",
        )

    def handle(self, *args, check=False, **options):
        path = settings.BASE_DIR / DEMO_FILE
        try:
            document = document_read(str(path))
            net = parse_network(document)
            result = critical_path(net)
        except (DocumentUnreadable, NetworkInvalid) as exc:
            raise CommandError(
                f"the demo project cannot be scheduled:\n{exc}"
            ) from None
        out = self.stdout
        for line in document.get("scenario", []):
            out.write(line)
        out.write("")
        out.write(f"Project: {net.name}")
        out.write(f"Start:   {net.start:%a %d %b %Y}")
        out.write(
            f"Finish:  {result.finish:%a %d %b %Y} "
            f"({result.length} working days, critical path method)"
        )
        if net.deadline:
            out.write(f"Deadline: {net.deadline:%a %d %b %Y}")
        out.write("")
        out.write(
            f"Driving path to the finish ({len(result.critical_path)} activities; "
            "float in working days):"
        )
        floats = dict(zip(net.keys, result.total_float.tolist(), strict=True))
        for n, step in enumerate(result.critical_path, 1):
            out.write(
                f"  {n:>3}. {step.key:<16} {step.name[:40]:<40} "
                f"{floats[step.key]:>3}  {step.driver.describe()}"
            )
        out.write("")
        out.write("Crews at early dates (before levelling):")
        out.write(f"  {'crew':<14} {'capacity':>8} {'peak':>5}  first peak day")
        over = 0
        for peak in crew_peaks(net, result):
            note = ""
            if peak.peak > peak.capacity:
                over += 1
                note = f"  over by {peak.peak - peak.capacity}"
            when = f"{peak.peak_date:%a %d %b %Y}" if peak.peak_date else "-"
            out.write(
                f"  {peak.crew:<14} {peak.capacity:>8} {peak.peak:>5}  {when}{note}"
            )
        if over:
            out.write(
                f"  {over} crew(s) are over-booked at early dates; crew levelling "
                "spreads their work."
            )
        out.write("")
        out.write(textwrap.fill("Caution: " + SITE_CAUTION, width=88))
        if check:
            # The same result as the command line gives, as a whole document.
            document = schedule_document(net, result)
            if len(document["activities"]) != net.size or not document["critical_path"]:
                raise CommandError("the demo schedule document is incomplete")
            out.write("")
            out.write("demo check: ok")
        else:
            out.write("")
            out.write(
                "Next: python manage.py schedule seed_data/demo_network.json "
                "--output var/demo_schedule.json"
            )
