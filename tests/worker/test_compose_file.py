"""docker-compose.yml and the Dockerfile, read as data (no Docker engine here)."""

from __future__ import annotations

from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[2]


def compose() -> dict:
    return yaml.safe_load((ROOT / "docker-compose.yml").read_text())


def test_compose_runs_the_five_services_with_health_checks():
    services = compose()["services"]
    assert {"postgres", "redis", "web", "worker", "beat"} <= set(services)
    for name in ("postgres", "redis", "web", "worker", "beat"):
        assert services[name]["healthcheck"]["test"], name


def test_compose_keeps_the_database_on_a_volume_and_settings_from_the_environment():
    doc = compose()
    services = doc["services"]
    volume = services["postgres"]["volumes"][0].split(":")[0]
    assert volume in doc["volumes"]
    for name in ("web", "worker", "beat", "migrate"):
        env = services[name]["environment"]
        assert env["SECRET_KEY"].startswith("${SECRET_KEY"), name
        assert env["DATABASE_URL"].startswith("postgres://"), name
        assert env["CELERY_BROKER_URL"].startswith("redis://redis:"), name
    # No secret is written into the file itself.
    assert (
        "${POSTGRES_PASSWORD:?"
        in services["postgres"]["environment"]["POSTGRES_PASSWORD"]
    )


def test_compose_commands_name_the_real_entry_points():
    services = compose()["services"]
    assert services["web"]["command"][:2] == ["gunicorn", "api.wsgi:application"]
    assert "worker" in services["worker"]["command"]
    assert "beat" in services["beat"]["command"]
    assert services["migrate"]["command"][-2:] == ["migrate", "--noinput"]
    import api.wsgi  # noqa: F401  (the module gunicorn loads)
    import scheduling.tasks  # noqa: F401  (what autodiscovery loads in the worker)
    from api.celery import app

    assert "scheduling.tasks.run_work" in app.tasks


def test_dockerfile_copies_what_the_package_needs():
    text = (ROOT / "Dockerfile").read_text()
    for folder in ("api", "scheduling", "frontend", "seed_data"):
        assert f"COPY {folder} ./{folder}" in text
        assert (ROOT / folder).is_dir()
    assert "pip install" in text and "USER sitepace" in text
