"""The Django shell around the engine: health, settings, the command line."""

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from django.conf import settings

ROOT = Path(__file__).resolve().parents[1]

TINY = {
    "format": "sitepace.network/1",
    "project": {"name": "Shed", "start": "2027-03-01", "calendar": "weekdays"},
    "calendars": [{"key": "weekdays", "workdays": ["mon", "tue", "wed", "thu", "fri"]}],
    "activities": [
        {"key": "BASE", "duration": 3},
        {"key": "WALLS", "duration": 4},
        {"key": "DONE", "duration": 0},
    ],
    "relations": [
        {
            "pred": "BASE",
            "succ": "WALLS",
            "type": "FS",
            "lag": 2,
            "lag_unit": "calendar_days",
        },
        {"pred": "WALLS", "succ": "DONE"},
    ],
}


def manage(*args, stdin=None):
    return subprocess.run(
        [sys.executable, "manage.py", *args],
        cwd=ROOT,
        input=stdin,
        capture_output=True,
        text=True,
        timeout=120,
    )


@pytest.mark.django_db
def test_healthz_answers_ok(client):
    response = client.get("/healthz")
    assert response.status_code == 200
    assert response.json() == {"status": "ok"}


def test_allowed_hosts_are_named_not_wildcard():
    assert "*" not in settings.ALLOWED_HOSTS


def _settings_load(tmp_path, **env):
    clean = {k: v for k, v in os.environ.items() if k not in {"SECRET_KEY", "DEBUG"}}
    clean.update(env, SITEPACE_VAR_DIR=str(tmp_path / "var"))
    return subprocess.run(
        [sys.executable, "-c", "from django.conf import settings; settings.SECRET_KEY"],
        cwd=ROOT,
        env={**clean, "DJANGO_SETTINGS_MODULE": "api.settings"},
        capture_output=True,
        text=True,
        timeout=60,
    )


def test_settings_refuse_a_shared_database_without_secret_key(tmp_path):
    out = _settings_load(tmp_path, DATABASE_URL=f"sqlite:///{tmp_path / 'db'}")
    assert out.returncode != 0
    assert "SECRET_KEY is not set" in out.stderr
    assert not (tmp_path / "var" / "secret_key").exists()


def test_debug_run_keeps_one_generated_key_per_machine(tmp_path):
    env = {"DATABASE_URL": f"sqlite:///{tmp_path / 'db'}", "DEBUG": "1"}
    assert _settings_load(tmp_path, **env).returncode == 0
    key = (tmp_path / "var" / "secret_key").read_text()
    assert len(key) >= 50
    assert _settings_load(tmp_path, **env).returncode == 0
    assert (tmp_path / "var" / "secret_key").read_text() == key


def test_schedule_command_writes_the_schedule_document(tmp_path):
    src = tmp_path / "shed.json"
    src.write_text(json.dumps(TINY))
    out = manage("schedule", str(src))
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["format"] == "sitepace.schedule/1"
    # BASE Mon 1–Wed 3; +2 calendar days from Thu 4 → Sat 6 → Mon 8; WALLS Mon
    # 8–Thu 11; DONE is the point at the start of Friday 12.
    walls = next(a for a in doc["activities"] if a["key"] == "WALLS")
    assert (walls["early_start"], walls["early_finish"]) == ("2027-03-08", "2027-03-11")
    assert doc["project"]["finish"] == "2027-03-12"
    assert "caution" in doc

    target = tmp_path / "out.json"
    out = manage("schedule", str(src), "--output", str(target))
    assert out.returncode == 0 and out.stdout == ""
    assert json.loads(target.read_text()) == doc


def test_schedule_command_reads_stdin():
    out = manage("schedule", "-", stdin=json.dumps(TINY))
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout)["project"]["name"] == "Shed"


def test_bad_network_exits_2_listing_every_problem_without_traceback(tmp_path):
    bad = json.loads(json.dumps(TINY))
    bad["activities"][1]["duration"] = -4
    bad["relations"].append({"pred": "DONE", "succ": "BASE"})
    src = tmp_path / "bad.json"
    src.write_text(json.dumps(bad))
    target = tmp_path / "never.json"
    out = manage("schedule", str(src), "--output", str(target))
    assert out.returncode == 2
    assert "2 problems" in out.stderr
    assert "/activities/1/duration: activity WALLS: duration" in out.stderr
    assert "BASE → WALLS → DONE → BASE" in out.stderr
    assert "Traceback" not in out.stderr
    assert not target.exists()


def test_malformed_json_names_line_and_column(tmp_path):
    src = tmp_path / "broken.json"
    src.write_text('{\n  "format": "sitepace.network/1",\n  "project": [}\n')
    out = manage("schedule", str(src))
    assert out.returncode == 2
    assert "line 3, column 15" in out.stderr
    assert "Traceback" not in out.stderr


def test_missing_file_exits_2():
    out = manage("schedule", "no/such/file.json")
    assert out.returncode == 2
    assert "cannot read no/such/file.json" in out.stderr


def embedded_demo_check(var_dir: Path) -> subprocess.CompletedProcess:
    """``manage.py demo --check`` on the embedded default, as a new user runs
    it: SQLite and the file-system broker under its own folder, a real worker
    process, no server of any kind."""
    env = {
        k: v
        for k, v in os.environ.items()
        if k not in ("DATABASE_URL", "SECRET_KEY", "CELERY_BROKER_URL")
    }
    env["SITEPACE_VAR_DIR"] = str(var_dir)
    return subprocess.run(
        [sys.executable, "manage.py", "demo", "--check"],
        cwd=ROOT,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )


def test_demo_check_levels_through_a_real_worker_on_the_embedded_default(tmp_path):
    out = embedded_demo_check(tmp_path)
    assert out.returncode == 0, out.stdout + out.stderr
    text = out.stdout
    assert "Finish:" in text
    assert "Driving path to the finish" in text
    assert "M-HANDOVER" in text
    assert "Crews at early dates" in text
    assert "competent person" in text
    assert "demo-site-manager" in text
    # The levelling went through the broker to the worker and was published.
    assert "published as schedule version 1." in text
    assert "(optimal)" in text or "(feasible)" in text
    assert text.rstrip().endswith("demo check: ok")
    assert (tmp_path / "sitepace.sqlite3").exists()
    assert (tmp_path / "celery" / "queue").is_dir()
    assert "ready." in (tmp_path / "demo-check-worker.log").read_text()


def test_demo_loads_once_and_its_users_can_sign_in(tmp_path):
    import sqlite3

    first, second = embedded_demo_check(tmp_path), embedded_demo_check(tmp_path)
    assert first.returncode == 0 and second.returncode == 0, second.stderr
    assert "published as schedule version 2." in second.stdout
    db = sqlite3.connect(tmp_path / "sitepace.sqlite3")
    assert db.execute("SELECT count(*) FROM scheduling_project").fetchone() == (1,)
    roles = sorted(r for (r,) in db.execute("SELECT role FROM scheduling_membership"))
    assert roles == ["owner", "scheduler", "site_manager"]
    # The passwords printed by the second run are the ones that work now.
    line = next(x for x in second.stdout.splitlines() if "demo-owner" in x)
    password = line.split()[-1]
    hashed = db.execute(
        "SELECT password FROM auth_user WHERE username = 'demo-owner'"
    ).fetchone()[0]
    from django.contrib.auth.hashers import check_password

    assert check_password(password, hashed)
