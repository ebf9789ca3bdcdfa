"""The committed OpenAPI schema (api/openapi.yaml) matches the code.

Regenerate with ``.venv/bin/python manage.py spectacular --file api/openapi.yaml``;
the file shows API changes in review.
"""

from pathlib import Path

from django.core.management import call_command

COMMITTED = Path(__file__).resolve().parents[1] / "api" / "openapi.yaml"


def test_committed_schema_is_current(tmp_path):
    fresh = tmp_path / "openapi.yaml"
    call_command("spectacular", "--file", str(fresh))
    assert fresh.read_text() == COMMITTED.read_text(), (
        "api/openapi.yaml is stale: run manage.py spectacular --file api/openapi.yaml"
    )
