"""Celery tasks: each takes an id (or nothing), and calls a service.

``run_work`` is idempotent (see :mod:`scheduling.runs`), so it is acknowledged
late and put back when its worker is lost: a message is only gone once its
run is published, failed or cancelled. Transient database errors are retried
with a growing wait; the wait is never shorter than the stale limit, so a
claim left behind by the failed attempt has gone stale when the retry comes.
"""

from __future__ import annotations

import logging

from celery import shared_task
from django.conf import settings
from django.db import InterfaceError, OperationalError

from . import runs

log = logging.getLogger(__name__)

MAX_RETRIES = 5


@shared_task(
    bind=True,
    name="scheduling.tasks.run_work",
    acks_late=True,
    reject_on_worker_lost=True,
    max_retries=MAX_RETRIES,
)
def run_work(self, run_id: int) -> str:
    try:
        outcome = runs.run_execute(run_id=int(run_id), task_id=self.request.id or "")
    except (OperationalError, InterfaceError) as exc:
        wait = 2 ** (self.request.retries + 1)
        countdown = max(wait, settings.SITEPACE_RUN_STALE_SECONDS + 1)
        log.warning("run %s: transient error, retry in %ss: %s", run_id, countdown, exc)
        raise self.retry(exc=exc, countdown=min(countdown, 300)) from exc
    log.info("%s", outcome)
    return outcome


@shared_task(name="scheduling.tasks.nightly_tick", ignore_result=True)
def nightly_tick() -> list[int]:
    """Queue the nightly re-levelling of every project whose hour has come."""
    queued = []
    for project, day in runs.nightly_due():
        try:
            run = runs.nightly_queue(project=project, day=day)
        except runs.QueueUnavailable:
            log.warning("nightly: the queue is down; the next tick tries again")
            break
        if run is not None:
            queued.append(run.pk)
    return queued


@shared_task(name="scheduling.tasks.runs_recover", ignore_result=True)
def runs_recover() -> list[int]:
    """Queue again the runs whose worker or message was lost."""
    return runs.runs_recover()
