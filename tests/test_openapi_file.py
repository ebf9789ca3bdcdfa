"""The committed OpenAPI schema (api/openapi.yaml) matches the code.

Regenerate on PostgreSQL, the production database, with
``DATABASE_URL=postgres://… .venv/bin/python manage.py spectacular --file
api/openapi.yaml``; the file shows API changes in review.
"""

from pathlib import Path

import pytest
from django.core.management import call_command
from django.db import connection

COMMITTED = Path(__file__).resolve().parents[1] / "api" / "openapi.yaml"


@pytest.mark.skipif(
    connection.vendor != "postgresql",
    reason="integer ranges in the schema come from the database backend; the "
    "committed schema is PostgreSQL's (CI runs on PostgreSQL)",
)
def test_committed_schema_is_current(tmp_path):
    fresh = tmp_path / "openapi.yaml"
    call_command("spectacular", "--file", str(fresh))
    assert fresh.read_text() == COMMITTED.read_text(), (
        "api/openapi.yaml is stale: run manage.py spectacular --file api/openapi.yaml "
        "on PostgreSQL"
    )
