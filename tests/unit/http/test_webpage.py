"""The web page and the API reference, through Flask's test client: what is served, under
which headers, and that every form field is a field of the request it is sent in."""

from __future__ import annotations

import hashlib
import io
import json
import re
from html.parser import HTMLParser
from typing import Any

import pytest
import yaml
from flask.testing import FlaskClient
from werkzeug.test import TestResponse

from service import create_app
from service.settings import Settings
from service.web.context import CSP, PAGE_CSP
from service.webpage import PAGES

ROOT = PAGES.parents[2]


@pytest.fixture(scope="module")
def client() -> FlaskClient:
    """One application for the module: these tests only read from it."""
    return create_app(Settings()).test_client()


PAGE_PATHS = ["/", "/docs", "/ui/page.js", "/ui/page.css", "/ui/docs.js", "/ui/docs.css",
              "/ui/reference/swagger-ui-bundle.js", "/ui/reference/swagger-ui.css"]


class PageParser(HTMLParser):
    """The elements of a page that the tests below read."""

    def __init__(self) -> None:
        super().__init__()
        self.assets: list[str] = []
        self.inline_scripts = 0
        self.style_attributes = 0
        self.controls: list[dict[str, str | None]] = []
        self.label_targets: set[str] = set()
        self.wrapped_controls = 0
        self.forms: list[dict[str, Any]] = []
        self._open_script = False
        self._label_depth = 0

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        found = dict(attrs)
        if "style" in found:
            self.style_attributes += 1
        if tag == "script":
            self._open_script = True
            if found.get("src"):
                self.assets.append(str(found["src"]))
        if tag == "link" and found.get("rel") == "stylesheet":
            self.assets.append(str(found["href"]))
        if tag == "form":
            self.forms.append({"attrs": found, "fields": []})
        if tag == "label":
            self._label_depth += 1
            if found.get("for"):
                self.label_targets.add(str(found["for"]))
        if tag in ("input", "select", "textarea"):
            found["wrapped"] = "yes" if self._label_depth else None
            self.controls.append(found)
            if self.forms:
                self.forms[-1]["fields"].append(found)

    def handle_endtag(self, tag: str) -> None:
        if tag == "script":
            self._open_script = False
        if tag == "label":
            self._label_depth -= 1

    def handle_data(self, data: str) -> None:
        if self._open_script and data.strip():
            self.inline_scripts += 1


def fetch(client: FlaskClient, path: str) -> TestResponse:
    """The answer read whole, and its file closed (files are streamed by send_file)."""
    with client.get(path) as response:
        response.get_data()
        return response


def parsed(name: str) -> PageParser:
    parser = PageParser()
    parser.feed((PAGES / name).read_text(encoding="utf-8"))
    return parser


@pytest.mark.parametrize("path", PAGE_PATHS)
def test_the_page_and_its_files_are_served_with_the_page_policy(
    client: FlaskClient, path: str
) -> None:
    response = fetch(client, path)
    assert response.status_code == 200
    assert response.headers["Content-Security-Policy"] == PAGE_CSP
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert response.headers["Referrer-Policy"] == "no-referrer"
    assert response.headers["X-Request-ID"]
    assert response.headers["Cache-Control"] == "no-cache"


def test_the_page_policy_allows_only_the_service_itself() -> None:
    directives = dict(part.strip().split(" ", 1) for part in PAGE_CSP.split(";"))
    assert directives["default-src"] == "'none'"
    assert directives["script-src"] == "'self'"
    assert directives["style-src"] == "'self'"
    assert directives["connect-src"] == "'self'"
    assert directives["frame-ancestors"] == "'none'"
    assert "unsafe" not in PAGE_CSP and "http" not in PAGE_CSP


def test_api_answers_keep_their_own_policy(client: FlaskClient) -> None:
    response = client.post("/v1/sample-size", json={"tolerable_rate": 0.05})
    assert response.headers["Content-Security-Policy"] == CSP
    assert response.headers["Cache-Control"] == "no-store"


@pytest.mark.parametrize("name", ["index.html", "docs.html"])
def test_pages_load_only_their_own_files_and_hold_no_inline_script_or_style(
    client: FlaskClient, name: str
) -> None:
    page = parsed(name)
    assert page.assets, "a page without its script and style"
    for asset in page.assets:
        assert asset.startswith("/") and not asset.startswith("//"), asset
        assert fetch(client, asset).status_code == 200, asset
    assert page.inline_scripts == 0
    assert page.style_attributes == 0
    assert "<style" not in (PAGES / name).read_text(encoding="utf-8")


def test_only_the_reference_files_named_are_served_from_the_package(client: FlaskClient) -> None:
    assert client.get("/ui/reference/index.css").status_code == 404
    assert client.get("/ui/reference/oauth2-redirect.html").status_code == 404
    assert client.get("/ui/../__init__.py").status_code == 404
    assert client.get("/ui/%2e%2e/__init__.py").status_code == 404


def test_every_control_has_a_label() -> None:
    page = parsed("index.html")
    for control in page.controls:
        if control.get("type") == "hidden":
            continue
        labelled = control.get("id") in page.label_targets or control.get("wrapped")
        assert labelled, f"no label for {control}"


def test_the_contract_is_also_served_as_json(client: FlaskClient) -> None:
    as_json = client.get("/openapi.json")
    assert as_json.status_code == 200
    assert as_json.mimetype == "application/json"
    assert as_json.headers["Cache-Control"] == "no-cache"
    assert json.loads(as_json.data) == yaml.safe_load(client.get("/openapi.yaml").data)


def _schema_at(spec: dict[str, Any], schema: dict[str, Any], path: list[str]) -> bool:
    """Whether the request schema has the property named by ``path``."""
    while "$ref" in schema:
        schema = spec["components"]["schemas"][schema["$ref"].rsplit("/", 1)[1]]
    for option in schema.get("oneOf", []) + schema.get("anyOf", []):
        if _schema_at(spec, option, path):
            return True
    if not path:
        return True
    properties = schema.get("properties", {})
    return path[0] in properties and _schema_at(spec, properties[path[0]], path[1:])


def test_every_form_field_is_a_field_of_its_request(client: FlaskClient) -> None:
    spec = json.loads(client.get("/openapi.json").data)
    checked = 0
    for form in parsed("index.html").forms:
        operation = form["attrs"].get("data-operation")
        if operation is None:
            continue
        content = spec["paths"][operation]["post"]["requestBody"]["content"]
        upload = content.get("multipart/form-data")
        file_form = upload["schema"]["properties"]["request"] if upload else None
        # A form that always sends a file is checked against the file form's request; a form
        # that may send one (a population given as a file) against either form's.
        schemas = [file_form] if form["attrs"].get("data-multipart") else [
            content["application/json"]["schema"], *([file_form] if file_form else [])]
        for field in form["fields"]:
            name = field.get("name")
            if not field.get("data-type") or field.get("data-type") == "file" or not name:
                continue
            assert any(_schema_at(spec, schema, name.split(".")) for schema in schemas), (
                f"{operation}: {name}")
            checked += 1
    assert checked > 30


def test_every_field_type_of_the_page_is_read_by_its_script() -> None:
    script = (PAGES.parent / "static" / "page.js").read_text(encoding="utf-8")
    readers = set(re.findall(r'^\s+"?([a-z-]+)"?: \(el\) =>', script, re.MULTILINE))
    used = {str(c["data-type"]) for c in parsed("index.html").controls if c.get("data-type")}
    assert used - {"file", "checked"} <= readers


def test_with_api_keys_the_page_stays_open_and_the_api_does_not() -> None:
    digests = frozenset({hashlib.sha256(b"harbour-lane-page-key").digest()})
    locked = create_app(Settings(api_keys=digests)).test_client()
    for path in [*PAGE_PATHS, "/openapi.json"]:
        assert fetch(locked, path).status_code == 200, path
    assert locked.post("/v1/sample-size", json={"tolerable_rate": 0.05}).status_code == 401
    assert locked.get("/ui/no-such-file.js").status_code == 404


def test_the_written_starting_requests_are_accepted(client: FlaskClient) -> None:
    examples = json.loads((PAGES.parent / "static" / "examples.json").read_text("utf-8"))
    spec = json.loads(fetch(client, "/openapi.json").data)
    population = (ROOT / "examples" / "harbour-lane-purchase-orders.csv").read_bytes()
    for path, body in examples.items():
        assert "post" in spec["paths"][path], path
        if "multipart/form-data" in spec["paths"][path]["post"]["requestBody"]["content"] and (
            "file" in body.get("population", {})
        ):
            response = client.post(path, content_type="multipart/form-data", data={
                "file": (io.BytesIO(population), "harbour-lane-purchase-orders.csv"),
                "request": (io.BytesIO(json.dumps(body).encode()), "request.json",
                            "application/json"),
            })
        else:
            response = client.post(path, json=body)
        assert response.status_code == 200, (path, response.get_json())


def test_every_file_of_the_page_is_packaged() -> None:
    """The image installs the service as a wheel: a file the package data misses is a 404."""
    import tomllib

    project = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    patterns = project["tool"]["setuptools"]["package-data"]["service.webpage"]
    files = [p for folder in ("pages", "static") for p in (PAGES.parent / folder).iterdir()]
    for file in files:
        relative = file.relative_to(PAGES.parent)
        assert any(relative.match(pattern) for pattern in patterns), relative
