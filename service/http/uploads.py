"""Uploads: a population file and its JSON request in one ``multipart/form-data`` body.

The body has exactly two parts: ``file``, the population file, and ``request``, the JSON
request the endpoint would otherwise take as its whole body (a plain field, or a file part
of its own). The file part is streamed to a temporary file in a folder made for the
request, never held whole in memory; the folder is removed when the answer has been made,
whether it succeeded or not (:func:`received` is a context manager).

Limits: the file part at most ``SAMPLING_MAX_FILE_BYTES`` (413 beyond), the ``request``
part at most ``SAMPLING_MAX_BODY_BYTES`` (413 beyond). A missing part, a part of another
name or a part given twice is refused with 422 naming the part; a ``request`` part that is
not strict JSON (:mod:`service.web.jsonio`) with 400 naming it.
"""

from __future__ import annotations

import shutil
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from itertools import count
from pathlib import Path
from typing import IO, Any

from flask import request
from werkzeug.datastructures import FileStorage, MultiDict
from werkzeug.exceptions import RequestEntityTooLarge
from werkzeug.formparser import FormDataParser

from service.settings import Settings
from service.web import jsonio
from service.web.problems import MALFORMED_BODY, Problem, invalid_input

MULTIPART = "multipart/form-data"
FILE_PART = "file"
REQUEST_PART = "request"
PARTS = (FILE_PART, REQUEST_PART)

# Room for the boundaries and part headers around the two parts.
_ENVELOPE_BYTES = 65_536
# Two parts are expected; a few more are parsed only to be named in the refusal.
_MAX_PARTS = 16


@dataclass(frozen=True)
class Upload:
    """The two parts of an upload: the file, on disk for the request's lifetime, and the
    request, parsed."""

    path: Path
    filename: str
    size: int
    payload: Any


def is_multipart() -> bool:
    """Whether the current request is sent as ``multipart/form-data``."""
    return request.mimetype == MULTIPART


@contextmanager
def received(settings: Settings) -> Iterator[Upload]:
    """Read the current request's parts; the temporary file is removed on leaving.

    Raises :class:`~service.web.problems.Problem` (400, 413, 422) for a body that is not a
    well-formed upload; the temporary folder is removed then too.
    """
    folder = Path(tempfile.mkdtemp(prefix="sampling-upload-"))
    try:
        yield _read(folder, settings)
    finally:
        shutil.rmtree(folder, ignore_errors=True)


def _too_large(settings: Settings) -> Problem:
    return Problem(
        413,
        "Content Too Large",
        f"the upload is larger than this service accepts: the file part at most "
        f"{settings.max_file_bytes:,} bytes (SAMPLING_MAX_FILE_BYTES) and the request part "
        f"at most {settings.max_body_bytes:,} bytes (SAMPLING_MAX_BODY_BYTES)",
    )


def _read(folder: Path, settings: Settings) -> Upload:
    request.max_content_length = (
        settings.max_file_bytes + settings.max_body_bytes + _ENVELOPE_BYTES
    )
    numbers = count(1)

    def to_disk(
        total_content_length: int | None,
        content_type: str | None,
        filename: str | None,
        content_length: int | None = None,
    ) -> IO[bytes]:
        return (folder / f"part-{next(numbers)}").open("wb+")

    parser = FormDataParser(
        stream_factory=to_disk,
        max_form_memory_size=settings.max_body_bytes,
        max_form_parts=_MAX_PARTS,
        silent=False,
    )
    try:
        _, form, files = parser.parse(
            request.stream, request.mimetype, request.content_length, request.mimetype_params
        )
    except RequestEntityTooLarge:
        raise _too_large(settings) from None
    except OSError:
        # The temporary folder is full (a small tmpfs, for one): nothing of the upload stays.
        raise Problem(
            507,
            "Insufficient Storage",
            "the service has no room to store the uploaded file for this request; "
            "try again later or with a smaller file",
        ) from None
    except ValueError as exc:
        raise Problem(
            400,
            "Malformed body",
            f"the multipart/form-data body cannot be read: {exc}",
            MALFORMED_BODY,
        ) from None
    try:
        return _parts(form, files, settings)
    finally:
        for _, storage in files.items(multi=True):
            storage.close()


def _parts(
    form: MultiDict[str, str], files: MultiDict[str, FileStorage], settings: Settings
) -> Upload:
    errors: dict[str, list[str]] = {}
    names = [name for name, _ in form.items(multi=True)] + [
        name for name, _ in files.items(multi=True)
    ]
    for name in dict.fromkeys(names):
        if name not in PARTS:
            errors[name] = ["is not a part of this request; send only the parts file and request"]
        elif names.count(name) > 1:
            errors[name] = ["is given more than once; send it once"]
    if FILE_PART in form:
        errors.setdefault(
            FILE_PART,
            ["must be sent as a file (a part with a filename), not as a plain field"],
        )
    elif FILE_PART not in files:
        errors[FILE_PART] = ["is required: the population file, as a part named file"]
    if REQUEST_PART not in form and REQUEST_PART not in files:
        errors[REQUEST_PART] = ["is required: the JSON request, as a part named request"]
    if errors:
        raise invalid_input(errors)

    storage = files[FILE_PART]
    path = Path(storage.stream.name)  # the stream is the file made by to_disk
    size = path.stat().st_size
    if size > settings.max_file_bytes:
        raise _too_large(settings)
    if size == 0:
        raise invalid_input({FILE_PART: ["is empty"]})
    return Upload(path, storage.filename or "", size, _request_part(form, files, settings))


def _request_part(
    form: MultiDict[str, str], files: MultiDict[str, FileStorage], settings: Settings
) -> Any:
    if REQUEST_PART in form:
        raw = form[REQUEST_PART].encode("utf-8", "surrogateescape")
    else:
        stream = files[REQUEST_PART].stream
        raw = stream.read(settings.max_body_bytes + 1)
        if len(raw) > settings.max_body_bytes:
            raise _too_large(settings)
    try:
        return jsonio.loads(raw)
    except jsonio.JSONDecodeProblem as exc:
        raise Problem(
            400,
            "Malformed body",
            f"the request part is not strict JSON: {exc}",
            MALFORMED_BODY,
            {REQUEST_PART: [str(exc)]},
        ) from None
