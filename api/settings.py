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
LOGIN_REDIRECT_URL = "/api/docs/"
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
# transport, which needs no server.
_broker_dir = VAR_DIR / "celery"
CELERY_BROKER_URL = os.environ.get("CELERY_BROKER_URL", "filesystem://")
if CELERY_BROKER_URL.startswith("filesystem://"):
    for sub in ("queue", "processed"):
        (_broker_dir / sub).mkdir(parents=True, exist_ok=True)
    CELERY_BROKER_TRANSPORT_OPTIONS = {
        "data_folder_in": str(_broker_dir / "queue"),
        "data_folder_out": str(_broker_dir / "queue"),
        "processed_folder": str(_broker_dir / "processed"),
        "store_processed": False,
    }
CELERY_TASK_SERIALIZER = "json"
CELERY_ACCEPT_CONTENT = ["json"]
CELERY_TIMEZONE = "UTC"
