"""``manage.py demo [--check]``: load the demo project and show its schedule."""

from __future__ import annotations

import secrets
import textwrap

from django.conf import settings
from django.core.management import call_command
from django.core.management.base import BaseCommand, CommandError
from django.db import connection
from django.db.migrations.executor import MigrationExecutor

from scheduling import services
from scheduling.engine import SITE_CAUTION
from scheduling.errors import ServiceError
from scheduling.files import DocumentUnreadable, document_read
from scheduling.models import Role

DEMO_FILE = "seed_data/demo_network.json"


def _migrate_if_needed() -> None:
    executor = MigrationExecutor(connection)
    if executor.migration_plan(executor.loader.graph.leaf_nodes()):
        call_command("migrate", verbosity=0, interactive=False)


class Command(BaseCommand):
    help = (
        "Load the demo project into the database with a scheduler, a site manager "
        "and an owner, and show its finish, driving path and crew peaks."
    )

    def add_arguments(self, parser):
        parser.add_argument(
            "--check",
            action="store_true",
            help="run non-interactively and exit 0 when everything works (for CI)",
        )

    def handle(self, *args, check=False, **options):
        try:
            document = document_read(str(settings.BASE_DIR / DEMO_FILE))
        except DocumentUnreadable as exc:
            raise CommandError(f"the demo project cannot be read: {exc}") from None
        _migrate_if_needed()
        passwords = {role: secrets.token_urlsafe(9) for role in Role.values}
        try:
            project = services.demo_load(document=document, passwords=passwords)
            schedule = services.schedule_get(project=project)
            peaks = services.crew_peaks_get(project=project)
        except ServiceError as exc:
            problems = "\n".join(f"  {p}" for p in exc.problems)
            raise CommandError(
                f"the demo project cannot be scheduled: {exc}\n{problems}"
            ) from None
        out = self.stdout
        for line in document.get("scenario", []):
            out.write(line)
        out.write("")
        summary = schedule["project"]
        out.write(
            f"Project: {summary['name']} (id {project.pk}, revision {project.revision})"
        )
        out.write(f"Start:   {summary['start']}")
        out.write(
            f"Finish:  {summary['finish']} ({summary['working_days']} working days, "
            "critical path method)"
        )
        out.write("")
        path = schedule["critical_path"]
        out.write(
            f"Driving path to the finish ({len(path)} activities; "
            "float in working days):"
        )
        floats = {a["key"]: a["total_float"] for a in schedule["activities"]}
        for n, step in enumerate(path, 1):
            out.write(
                f"  {n:>3}. {step['key']:<16} {step['name'][:40]:<40} "
                f"{floats[step['key']]:>3}  {_driver(step['driver'])}"
            )
        out.write("")
        out.write("Crews at early dates (before levelling):")
        out.write(f"  {'crew':<14} {'capacity':>8} {'peak':>5}  first peak day")
        over = 0
        for peak in peaks:
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
        out.write("Demo users (passwords are new on every run):")
        for role, username in services.DEMO_USERS.items():
            out.write(f"  {Role(role).label:<13} {username:<18} {passwords[role]}")
        out.write("")
        out.write(textwrap.fill("Caution: " + SITE_CAUTION, width=88))
        out.write("")
        if check:
            if len(schedule["activities"]) != len(document["activities"]) or not path:
                raise CommandError("the demo schedule is incomplete")
            out.write("demo check: ok")
        else:
            out.write(
                "API: POST /api/v1/auth/token with a demo user's name and password, "
                f"then GET /api/v1/projects/{project.pk}/schedule."
            )


def _driver(driver: dict) -> str:
    if driver["kind"] == "relation":
        lag = driver["lag"]
        unit = driver["lag_unit"].replace("_", " ")
        shown = f" {lag:+d} {unit}" if lag else ""
        return f"{driver['type']}{shown} from {driver['pred']}"
    if driver["kind"] == "not_before":
        return f"not before {driver['date']}"
    return driver["kind"].replace("_", " ")
