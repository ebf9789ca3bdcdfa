"""Settings, read from the environment.

The embedded default needs nothing set: SQLite under ``var/`` and a Celery
broker on the local file system. Production sets ``SECRET_KEY``,
``ALLOWED_HOSTS``, ``DATABASE_URL`` (PostgreSQL) and ``CELERY_BROKER_URL``
(Redis); with ``DATABASE_URL`` set and neither ``SECRET_KEY`` nor ``DEBUG``,
the settings refuse to load.
"""

import os
import secrets
from pathlib import Path

import dj_database_url
from django.core.exceptions import ImproperlyConfigured

BASE_DIR = Path(__file__).resolve().parent.parent
VAR_DIR = Path(os.environ.get("SITEPACE_VAR_DIR", BASE_DIR / "var"))
VAR_DIR.mkdir(parents=True, exist_ok=True)


def _flag(name: str, default: bool = False) -> bool:
    value = os.environ.get(name)
    if value is None:
        return default
    return value.strip().lower() in {"1", "true", "yes", "on"}


def _local_secret_key() -> str:
    """A key made once per installation for the embedded default; never committed."""
    path = VAR_DIR / "secret_key"
    if not path.exists():
        path.write_text(secrets.token_urlsafe(50))
        path.chmod(0o600)
    return path.read_text().strip()


DEBUG = _flag("DEBUG")
# A key on this machine's disk is only right where the database is on this
# machine's disk too, or for a DEBUG run: a deployment with a shared database
# needs one key on every machine, so it must set SECRET_KEY or refuse to start.
_EMBEDDED_DATABASE = "DATABASE_URL" not in os.environ
SECRET_KEY = os.environ.get("SECRET_KEY", "")
if not SECRET_KEY:
    if not (DEBUG or _EMBEDDED_DATABASE):
        raise ImproperlyConfigured(
            "SECRET_KEY is not set; set it in the environment (only DEBUG=1 or "
            "the embedded SQLite default fall back to var/secret_key)"
        )
    SECRET_KEY = _local_secret_key()
ALLOWED_HOSTS = [
    h.strip()
    for h in os.environ.get("ALLOWED_HOSTS", "localhost,127.0.0.1").split(",")
    if h.strip()
]
if "*" in ALLOWED_HOSTS:
    raise ImproperlyConfigured("ALLOWED_HOSTS must name the hosts; '*' is refused")

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "rest_framework",
    "rest_framework.authtoken",
    "django_filters",
    "drf_spectacular",
    "drf_spectacular_sidecar",
    "scheduling",
    "frontend",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    "api.v1.errors.BodyLimit",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
]

ROOT_URLCONF = "api.urls"
WSGI_APPLICATION = "api.wsgi.application"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
            ],
        },
    },
]

DATABASES = {
    "default": dj_database_url.parse(
        os.environ.get("DATABASE_URL", f"sqlite:///{VAR_DIR / 'sitepace.sqlite3'}"),
        conn_max_age=int(os.environ.get("DATABASE_CONN_MAX_AGE", "60")),
    )
}
if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
    # The embedded default has a web server and a worker process on one file:
    # readers do not wait for the writer (WAL), writers take the lock when
    # their transaction begins and wait for it rather than fail at once.
    DATABASES["default"].setdefault("OPTIONS", {}).update(
        init_command="PRAGMA journal_mode=WAL;",
        transaction_mode="IMMEDIATE",
        timeout=30,
    )
DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator"},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
]

LANGUAGE_CODE = "en"
TIME_ZONE = "UTC"
USE_I18N = True
USE_TZ = True
LOGIN_URL = "/app/login"
LOGIN_REDIRECT_URL = "/app/projects/"
LOGOUT_REDIRECT_URL = "/app/login"
STATIC_URL = "static/"
STATIC_ROOT = VAR_DIR / "static"
STATIC_ROOT.mkdir(exist_ok=True)
# Static files (the API reference page's scripts, later the pages) are served
# by the app itself, from the installed packages, with no collect step needed.
WHITENOISE_USE_FINDERS = True
WHITENOISE_AUTOREFRESH = DEBUG

# A 2,000-activity network is about 1 MB; larger bodies are refused with 413.
SITEPACE_MAX_BODY_BYTES = int(os.environ.get("SITEPACE_MAX_BODY_BYTES", 10 * 2**20))
DATA_UPLOAD_MAX_MEMORY_SIZE = SITEPACE_MAX_BODY_BYTES

REST_FRAMEWORK = {
    "DEFAULT_SCHEMA_CLASS": "api.v1.schema.PagedSchema",
    "DEFAULT_AUTHENTICATION_CLASSES": [
        "rest_framework.authentication.TokenAuthentication",
        "rest_framework.authentication.SessionAuthentication",
    ],
    "DEFAULT_PERMISSION_CLASSES": ["rest_framework.permissions.IsAuthenticated"],
    "DEFAULT_RENDERER_CLASSES": ["rest_framework.renderers.JSONRenderer"],
    "DEFAULT_PARSER_CLASSES": ["rest_framework.parsers.JSONParser"],
    "EXCEPTION_HANDLER": "api.v1.errors.exception_handler",
    "DEFAULT_THROTTLE_CLASSES": [
        "rest_framework.throttling.AnonRateThrottle",
        "rest_framework.throttling.UserRateThrottle",
    ],
    "DEFAULT_THROTTLE_RATES": {
        "anon": os.environ.get("SITEPACE_THROTTLE_ANON", "60/minute"),
        "user": os.environ.get("SITEPACE_THROTTLE_USER", "6000/minute"),
    },
}
SPECTACULAR_SETTINGS = {
    "TITLE": "Sitepace API",
    "DESCRIPTION": "Projects, their networks, and critical-path schedules.",
    "VERSION": "1",
    "SWAGGER_UI_DIST": "SIDECAR",
    "SWAGGER_UI_FAVICON_HREF": "SIDECAR",
    "REDOC_DIST": "SIDECAR",
    "COMPONENT_SPLIT_REQUEST": True,
    "POSTPROCESSING_HOOKS": [
        "drf_spectacular.hooks.postprocess_schema_enums",
        "api.v1.schema.add_error_envelope",
    ],
}


# Celery: Redis in production; the embedded default uses kombu's file-system
# transport, which needs no server (a real worker process all the same).
def _seconds(name: str, default: float) -> float:
    try:
        return float(os.environ.get(name, default))
    except ValueError:
        raise ImproperlyConfigured(f"{name} must be a number of seconds") from None


_broker_dir = VAR_DIR / "celery"
CELERY_BROKER_URL = os.environ.get("CELERY_BROKER_URL", "filesystem://")
# The time limits nest: the longest solve a run may ask for < the task's soft
# limit < its hard limit < the broker's visibility timeout, so a message is
# never handed to a second worker while the first may still be working on it.
SITEPACE_RUN_MAX_SECONDS = _seconds("SITEPACE_RUN_MAX_SECONDS", 600)
CELERY_TASK_SOFT_TIME_LIMIT = _seconds(
    "SITEPACE_TASK_SOFT_LIMIT", SITEPACE_RUN_MAX_SECONDS + 60
)
CELERY_TASK_TIME_LIMIT = _seconds(
    "SITEPACE_TASK_HARD_LIMIT", CELERY_TASK_SOFT_TIME_LIMIT + 30
)
SITEPACE_VISIBILITY_TIMEOUT = _seconds(
    "SITEPACE_BROKER_VISIBILITY_TIMEOUT", CELERY_TASK_TIME_LIMIT + 180
)
if not (
    0
    < SITEPACE_RUN_MAX_SECONDS
    < CELERY_TASK_SOFT_TIME_LIMIT
    < CELERY_TASK_TIME_LIMIT
    < SITEPACE_VISIBILITY_TIMEOUT
):
    raise ImproperlyConfigured(
        "time limits must nest: SITEPACE_RUN_MAX_SECONDS < SITEPACE_TASK_SOFT_LIMIT "
        "< SITEPACE_TASK_HARD_LIMIT < SITEPACE_BROKER_VISIBILITY_TIMEOUT"
    )
#: A working run whose heartbeat is older than this counts as abandoned (its
#: worker died): a later delivery may take it over. The heartbeat is written
#: every fifth of it.
SITEPACE_RUN_STALE_SECONDS = _seconds("SITEPACE_RUN_STALE_SECONDS", 30)
#: How often a run may be taken up again after its worker was lost.
SITEPACE_RUN_MAX_ATTEMPTS = int(_seconds("SITEPACE_RUN_MAX_ATTEMPTS", 3))
#: Seconds a nightly re-levelling gives the solver.
SITEPACE_NIGHTLY_TIME_LIMIT = _seconds("SITEPACE_NIGHTLY_TIME_LIMIT", 60)
#: Solver threads per run (CP-SAT ``num_workers``).
SITEPACE_SOLVER_WORKERS = int(_seconds("SITEPACE_SOLVER_WORKERS", 2))

if CELERY_BROKER_URL.startswith("filesystem://"):
    for sub in ("queue", "processed"):
        (_broker_dir / sub).mkdir(parents=True, exist_ok=True)
    CELERY_BROKER_TRANSPORT_OPTIONS: dict = {
        "data_folder_in": str(_broker_dir / "queue"),
        "data_folder_out": str(_broker_dir / "queue"),
        "processed_folder": str(_broker_dir / "processed"),
        "store_processed": False,
    }
else:
    CELERY_BROKER_TRANSPORT_OPTIONS = {
        "visibility_timeout": SITEPACE_VISIBILITY_TIMEOUT,
        # Sweep for messages of lost workers at least every tenth of the
        # visibility timeout (kombu's default sweep is 100 s apart).
        "unacked_restore_interval": max(1, int(SITEPACE_VISIBILITY_TIMEOUT / 10)),
        "unacked_restore_throttle": 1,
        "socket_timeout": 10,
        "socket_connect_timeout": 5,
    }
    _prefix = os.environ.get("SITEPACE_BROKER_PREFIX")
    if _prefix:
        CELERY_BROKER_TRANSPORT_OPTIONS["global_keyprefix"] = _prefix
CELERY_TASK_SERIALIZER = "json"
CELERY_ACCEPT_CONTENT = ["json"]
CELERY_TIMEZONE = "UTC"
CELERY_ENABLE_UTC = True
# Runs keep their own state and progress in the database: no result backend.
CELERY_TASK_IGNORE_RESULT = True
CELERY_TASK_ACKS_LATE = True
CELERY_TASK_REJECT_ON_WORKER_LOST = True
CELERY_WORKER_PREFETCH_MULTIPLIER = 1
CELERY_BROKER_CONNECTION_TIMEOUT = 5
CELERY_BROKER_CONNECTION_RETRY_ON_STARTUP = True
CELERY_WORKER_HIJACK_ROOT_LOGGER = False
CELERY_BEAT_SCHEDULE_FILENAME = str(VAR_DIR / "beat-schedule")
CELERY_BEAT_SCHEDULE = {
    # Every quarter hour: queue the nightly re-levelling of each project whose
    # local hour is its nightly hour (projects keep their own time zones).
    "nightly-relevel": {
        "task": "scheduling.tasks.nightly_tick",
        "schedule": 15 * 60,
        "options": {"expires": 14 * 60},
    },
    # Every few minutes: take up runs whose worker was lost or whose message
    # went missing (the file-system broker cannot redeliver by itself).
    "recover-runs": {
        "task": "scheduling.tasks.runs_recover",
        "schedule": max(60.0, SITEPACE_RUN_STALE_SECONDS * 2),
        "options": {"expires": 60},
    },
}
