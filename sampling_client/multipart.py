"""A ``multipart/form-data`` body streamed from a file on disk (RFC 7578).

The service takes a population file or a completed test sheet as two parts: ``file``, the
file's bytes, and ``request``, the JSON request. :class:`FileUpload` yields the body in
blocks read from the file as they are sent, so a file of gigabytes is never held in
memory, and it knows its length beforehand, so the request carries a ``Content-Length``
(no chunked encoding). Each iteration reads the file again from its start, which is what
a retry needs.
"""

from __future__ import annotations

import json
import os
import secrets
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

#: Bytes read from the file at a time.
BLOCK_BYTES = 1 << 20


def _quoted(name: str) -> str:
    # RFC 7578 4.2: a file name in a quoted string, with its quote, backslash and line
    # breaks percent-encoded as browsers do.
    return (name.replace("\\", "%5C").replace('"', "%22").replace("\r", "%0D")
            .replace("\n", "%0A"))


class FileChanged(OSError):
    """The file's size changed while it was being sent."""


class FileUpload:
    """The body ``file`` (the file at ``path``) + ``request`` (``request`` as JSON).

    Raises :class:`OSError` at once when the file cannot be read, and
    :class:`ValueError` when the request cannot be written as JSON (NaN, Infinity).
    """

    def __init__(self, path: str | os.PathLike[str], request: Mapping[str, Any]) -> None:
        self.path = Path(path)
        with self.path.open("rb"):  # refuse a missing or unreadable file before sending
            pass
        if self.path.is_dir():
            raise IsADirectoryError(21, "Is a directory", str(self.path))
        self.size = self.path.stat().st_size
        try:
            payload = json.dumps(dict(request), allow_nan=False, ensure_ascii=False)
        except ValueError:
            raise ValueError("the request holds NaN or Infinity, which JSON cannot carry") \
                from None
        self.boundary = "----attribute-sampling-" + secrets.token_hex(16)
        dash = f"--{self.boundary}\r\n"
        self._head = (
            f"{dash}Content-Disposition: form-data; name=\"request\"\r\n"
            "Content-Type: application/json\r\n\r\n"
            f"{payload}\r\n"
            f"{dash}Content-Disposition: form-data; name=\"file\"; "
            f"filename=\"{_quoted(self.path.name)}\"\r\n"
            "Content-Type: application/octet-stream\r\n\r\n"
        ).encode()
        self._tail = f"\r\n--{self.boundary}--\r\n".encode("ascii")

    @property
    def content_type(self) -> str:
        """The ``Content-Type`` header of the body, with its boundary."""
        return f"multipart/form-data; boundary={self.boundary}"

    def __len__(self) -> int:
        return len(self._head) + self.size + len(self._tail)

    def __iter__(self) -> Iterator[bytes]:
        yield self._head
        sent = 0
        with self.path.open("rb") as handle:
            while sent < self.size:
                block = handle.read(min(BLOCK_BYTES, self.size - sent))
                if not block:
                    break
                sent += len(block)
                yield block
            more = handle.read(1)
        if sent != self.size or more:
            raise FileChanged(f"{self.path} changed size while it was being sent")
        yield self._tail
