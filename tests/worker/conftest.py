"""Fixtures of the worker tests: real Celery workers on Redis and PostgreSQL.

A worker is a separate process, so it must see committed rows: the tests that
start one are ``transaction=True`` tests on PostgreSQL, and the worker
connects to the test database pytest-django made. Each test session uses its
own key prefix on Redis, so that nothing of another run (or of anyone else on
the same Redis) is ever delivered to these workers.

Without PostgreSQL or Redis those tests skip with the reason; with
``SITEPACE_REQUIRE_SERVICES=1`` (CI) they fail instead.
"""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import time
import uuid
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest
from django.db import connection

from tests.api.conftest import (  # noqa: F401 (fixtures used by the tests here)
    _fast_passwords,
    _fresh_throttle_counts,
    clients,
    make_user,
    users,
)

ROOT = Path(__file__).resolve().parents[2]
REDIS_URL = os.environ.get("SITEPACE_TEST_REDIS_URL", "redis://127.0.0.1:6379/0")
REQUIRED = os.environ.get("SITEPACE_REQUIRE_SERVICES") == "1"

#: Short limits for the tests, nested as in production: the longest solve <
#: soft limit < hard limit < visibility timeout; a claim is stale after 4 s.
LIMITS = {
    "SITEPACE_RUN_MAX_SECONDS": "6",
    "SITEPACE_TASK_SOFT_LIMIT": "9",
    "SITEPACE_TASK_HARD_LIMIT": "11",
    "SITEPACE_BROKER_VISIBILITY_TIMEOUT": "12",
    "SITEPACE_RUN_STALE_SECONDS": "4",
}
PREFIX = f"sitepace-test-{uuid.uuid4().hex[:10]}:"


def missing(what: str) -> None:
    """Fail in CI, skip elsewhere."""
    if REQUIRED:
        pytest.fail(f"{what} (SITEPACE_REQUIRE_SERVICES=1: the service must be there)")
    pytest.skip(what)


def redis_reachable(url: str) -> bool:
    import redis

    try:
        redis.Redis.from_url(url, socket_connect_timeout=2).ping()
    except redis.RedisError:
        return False
    return True


@pytest.fixture
def postgres() -> None:
    if connection.vendor != "postgresql":
        missing(
            "a worker process cannot see the in-memory SQLite test database; "
            "run with DATABASE_URL=postgres://…"
        )


@pytest.fixture
def redis_url() -> str:
    if not redis_reachable(REDIS_URL):
        missing(f"Redis is not reachable at {REDIS_URL}")
    return REDIS_URL


def transport_options(visibility: float = 12) -> dict[str, Any]:
    return {
        "visibility_timeout": visibility,
        "unacked_restore_interval": 1,
        "unacked_restore_throttle": 1,
        "socket_timeout": 5,
        "socket_connect_timeout": 2,
        "global_keyprefix": PREFIX,
    }


@pytest.fixture
def broker(settings) -> Iterator[Callable[[str], None]]:
    """Point this process's Celery app (the web side) at a broker URL."""
    from api.celery import app

    saved = (app.conf.broker_url, app.conf.broker_transport_options)

    def use(url: str) -> None:
        app.conf.broker_url = url
        app.conf.broker_transport_options = (
            transport_options() if url.startswith("redis") else {}
        )

    yield use
    app.conf.broker_url, app.conf.broker_transport_options = saved


class Worker:
    """One ``celery worker`` process (and its pool) in its own process group."""

    def __init__(self, broker_url: str, log: Path, concurrency: int = 1):
        db = connection.settings_dict
        database_url = (
            f"postgres://{db['USER'] or 'postgres'}@{db['HOST'] or '127.0.0.1'}:"
            f"{db['PORT'] or 5432}/{db['NAME']}"
        )
        env = {
            **os.environ,
            **LIMITS,
            "DATABASE_URL": database_url,
            "DATABASE_CONN_MAX_AGE": "0",
            "SECRET_KEY": os.environ.get("SECRET_KEY") or "worker-test-key",
            "CELERY_BROKER_URL": broker_url,
            "SITEPACE_BROKER_PREFIX": PREFIX,
            "SITEPACE_VAR_DIR": str(log.parent),
        }
        self.log = log
        self.proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "celery",
                "-A",
                "api.celery",
                "worker",
                "--loglevel=INFO",
                f"--concurrency={concurrency}",
                "--without-gossip",
                "--without-mingle",
                "--without-heartbeat",
                f"--hostname=test-{uuid.uuid4().hex[:8]}@%h",
            ],
            cwd=ROOT,
            env=env,
            stdout=log.open("ab"),
            stderr=subprocess.STDOUT,
            start_new_session=True,
        )

    def wait_ready(self, timeout: float = 60) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise AssertionError(f"the worker died:\n{self.log.read_text()}")
            if " ready." in self.log.read_text(errors="replace"):
                return
            time.sleep(0.2)
        raise AssertionError(f"the worker did not start:\n{self.log.read_text()}")

    def kill(self) -> None:
        """SIGKILL to the worker and its pool, all at once."""
        try:
            os.killpg(self.proc.pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
        self.proc.wait(timeout=10)

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                pass
        self.kill()


@pytest.fixture
def start_worker(tmp_path) -> Iterator[Callable[..., Worker]]:
    started: list[Worker] = []

    def start(broker_url: str, concurrency: int = 1) -> Worker:
        worker = Worker(
            broker_url, tmp_path / f"worker-{len(started)}.log", concurrency
        )
        started.append(worker)
        worker.wait_ready()
        return worker

    yield start
    for worker in started:
        worker.stop()


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class PrivateRedis:
    """A redis-server of the test's own, on a free port, that it may stop."""

    def __init__(self, tmp: Path):
        binary = shutil.which("redis-server")
        if binary is None:
            missing("redis-server is not installed")
        self.binary, self.tmp = binary, tmp
        self.port = free_port()
        self.url = f"redis://127.0.0.1:{self.port}/0"
        self.proc: subprocess.Popen | None = None

    def start(self) -> None:
        self.proc = subprocess.Popen(
            [
                self.binary,
                "--port",
                str(self.port),
                "--bind",
                "127.0.0.1",
                "--save",
                "",
                "--appendonly",
                "no",
                "--dir",
                str(self.tmp),
            ],
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        deadline = time.monotonic() + 20
        while not redis_reachable(self.url):
            if time.monotonic() > deadline:
                raise AssertionError("the private redis-server did not start")
            time.sleep(0.1)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait(timeout=10)


@pytest.fixture
def private_redis(tmp_path) -> Iterator[PrivateRedis]:
    server = PrivateRedis(tmp_path)
    server.start()
    yield server
    server.stop()


def wait_for(check: Callable[[], Any], timeout: float, what: str) -> Any:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        got = check()
        if got:
            return got
        time.sleep(0.2)
    raise AssertionError(f"timed out after {timeout} s waiting for {what}")


@pytest.fixture(scope="session", autouse=True)
def _forget_test_keys() -> Iterator[None]:
    """At the end, remove what this session left on the shared Redis."""
    yield
    if not redis_reachable(REDIS_URL):
        return
    import redis

    client = redis.Redis.from_url(REDIS_URL)
    keys = list(client.scan_iter(match=f"{PREFIX}*"))
    if keys:
        client.delete(*keys)
