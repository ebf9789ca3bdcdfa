"""One error envelope for every error the API gives.

``{"error": {"status": 400, "code": "invalid", "message": "…",
"problems": [{"pointer": "/activities/3/duration", "code": "…", "message": "…"}]}}``
"""

from __future__ import annotations

import logging
from typing import Any

from django.http import Http404, JsonResponse
from rest_framework import exceptions, status
from rest_framework.response import Response
from rest_framework.views import exception_handler as drf_handler

from scheduling.errors import ServiceError

log = logging.getLogger(__name__)


def envelope(
    code: str, message: str, http_status: int, problems: list[dict[str, str]] = ()
) -> dict[str, Any]:
    return {
        "error": {
            "status": http_status,
            "code": code,
            "message": message,
            "problems": list(problems),
        }
    }


def _flatten(detail: Any, pointer: str = "") -> list[dict[str, str]]:
    """DRF's nested validation errors as pointer/message pairs."""
    if isinstance(detail, dict):
        out = []
        for k, v in detail.items():
            key = "" if k == "non_field_errors" else f"/{k}"
            out += _flatten(v, pointer + key)
        return out
    if isinstance(detail, list):
        if all(not isinstance(d, dict | list) for d in detail):
            return [
                {
                    "pointer": pointer or "/",
                    "code": getattr(d, "code", "invalid"),
                    "message": str(d),
                }
                for d in detail
            ]
        out = []
        for i, d in enumerate(detail):
            out += _flatten(d, f"{pointer}/{i}")
        return out
    return [
        {
            "pointer": pointer or "/",
            "code": getattr(detail, "code", "invalid"),
            "message": str(detail),
        }
    ]


def exception_handler(exc: Exception, context: dict[str, Any]) -> Response | None:
    if isinstance(exc, ServiceError):
        problems = [p.as_dict() for p in exc.problems]
        retry_after = getattr(exc, "retry_after", None)
        # Beside the envelope, what the client needs to act on the error (the
        # current state of an activity whose progress clashed).
        details = getattr(exc, "details", None) or {}
        return Response(
            {**envelope(exc.code, exc.message, exc.status, problems), **details},
            exc.status,
            headers={"Retry-After": str(retry_after)} if retry_after else None,
        )
    if isinstance(exc, Http404):
        exc = exceptions.NotFound()
    if isinstance(exc, exceptions.ValidationError):
        problems = _flatten(exc.detail)
        message = "; ".join(f"{p['pointer']}: {p['message']}" for p in problems[:5])
        return Response(
            envelope("invalid", message or "invalid input", 400, problems), 400
        )
    response = drf_handler(exc, context)
    if response is None:
        log.exception("unhandled error in the API", exc_info=exc)
        return Response(
            envelope("server_error", "something went wrong on our side", 500), 500
        )
    detail = getattr(exc, "detail", "")
    code = getattr(detail, "code", None) or getattr(exc, "default_code", "error")
    response.data = envelope(str(code), str(detail), response.status_code)
    return response


def not_found_json(request, exception=None):  # Django's handler404 for /api/
    return JsonResponse(envelope("not_found", "no such resource", 404), status=404)


def server_error_json(request):
    return JsonResponse(
        envelope("server_error", "something went wrong on our side", 500), status=500
    )


class BodyLimit:
    """Refuse request bodies over the limit with 413, before anything reads them."""

    def __init__(self, get_response, limit: int | None = None):
        from django.conf import settings

        self.get_response = get_response
        self.limit = limit or settings.SITEPACE_MAX_BODY_BYTES

    def __call__(self, request):
        try:
            length = int(request.META.get("CONTENT_LENGTH") or 0)
        except ValueError:
            length = 0
        if length > self.limit:
            body = envelope(
                "too_large",
                f"the request body is larger than {self.limit // 2**20} MiB",
                status.HTTP_413_REQUEST_ENTITY_TOO_LARGE,
            )
            return JsonResponse(body, status=413)
        return self.get_response(request)
