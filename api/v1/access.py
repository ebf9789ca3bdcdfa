"""Who may do what on a project (the role table of DESIGN.md), and ETags.

A user who is not a member of a project gets 404 for everything under it, so
nobody learns that it exists.
"""

from __future__ import annotations

import re

from scheduling.errors import Forbidden, NotFound
from scheduling.models import Membership, Project, Role

ALL = frozenset(Role.values)
PLANNING = frozenset({Role.SITE_MANAGER, Role.SCHEDULER})
SCHEDULER = frozenset({Role.SCHEDULER})

#: area → (roles that read, roles that write)
ACCESS: dict[str, tuple[frozenset[str], frozenset[str]]] = {
    "project": (ALL, SCHEDULER),
    "schedule": (ALL, frozenset()),
    "network": (PLANNING, SCHEDULER),
    "members": (PLANNING, SCHEDULER),
    # Runs: every member follows them; schedulers queue and cancel them.
    "runs": (ALL, SCHEDULER),
    # Progress from site: every member reads it; site managers and schedulers
    # record it.
    "progress": (ALL, PLANNING),
    # The owner's status report: every member reads it (DESIGN.md "Roles").
    "report": (ALL, frozenset()),
    # Baselines: every member reads them; schedulers capture them and choose
    # the current one. Nobody changes or deletes one.
    "baselines": (ALL, SCHEDULER),
}


def project_for(request, project_id: int | str, area: str, write: bool) -> Project:
    """The project, if the user is a member whose role allows this access."""
    try:
        pid = int(project_id)
    except (TypeError, ValueError):
        raise NotFound("no such project") from None
    membership = (
        Membership.objects.select_related("project")
        .filter(project_id=pid, user=request.user)
        .first()
        if request.user.is_authenticated
        else None
    )
    if membership is None:
        raise NotFound("no such project")
    readers, writers = ACCESS[area]
    allowed = writers if write else readers
    if membership.role not in allowed:
        verb = "change" if write else "read"
        raise Forbidden(
            f"a {membership.get_role_display().lower()} may not {verb} this"
        )
    return membership.project


def may_write(request, project: Project, area: str) -> bool:
    """Whether the signed-in user's role on ``project`` may write ``area``
    (for pages that show or hide a form by the same table the API uses)."""
    role = (
        Membership.objects.filter(project=project, user=request.user)
        .values_list("role", flat=True)
        .first()
    )
    return role in ACCESS[area][1]


_TAG = re.compile(r'^\s*(?:W/)?"r?(\d+)"\s*$')


def if_match(request) -> int | None:
    """The version named by If-Match, or None when the header is absent."""
    header = request.headers.get("If-Match")
    if header is None:
        return None
    found = _TAG.match(header)
    # An unreadable tag matches no version: the write is refused with 412.
    return int(found.group(1)) if found else -1


def etag(version: int, prefix: str = "") -> str:
    return f'"{prefix}{version}"'
