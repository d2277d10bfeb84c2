"""Uploads through the Flask test client: a ``file`` part and a JSON ``request`` part.

A probe operation that accepts files is registered beside the service's own, so the
upload plumbing is checked apart from any population format. Temporary files are made
under a folder of the test's own (``tempfile.tempdir``), so every test can check that
nothing is left behind, after a success and after each kind of error.
"""

from __future__ import annotations

import io
import json
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from flask import Flask
from flask.testing import FlaskClient
from marshmallow import Schema, fields

from schemas.common import StrictSchema
from schemas.fields import StrictString
from service import create_app
from service.http.operations import Operation, blueprint
from service.sampling.errors import InvalidInput
from service.settings import Settings

PROBE = "/v1/upload-probe"
FILE_LIMIT = 100


class ProbeRequest(StrictSchema):
    label = StrictString(required=True)


class ProbeAnswer(Schema):
    label = fields.String()
    size = fields.Integer()
    first_line = fields.String()


SEEN: list[Path | None] = []


def _probe(inputs: dict[str, Any], settings: Settings) -> dict[str, Any]:
    upload = inputs["upload"]
    SEEN.append(upload)
    if inputs["label"] == "fail":
        raise InvalidInput("label", "the probe was asked to fail")
    if upload is None:
        return {"label": inputs["label"], "size": 0, "first_line": ""}
    data = upload.read_bytes()
    return {
        "label": inputs["label"],
        "size": len(data),
        "first_line": data.split(b"\n")[0].decode(),
    }


PROBE_OPERATION = Operation(
    name="upload-probe",
    path=PROBE,
    summary="Probe",
    description="Reads an upload.",
    request=ProbeRequest,
    response=ProbeAnswer,
    run=_probe,
    tag="probe",
    accepts_file=True,
)


@pytest.fixture
def temp_root(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Iterator[Path]:
    root = tmp_path / "temporary"
    root.mkdir()
    monkeypatch.setattr(tempfile, "tempdir", str(root))
    SEEN.clear()
    yield root


def _client(settings: Settings) -> FlaskClient:
    app: Flask = create_app(settings)
    app.register_blueprint(blueprint("upload_probe", [PROBE_OPERATION]))
    return app.test_client()


@pytest.fixture
def client(temp_root: Path) -> FlaskClient:
    return _client(Settings(max_file_bytes=FILE_LIMIT))


def _post(client: FlaskClient, data: dict[str, Any]) -> Any:
    return client.post(PROBE, data=data, content_type="multipart/form-data")


def _problem(response: Any, status: int) -> dict[str, Any]:
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.headers["Content-Type"] == "application/problem+json"
    body: dict[str, Any] = json.loads(response.get_data(as_text=True))
    assert body["status"] == status
    return body


def _file(content: bytes = b"doc_no,amount\nHL-1,10.00\n") -> tuple[io.BytesIO, str]:
    return io.BytesIO(content), "orders.csv"


def test_the_file_reaches_the_core_and_is_removed_after_the_answer(
    client: FlaskClient, temp_root: Path
) -> None:
    response = _post(client, {"file": _file(), "request": json.dumps({"label": "q3"})})
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.json == {"label": "q3", "size": 25, "first_line": "doc_no,amount"}
    (path,) = SEEN
    assert path is not None and path.is_relative_to(temp_root)
    assert not path.exists()
    assert list(temp_root.iterdir()) == []


def test_the_request_part_may_come_as_a_file_part(client: FlaskClient, temp_root: Path) -> None:
    request_part = (io.BytesIO(b'{"label": "as a file"}'), "request.json")
    response = _post(client, {"file": _file(), "request": request_part})
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.json["label"] == "as a file"
    assert list(temp_root.iterdir()) == []


def test_a_json_request_still_works_and_gets_no_upload(client: FlaskClient) -> None:
    response = client.post(PROBE, json={"label": "plain"})
    assert response.status_code == 200
    assert response.json == {"label": "plain", "size": 0, "first_line": ""}
    assert SEEN == [None]


def test_the_file_is_removed_when_the_core_refuses(client: FlaskClient, temp_root: Path) -> None:
    response = _post(client, {"file": _file(), "request": json.dumps({"label": "fail"})})
    assert "label" in _problem(response, 422)["errors"]
    (path,) = SEEN
    assert path is not None and not path.exists()
    assert list(temp_root.iterdir()) == []


def test_the_file_is_removed_when_the_request_part_does_not_load(
    client: FlaskClient, temp_root: Path
) -> None:
    response = _post(client, {"file": _file(), "request": json.dumps({"colour": "red"})})
    body = _problem(response, 422)
    assert set(body["errors"]) == {"label", "colour"}
    assert SEEN == []
    assert list(temp_root.iterdir()) == []


@pytest.mark.parametrize(
    ("parts", "missing"),
    [
        ({"request": json.dumps({"label": "q3"})}, "file"),
        ({"file": _file()}, "request"),
    ],
)
def test_a_missing_part_is_named(
    client: FlaskClient, temp_root: Path, parts: dict[str, Any], missing: str
) -> None:
    body = _problem(_post(client, parts), 422)
    assert list(body["errors"]) == [missing]
    assert "is required" in body["errors"][missing][0]
    assert list(temp_root.iterdir()) == []


def test_an_unknown_part_is_named(client: FlaskClient, temp_root: Path) -> None:
    parts = {"file": _file(), "request": json.dumps({"label": "q3"}), "notes": "hello"}
    body = _problem(_post(client, parts), 422)
    assert list(body["errors"]) == ["notes"]
    assert "file and request" in body["errors"]["notes"][0]
    assert list(temp_root.iterdir()) == []


def test_a_file_sent_as_a_plain_field_is_refused(client: FlaskClient) -> None:
    body = _problem(_post(client, {"file": "doc_no\nHL-1\n", "request": '{"label": "x"}'}), 422)
    assert "as a file" in body["errors"]["file"][0]


def test_an_empty_file_is_refused(client: FlaskClient) -> None:
    body = _problem(_post(client, {"file": _file(b""), "request": '{"label": "x"}'}), 422)
    assert body["errors"] == {"file": ["is empty"]}


@pytest.mark.parametrize(
    "text",
    ['{"label": NaN}', "label=q3", "", '{"label": "a", "label": "b"}'],
)
def test_a_request_part_that_is_not_json_is_named(
    client: FlaskClient, temp_root: Path, text: str
) -> None:
    body = _problem(_post(client, {"file": _file(), "request": text}), 400)
    assert list(body["errors"]) == ["request"]
    assert "request part" in body["detail"]
    assert list(temp_root.iterdir()) == []


def test_a_file_over_the_limit_is_refused_with_413(client: FlaskClient, temp_root: Path) -> None:
    just_over = b"x" * (FILE_LIMIT + 1)
    body = _problem(_post(client, {"file": _file(just_over), "request": '{"label": "x"}'}), 413)
    assert f"{FILE_LIMIT:,} bytes (SAMPLING_MAX_FILE_BYTES)" in body["detail"]
    assert SEEN == []
    assert list(temp_root.iterdir()) == []


def test_a_file_at_the_limit_is_accepted(client: FlaskClient) -> None:
    response = _post(client, {"file": _file(b"y" * FILE_LIMIT), "request": '{"label": "x"}'})
    assert response.status_code == 200
    assert response.json["size"] == FILE_LIMIT


def test_a_body_far_over_the_limit_is_cut_while_streaming(temp_root: Path) -> None:
    # The whole body exceeds the file limit, the request part's limit and the room for
    # part headers together, so the parser stops reading before the end.
    client = _client(Settings(max_file_bytes=FILE_LIMIT, max_body_bytes=256))
    huge = b"z" * 200_000
    body = _problem(_post(client, {"file": _file(huge), "request": '{"label": "x"}'}), 413)
    assert "SAMPLING_MAX_FILE_BYTES" in body["detail"]
    assert list(temp_root.iterdir()) == []


def test_a_multipart_body_without_boundary_is_malformed(client: FlaskClient) -> None:
    response = client.post(PROBE, data=b"--x\r\n", content_type="multipart/form-data")
    assert "multipart/form-data" in _problem(response, 400)["detail"]


def test_an_operation_without_files_still_refuses_multipart(client: FlaskClient) -> None:
    response = client.post(
        "/v1/sample-size",
        data={"request": '{"tolerable_rate": 0.05}'},
        content_type="multipart/form-data",
    )
    assert "application/json (got multipart/form-data)" in _problem(response, 415)["detail"]


def test_the_media_type_refusal_names_both_forms_where_files_are_taken(
    client: FlaskClient,
) -> None:
    response = client.post(PROBE, data="label=x", content_type="text/plain")
    detail = _problem(response, 415)["detail"]
    assert "application/json or multipart/form-data" in detail


def test_the_spec_offers_the_upload_form_for_operations_that_accept_files(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from openapi_spec_validator import validate

    from service.web import openapi

    monkeypatch.setattr(openapi, "all_operations", lambda: [PROBE_OPERATION])
    document = openapi.build_spec().to_dict()
    validate(document)  # OpenAPI 3.1 schema of the OpenAPI Initiative
    content = document["paths"][PROBE]["post"]["requestBody"]["content"]
    assert list(content) == ["application/json", "multipart/form-data"]
    form = content["multipart/form-data"]
    assert form["schema"]["required"] == ["file", "request"]
    assert form["schema"]["properties"]["file"]["format"] == "binary"
    assert form["schema"]["properties"]["request"] == content["application/json"]["schema"]
    assert form["encoding"]["request"]["contentType"] == "application/json"


def test_a_full_temporary_folder_is_507_not_a_crash(
    client: FlaskClient, temp_root: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    original = Path.open

    def full(self: Path, *args: Any, **kwargs: Any) -> Any:
        if self.name.startswith("part-"):
            raise OSError(28, "No space left on device")
        return original(self, *args, **kwargs)

    monkeypatch.setattr(Path, "open", full)
    response = _post(client, {"file": _file(), "request": '{"label": "x"}'})
    assert "no room" in _problem(response, 507)["detail"]
    assert list(temp_root.iterdir()) == []
