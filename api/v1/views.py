"""The REST layer: validate input, call one service or selector, serialise."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from django.contrib.auth import authenticate
from django.db.models import QuerySet
from django.http import HttpResponse
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import (
    OpenApiParameter,
    OpenApiResponse,
    extend_schema,
    extend_schema_view,
)
from rest_framework import status, viewsets
from rest_framework.authtoken.models import Token
from rest_framework.decorators import action
from rest_framework.exceptions import ParseError
from rest_framework.negotiation import DefaultContentNegotiation
from rest_framework.pagination import PageNumberPagination
from rest_framework.parsers import BaseParser
from rest_framework.permissions import AllowAny, IsAuthenticated
from rest_framework.response import Response
from rest_framework.throttling import AnonRateThrottle
from rest_framework.views import APIView

from scheduling import (
    baselines,
    progress_entries,
    report,
    report_render,
    runs,
    services,
)
from scheduling.bridge import network_document
from scheduling.engine import Problem
from scheduling.errors import Invalid, NotFound
from scheduling.models import (
    Activity,
    Calendar,
    Crew,
    Membership,
    Project,
    Relation,
    Run,
)

from . import report_serializers as rs
from . import serializers as s
from .access import etag, if_match, project_for

ORDERING = {
    "activities": ("key", "name", "duration", "zone", "trade", "id"),
    "calendars": ("key", "name", "id"),
    "crews": ("key", "name", "capacity", "id"),
    "relations": ("id", "type", "lag"),
}


class Pages(PageNumberPagination):
    page_size = 100
    page_size_query_param = "page_size"
    max_page_size = 500


def paged(request, view, qs: QuerySet, render: Callable[[Any], Any]) -> Response:
    """One page of ``qs`` (``page``, ``page_size``) in the page envelope, its
    rows turned into data by ``render(rows)``."""
    pages = Pages()
    page = pages.paginate_queryset(qs, request, view=view)
    return pages.get_paginated_response(render(page))


def many(serializer: Any, **context: Any) -> Callable[[Any], Any]:
    """``render`` for :func:`paged`: the rows through an output serializer."""
    return lambda rows: serializer(rows, many=True, context=context).data


def _ordered(request, qs: QuerySet, section: str) -> QuerySet:
    """Whitelisted ordering, always ending with the id for a stable order."""
    wanted = request.query_params.get("ordering", "")
    fields = []
    for name in filter(None, wanted.split(",")):
        bare = name.lstrip("-")
        if bare not in ORDERING[section]:
            allowed = ", ".join(ORDERING[section])
            raise Invalid(
                f"cannot order by {bare!r}; use one of {allowed}",
                [
                    services.Problem(
                        "/ordering", "bad_ordering", f"use one of {allowed}"
                    )
                ],
            )
        fields.append(name)
    default = ["key"] if section != "relations" else []
    return qs.order_by(*(fields or default), "id")


class TokenView(APIView):
    """Exchange a username and password for an API token."""

    authentication_classes: list = []
    permission_classes = [AllowAny]
    throttle_classes = [AnonRateThrottle]

    @extend_schema(request=s.TokenIn, responses={200: s.TokenOut})
    def post(self, request):
        data = s.TokenIn(data=request.data)
        data.is_valid(raise_exception=True)
        user = authenticate(request, **data.validated_data)
        if user is None:
            raise Invalid(
                "wrong username or password",
                [
                    services.Problem(
                        "/password", "bad_credentials", "wrong username or password"
                    )
                ],
            )
        token, _ = Token.objects.get_or_create(user=user)
        return Response({"token": token.key})


class ProjectViewSet(viewsets.ViewSet):
    permission_classes = [IsAuthenticated]
    lookup_value_regex = r"\d+"

    def _roles(self, request) -> dict[int, str]:
        return dict(
            Membership.objects.filter(user=request.user).values_list(
                "project_id", "role"
            )
        )

    @extend_schema(responses=s.page_of(s.ProjectOut))
    def list(self, request):
        roles = self._roles(request)
        qs = (
            Project.objects.filter(pk__in=roles)
            .select_related("calendar")
            .order_by("id")
        )
        return paged(
            request,
            self,
            qs,
            many(s.ProjectOut, roles=roles),
        )

    @extend_schema(request=s.ProjectIn, responses={201: s.ProjectOut})
    def create(self, request):
        data = s.ProjectIn(data=request.data)
        data.is_valid(raise_exception=True)
        project = services.project_create(user=request.user, **data.validated_data)
        return self._project_response(request, project, status.HTTP_201_CREATED)

    @extend_schema(responses=s.ProjectOut)
    def retrieve(self, request, pk=None):
        project = project_for(request, pk, "project", write=False)
        return self._project_response(request, project)

    @extend_schema(request=s.ProjectIn(partial=True), responses=s.ProjectOut)
    def partial_update(self, request, pk=None):
        project = project_for(request, pk, "project", write=True)
        data = s.ProjectIn(data=request.data, partial=True)
        data.is_valid(raise_exception=True)
        project = services.project_update(
            project=project,
            values=dict(data.validated_data),
            expected_revision=if_match(request),
        )
        return self._project_response(request, project)

    def _project_response(self, request, project, code=status.HTTP_200_OK):
        project.refresh_from_db()
        out = s.ProjectOut(project, context={"roles": self._roles(request)})
        return Response(
            out.data, status=code, headers={"ETag": etag(project.revision, "r")}
        )

    @extend_schema(
        methods=["GET"],
        responses={200: OpenApiResponse(description="the sitepace.network/1 document")},
    )
    @extend_schema(
        methods=["PUT"],
        request={"application/json": {"type": "object"}},
        parameters=[
            OpenApiParameter("If-Match", str, OpenApiParameter.HEADER, required=True)
        ],
        responses={200: OpenApiResponse(description="the stored network document")},
    )
    @action(detail=True, methods=["get", "put"])
    def network(self, request, pk=None):
        write = request.method == "PUT"
        project = project_for(request, pk, "network", write=write)
        if write:
            project = services.network_replace(
                project=project,
                document=request.data,
                expected_revision=if_match(request),
            )
        return Response(
            network_document(project), headers={"ETag": etag(project.revision, "r")}
        )

    @extend_schema(
        responses={
            200: OpenApiResponse(
                description="the latest published sitepace.schedule/1 document "
                "(``published`` names its version), or while nothing is published "
                "the critical path of the current revision (``published`` null)"
            )
        }
    )
    @action(detail=True, methods=["get"])
    def schedule(self, request, pk=None):
        project = project_for(request, pk, "schedule", write=False)
        document = services.schedule_get(project=project)
        published = document["published"]
        tag = (
            f"v{published['version']}-r{project.revision}"
            if published
            else f"r{project.revision}"
        )
        forecast = (published or {}).get("forecast") or document
        if forecast.get("progress_revision"):
            tag += f"-p{forecast['progress_revision']}"
        return Response(document, headers={"ETag": f'"{tag}"'})

    @extend_schema(
        responses={
            200: OpenApiResponse(
                description="the sitepace.schedule/1 critical path of the current "
                "network with the latest progress from site, cached per "
                "(revision, progress_revision)"
            )
        }
    )
    @action(detail=True, methods=["get"])
    def forecast(self, request, pk=None):
        project = project_for(request, pk, "schedule", write=False)
        document = services.forecast_get(project=project)
        tag = f'"r{document["revision"]}-p{document["progress_revision"]}"'
        return Response(document, headers={"ETag": tag})


class CsvText(BaseParser):
    """A CSV body, handed on as text."""

    media_type = "text/csv"

    def parse(self, stream, media_type=None, parser_context=None):
        raw = stream.read()
        try:
            return raw.decode("utf-8-sig")
        except UnicodeDecodeError:
            raise ParseError("the CSV is not UTF-8 text") from None


class CsvActions:
    """``GET …/export`` gives CSV; ``POST …/import`` (text/csv) merges rows."""

    csv_section: str

    @extend_schema(responses={(200, "text/csv"): OpenApiTypes.STR})
    @action(detail=False, methods=["get"], url_path="export")
    def export(self, request, project_pk=None):
        project = self.project(write=False)
        text = services.csv_export_section(project=project, section=self.csv_section)
        response = HttpResponse(text, content_type="text/csv; charset=utf-8")
        name = f"project-{project.pk}-{self.csv_section}.csv"
        response["Content-Disposition"] = f'attachment; filename="{name}"'
        response["ETag"] = etag(project.revision, "r")
        return response

    @extend_schema(
        request={"text/csv": OpenApiTypes.STR},
        parameters=[
            OpenApiParameter("If-Match", str, OpenApiParameter.HEADER, required=True)
        ],
        responses={
            200: OpenApiResponse(description="counts of added and changed rows")
        },
    )
    @action(detail=False, methods=["post"], url_path="import", parser_classes=[CsvText])
    def import_csv(self, request, project_pk=None):
        project = self.project(write=True)
        if not isinstance(request.data, str):
            raise Invalid(
                "send the CSV as text/csv",
                [services.Problem("/", "not_csv", "Content-Type must be text/csv")],
            )
        project, counts = services.csv_import(
            project=project,
            section=self.csv_section,
            text=request.data,
            expected_revision=if_match(request),
        )
        return Response(
            {**counts, "revision": project.revision},
            headers={"ETag": etag(project.revision, "r")},
        )


class NestedViewSet(viewsets.ViewSet):
    permission_classes = [IsAuthenticated]
    lookup_value_regex = r"\d+"
    area = "network"

    def project(self, write: bool) -> Project:
        return project_for(self.request, self.kwargs["project_pk"], self.area, write)


class KeyedViewSet(NestedViewSet):
    """Calendars, crews and activities: entries named by a key in the network."""

    section: str
    model: Any
    serializer_in: Any
    serializer_out: Any

    def _row(self, project: Project, pk: Any):
        try:
            return self.model.objects.get(project=project, pk=int(pk))
        except (self.model.DoesNotExist, TypeError, ValueError):
            raise NotFound(
                f"no such {services.SINGULAR[self.section]} in this project"
            ) from None

    def filtered(self, request, qs: QuerySet) -> QuerySet:
        return qs

    def out_context(self, project: Project) -> dict[str, Any]:
        """What the output serializer needs besides the rows."""
        return {}

    def out(self, project: Project, rows: Any, many: bool = False) -> Any:
        return self.serializer_out(
            rows, many=many, context=self.out_context(project)
        ).data

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = self.filtered(request, self.model.objects.filter(project=project))
        qs = _ordered(request, qs, self.section)
        return paged(request, self, qs, lambda page: self.out(project, page, many=True))

    def retrieve(self, request, project_pk=None, pk=None):
        project = self.project(write=False)
        row = self._row(project, pk)
        return Response(self.out(project, row), headers={"ETag": etag(row.version)})

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = self.serializer_in(data=request.data)
        data.is_valid(raise_exception=True)
        entry = s.as_entry(data.validated_data)
        services.keyed_save(
            project=project,
            section=self.section,
            key=None,
            values=entry,
            expected_version=None,
            current_version=None,
        )
        row = self.model.objects.get(project=project, key=entry["key"])
        return Response(
            self.out(project, row),
            status=status.HTTP_201_CREATED,
            headers={"ETag": etag(row.version)},
        )

    def _change(self, request, pk, partial: bool):
        project = self.project(write=True)
        row = self._row(project, pk)
        data = self.serializer_in(data=request.data, partial=partial)
        data.is_valid(raise_exception=True)
        entry = s.as_entry(data.validated_data)
        services.keyed_save(
            project=project,
            section=self.section,
            key=row.key,
            values=entry,
            expected_version=if_match(request),
            current_version=row.version,
        )
        row = self.model.objects.get(project=project, key=entry.get("key", row.key))
        return Response(self.out(project, row), headers={"ETag": etag(row.version)})

    def update(self, request, project_pk=None, pk=None):
        return self._change(request, pk, partial=False)

    def partial_update(self, request, project_pk=None, pk=None):
        return self._change(request, pk, partial=True)

    def destroy(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        row = self._row(project, pk)
        services.keyed_delete(
            project=project,
            section=self.section,
            key=row.key,
            expected_version=if_match(request),
            current_version=row.version,
        )
        return Response(status=status.HTTP_204_NO_CONTENT)


@extend_schema(request=s.CalendarIn, responses=s.CalendarOut)
@extend_schema_view(list=extend_schema(responses=s.page_of(s.CalendarOut)))
class CalendarViewSet(KeyedViewSet):
    section, model = "calendars", Calendar
    serializer_in, serializer_out = s.CalendarIn, s.CalendarOut


@extend_schema(request=s.CrewIn, responses=s.CrewOut)
@extend_schema_view(list=extend_schema(responses=s.page_of(s.CrewOut)))
class CrewViewSet(KeyedViewSet):
    section, model = "crews", Crew
    serializer_in, serializer_out = s.CrewIn, s.CrewOut


@extend_schema(
    request=s.ActivityIn,
    responses=s.ActivityOut,
    parameters=[
        OpenApiParameter("crew", str, description="only activities needing this crew"),
        OpenApiParameter("zone", str),
        OpenApiParameter("trade", str),
        OpenApiParameter("critical", bool, description="only critical activities"),
        OpenApiParameter("from", str, description="early dates overlap from this date"),
        OpenApiParameter("to", str, description="early dates overlap up to this date"),
        OpenApiParameter("ordering", str),
    ],
)
@extend_schema_view(list=extend_schema(responses=s.page_of(s.ActivityOut)))
class ActivityViewSet(CsvActions, KeyedViewSet):
    section, model = "activities", Activity
    csv_section = "activities"
    serializer_in, serializer_out = s.ActivityIn, s.ActivityOut

    def out_context(self, project: Project) -> dict[str, Any]:
        return {"progress": progress_entries.progress_states_get(project=project)}

    def filtered(self, request, qs: QuerySet) -> QuerySet:
        q = request.query_params
        if q.get("crew"):
            qs = qs.filter(demands__has_key=q["crew"])
        for name in ("zone", "trade"):
            if q.get(name):
                qs = qs.filter(**{name: q[name]})
        if q.get("critical") or q.get("from") or q.get("to"):
            qs = qs.filter(key__in=self._by_schedule(request))
        return qs

    def _by_schedule(self, request) -> list[str]:
        """Keys that pass the filters read from the critical path."""
        import datetime as dt

        q = request.query_params
        window = {}
        for name in ("from", "to"):
            if q.get(name):
                try:
                    window[name] = dt.date.fromisoformat(q[name]).isoformat()
                except ValueError:
                    raise Invalid(
                        f"{name} must be a date YYYY-MM-DD",
                        [services.Problem(f"/{name}", "bad_date", "use YYYY-MM-DD")],
                    ) from None
        critical = q.get("critical", "").lower()
        if critical and critical not in {"true", "false", "1", "0"}:
            raise Invalid(
                "critical must be true or false",
                [services.Problem("/critical", "bad_flag", "use true or false")],
            )
        doc = services.schedule_cpm_get(project=self.project(write=False))
        keys = []
        for a in doc["activities"]:
            if critical in {"true", "1"} and not a["critical"]:
                continue
            if critical in {"false", "0"} and a["critical"]:
                continue
            if "from" in window and a["early_finish"] < window["from"]:
                continue
            if "to" in window and a["early_start"] > window["to"]:
                continue
            keys.append(a["key"])
        return keys


@extend_schema(request=s.RelationIn, responses=s.RelationOut)
@extend_schema_view(list=extend_schema(responses=s.page_of(s.RelationOut)))
class RelationViewSet(CsvActions, NestedViewSet):
    csv_section = "relations"

    def _row(self, project, pk):
        try:
            return Relation.objects.select_related("pred", "succ").get(
                project=project, pk=int(pk)
            )
        except (Relation.DoesNotExist, TypeError, ValueError):
            raise NotFound("no such relation in this project") from None

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = Relation.objects.filter(project=project).select_related("pred", "succ")
        if request.query_params.get("activity"):
            key = request.query_params["activity"]
            qs = qs.filter(pred__key=key) | qs.filter(succ__key=key)
        qs = _ordered(request, qs, "relations")
        return paged(request, self, qs, many(s.RelationOut))

    def retrieve(self, request, project_pk=None, pk=None):
        row = self._row(self.project(write=False), pk)
        return Response(s.RelationOut(row).data, headers={"ETag": etag(row.version)})

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = s.RelationIn(data=request.data)
        data.is_valid(raise_exception=True)
        entry = s.as_entry(data.validated_data)
        services.relation_save(
            project=project,
            pair=None,
            values=entry,
            expected_version=None,
            current_version=None,
        )
        row = Relation.objects.select_related("pred", "succ").get(
            project=project, pred__key=entry["pred"], succ__key=entry["succ"]
        )
        return Response(
            s.RelationOut(row).data,
            status=status.HTTP_201_CREATED,
            headers={"ETag": etag(row.version)},
        )

    def partial_update(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        row = self._row(project, pk)
        data = s.RelationIn(data=request.data, partial=True)
        data.is_valid(raise_exception=True)
        entry = s.as_entry(data.validated_data)
        pair = (row.pred.key, row.succ.key)
        services.relation_save(
            project=project,
            pair=pair,
            values=entry,
            expected_version=if_match(request),
            current_version=row.version,
        )
        new_pair = (entry.get("pred", pair[0]), entry.get("succ", pair[1]))
        row = Relation.objects.select_related("pred", "succ").get(
            project=project, pred__key=new_pair[0], succ__key=new_pair[1]
        )
        return Response(s.RelationOut(row).data, headers={"ETag": etag(row.version)})

    def destroy(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        row = self._row(project, pk)
        services.relation_delete(
            project=project,
            pair=(row.pred.key, row.succ.key),
            expected_version=if_match(request),
            current_version=row.version,
        )
        return Response(status=status.HTTP_204_NO_CONTENT)


@extend_schema(request=s.MemberIn, responses=s.MemberOut)
@extend_schema_view(list=extend_schema(responses=s.page_of(s.MemberOut)))
class MemberViewSet(NestedViewSet):
    area = "members"

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = project.members.select_related("user").order_by("id")
        return paged(request, self, qs, many(s.MemberOut))

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = s.MemberIn(data=request.data)
        data.is_valid(raise_exception=True)
        member = services.member_add(project=project, **data.validated_data)
        return Response(s.MemberOut(member).data, status=status.HTTP_201_CREATED)

    def destroy(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        member = project.members.filter(pk=pk).first() if str(pk).isdigit() else None
        if member is None:
            raise NotFound("no such member of this project")
        services.member_remove(membership=member)
        return Response(status=status.HTTP_204_NO_CONTENT)


@extend_schema_view(
    list=extend_schema(responses=s.page_of(s.RunOut)),
    retrieve=extend_schema(responses=s.RunOut),
    create=extend_schema(
        request=s.RunIn,
        responses={
            202: s.RunOut,
            503: OpenApiResponse(
                description="error: the work queue cannot be reached; nothing was "
                "queued; ask again after Retry-After seconds"
            ),
        },
    ),
    cancel=extend_schema(request=None, responses=s.RunOut),
)
class RunViewSet(NestedViewSet):
    """Runs of the critical path or the levelling: queue, follow, cancel.

    One active run per project: a request while one is waiting or working is
    refused with 409 naming it.
    """

    area = "runs"

    def _runs(self, project: Project) -> QuerySet:
        from django.db.models import F

        return (
            Run.objects.filter(project=project)
            .select_related("requested_by")
            .annotate(version_number=F("version__number"))
        )

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = self._runs(project).order_by("-id")
        return paged(request, self, qs, many(s.RunOut))

    def retrieve(self, request, project_pk=None, pk=None):
        project = self.project(write=False)
        run = runs.run_get(project=project, run_id=pk)
        run = self._runs(project).get(pk=run.pk)
        return Response(s.RunOut(run).data)

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = s.RunIn(data=request.data)
        data.is_valid(raise_exception=True)
        run = runs.run_queue(project=project, user=request.user, **data.validated_data)
        run = self._runs(project).get(pk=run.pk)
        return Response(
            s.RunOut(run).data,
            status=status.HTTP_202_ACCEPTED,
            headers={"Location": f"/api/v1/projects/{project.pk}/runs/{run.pk}"},
        )

    @action(detail=True, methods=["post"])
    def cancel(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        run = runs.run_cancel(run=runs.run_get(project=project, run_id=pk))
        return Response(s.RunOut(self._runs(project).get(pk=run.pk)).data)


@extend_schema_view(
    list=extend_schema(responses=s.page_of(s.VersionOut)),
    retrieve=extend_schema(
        responses=s.VersionDetailOut,
        parameters=[
            OpenApiParameter(
                "number", int, OpenApiParameter.PATH, description="version number"
            )
        ],
    ),
)
class VersionViewSet(NestedViewSet):
    """Published schedule versions, newest first, each with its change summary."""

    area = "schedule"
    lookup_field = "number"

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = services.versions_list(project=project)
        return paged(request, self, qs, many(s.VersionOut))

    def retrieve(self, request, project_pk=None, number=None):
        project = self.project(write=False)
        version = services.version_get(project=project, number=number)
        return Response(
            s.VersionDetailOut(version).data, headers={"ETag": f'"v{version.number}"'}
        )


@extend_schema_view(
    list=extend_schema(
        responses=s.page_of(s.ProgressEntryOut),
        parameters=[
            OpenApiParameter("activity", str, description="only this activity's key")
        ],
    ),
    retrieve=extend_schema(responses=s.ProgressEntryOut),
    create=extend_schema(
        request=s.ProgressIn,
        parameters=[
            OpenApiParameter(
                "Idempotency-Key",
                str,
                OpenApiParameter.HEADER,
                description="a new key (a UUID) per entry; a retry with the same "
                "key gets the first answer and stores nothing new",
            )
        ],
        responses={
            201: s.ProgressEntryOut,
            409: s.ProgressConflictOut,
            422: OpenApiResponse(
                description="error: the Idempotency-Key was used for another entry"
            ),
        },
    ),
)
class ProgressViewSet(NestedViewSet):
    """Progress entries from site: append-only; no change or deletion."""

    area = "progress"

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = progress_entries.progress_list(
            project=project, activity=request.query_params.get("activity")
        )
        return paged(request, self, qs, many(s.ProgressEntryOut))

    def retrieve(self, request, project_pk=None, pk=None):
        project = self.project(write=False)
        entry = progress_entries.progress_get(project=project, entry_id=pk)
        return Response(s.ProgressEntryOut(entry).data)

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = s.ProgressIn(data=request.data)
        data.is_valid(raise_exception=True)
        recorded = progress_entries.progress_record(
            project=project,
            user=request.user,
            values=dict(data.validated_data),
            idempotency_key=request.headers.get("Idempotency-Key"),
            render=lambda entry, state: dict(
                s.ProgressEntryOut(entry, context={"state": state}).data
            ),
        )
        return Response(
            recorded.answer,
            status=recorded.status,
            headers={
                "Location": f"/api/v1/projects/{project.pk}/progress/"
                f"{recorded.entry_id}",
                "Idempotent-Replay": "true" if recorded.replayed else "false",
            },
        )


@extend_schema_view(
    list=extend_schema(responses=s.page_of(rs.BaselineOut)),
    retrieve=extend_schema(responses=rs.BaselineDetailOut),
    create=extend_schema(request=rs.BaselineIn, responses={201: rs.BaselineDetailOut}),
    current=extend_schema(request=None, responses=rs.BaselineOut),
    compare=extend_schema(
        parameters=[
            OpenApiParameter(
                "version",
                int,
                description="the published version to compare (default: the latest)",
            )
        ],
        responses=rs.CompareOut,
    ),
)
class BaselineViewSet(NestedViewSet):
    """Baselines: captured from a published version, never changed or deleted;
    one is current."""

    area = "baselines"

    def list(self, request, project_pk=None):
        project = self.project(write=False)
        qs = baselines.baselines_list(project=project)
        return paged(request, self, qs, many(rs.BaselineOut))

    def retrieve(self, request, project_pk=None, pk=None):
        project = self.project(write=False)
        row = baselines.baseline_get(project=project, baseline_id=pk)
        return Response(rs.BaselineDetailOut(row).data)

    def create(self, request, project_pk=None):
        project = self.project(write=True)
        data = rs.BaselineIn(data=request.data)
        data.is_valid(raise_exception=True)
        row = baselines.baseline_capture(
            project=project, user=request.user, **data.validated_data
        )
        return Response(
            rs.BaselineDetailOut(row).data,
            status=status.HTTP_201_CREATED,
            headers={"Location": f"/api/v1/projects/{project.pk}/baselines/{row.pk}"},
        )

    @action(detail=True, methods=["post"])
    def current(self, request, project_pk=None, pk=None):
        project = self.project(write=True)
        row = baselines.baseline_get(project=project, baseline_id=pk)
        return Response(
            rs.BaselineOut(baselines.baseline_set_current(baseline=row)).data
        )

    @action(detail=True, methods=["get"])
    def compare(self, request, project_pk=None, pk=None):
        project = self.project(write=False)
        row = baselines.baseline_get(project=project, baseline_id=pk)
        return Response(
            baselines.baseline_compare(
                project=project,
                baseline=row,
                version=request.query_params.get("version"),
            )
        )


class _FormatByParameter(DefaultContentNegotiation):
    """JSON always; the report's ``format`` parameter picks CSV or PDF in the
    view, so an unknown format is a 400 naming the parameter, not a 404."""

    def select_renderer(self, request, renderers, format_suffix=None):
        return renderers[0], renderers[0].media_type


class ReportView(APIView):
    """The owner's status report as of the data date: JSON, a zip of CSV files
    or a PDF."""

    permission_classes = [IsAuthenticated]
    content_negotiation_class = _FormatByParameter
    FORMATS = {
        "json": None,
        "csv": ("application/zip", "zip"),
        "pdf": ("application/pdf", "pdf"),
    }

    @extend_schema(
        operation_id="projects_report",
        parameters=[
            OpenApiParameter(
                "format",
                str,
                enum=["json", "csv", "pdf"],
                description="json (default), csv (a zip of one CSV file per "
                "section) or pdf",
            ),
            OpenApiParameter(
                "threshold",
                int,
                description="near-critical: total float up to this many working "
                f"days (0 to {report.MAX_THRESHOLD}, default "
                f"{report.DEFAULT_THRESHOLD})",
            ),
        ],
        responses={
            (200, "application/json"): rs.ReportOut,
            (200, "application/zip"): OpenApiTypes.BINARY,
            (200, "application/pdf"): OpenApiTypes.BINARY,
        },
    )
    def get(self, request, project_pk=None):
        project = project_for(request, project_pk, "report", write=False)
        wanted = (request.query_params.get("format") or "json").strip().lower()
        if wanted not in self.FORMATS:
            raise Invalid(
                f"format must be one of json, csv or pdf, got {wanted!r}",
                [Problem("/format", "bad_format", "use json, csv or pdf")],
            )
        threshold = report.threshold_parse(request.query_params.get("threshold"))
        kind = self.FORMATS[wanted]
        if kind is None:
            body = report.report_json_get(project=project, threshold=threshold)
            return HttpResponse(body, content_type="application/json")
        built = report.report_build(project=project, threshold=threshold)
        body = (
            report_render.report_csv_zip(built)
            if wanted == "csv"
            else report_render.report_pdf(built)
        )
        name = f"status-report-{project.pk}-{built['project']['data_date']}.{kind[1]}"
        response = HttpResponse(body, content_type=kind[0])
        response["Content-Disposition"] = f'attachment; filename="{name}"'
        return response
