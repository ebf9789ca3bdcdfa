"""Runs: queueing, working on and publishing a schedule computation.

A run goes ``waiting`` → ``working`` → ``published`` (or ``failed`` or
``cancelled``). Its life, end to end:

* :func:`run_queue` stores the run and, once the transaction has committed,
  hands its id to the broker; if the broker cannot be reached the run is
  marked failed and the caller gets :class:`QueueUnavailable` (503).
* :func:`run_execute` is what the worker does with an id. It *claims* the run
  with a conditional update (``waiting`` → ``working`` with a new claim token,
  or takes over a ``working`` run whose heartbeat went stale because its
  worker died), so a second delivery of a run that is published, failed,
  cancelled or being worked on does nothing. While the solver works a watcher
  thread writes the progress (at most twice a second) and the heartbeat, and
  notices a cancellation.
* :func:`_publish` writes the new version, its change summary and the run's
  end in one transaction, after checking that the claim still holds: a
  reader sees the previous version until this one is complete.

One active run per project: a second request while one is waiting or working
is refused with 409 naming the active run (a partial unique index holds the
rule even between two requests at the same instant).
"""

from __future__ import annotations

import datetime as dt
import logging
import threading
import time
import uuid
import zoneinfo
from collections.abc import Iterable
from functools import partial
from typing import Any

from django.conf import settings
from django.db import IntegrityError, connection, transaction
from django.db.models import F, Q
from django.utils import timezone

from scheduling.engine import (
    SITE_CAUTION,
    NetworkInvalid,
    Problem,
    crew_peaks,
    critical_path,
    schedule_document,
)
from scheduling.engine.levelling import LevellingStopped
from scheduling.engine.network import Network

from .bridge import network_document
from .errors import Conflict, Invalid, NotFound, QueueUnavailable
from .models import (
    ACTIVE_STATES,
    Project,
    Run,
    RunGoal,
    RunKind,
    RunOrigin,
    RunState,
    ScheduleVersion,
)
from .services import network_check

log = logging.getLogger(__name__)

#: Seconds a client is told to wait (Retry-After) when the queue is down.
RETRY_AFTER = 30
#: Progress is written at most this often (seconds).
PROGRESS_EVERY = 0.5
#: Progress fields of an activity in the network document, kept with a version.
PROGRESS_FIELDS = ("actual_start", "actual_finish", "remaining", "percent_complete")


class RunStopped(Exception):
    """Raised from the solver's progress callback: the run is no longer ours."""


# ---------------------------------------------------------------------------
# Queueing, cancelling


def run_queue(
    *,
    project: Project,
    user: Any,
    kind: str,
    goal: str | None = None,
    time_limit: float | None = None,
    stable: bool = False,
    origin: str = RunOrigin.REQUEST,
    nightly_for: dt.date | None = None,
    dispatch: bool = True,
) -> Run:
    """Store a run and queue it once the transaction commits.

    ``dispatch=False`` stores it without queueing, for a caller that runs it
    itself (:func:`relevel_now`).

    Raises :class:`Invalid` for a bad kind, goal or time limit,
    :class:`Conflict` when the project has an active run, and
    :class:`QueueUnavailable` when the broker cannot be reached (the run is
    then stored as failed, saying so).
    """
    problems = []
    if kind not in RunKind.values:
        problems.append(
            Problem("/kind", "bad_kind", f"kind must be one of {RunKind.values}")
        )
    if kind == RunKind.CPM and goal:
        problems.append(
            Problem("/goal", "goal_for_cpm", "a critical-path run takes no goal")
        )
    if goal is not None and goal not in RunGoal.values and kind != RunKind.CPM:
        problems.append(
            Problem("/goal", "bad_goal", f"goal must be one of {RunGoal.values}")
        )
    limit_max = settings.SITEPACE_RUN_MAX_SECONDS
    if time_limit is None:
        time_limit = 10.0
    if not 0 < time_limit <= limit_max:
        problems.append(
            Problem(
                "/time_limit",
                "bad_time_limit",
                f"time_limit must be more than 0 and at most {limit_max:g} seconds",
            )
        )
    if stable and kind == RunKind.CPM:
        problems.append(
            Problem("/stable", "stable_for_cpm", "only a levelling run can be stable")
        )
    if problems:
        raise Invalid(f"the run cannot be queued: {problems[0].message}", problems)
    if not project.activities.exists():
        raise Invalid(
            "the project has no activities yet",
            [Problem("/activities", "no_activities", "add activities first")],
        )
    task_id = str(uuid.uuid4())
    try:
        with transaction.atomic():
            _refuse_if_active(project)
            run = Run.objects.create(
                project=project,
                kind=kind,
                goal=(goal or RunGoal.SHORTEST) if kind == RunKind.LEVEL else "",
                stable=stable,
                time_limit=time_limit,
                origin=origin,
                nightly_for=nightly_for,
                requested_by=user if getattr(user, "pk", None) else None,
                task_id=task_id,
            )
            if dispatch:
                transaction.on_commit(partial(_dispatch, run.pk, task_id))
    except IntegrityError:
        # Two requests at the same instant: the index let only one through.
        _refuse_if_active(project)
        raise
    return run


def _refuse_if_active(project: Project) -> None:
    active = (
        Run.objects.filter(project=project, state__in=ACTIVE_STATES)
        .order_by("id")
        .first()
    )
    if active is not None:
        raise Conflict(
            f"run {active.pk} of this project is {active.state}; one run at a time "
            f"per project: wait for it to finish or cancel it "
            f"(POST runs/{active.pk}/cancel)",
            [Problem("/kind", "run_active", f"run {active.pk} is {active.state}")],
        )


def _dispatch(run_id: int, task_id: str) -> None:
    """Hand the run's id to the broker; on failure mark it failed and say 503."""
    try:
        run_send(run_id=run_id, task_id=task_id)
    except Exception as exc:  # kombu raises several kinds for an absent broker
        log.warning("run %s: the queue cannot be reached: %s", run_id, exc)
        Run.objects.filter(pk=run_id, state=RunState.WAITING).update(
            state=RunState.FAILED,
            finished_at=timezone.now(),
            error="the work queue could not be reached; nothing was computed",
        )
        unavailable = QueueUnavailable(
            "the work queue cannot be reached just now; nothing was queued and "
            f"nothing stored has changed. Ask again in {RETRY_AFTER} seconds.",
            retry_after=RETRY_AFTER,
        )
        unavailable.run_id = run_id
        raise unavailable from None


def run_send(*, run_id: int, task_id: str) -> None:
    """Publish the task message (the run id only) on a fresh broker connection.

    A fresh connection per message reads the broker settings as they are and
    fails fast when the broker is down, instead of waiting on a pooled
    connection that died with it.
    """
    from api.celery import app

    from .tasks import run_work

    with app.connection_for_write() as conn:
        conn.ensure_connection(
            max_retries=1, interval_start=0, interval_step=0.5, timeout=3
        )
        run_work.apply_async(
            (run_id,),
            task_id=task_id,
            connection=conn,
            retry=True,
            retry_policy={
                "max_retries": 2,
                "interval_start": 0,
                "interval_step": 0.5,
                "interval_max": 1,
            },
        )


def run_cancel(*, run: Run) -> Run:
    """Cancel a waiting or working run: it will never publish."""
    done = Run.objects.filter(pk=run.pk, state__in=ACTIVE_STATES).update(
        state=RunState.CANCELLED, finished_at=timezone.now(), claim=""
    )
    run.refresh_from_db()
    if not done:
        raise Conflict(
            f"run {run.pk} is {run.state} already; only a waiting or working "
            "run can be cancelled",
            [Problem("/state", "run_finished", f"run {run.pk} is {run.state}")],
        )
    return run


def run_get(*, project: Project, run_id: Any) -> Run:
    try:
        return Run.objects.get(project=project, pk=int(run_id))
    except (Run.DoesNotExist, TypeError, ValueError):
        raise NotFound("no such run in this project") from None


# ---------------------------------------------------------------------------
# The worker's side


def run_execute(*, run_id: int, task_id: str = "") -> str:
    """Claim the run, compute its schedule and publish it; what happened.

    Idempotent: a run that is finished, or being worked on by a live worker,
    is left alone ("nothing to do"). Transient database errors propagate for
    the task to retry; every other failure ends the run as failed.
    """
    claim = _claim(run_id, task_id)
    if claim is None:
        state = Run.objects.filter(pk=run_id).values_list("state", flat=True).first()
        return f"nothing to do: run {run_id} is {state or 'unknown'}"
    run = Run.objects.select_related("project").get(pk=run_id)
    watch = _Watch(run_id, claim)
    try:
        outcome = _work(run, watch)
    except (RunStopped, LevellingStopped):
        return f"run {run_id} stopped: {_state_of(run_id)}"
    except NetworkInvalid as exc:
        first = exc.problems[0].message if exc.problems else ""
        _fail(run_id, claim, f"the network cannot be scheduled: {first}", exc.problems)
        return f"run {run_id} failed: the network cannot be scheduled"
    except Invalid as exc:
        _fail(run_id, claim, exc.message, exc.problems)
        return f"run {run_id} failed: {exc.message}"
    except _TRANSIENT:
        _release(run_id, claim)
        raise
    except Exception as exc:
        from celery.exceptions import SoftTimeLimitExceeded

        if isinstance(exc, SoftTimeLimitExceeded):
            _fail(run_id, claim, "the run took longer than the worker's time limit")
            raise
        log.exception("run %s failed", run_id)
        _fail(run_id, claim, f"the run failed on our side: {exc}")
        return f"run {run_id} failed: {exc}"
    finally:
        watch.stop()
    return outcome


def _transient() -> tuple[type[BaseException], ...]:
    from django.db import InterfaceError, OperationalError

    return (OperationalError, InterfaceError)


_TRANSIENT = _transient()


def _claim(run_id: int, task_id: str) -> str | None:
    """A new claim token if this delivery may work on the run, else None."""
    token = str(uuid.uuid4())
    now = timezone.now()
    stale = now - dt.timedelta(seconds=settings.SITEPACE_RUN_STALE_SECONDS)
    fields = {
        "state": RunState.WORKING,
        "claim": token,
        "attempts": F("attempts") + 1,
        "started_at": now,
        "heartbeat_at": now,
        "error": "",
    }
    if task_id:
        fields["task_id"] = task_id
    runs = Run.objects.filter(pk=run_id)
    got = runs.filter(state=RunState.WAITING).update(**fields)
    if not got:
        # A worker that died leaves its run working with a stale heartbeat.
        got = runs.filter(
            Q(heartbeat_at__lt=stale) | Q(heartbeat_at__isnull=True),
            state=RunState.WORKING,
            attempts__lt=settings.SITEPACE_RUN_MAX_ATTEMPTS,
        ).update(**fields)
    if not got:
        runs.filter(
            Q(heartbeat_at__lt=stale) | Q(heartbeat_at__isnull=True),
            state=RunState.WORKING,
            attempts__gte=settings.SITEPACE_RUN_MAX_ATTEMPTS,
        ).update(
            state=RunState.FAILED,
            finished_at=now,
            claim="",
            error="the worker was lost on every attempt; nothing was published",
        )
        return None
    return token


def _state_of(run_id: int) -> str:
    return Run.objects.filter(pk=run_id).values_list("state", flat=True).first() or ""


def _fail(
    run_id: int, claim: str, message: str, problems: Iterable[Problem] = ()
) -> None:
    Run.objects.filter(pk=run_id, claim=claim, state=RunState.WORKING).update(
        state=RunState.FAILED,
        finished_at=timezone.now(),
        claim="",
        error=message,
        problems=[p.as_dict() for p in problems],
    )


def _release(run_id: int, claim: str) -> None:
    """Give the run back for the retry; best effort (the database may be down)."""
    try:
        Run.objects.filter(pk=run_id, claim=claim, state=RunState.WORKING).update(
            state=RunState.WAITING, claim="", heartbeat_at=None
        )
    except _TRANSIENT:
        log.warning("run %s: could not release the claim; it goes stale", run_id)


def _work(run: Run, watch: _Watch) -> str:
    project = run.project
    document = network_document(project)
    if not document["activities"]:
        raise Invalid(
            "the project has no activities",
            [Problem("/activities", "no_activities", "add activities first")],
        )
    try:
        net = network_check(document)
    except Invalid as exc:
        raise NetworkInvalid(exc.problems) from None
    cpm = critical_path(net)
    Run.objects.filter(pk=run.pk, claim=watch.claim).update(revision=project.revision)
    if run.kind == RunKind.CPM:
        schedule = schedule_document(net, cpm)
        peaks = {
            p.crew: {
                "peak": p.peak,
                "date": p.peak_date.isoformat() if p.peak_date else None,
                "capacity": p.capacity,
            }
            for p in crew_peaks(net, cpm)
        }
        figures = {"best_finish": cpm.finish, "bound": cpm.finish, "gap_percent": 0.0}
    else:
        from scheduling.engine.levelling import level
        from scheduling.engine.output import levelled_document

        previous = _previous_starts(project) if run.stable else None
        watch.start(net.start)
        levelled = level(
            net,
            goal=run.goal or RunGoal.SHORTEST,
            previous=previous,
            time_limit=run.time_limit,
            workers=max(1, settings.SITEPACE_SOLVER_WORKERS),
            on_progress=watch.progress,
            should_stop=lambda: watch.lost,
        )
        watch.stop()
        if watch.lost:
            raise RunStopped
        schedule = levelled_document(net, cpm, levelled)
        peaks = levelled_peaks(net, schedule)
        figures = {
            "best_finish": levelled.finish,
            "bound": levelled.bound,
            "gap_percent": round(levelled.gap_percent, 2),
        }
    schedule["revision"] = project.revision
    return _publish(run, watch, project, document, schedule, peaks, figures)


def _previous_starts(project: Project) -> dict[str, dt.date] | None:
    last = project.versions.order_by("-number").first()
    if last is None:
        return None
    return {key: dt.date.fromisoformat(day) for key, day in _starts(last.document)}


def _starts(schedule: dict[str, Any]) -> list[tuple[str, str]]:
    return [
        (a["key"], a.get("start") or a["early_start"]) for a in schedule["activities"]
    ]


def _publish(
    run: Run,
    watch: _Watch,
    project: Project,
    document: dict[str, Any],
    schedule: dict[str, Any],
    peaks: dict[str, Any],
    figures: dict[str, Any],
) -> str:
    """The new version and the run's end in one transaction, if still ours."""
    elapsed = time.perf_counter() - watch.began
    with transaction.atomic():
        Project.objects.select_for_update().filter(pk=project.pk).first()
        mine = (
            Run.objects.select_for_update()
            .filter(pk=run.pk, claim=watch.claim, state=RunState.WORKING)
            .first()
        )
        if mine is None:
            return f"run {run.pk} was not published: it is {_state_of(run.pk)}"
        last = project.versions.order_by("-number").first()
        finish = dt.date.fromisoformat(
            (schedule.get("levelling") or schedule["project"])["finish"]
        )
        version = ScheduleVersion.objects.create(
            project=project,
            number=(last.number + 1) if last else 1,
            run=mine,
            kind=run.kind,
            goal=run.goal,
            revision=project.revision,
            data_date=project.data_date,
            progress=_progress_of(document),
            finish=finish,
            document=schedule,
            crew_peaks=peaks,
            changes=changes_between(last, schedule, finish, peaks),
        )
        Run.objects.filter(pk=run.pk).update(
            state=RunState.PUBLISHED,
            finished_at=timezone.now(),
            claim="",
            elapsed=round(elapsed, 3),
            progress_at=timezone.now(),
            **figures,
        )
    return f"run {run.pk} published version {version.number}"


def _progress_of(document: dict[str, Any]) -> dict[str, Any]:
    out = {}
    for a in document["activities"]:
        got = {k: a[k] for k in PROGRESS_FIELDS if a.get(k) is not None}
        if got:
            out[a["key"]] = got
    return out


def levelled_peaks(net: Network, schedule: dict[str, Any]) -> dict[str, Any]:
    """Each crew's peak daily demand at the levelled dates: crew → figures.

    An activity loads its crews on its own working days from its levelled
    start to its finish (the checker's reading); milestones load nothing.
    """
    index = {k: i for i, k in enumerate(net.keys)}
    crews = [c.key for c in net.crews]
    load: dict[tuple[int, dt.date], int] = {}
    demands: dict[int, list[tuple[int, int]]] = {}
    for a, c, u in zip(
        net.dem_activity.tolist(),
        net.dem_crew.tolist(),
        net.dem_units.tolist(),
        strict=True,
    ):
        demands.setdefault(a, []).append((c, u))
    for entry in schedule["activities"]:
        i = index[entry["key"]]
        if i not in demands or int(net.duration[i]) == 0:
            continue
        calendar = net.calendars[int(net.act_calendar[i])]
        day = dt.date.fromisoformat(entry["start"])
        last = dt.date.fromisoformat(entry["finish"])
        while day <= last:
            if calendar.is_workday(day):
                for c, u in demands[i]:
                    load[c, day] = load.get((c, day), 0) + u
            day += dt.timedelta(days=1)
    out = {}
    for c, crew in enumerate(net.crews):
        days = sorted((d, n) for (k, d), n in load.items() if k == c)
        peak = max((n for _, n in days), default=0)
        when = next((d for d, n in days if n == peak), None) if peak else None
        out[crews[c]] = {
            "peak": peak,
            "date": when.isoformat() if when else None,
            "capacity": crew.capacity,
        }
    return out


def changes_between(
    last: ScheduleVersion | None,
    schedule: dict[str, Any],
    finish: dt.date,
    peaks: dict[str, Any],
) -> dict[str, Any]:
    """What changed against the previous version: finish, moves, crew peaks.

    ``shift_days`` are calendar days, positive when the activity starts later.
    Activities new in this version, or gone from it, are listed by key.
    """
    summary: dict[str, Any] = {
        "previous_version": None,
        "finish": finish.isoformat(),
        "previous_finish": None,
        "finish_shift_days": None,
        "moved": [],
        "added": [],
        "removed": [],
        "crew_peaks": [],
        "caution": SITE_CAUTION,
    }
    if last is None:
        return summary
    before = dict(_starts(last.document))
    now = dict(_starts(schedule))
    names = {a["key"]: a.get("name", "") for a in schedule["activities"]}
    moved = []
    for key, start in now.items():
        if key in before and before[key] != start:
            shift = dt.date.fromisoformat(start) - dt.date.fromisoformat(before[key])
            moved.append(
                {
                    "key": key,
                    "name": names.get(key, ""),
                    "from": before[key],
                    "to": start,
                    "shift_days": shift.days,
                }
            )
    moved.sort(key=lambda m: (-abs(m["shift_days"]), m["key"]))
    crew_changes = []
    for crew in sorted(set(peaks) | set(last.crew_peaks)):
        was = (last.crew_peaks.get(crew) or {}).get("peak")
        got = (peaks.get(crew) or {}).get("peak")
        if was != got:
            crew_changes.append(
                {
                    "crew": crew,
                    "capacity": (peaks.get(crew) or last.crew_peaks[crew])["capacity"],
                    "previous_peak": was,
                    "peak": got,
                }
            )
    summary.update(
        previous_version=last.number,
        previous_finish=last.finish.isoformat(),
        finish_shift_days=(finish - last.finish).days,
        moved=moved,
        added=sorted(set(now) - set(before)),
        removed=sorted(set(before) - set(now)),
        crew_peaks=crew_changes,
    )
    return summary


class _Watch:
    """The watcher thread of one claimed run: progress, heartbeat, cancellation.

    The solver calls :meth:`progress` from its own thread with each better
    solution; the watcher writes the latest figures at most every
    :data:`PROGRESS_EVERY` seconds, and the heartbeat every fifth of the
    stale limit, with one conditional update that also tells whether the run
    is still ours. When it is not (cancelled, or taken over) ``lost`` turns
    true: the levelling's ``should_stop`` reads it and ends the solve within
    a moment, and the next progress call raises :class:`RunStopped`.
    """

    def __init__(self, run_id: int, claim: str) -> None:
        self.run_id, self.claim = run_id, claim
        self.began = time.perf_counter()
        self.lost = False
        self._latest: tuple[dt.date, dt.date | None, float] | None = None
        self._dirty = False
        self._lock = threading.Lock()
        self._done = threading.Event()
        self._thread: threading.Thread | None = None
        self._start: dt.date | None = None

    def start(self, project_start: dt.date) -> None:
        self._start = project_start
        self._thread = threading.Thread(
            target=self._loop, name=f"run-{self.run_id}-watch", daemon=True
        )
        self._thread.start()

    def progress(self, finish: dt.date, bound: dt.date | None, elapsed: float) -> None:
        if self.lost:
            raise RunStopped
        with self._lock:
            self._latest = (finish, bound, elapsed)
            self._dirty = True

    def stop(self) -> None:
        self._done.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(timeout=10)
            self._thread = None

    def _loop(self) -> None:
        beat_every = max(0.5, settings.SITEPACE_RUN_STALE_SECONDS / 5)
        last_beat = 0.0
        try:
            while not self._done.wait(PROGRESS_EVERY):
                now = time.perf_counter()
                with self._lock:
                    latest, dirty = self._latest, self._dirty
                    self._dirty = False
                if not dirty and now - last_beat < beat_every:
                    continue
                fields: dict[str, Any] = {"heartbeat_at": timezone.now()}
                if dirty and latest is not None:
                    fields.update(self._figures(*latest))
                try:
                    held = Run.objects.filter(
                        pk=self.run_id, claim=self.claim, state=RunState.WORKING
                    ).update(**fields)
                except _TRANSIENT:
                    log.warning("run %s: progress not written", self.run_id)
                    continue
                last_beat = now
                if not held:
                    self.lost = True
                    return
        finally:
            connection.close()

    def _figures(
        self, finish: dt.date, bound: dt.date | None, elapsed: float
    ) -> dict[str, Any]:
        gap = None
        if bound is not None and self._start is not None:
            span = (finish - self._start).days
            gap = round(100.0 * (finish - bound).days / span, 2) if span > 0 else 0.0
        return {
            "best_finish": finish,
            "bound": bound,
            "gap_percent": gap,
            "elapsed": round(elapsed, 3),
            "progress_at": timezone.now(),
        }


# ---------------------------------------------------------------------------
# Nightly re-levelling and recovery


def nightly_due(*, now: dt.datetime | None = None) -> list[tuple[Project, dt.date]]:
    """Projects whose local hour is their nightly hour and that have no
    nightly run for their local date yet, with that date."""
    now = now or timezone.now()
    due = []
    projects = Project.objects.filter(activities__isnull=False).distinct()
    done = set(
        Run.objects.filter(
            origin=RunOrigin.NIGHTLY,
            nightly_for__gte=(now - dt.timedelta(days=2)).date(),
        ).values_list("project_id", "nightly_for")
    )
    for project in projects.order_by("id"):
        try:
            zone = zoneinfo.ZoneInfo(project.time_zone)
        except (zoneinfo.ZoneInfoNotFoundError, ValueError):
            log.warning(
                "project %s: unknown time zone %r", project.pk, project.time_zone
            )
            continue
        local = now.astimezone(zone)
        if (
            local.hour == project.nightly_hour
            and (project.pk, local.date()) not in done
        ):
            due.append((project, local.date()))
    return due


def nightly_queue(
    *, project: Project, day: dt.date, time_limit: float | None = None
) -> Run | None:
    """Queue the nightly stability re-levelling of one project (None if busy)."""
    last = project.versions.filter(kind=RunKind.LEVEL).order_by("-number").first()
    try:
        return run_queue(
            project=project,
            user=None,
            kind=RunKind.LEVEL,
            goal=last.goal if last and last.goal else RunGoal.SHORTEST,
            time_limit=time_limit or settings.SITEPACE_NIGHTLY_TIME_LIMIT,
            stable=True,
            origin=RunOrigin.NIGHTLY,
            nightly_for=day,
        )
    except QueueUnavailable as exc:
        # The timer's own run that never reached the queue: not a nightly run
        # for the day, so the next tick may queue one.
        Run.objects.filter(pk=exc.run_id, state=RunState.FAILED).delete()
        raise
    except (Conflict, IntegrityError):
        # Busy, or another timer queued it first: the next tick tries again
        # within the same hour while no nightly run exists for the day.
        return None


def relevel_now(
    *, project: Project, time_limit: float | None = None, goal: str | None = None
) -> Run:
    """The nightly re-levelling of one project, here and now (no worker)."""
    last = project.versions.filter(kind=RunKind.LEVEL).order_by("-number").first()
    run = run_queue(
        project=project,
        user=None,
        kind=RunKind.LEVEL,
        goal=goal or (last.goal if last and last.goal else RunGoal.SHORTEST),
        time_limit=time_limit or settings.SITEPACE_NIGHTLY_TIME_LIMIT,
        stable=True,
        origin=RunOrigin.COMMAND,
        dispatch=False,
    )
    run_execute(run_id=run.pk)
    run.refresh_from_db()
    return run


def runs_recover(*, now: dt.datetime | None = None) -> list[int]:
    """Queue again the runs whose message or worker was lost; their ids.

    A working run with a stale heartbeat lost its worker (the file-system
    broker cannot redeliver; Redis redelivers only after its visibility
    timeout); a waiting run older than the visibility timeout lost its
    message. Sending again is safe: the task does nothing new for a run that
    is not waiting or abandoned.
    """
    now = now or timezone.now()
    stale = now - dt.timedelta(seconds=settings.SITEPACE_RUN_STALE_SECONDS)
    lost_message = now - dt.timedelta(seconds=settings.SITEPACE_VISIBILITY_TIMEOUT)
    runs = Run.objects.filter(
        Q(state=RunState.WORKING, heartbeat_at__lt=stale)
        | Q(state=RunState.WAITING, requested_at__lt=lost_message)
    ).order_by("id")
    sent = []
    for run in runs:
        try:
            run_send(run_id=run.pk, task_id=str(uuid.uuid4()))
        except Exception as exc:
            log.warning("run %s: could not queue it again: %s", run.pk, exc)
            break
        sent.append(run.pk)
    return sent
