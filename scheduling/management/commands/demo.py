"""``manage.py demo [--check] [--port N]``: load the demo project and run it.

Without ``--check`` it then starts the web server, a Celery worker and the
nightly timer (Celery beat) as child processes on the configured database and
broker (SQLite and the file-system broker by default), and stops all three
when it is interrupted (Ctrl-C) or when one of them stops.
"""

from __future__ import annotations

import os
import secrets
import signal
import subprocess
import sys
import textwrap
import time

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
#: Seconds ``--check`` waits for the worker to publish the demo's levelling.
CHECK_SECONDS = 180
WORKER_OPTIONS = (
    "--concurrency=1",
    "--without-gossip",
    "--without-mingle",
    "--hostname=sitepace-demo@%h",
)


def _celery() -> list[str]:
    return [sys.executable, "-m", "celery", "-A", "api.celery"]


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
            help="run non-interactively: level the demo through a real worker on "
            "the configured broker, and exit 0 when it publishes (for CI); starts "
            "no web server",
        )
        parser.add_argument(
            "--port", type=int, default=8000, help="web server port (default 8000)"
        )

    def handle(self, *args, check=False, port=8000, **options):
        try:
            document = document_read(str(settings.BASE_DIR / DEMO_FILE))
        except DocumentUnreadable as exc:
            raise CommandError(f"the demo project cannot be read: {exc}") from None
        _migrate_if_needed()
        passwords = {role: secrets.token_urlsafe(9) for role in Role.values}
        try:
            project = services.demo_load(document=document, passwords=passwords)
            schedule = services.schedule_cpm_get(project=project)
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
            self._check_levelling(project)
            out.write("demo check: ok")
        else:
            out.write(
                f"API: POST http://127.0.0.1:{port}/api/v1/auth/token with a demo "
                "user's name and password, then POST "
                f"/api/v1/projects/{project.pk}/runs/ with "
                '{"kind": "level", "time_limit": 10} and GET '
                f"/api/v1/projects/{project.pk}/schedule."
            )
            out.write(f"Pages: http://127.0.0.1:{port}/app/login")
            out.write("")
            self._serve(port)

    def _check_levelling(self, project) -> None:
        """Queue a levelling run, let a real worker process on the configured
        broker (the file-system one by default) publish it, and stop the
        worker. Raises :class:`CommandError` when the run does not publish."""
        from scheduling import runs
        from scheduling.models import ACTIVE_STATES, Run, RunState

        out = self.stdout
        for stale in Run.objects.filter(project=project, state__in=ACTIVE_STATES):
            out.write(f"demo check: cancelling run {stale.pk}, left {stale.state}")
            runs.run_cancel(run=stale)
        scheduler = project.members.get(role=Role.SCHEDULER).user
        try:
            run = runs.run_queue(
                project=project, user=scheduler, kind="level", time_limit=10
            )
        except ServiceError as exc:
            raise CommandError(f"the levelling run cannot be queued: {exc}") from None
        log = settings.VAR_DIR / "demo-check-worker.log"
        out.write(f"Levelling run {run.pk} queued; a worker takes it (its log: {log}).")
        with log.open("wb") as sink:
            worker = {
                "worker": subprocess.Popen(
                    [*_celery(), "worker", *WORKER_OPTIONS, "--loglevel=INFO"],
                    cwd=settings.BASE_DIR,
                    stdout=sink,
                    stderr=subprocess.STDOUT,
                    start_new_session=True,
                )
            }
        try:
            deadline = time.monotonic() + CHECK_SECONDS
            while time.monotonic() < deadline:
                run.refresh_from_db()
                if run.state not in ACTIVE_STATES:
                    break
                if worker["worker"].poll() is not None:
                    raise CommandError("the worker stopped before the run ended")
                time.sleep(0.5)
        finally:
            _stop_all(worker)
        if run.state != RunState.PUBLISHED:
            tail = log.read_text(errors="replace").splitlines()[-20:]
            raise CommandError(
                f"the levelling run did not publish within {CHECK_SECONDS} s: "
                f"it is {run.state}{': ' + run.error if run.error else ''}\n"
                "the worker's last lines:\n" + "\n".join(tail)
            )
        version = run.version
        took = (run.finished_at - run.requested_at).total_seconds()
        status = (version.document.get("levelling") or {}).get("status", "")
        out.write(
            f"Levelled by the worker in {took:.1f} s: finish {version.finish} "
            f"({status}), published as schedule version {version.number}."
        )

    def _serve(self, port: int) -> None:
        """Run the web server, a worker and the timer until interrupted."""
        python = sys.executable
        manage = str(settings.BASE_DIR / "manage.py")
        celery = _celery()
        commands = {
            "web server": [
                python,
                manage,
                "runserver",
                "--noreload",
                f"127.0.0.1:{port}",
            ],
            "worker": [*celery, "worker", *WORKER_OPTIONS, "--loglevel=INFO"],
            "nightly timer": [*celery, "beat", "--loglevel=INFO"],
        }
        stopping: list[int] = []

        def stop(signum, frame):
            stopping.append(signum)

        previous = {
            sig: signal.signal(sig, stop) for sig in (signal.SIGINT, signal.SIGTERM)
        }
        children: dict[str, subprocess.Popen] = {}
        try:
            for name, command in commands.items():
                # Each child in its own session: Ctrl-C reaches only this
                # command, which then stops the children in order.
                children[name] = subprocess.Popen(
                    command, cwd=settings.BASE_DIR, start_new_session=True
                )
            self.stdout.write(
                "Started: "
                + ", ".join(f"{n} (pid {p.pid})" for n, p in children.items())
                + ". Ctrl-C stops them all."
            )
            self.stdout.flush()
            ended = None
            while not stopping and ended is None:
                time.sleep(0.3)
                ended = next(
                    (n for n, p in children.items() if p.poll() is not None), None
                )
            if ended is not None and not stopping:
                self.stderr.write(f"demo: the {ended} stopped; stopping the rest")
        finally:
            _stop_all(children)
            for sig, handler in previous.items():
                signal.signal(sig, handler)
        self.stdout.write("demo: stopped the web server, the worker and the timer")
        if ended is not None and not stopping:
            raise CommandError(f"the {ended} stopped by itself")


def _driver(driver: dict) -> str:
    if driver["kind"] == "relation":
        lag = driver["lag"]
        unit = driver["lag_unit"].replace("_", " ")
        shown = f" {lag:+d} {unit}" if lag else ""
        return f"{driver['type']}{shown} from {driver['pred']}"
    if driver["kind"] == "not_before":
        return f"not before {driver['date']}"
    return driver["kind"].replace("_", " ")


def _stop_all(children: dict, grace: float = 10.0) -> None:
    """SIGTERM to every child, SIGKILL to its process group (the worker's pool
    too) after ``grace`` seconds: a worker in the middle of a long solve is not
    waited for, its run is taken up again by the next worker (scheduling/runs.py).
    """
    for proc in children.values():
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
    deadline = time.monotonic() + grace
    for proc in children.values():
        try:
            proc.wait(timeout=max(0.1, deadline - time.monotonic()))
        except subprocess.TimeoutExpired:
            try:
                os.killpg(proc.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            proc.wait()
        try:
            # Whatever the child left behind in its group (pool processes).
            os.killpg(proc.pid, signal.SIGKILL)
        except (ProcessLookupError, PermissionError):
            pass
