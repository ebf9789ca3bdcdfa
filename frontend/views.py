"""The pages: thin views that check access, read through the selectors and
render. Every page that shows dates carries the site caution."""

from __future__ import annotations

from functools import wraps

from django.contrib.auth.decorators import login_required
from django.shortcuts import render
from django.utils.safestring import mark_safe

from api.v1.access import may_write, project_for
from scheduling.engine import SITE_CAUTION
from scheduling.errors import ServiceError

from . import charts, selectors


class BadParameter(ServiceError):
    status = 400
    code = "bad_parameter"


def _choice(request, name: str, allowed: dict[str, str], default: str) -> str:
    value = request.GET.get(name, default)
    if value not in allowed:
        raise BadParameter(f"{name} must be one of {', '.join(allowed)}; got {value!r}")
    return value


def error_page(request, exc: ServiceError):
    """A domain error as a page with its status, its problems and the caution."""
    return render(
        request,
        "frontend/error.html",
        {
            "status": exc.status,
            "message": exc.message,
            "problems": exc.problems,
            "caution": SITE_CAUTION,
        },
        status=exc.status,
    )


def _page(view):
    """Sign-in required, the project read with the API's role table, and every
    domain error answered as a page with its status."""

    @login_required
    @wraps(view)
    def wrapped(request, project_id):
        try:
            project = project_for(request, project_id, "schedule", write=False)
            return view(request, project)
        except ServiceError as exc:
            return error_page(request, exc)

    return wrapped


@login_required
def projects(request):
    return render(
        request,
        "frontend/projects.html",
        {
            "memberships": selectors.projects_of_user(user=request.user),
            "caution": SITE_CAUTION,
        },
    )


@_page
def overview(request, project):
    context = selectors.overview_get(project=project)
    panel = selectors.run_panel_get(
        project=project, can_start=may_write(request, project, "runs")
    )
    return render(
        request,
        "frontend/overview.html",
        {**context, "run_panel": panel, "project": project, "page": "overview"},
    )


@_page
def bars(request, project):
    zoom = _choice(request, "zoom", {z: z for z in charts.ZOOMS}, "weeks")
    group = _choice(request, "group", charts.GROUPINGS, "zone")
    links = _choice(request, "relations", {"on": "on", "off": "off"}, "off")
    data = selectors.page_data_get(project=project)
    chart = charts.bar_chart(
        data.schedule,
        data.network,
        zoom=zoom,
        group=group,
        baseline=data.baseline_dates,
        relations=links == "on",
    )
    return render(
        request,
        "frontend/bars.html",
        {
            "project": project,
            "page": "bars",
            "data": data,
            "chart": chart,
            "defs": mark_safe(charts.defs_svg()),  # noqa: S308 - escaped in charts
            "zoom": zoom,
            "zooms": list(charts.ZOOMS),
            "group": group,
            "groupings": charts.GROUPINGS,
            "relations": links,
            "caution": data.schedule.get("caution") or SITE_CAUTION,
            "label_width": charts.LABEL_W,
        },
    )


@_page
def crews(request, project):
    period = _choice(request, "period", charts.PERIODS, "day")
    data = selectors.page_data_get(project=project)
    hist = charts.crew_histograms(data.schedule, data.network, period=period)
    return render(
        request,
        "frontend/crews.html",
        {
            "project": project,
            "page": "crews",
            "data": data,
            "hist": hist,
            "defs": mark_safe(charts.defs_svg()),  # noqa: S308 - escaped in charts
            "period": period,
            "periods": charts.PERIODS,
            "caution": data.schedule.get("caution") or SITE_CAUTION,
            "label_width": 220,
        },
    )
