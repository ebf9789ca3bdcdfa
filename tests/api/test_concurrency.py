"""Two clients write the same thing with the same ETag: exactly one wins.

The loser gets 412 and the stored value is the winner's. Sequentially through
the test client on any database; with two threads racing against a live
server on PostgreSQL (SQLite serialises writers on one file lock, and the
test server shares one in-memory connection, so the race is not real there).
"""

from __future__ import annotations

import json
import threading
import urllib.error
import urllib.request

import pytest
from django.db import connection
from rest_framework.authtoken.models import Token

from scheduling.models import Activity, Project

from .conftest import API, error_of, token_client, url


def _second_scheduler(clients, project, make_user):
    """Another scheduler of the same project, with a client of their own."""
    other = make_user("sasha.second")
    added = clients["scheduler"].post(
        url(project, "members/"),
        {"username": other.username, "role": "scheduler"},
        format="json",
    )
    assert added.status_code == 201
    return token_client(other)


@pytest.mark.django_db
def test_two_writes_of_one_activity_with_one_etag_one_wins_the_other_gets_412(
    clients, project, make_user
):
    first = clients["scheduler"]
    second = _second_scheduler(clients, project, make_user)
    frame = Activity.objects.get(project_id=project["id"], key="FRAME")
    path = url(project, f"activities/{frame.pk}/")
    etag_a = first.get(path)["ETag"]
    etag_b = second.get(path)["ETag"]
    assert etag_a == etag_b

    won = first.patch(path, {"duration": 6}, format="json", HTTP_IF_MATCH=etag_a)
    lost = second.patch(path, {"duration": 9}, format="json", HTTP_IF_MATCH=etag_b)
    assert won.status_code == 200, won.content
    assert lost.status_code == 412, lost.content
    assert error_of(lost)["code"] == "version_mismatch"
    frame.refresh_from_db()
    assert frame.duration == 6
    assert second.get(path).json()["duration"] == 6


@pytest.mark.django_db
def test_two_network_puts_with_one_etag_one_wins_the_other_gets_412(
    clients, project, make_user
):
    first = clients["scheduler"]
    second = _second_scheduler(clients, project, make_user)
    doc = first.get(url(project, "network"))
    etag = doc["ETag"]
    mine, theirs = doc.json(), doc.json()
    mine["activities"][0]["duration"] = 4
    theirs["activities"][0]["duration"] = 5
    won = first.put(url(project, "network"), mine, format="json", HTTP_IF_MATCH=etag)
    lost = second.put(
        url(project, "network"), theirs, format="json", HTTP_IF_MATCH=etag
    )
    assert (won.status_code, lost.status_code) == (200, 412)
    assert second.get(url(project, "network")).json() == mine


def _patch(base: str, path: str, token: str, etag: str, duration: int):
    request = urllib.request.Request(
        base + path,
        data=json.dumps({"duration": duration}).encode(),
        method="PATCH",
        headers={
            "Authorization": f"Token {token}",
            "If-Match": etag,
            "Content-Type": "application/json",
        },
    )
    try:
        with urllib.request.urlopen(request, timeout=30) as answer:
            return answer.status
    except urllib.error.HTTPError as refused:
        return refused.code


ROUNDS = 8


@pytest.mark.django_db(transaction=True)
def test_two_threads_racing_with_one_etag_exactly_one_wins(
    live_server, clients, users, project, make_user
):
    if connection.vendor != "postgresql":
        pytest.skip(
            "SQLite: one file lock serialises the writers and the live server "
            "shares the test's in-memory connection, so the race is not real; "
            "runs on PostgreSQL"
        )
    _second_scheduler(clients, project, make_user)
    tokens = [
        Token.objects.get(user=users["scheduler"]).key,
        Token.objects.get(user__username="sasha.second").key,
    ]
    frame = Activity.objects.get(project_id=project["id"], key="FRAME")
    path = f"{API}/projects/{project['id']}/activities/{frame.pk}/"
    for round_ in range(ROUNDS):
        frame.refresh_from_db()
        etag = f'"{frame.version}"'
        values = (100 + 2 * round_, 101 + 2 * round_)
        results: dict[int, int] = {}
        start = threading.Barrier(2)

        def write(i: int, etag=etag, values=values, results=results, start=start):
            start.wait()
            results[i] = _patch(live_server.url, path, tokens[i], etag, values[i])

        threads = [threading.Thread(target=write, args=(i,)) for i in (0, 1)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(60)
        assert sorted(results.values()) == [200, 412], (round_, results)
        winner = next(i for i, code in results.items() if code == 200)
        frame.refresh_from_db()
        assert frame.duration == values[winner], round_
        assert frame.version == int(etag.strip('"')) + 1
    revision = Project.objects.get(pk=project["id"]).revision
    assert revision == project["revision"] + ROUNDS
