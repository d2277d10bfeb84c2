"""Layering: the sampling core knows nothing of HTTP, the schemas nothing of Flask, and the
client nothing of the service but its published contract (the OpenAPI document).

Imports are read with ``ast`` from every file, so an import inside a function or under
``if TYPE_CHECKING`` counts too.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

CORE_FORBIDDEN = ("flask", "marshmallow", "werkzeug", "schemas", "service.http")
SCHEMAS_FORBIDDEN = ("flask",)
# The client reads the service's OpenAPI document (sampling_client/openapi.json), never its
# code: installing or running the command needs none of the server's packages.
CLIENT_FORBIDDEN = ("service", "schemas", "marshmallow", "apispec", "flask", "werkzeug")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def imported_modules(source: str, module: str, is_package: bool = False) -> set[str]:
    """Absolute names of every module ``source`` (the text of ``module``) imports."""
    names: set[str] = set()
    package = module if is_package else module.rpartition(".")[0]
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)] if node.level > 1 else base
                prefix = ".".join(base)
                target = f"{prefix}.{node.module}" if node.module else prefix
            else:
                target = node.module or ""
            names.add(target)
            # "from service import http" imports the module service.http
            names.update(f"{target}.{alias.name}" for alias in node.names if alias.name != "*")
    return names


def _violations(directory: str, forbidden: tuple[str, ...]) -> dict[str, list[str]]:
    files = sorted((ROOT / directory).rglob("*.py"))
    assert files, f"no Python files under {directory}/"
    found: dict[str, list[str]] = {}
    for path in files:
        names = imported_modules(
            path.read_text(encoding="utf-8"), _module_name(path), path.name == "__init__.py"
        )
        bad = sorted(
            name for name in names
            if any(name == f or name.startswith(f + ".") for f in forbidden)
        )
        if bad:
            found[str(path.relative_to(ROOT))] = bad
    return found


def test_sampling_core_does_not_import_the_web_layers() -> None:
    assert _violations("service/sampling", CORE_FORBIDDEN) == {}


def test_schemas_do_not_import_flask() -> None:
    assert _violations("schemas", SCHEMAS_FORBIDDEN) == {}


def test_the_client_imports_nothing_of_the_service() -> None:
    assert _violations("sampling_client", CLIENT_FORBIDDEN) == {}


def test_the_client_imports_no_module_by_name() -> None:
    # importlib.import_module("service.http") or __import__ would escape the import scan.
    found = {}
    for path in sorted((ROOT / "sampling_client").rglob("*.py")):
        calls = [
            node.func.attr if isinstance(node.func, ast.Attribute) else getattr(node.func, "id", "")
            for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
            if isinstance(node, ast.Call)
        ]
        dynamic = sorted({name for name in calls if name in ("import_module", "__import__")})
        if dynamic:
            found[path.name] = dynamic
    assert found == {}


def test_the_client_is_actually_read() -> None:
    # Guards the guard: the walk sees a lazy import inside a function of the client.
    names = imported_modules(
        (ROOT / "sampling_client/api.py").read_text(encoding="utf-8"), "sampling_client.api"
    )
    assert "yaml" in names
    assert "sampling_client.multipart" in names


def test_the_core_is_actually_read() -> None:
    # Guards the guard: the walk sees the core's real imports.
    names = imported_modules(
        (ROOT / "service/sampling/attributes/sizing.py").read_text(encoding="utf-8"),
        "service.sampling.attributes.sizing",
    )
    assert "scipy" in names
    assert "service.sampling.errors" in names


@pytest.mark.parametrize(
    ("source", "expected"),
    [
        ("import flask", "flask"),
        ("from flask import request", "flask"),
        ("import werkzeug.exceptions as wz", "werkzeug.exceptions"),
        ("def f():\n    import marshmallow\n", "marshmallow"),
        ("from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    import schemas.fields\n",
         "schemas.fields"),
        ("from service import http", "service.http"),
        ("from service.http.operations import Operation", "service.http.operations"),
        ("from ..http import operations", "service.http"),
        ("from .. import http", "service.http"),
    ],
)
def test_forbidden_imports_are_detected(source: str, expected: str) -> None:
    names = imported_modules(source, "service.sampling.example")
    assert expected in names
    assert any(expected == f or expected.startswith(f + ".") for f in CORE_FORBIDDEN)
