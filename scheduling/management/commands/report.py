"""``manage.py report PROJECT [--format json|csv|pdf] [--output FILE]``.

The owner's status report of one project (its id, or its exact name), as the
API answers it: JSON (to standard output unless ``--output`` names a file), a
zip of CSV files or a PDF (these two need ``--output``). The file is written
only once the whole report is built, so a failure leaves no half file.
"""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from scheduling import report, report_render
from scheduling.errors import ServiceError
from scheduling.models import Project


class Command(BaseCommand):
    help = "Write the owner's status report of a project as JSON, CSV (zip) or PDF."

    def add_arguments(self, parser):
        parser.add_argument("project", metavar="PROJECT", help="project id or name")
        parser.add_argument(
            "--format", choices=["json", "csv", "pdf"], default="json", dest="fmt"
        )
        parser.add_argument("--output", metavar="FILE", default=None)
        parser.add_argument(
            "--threshold",
            default=None,
            metavar="DAYS",
            help="near-critical: total float up to DAYS working days (default "
            f"{report.DEFAULT_THRESHOLD})",
        )

    def handle(self, *args, project, fmt="json", output=None, threshold=None, **opts):
        found = self._project(project)
        if fmt != "json" and not output:
            raise CommandError(f"--format {fmt} writes a file: give --output FILE")
        try:
            days = report.threshold_parse(threshold)
            built = report.report_build(project=found, threshold=days)
        except ServiceError as exc:
            raise CommandError(exc.message) from None
        if fmt == "json":
            body = (json.dumps(built, indent=2, ensure_ascii=False) + "\n").encode()
        elif fmt == "csv":
            body = report_render.report_csv_zip(built)
        else:
            body = report_render.report_pdf(built)
        if output is None:
            self.stdout.write(body.decode(), ending="")
            return
        self._write(Path(output), body)
        self.stderr.write(
            f"wrote the {fmt} report of {found.name!r} as of "
            f"{built['project']['data_date']} to {output} ({len(body)} bytes)"
        )

    def _project(self, name: str) -> Project:
        if name.isdigit():
            found = Project.objects.filter(pk=int(name)).first()
        else:
            matches = list(Project.objects.filter(name=name)[:2])
            if len(matches) > 1:
                raise CommandError(
                    f"more than one project is named {name!r}: use its id"
                )
            found = matches[0] if matches else None
        if found is None:
            raise CommandError(f"no project {name!r}")
        return found

    def _write(self, path: Path, body: bytes) -> None:
        """Write next to the target, then rename: never a half-written file."""
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            raise CommandError(f"no folder {folder} for --output")
        fd, tmp = tempfile.mkstemp(dir=folder, prefix=".report-")
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(body)
            os.replace(tmp, path)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
