"""The engine stays free of Django, Celery and I/O frameworks (STYLE.md)."""

import ast
import pathlib
import subprocess
import sys

ENGINE = pathlib.Path(__file__).resolve().parents[2] / "scheduling" / "engine"
FORBIDDEN = ("django", "rest_framework", "celery", "kombu", "redis", "psycopg")


def test_engine_source_imports_no_framework():
    offenders = []
    for path in sorted(ENGINE.rglob("*.py")):
        tree = ast.parse(path.read_text(), filename=str(path))
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module and not node.level:
                names = [node.module]
            offenders += [
                f"{path.name}:{node.lineno} imports {name}"
                for name in names
                if name.split(".")[0] in FORBIDDEN
            ]
    assert offenders == []


def test_importing_the_engine_loads_no_framework():
    code = (
        "import sys, scheduling.engine; "
        f"print(sorted(m for m in sys.modules if m.split('.')[0] in {FORBIDDEN!r}))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        check=True,
        cwd=ENGINE.parents[1],
    )
    assert out.stdout.strip() == "[]"
