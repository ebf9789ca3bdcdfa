"""``manage.py report PROJECT [--format json|csv|pdf] [--output FILE]``."""

from __future__ import annotations

import io
import json
import zipfile

import pytest
from django.core.management import CommandError, call_command
from pypdf import PdfReader

from scheduling import baselines
from scheduling.engine import SITE_CAUTION

from .conftest import publish

pytestmark = pytest.mark.django_db


@pytest.fixture
def baselined(demo, users):
    publish(demo)
    baselines.baseline_capture(project=demo, user=users["scheduler"], name="Contract")
    return demo


def test_json_to_standard_output_by_id_or_name(baselined):
    out = io.StringIO()
    call_command("report", str(baselined.pk), stdout=out)
    body = json.loads(out.getvalue())
    assert body["caution"] == SITE_CAUTION
    assert body["sources"]["baseline"]["name"] == "Contract"
    by_name = io.StringIO()
    call_command("report", baselined.name, stdout=by_name)
    assert json.loads(by_name.getvalue()) == body


def test_csv_and_pdf_files(baselined, tmp_path):
    zipped, pdf = tmp_path / "report.zip", tmp_path / "report.pdf"
    call_command(
        "report", str(baselined.pk), "--format", "csv", "--output", str(zipped),
        stderr=io.StringIO(),
    )  # fmt: skip
    assert "earned_value.csv" in zipfile.ZipFile(zipped).namelist()
    call_command(
        "report", str(baselined.pk), "--format", "pdf", "--output", str(pdf),
        "--threshold", "10", stderr=io.StringIO(),
    )  # fmt: skip
    text = " ".join(p.extract_text() for p in PdfReader(pdf).pages)
    assert "within 10 working days" in " ".join(text.split())
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.pdf", "report.zip"]


@pytest.mark.parametrize(
    "args, message",
    [
        (["999999"], "no project '999999'"),
        (["Nowhere Hall"], "no project 'Nowhere Hall'"),
        (["{pk}", "--format", "pdf"], "give --output FILE"),
        (["{pk}", "--threshold", "lots"], "threshold must be"),
        (["{pk}", "--output", "/nonexistent/dir/r.json"], "no folder"),
    ],
)
def test_bad_arguments_are_clear_errors(args, message, baselined):
    args = [a.format(pk=baselined.pk) for a in args]
    with pytest.raises(CommandError, match=message.replace("(", r"\(")):
        call_command("report", *args, stdout=io.StringIO(), stderr=io.StringIO())
