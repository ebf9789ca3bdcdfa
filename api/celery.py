"""The Celery app, configured from the Django settings (``CELERY_*``).

Start a worker with ``celery -A api.celery worker`` and the timer with
``celery -A api.celery beat``; both read the same settings as the web server.
"""

import os

from celery import Celery

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "api.settings")

app = Celery("sitepace")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()
