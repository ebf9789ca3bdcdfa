"""Schema additions drf-spectacular cannot see by itself.

Every operation may answer with the one error envelope; this hook declares it
for the statuses the API gives, next to each operation's success answer.
"""

from __future__ import annotations

from typing import Any

from drf_spectacular.openapi import AutoSchema

ERROR_STATUSES = {
    "400": "the input, or the network it would make, is wrong; nothing was stored",
    "401": "not signed in",
    "403": "the role may not do this",
    "404": "no such resource, or not a member of the project",
    "409": "the change conflicts with the stored state",
    "412": "If-Match names an older version; nothing was changed",
    "413": "the request body is too large",
    "415": "unsupported content type",
    "428": "If-Match is required to change this resource",
    "429": "too many requests; slow down",
}

ERROR_SCHEMA = {
    "type": "object",
    "required": ["error"],
    "properties": {
        "error": {
            "type": "object",
            "required": ["status", "code", "message", "problems"],
            "properties": {
                "status": {"type": "integer"},
                "code": {"type": "string"},
                "message": {"type": "string"},
                "problems": {
                    "type": "array",
                    "items": {
                        "type": "object",
                        "required": ["pointer", "code", "message"],
                        "properties": {
                            "pointer": {"type": "string"},
                            "code": {"type": "string"},
                            "message": {"type": "string"},
                        },
                    },
                },
            },
        }
    },
}


def add_error_envelope(result: dict[str, Any], generator, request, public) -> dict:
    result.setdefault("components", {}).setdefault("schemas", {})["Error"] = (
        ERROR_SCHEMA
    )
    ref = {"$ref": "#/components/schemas/Error"}
    for operations in result.get("paths", {}).values():
        for method, operation in operations.items():
            if method not in {"get", "post", "put", "patch", "delete"}:
                continue
            responses = operation.setdefault("responses", {})
            for answer in responses.values():
                # An error answer declared by a view without a body schema
                # (503 of queueing a run) carries the envelope too.
                if answer.get("description", "").startswith("error:"):
                    answer["description"] = answer["description"][6:].strip()
                    answer["content"] = {"application/json": {"schema": ref}}
            for status, text in ERROR_STATUSES.items():
                responses.setdefault(
                    status,
                    {
                        "description": text,
                        "content": {"application/json": {"schema": ref}},
                    },
                )
    return result


class PagedSchema(AutoSchema):
    """The schema class: a list answered with a page is one object, not an array
    (the views paginate by hand, which drf-spectacular cannot see)."""

    def _is_list_view(self, serializer: Any = None) -> bool:
        if serializer is None:
            serializer = self.get_response_serializers()
        if _is_page(serializer):
            return False
        return super()._is_list_view(serializer)

    def get_operation_id(self) -> str:
        name = super().get_operation_id()
        if getattr(self.view, "action", None) == "list":
            return name.removesuffix("_retrieve") + "_list"
        return name


def _is_page(serializer: Any) -> bool:
    if isinstance(serializer, dict) and serializer:
        serializer = serializer[min(serializer, key=str)]
    cls = serializer if isinstance(serializer, type) else type(serializer)
    return cls.__name__.endswith("Page")
