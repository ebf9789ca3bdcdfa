"""GET /api/v1/projects/{id}/report: JSON, the CSV zip and the PDF; who may
read it, bad parameters, and the cache."""

from __future__ import annotations

import csv
import datetime as dt
import io
import zipfile

import pytest
from pypdf import PdfReader

from api.v1 import report_serializers as rs
from scheduling import baselines, report
from scheduling.engine import SITE_CAUTION
from scheduling.models import ProgressEntry
from tests.api.conftest import error_of, token_client

from .conftest import publish, record, set_data_date

pytestmark = pytest.mark.django_db


@pytest.fixture
def reported(demo, users, monkeypatch):
    """The demo with a baseline, a data date, some progress and a nightly run."""
    publish(demo)
    baselines.baseline_capture(project=demo, user=users["scheduler"], name="Contract")
    demo = set_data_date(demo, dt.date(2027, 4, 12))
    record(
        demo,
        users["site_manager"],
        "SITE-SETUP",
        monkeypatch,
        actual_start=dt.date(2027, 3, 1),
        actual_finish=dt.date(2027, 3, 12),
    )
    record(
        demo,
        users["site_manager"],
        "SITE-POWER",
        monkeypatch,
        actual_start=dt.date(2027, 3, 8),
        percent_complete=60,
    )
    publish(demo, origin="nightly")
    demo.refresh_from_db()
    return demo


def path(project, query: str = "") -> str:
    return f"/api/v1/projects/{project.pk}/report" + (f"?{query}" if query else "")


@pytest.mark.parametrize("role", ["owner", "site_manager", "scheduler"])
def test_every_member_reads_the_report(role, reported, users):
    answer = token_client(users[role]).get(path(reported))
    assert answer.status_code == 200, answer.content[:300]
    body = answer.json()
    assert body["caution"] == SITE_CAUTION
    assert body["project"]["data_date"] == "2027-04-12"


def test_an_outsider_learns_nothing(reported, users):
    answer = token_client(users["outsider"]).get(path(reported))
    assert answer.status_code == 404
    assert error_of(answer)["code"] == "not_found"


def _undocumented(value, serializer, where: str) -> list[str]:
    """Keys of the built report that the schema's serializer does not name."""
    out = []
    fields = serializer.fields
    for key, sub in value.items():
        if key not in fields:
            out.append(f"{where}/{key}")
            continue
        field = fields[key]
        child = getattr(field, "child", None)
        if isinstance(sub, dict) and hasattr(field, "fields"):
            out += _undocumented(sub, field, f"{where}/{key}")
        elif isinstance(sub, list) and sub and hasattr(child, "fields"):
            out += _undocumented(sub[0], child, f"{where}/{key}/0")
    return out


def test_the_schema_documents_every_key_of_the_json(reported, users):
    body = token_client(users["owner"]).get(path(reported)).json()
    assert _undocumented(body, rs.ReportOut(), "") == []
    assert set(rs.ReportOut().fields) == set(body)


def test_the_json_holds_every_section(reported, users):
    body = token_client(users["owner"]).get(path(reported)).json()
    for section in report.SECTIONS:
        assert section in body, section
    assert body["sources"]["baseline"]["name"] == "Contract"
    assert body["nightly"]["version"] == 2
    assert body["since_previous"]["finished"][0]["key"] == "SITE-SETUP"
    assert body["look_ahead"]["crews"], "the look-ahead lists work by crew"
    crew_load = body["crew_load"]
    assert all(len(c["peak"]) == len(crew_load["weeks"]) for c in crew_load["crews"])


def test_csv_is_a_zip_of_one_table_per_section(reported, users):
    answer = token_client(users["owner"]).get(path(reported, "format=csv"))
    assert answer.status_code == 200
    assert answer["Content-Type"] == "application/zip"
    zf = zipfile.ZipFile(io.BytesIO(answer.content))
    names = set(zf.namelist())
    for section in report.SECTIONS:
        assert f"{section}.csv" in names, section
    caution = list(csv.reader(io.StringIO(zf.read("caution.csv").decode())))
    assert caution == [["caution"], [SITE_CAUTION]]
    milestones = list(csv.DictReader(io.StringIO(zf.read("milestones.csv").decode())))
    assert {m["key"] for m in milestones} >= {"M-START", "M-HANDOVER"}
    finished = list(csv.DictReader(io.StringIO(zf.read("since_previous.csv").decode())))
    assert {"change": "finished", "key": "SITE-SETUP"}.items() <= finished[-1].items()


def test_pdf_opens_and_holds_the_sections(reported, users):
    answer = token_client(users["owner"]).get(path(reported, "format=pdf"))
    assert answer.status_code == 200
    assert answer["Content-Type"] == "application/pdf"
    reader = PdfReader(io.BytesIO(answer.content))
    text = " ".join(" ".join(page.extract_text().split()) for page in reader.pages)
    for heading in (
        "Finish",
        "Progress, earned value and earned schedule",
        "S-curve: planned against earned, cumulative",
        "Milestones (slipped first)",
        "Critical and near-critical work",
        "Since the previous data date",
        "Late against the baseline",
        "Look-ahead by crew",
        "Crew load against capacity per week",
        "Last nightly run",
        "Site caution",
    ):
        assert heading in text, heading
    assert "IEAC(t)" in text and "SPI(t)" in text
    assert "M-HANDOVER" in text
    assert " ".join(SITE_CAUTION.split()[:12]) in text


@pytest.mark.parametrize(
    "query, pointer",
    [
        ("format=docx", "/format"),
        ("format=", None),
        ("threshold=abc", "/threshold"),
        ("threshold=-1", "/threshold"),
        ("threshold=251", "/threshold"),
        ("threshold=2.5", "/threshold"),
    ],
)
def test_bad_parameters_are_a_400_naming_the_parameter(query, pointer, reported, users):
    answer = token_client(users["owner"]).get(path(reported, query))
    if pointer is None:
        assert answer.status_code == 200
        return
    assert answer.status_code == 400, answer.content[:300]
    err = error_of(answer)
    assert [p["pointer"] for p in err["problems"]] == [pointer]
    assert pointer[1:] in err["message"]


def test_the_threshold_widens_the_near_critical_list(reported, users):
    client = token_client(users["owner"])
    none = client.get(path(reported, "threshold=0")).json()["critical"]
    wide = client.get(path(reported, "threshold=20")).json()["critical"]
    assert none["near_critical_count"] == 0
    assert wide["near_critical_count"] > 0
    assert all(r["total_float"] <= 20 for r in wide["activities"])


def test_the_report_is_cached_until_progress_moves_on(reported, users, monkeypatch):
    built = []
    real = report._Report.build

    def counting(self):
        built.append(1)
        return real(self)

    monkeypatch.setattr(report._Report, "build", counting)
    client = token_client(users["owner"])
    first = client.get(path(reported)).json()
    again = client.get(path(reported)).json()
    assert first == again and len(built) == 1
    monkeypatch.undo()
    before = ProgressEntry.objects.count()
    record(
        reported,
        users["site_manager"],
        "SITE-POWER",
        monkeypatch,
        percent_complete=90,
    )
    assert ProgressEntry.objects.count() == before + 1
    monkeypatch.setattr(report._Report, "build", counting)
    later = client.get(path(reported)).json()
    assert len(built) == 2
    assert (
        later["percent_complete"]["by_duration"]
        > first["percent_complete"]["by_duration"]
    )


def test_without_a_baseline_the_measures_say_why_they_are_absent(demo, users):
    body = token_client(users["owner"]).get(path(demo)).json()
    assert "no current baseline" in body["earned_value"]["absent"]
    assert "no current baseline" in body["earned_schedule"]["absent"]
    assert body["finish"]["baseline"] is None
    assert body["finish"]["variance_to_baseline"] is None
    assert body["nightly"]["absent"]
    assert body["project"]["data_date_set"] is False
    pdf = token_client(users["owner"]).get(path(demo, "format=pdf"))
    assert pdf.status_code == 200
    assert PdfReader(io.BytesIO(pdf.content)).pages


def test_a_project_without_activities_is_a_clear_400(users):
    from tests.api.conftest import API

    client = token_client(users["scheduler"])
    made = client.post(
        f"{API}/projects/", {"name": "Empty lot", "start": "2027-03-01"}, format="json"
    ).json()
    answer = client.get(f"{API}/projects/{made['id']}/report")
    assert answer.status_code == 400
    assert error_of(answer)["problems"][0]["pointer"] == "/activities"
