"""The Celery app, configured from the Django settings (``CELERY_*``).

Start a worker with ``celery -A api.celery worker`` and the timer with
``celery -A api.celery beat``; both read the same settings as the web server.
"""

import os

from celery import Celery
from celery.signals import worker_process_init

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "api.settings")

app = Celery("sitepace")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()


@worker_process_init.connect
def _compile_levelling_passes(**_kwargs: object) -> None:
    """Compile the levelling's serial passes as each worker process starts,
    so the first run does not spend its time limit on it."""
    from scheduling.engine import passes

    passes.warm_up()
