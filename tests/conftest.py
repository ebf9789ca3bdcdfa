"""Test options: opt-in benchmarks, and services that must be there in CI."""

from __future__ import annotations

import os

import pytest


def pytest_addoption(parser):
    parser.addoption(
        "--bench",
        action="store_true",
        default=False,
        help="run the benchmarks under tests/bench (they print their figures)",
    )


def pytest_collection_modifyitems(config, items):
    if config.getoption("--bench"):
        return
    skip = pytest.mark.skip(reason="benchmark: run with --bench")
    for item in items:
        if "bench" in item.keywords:
            item.add_marker(skip)


def pytest_sessionstart(session):
    """In CI (SITEPACE_REQUIRE_SERVICES=1) a missing database fails the run."""
    if os.environ.get("SITEPACE_REQUIRE_SERVICES") != "1":
        return
    url = os.environ.get("DATABASE_URL", "")
    if not url.startswith(("postgres://", "postgresql://")):
        pytest.exit("CI must test on PostgreSQL: set DATABASE_URL", returncode=3)
    import psycopg

    try:
        psycopg.connect(url, connect_timeout=5).close()
    except psycopg.OperationalError as exc:
        pytest.exit(f"PostgreSQL is not reachable at {url}: {exc}", returncode=3)
