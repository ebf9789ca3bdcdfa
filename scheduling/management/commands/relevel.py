"""``manage.py relevel [PROJECT_ID ...] [--all] [--queue]``: re-level on demand.

The same work as the nightly re-levelling (stability against the last
published schedule, from the latest progress), for the projects named or all
projects with activities. By default it runs here and now and prints each
project's change summary; ``--queue`` hands the runs to the workers instead.
"""

from __future__ import annotations

from django.conf import settings
from django.core.management.base import BaseCommand, CommandError

from scheduling import runs
from scheduling.errors import ServiceError
from scheduling.models import Project, RunGoal, RunState


class Command(BaseCommand):
    help = (
        "Re-level projects against their last published schedule, as the nightly "
        "timer does: here and now (default) or on the workers (--queue)."
    )

    def add_arguments(self, parser):
        parser.add_argument("projects", nargs="*", type=int, metavar="PROJECT_ID")
        parser.add_argument(
            "--all", action="store_true", help="every project with activities"
        )
        parser.add_argument(
            "--queue", action="store_true", help="queue the runs for the workers"
        )
        parser.add_argument(
            "--time-limit",
            type=float,
            default=None,
            metavar="S",
            help="seconds for the solver (default SITEPACE_NIGHTLY_TIME_LIMIT)",
        )
        parser.add_argument(
            "--goal",
            choices=RunGoal.values,
            default=None,
            help="default: the goal of the last published levelling, else shortest",
        )

    def handle(self, *args, projects, all=False, queue=False, **options):
        if bool(projects) == bool(all):
            raise CommandError("name project ids or give --all (not both)")
        qs = Project.objects.order_by("id")
        if all:
            qs = qs.filter(activities__isnull=False).distinct()
        else:
            qs = qs.filter(pk__in=projects)
            missing = set(projects) - set(qs.values_list("pk", flat=True))
            if missing:
                raise CommandError(f"no project {', '.join(map(str, sorted(missing)))}")
        limit = options["time_limit"]
        if limit is not None and not 0 < limit <= settings.SITEPACE_RUN_MAX_SECONDS:
            raise CommandError(
                f"--time-limit must be more than 0 and at most "
                f"{settings.SITEPACE_RUN_MAX_SECONDS:g} seconds"
            )
        failed = 0
        for project in qs:
            try:
                if queue:
                    run = runs.run_queue(
                        project=project,
                        user=None,
                        kind="level",
                        goal=options["goal"],
                        time_limit=limit or settings.SITEPACE_NIGHTLY_TIME_LIMIT,
                        stable=True,
                        origin="command",
                    )
                    self.stdout.write(f"project {project.pk}: run {run.pk} queued")
                    continue
                run = runs.relevel_now(
                    project=project, time_limit=limit, goal=options["goal"]
                )
            except ServiceError as exc:
                failed += 1
                self.stderr.write(f"project {project.pk}: {exc.message}")
                continue
            if run.state != RunState.PUBLISHED:
                failed += 1
                self.stderr.write(
                    f"project {project.pk}: run {run.pk} {run.state}: {run.error}"
                )
                continue
            self._summary(project, run)
        if failed:
            raise CommandError(f"{failed} project(s) were not re-levelled")

    def _summary(self, project, run) -> None:
        version = run.version
        c = version.changes
        out = self.stdout
        out.write(
            f"project {project.pk} ({project.name}): version {version.number}, "
            f"finish {c['finish']}"
        )
        if c["previous_version"] is not None:
            out.write(
                f"  against version {c['previous_version']}: finish was "
                f"{c['previous_finish']} ({c['finish_shift_days']:+d} days); "
                f"{len(c['moved'])} activities moved"
            )
            for m in c["moved"][:10]:
                out.write(
                    f"    {m['key']:<16} {m['from']} -> {m['to']} "
                    f"({m['shift_days']:+d} days)"
                )
            for p in c["crew_peaks"]:
                out.write(
                    f"  crew {p['crew']}: peak {p['previous_peak']} -> {p['peak']} "
                    f"(capacity {p['capacity']})"
                )
