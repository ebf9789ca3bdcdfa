"""The Django shell around the engine: health, settings, the command line."""

import datetime as dt
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from django.conf import settings

from scheduling.management.commands.schedule import _ProgressLine

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


#: An invented two-crew yard store: one mason and one joiner. The walls both
#: need the mason, so levelling must put them one after the other.
CREWED = {
    "format": "sitepace.network/1",
    "project": {"name": "Yard store", "start": "2027-03-01", "calendar": "weekdays"},
    "calendars": [
        {"key": "weekdays", "workdays": ["mon", "tue", "wed", "thu", "fri"]},
        {"key": "sixday", "workdays": ["mon", "tue", "wed", "thu", "fri", "sat"]},
    ],
    "crews": [
        {"key": "masons", "name": "Mason", "capacity": 1, "calendar": "sixday"},
        {"key": "joiners", "name": "Joiner", "capacity": 1, "calendar": "weekdays"},
    ],
    "activities": [
        {
            "key": "WALL-N",
            "duration": 4,
            "calendar": "sixday",
            "demands": {"masons": 1},
        },
        {
            "key": "WALL-S",
            "duration": 3,
            "calendar": "sixday",
            "demands": {"masons": 1},
        },
        {"key": "DOORS", "duration": 2, "demands": {"joiners": 1}},
        {"key": "HANDOVER", "duration": 0},
    ],
    "relations": [
        {"pred": "WALL-N", "succ": "DOORS"},
        {"pred": "DOORS", "succ": "HANDOVER"},
        {"pred": "WALL-S", "succ": "HANDOVER"},
    ],
}


def _level(tmp_path, network, *extra):
    src = tmp_path / "net.json"
    src.write_text(json.dumps(network))
    target = tmp_path / "levelled.json"
    out = manage("schedule", str(src), "--level", "-o", str(target), *extra)
    return out, (json.loads(target.read_text()) if target.exists() else None)


def test_schedule_level_writes_a_levelled_document_and_its_progress(tmp_path):
    out, doc = _level(tmp_path, CREWED, "--time-limit", "5")
    assert out.returncode == 0, out.stderr
    assert doc["format"] == "sitepace.schedule/1"
    dates = {a["key"]: (a["start"], a["finish"]) for a in doc["activities"]}
    assert set(dates) == {"WALL-N", "WALL-S", "DOORS", "HANDOVER"}
    # One mason: the two walls must not share a day (the crew's capacity).
    (n0, n1), (s0, s1) = dates["WALL-N"], dates["WALL-S"]
    assert n1 < s0 or s1 < n0
    # Not a terminal: plain progress lines, then the run's summary.
    lines = out.stderr.splitlines()
    assert any(line.startswith("levelling: best finish ") for line in lines)
    assert "\r" not in out.stderr
    assert lines[-1].startswith("schedule: optimal, finish ")
    assert lines[-1].endswith("gap 0.0 %")


def test_schedule_level_smooth_keeps_the_critical_path_finish(tmp_path):
    plain = json.loads(manage("schedule", "-", stdin=json.dumps(CREWED)).stdout)
    out, doc = _level(tmp_path, CREWED, "--goal", "smooth", "--time-limit", "5")
    assert out.returncode == 0, out.stderr
    # By hand: WALL-N Mon 1-Thu 4 March, DOORS Fri 5-Mon 8 (weekdays), the
    # handover on Tue 9, the critical-path finish. The one mason builds
    # WALL-S after WALL-N, on his six-day week: Fri 5, Sat 6, Mon 8; that
    # keeps the finish.
    assert plain["project"]["finish"] == doc["project"]["finish"] == "2027-03-09"
    dates = {a["key"]: (a["start"], a["finish"]) for a in doc["activities"]}
    assert dates["WALL-N"] == ("2027-03-01", "2027-03-04")
    assert dates["WALL-S"] == ("2027-03-05", "2027-03-08")
    run = doc["levelling"]
    assert (run["goal"], run["status"]) == ("smooth", "optimal")
    assert run["over_capacity"] == {"masons": 0, "joiners": 0}
    # After levelling the mason, not a relation, drives WALL-S.
    step = next(s for s in run["critical_path"] if s["key"] == "WALL-S")
    assert step["driver"] == {"kind": "crew", "pred": "WALL-N", "crew": "masons"}


def test_schedule_level_refuses_bad_options_with_exit_2(tmp_path):
    out, doc = _level(tmp_path, CREWED, "--time-limit", "0")
    assert out.returncode == 2 and doc is None
    assert "--time-limit must be between 0 and 3600 seconds" in out.stderr
    old = tmp_path / "old.json"
    old.write_text(json.dumps({"activities": [{"name": "no key"}]}))
    out, doc = _level(tmp_path, CREWED, "--previous", str(old))
    assert out.returncode == 2 and doc is None
    assert f"{old} is not a sitepace.schedule/1 document" in out.stderr
    assert "Traceback" not in out.stderr


def test_schedule_level_says_so_before_it_prepares_the_search(tmp_path):
    """A network the genetic search works on (50 to 400 activities) makes a
    new process compile its passes first: the command says so before the
    silence rather than after it."""
    net = json.loads(json.dumps(CREWED))
    net["activities"] += [
        {"key": f"BAY-{i:02d}", "duration": 1 + i % 3, "demands": {"joiners": 1}}
        for i in range(60)
    ]
    net["relations"] += [
        {"pred": f"BAY-{i:02d}", "succ": f"BAY-{i + 1:02d}", "type": "SS", "lag": 1}
        for i in range(0, 58, 2)
    ]
    out, doc = _level(tmp_path, net, "--time-limit", "3")
    assert out.returncode == 0, out.stderr
    lines = out.stderr.splitlines()
    assert lines[0].startswith("levelling: preparing the search")
    assert any(line.startswith("levelling: best finish ") for line in lines[1:])
    assert len(doc["activities"]) == 64


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


def test_level_progress_is_one_updating_line_on_a_terminal():
    class Terminal(io.StringIO):
        def isatty(self):
            return True

    screen = Terminal()
    line = _ProgressLine(screen, 10)
    line(dt.date(2027, 5, 3), dt.date(2027, 4, 26), 1.25)
    line(dt.date(2027, 4, 30), dt.date(2027, 4, 27), 4.5)
    line.close()
    text = screen.getvalue()
    # Each update returns to the start of the line and clears it; one newline
    # at the end, none between.
    assert text.count("\r\033[K") == 2 and text.count("\n") == 1
    assert text.endswith(
        "\r\033[Klevelling: best finish 2027-04-30  bound 2027-04-27    4.5 s of 10 s\n"
    )
