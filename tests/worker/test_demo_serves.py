"""``manage.py demo`` on the embedded default: a web server, a real worker on
the file-system broker and the nightly timer, all stopped by one Ctrl-C."""

from __future__ import annotations

import json
import os
import re
import signal
import subprocess
import sys
import urllib.error
import urllib.request
from pathlib import Path

from tests.worker.conftest import free_port, wait_for

ROOT = Path(__file__).resolve().parents[2]


def call(port: int, path: str, body=None, token: str | None = None):
    request = urllib.request.Request(
        f"http://127.0.0.1:{port}{path}",
        data=json.dumps(body).encode() if body is not None else None,
        headers={"Content-Type": "application/json"}
        | ({"Authorization": f"Token {token}"} if token else {}),
        method="POST" if body is not None else "GET",
    )
    try:
        with urllib.request.urlopen(request, timeout=10) as answer:
            return answer.status, json.loads(answer.read())
    except urllib.error.HTTPError as exc:
        return exc.code, json.loads(exc.read())
    except OSError:
        return None, None


def alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    # A child that has exited but is not yet reaped counts as gone.
    status = Path(f"/proc/{pid}/stat")
    return not (status.exists() and status.read_text().split()[2] == "Z")


def test_demo_runs_web_worker_and_timer_and_ctrl_c_stops_them_all(tmp_path):
    port = free_port()
    env = {
        k: v
        for k, v in os.environ.items()
        if k not in {"DATABASE_URL", "CELERY_BROKER_URL", "SECRET_KEY"}
    }
    env["SITEPACE_VAR_DIR"] = str(tmp_path)
    log = tmp_path / "demo.log"
    demo = subprocess.Popen(
        [sys.executable, "manage.py", "demo", "--port", str(port)],
        cwd=ROOT,
        env=env,
        stdout=log.open("wb"),
        stderr=subprocess.STDOUT,
    )
    try:
        started = wait_for(
            lambda: re.search(r"^Started: .*$", log.read_text(), re.M), 120, "start"
        )
        pids = [int(p) for p in re.findall(r"pid (\d+)", started.group(0))]
        assert len(pids) == 3
        wait_for(lambda: call(port, "/healthz")[0] == 200, 60, "the web server")
        password = re.search(r"demo-scheduler\s+(\S+)", log.read_text()).group(1)
        _, answer = call(
            port,
            "/api/v1/auth/token",
            {"username": "demo-scheduler", "password": password},
        )
        token = answer["token"]
        project = re.search(r"\(id (\d+),", log.read_text()).group(1)
        base = f"/api/v1/projects/{project}"
        status, run = call(port, f"{base}/runs/", {"kind": "cpm"}, token)
        assert status == 202, run

        def published():
            _, got = call(port, f"{base}/runs/{run['id']}", token=token)
            return got if got and got["state"] not in ("waiting", "working") else None

        done = wait_for(published, 90, "the worker to publish the run")
        assert done["state"] == "published", done
        _, schedule = call(port, f"{base}/schedule", token=token)
        assert schedule["published"]["version"] == done["version"]

        demo.send_signal(signal.SIGINT)  # what Ctrl-C sends
        assert demo.wait(timeout=60) == 0, log.read_text()
        assert not [pid for pid in pids if alive(pid)], log.read_text()
        assert "stopped the web server, the worker and the timer" in log.read_text()
    finally:
        if demo.poll() is None:
            demo.kill()
            demo.wait()
