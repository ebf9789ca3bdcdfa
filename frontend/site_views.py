"""The site page: the crews' look-ahead and progress entry on a tablet.

Server-rendered; ``static/frontend/site.js`` keeps entries in the browser
first and sends them with their idempotency keys when the signal allows.
"""

from __future__ import annotations

from django.contrib.auth.decorators import login_required
from django.middleware.csrf import get_token
from django.shortcuts import render

from api.v1.access import may_write, project_for
from scheduling.engine import SITE_CAUTION
from scheduling.errors import ServiceError

from . import site_selectors
from .views import error_page


@login_required
def site(request, project_id):
    try:
        project = project_for(request, project_id, "progress", write=False)
        context = site_selectors.site_page_get(
            project=project, crew=request.GET.get("crew", "")
        )
    except ServiceError as exc:
        return error_page(request, exc)
    return render(
        request,
        "frontend/site.html",
        {
            **context,
            "project": project,
            "page": "site",
            "can_record": may_write(request, project, "progress"),
            "site_caution": SITE_CAUTION,
            "csrf": get_token(request),
        },
    )
