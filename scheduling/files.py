"""Reading network documents from files, and writing results safely."""

from __future__ import annotations

import json
import os
import sys
import tempfile
from pathlib import Path
from typing import Any

#: Larger files are refused before parsing (the API has its own, lower bound).
MAX_DOCUMENT_BYTES = 64 * 2**20


class DocumentUnreadable(ValueError):
    """The file could not be read as JSON; the message says where and why."""


def document_read(path: str) -> Any:
    """Read a JSON document from ``path`` ("-" for standard input)."""
    try:
        if path == "-":
            raw = sys.stdin.buffer.read(MAX_DOCUMENT_BYTES + 1)
        else:
            with open(path, "rb") as fh:
                raw = fh.read(MAX_DOCUMENT_BYTES + 1)
    except OSError as exc:
        raise DocumentUnreadable(f"cannot read {path}: {exc.strerror}") from None
    if len(raw) > MAX_DOCUMENT_BYTES:
        raise DocumentUnreadable(
            f"{path} is larger than {MAX_DOCUMENT_BYTES // 2**20} MiB"
        )
    try:
        return json.loads(raw)
    except UnicodeDecodeError:
        raise DocumentUnreadable(f"{path} is not UTF-8 text") from None
    except json.JSONDecodeError as exc:
        raise DocumentUnreadable(
            f"{path} is not valid JSON: {exc.msg} at line {exc.lineno}, "
            f"column {exc.colno}"
        ) from None


def document_write(document: Any, path: str | None, stdout: Any) -> None:
    """Write JSON to ``path`` atomically (temporary file, then rename), or stdout."""
    text = json.dumps(document, indent=2, ensure_ascii=False) + "\n"
    if path is None or path == "-":
        stdout.write(text)
        return
    target = Path(path)
    fd, tmp = tempfile.mkstemp(dir=target.parent or ".", prefix=f".{target.name}.")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
