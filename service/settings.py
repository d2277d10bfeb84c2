"""Service settings: read once from the environment into one frozen object.

============================= ========== ==================================================
variable                      default    meaning
============================= ========== ==================================================
SAMPLING_MAX_BODY_BYTES       1048576    largest request body accepted (413 beyond)
SAMPLING_MAX_SAMPLE_SIZE      10000000   largest sample any computation may consider
SAMPLING_MAX_ITEMS            1000000    largest explicit item list a selection accepts
SAMPLING_MAX_LIST_BODY_BYTES  67108864   largest body of an endpoint that takes item lists
SAMPLING_MAX_BATCH_OPERATIONS 1000       most operations one batch may hold
SAMPLING_MAX_BATCH_WORK       1000000    most work units one batch may hold (see below)
SAMPLING_MAX_FILE_BYTES       2147483648 largest uploaded population file (413 beyond)
SAMPLING_MAX_FILE_LINE_BYTES  1048576    longest line of an uploaded CSV file
SAMPLING_MAX_REQUEST_COST     2000000    most cost units one request (or batch) may need
SAMPLING_REQUEST_DEADLINE     10         seconds a request may compute before a 503
SAMPLING_UPLOAD_DEADLINE      300        the same for a request with an uploaded file
SAMPLING_API_KEYS             (unset)    accepted API keys, as digests (see below)
SAMPLING_API_KEYS_FILE        (unset)    a file of further digests, one per line
SAMPLING_CORS_ORIGINS         (unset)    origins whose browser pages may read answers
============================= ========== ==================================================

A batch's work units are, summed over its operations, the elements of every JSON array
in the request (listed items, ranges, exclusions, methods) plus its ``sample_size`` when
that is a whole number: so a batch can list, or draw, no more in total than one
selection may.

**Cost and deadline.** Before it computes, every operation estimates its work from its
validated inputs in cost units, each about a microsecond of one core's time on the
reference machine (:mod:`service.http.costs`); a request, or a batch (the sum of its
operations), whose estimate is above ``SAMPLING_MAX_REQUEST_COST`` is refused at once
with a 422 naming the inputs that make it large. The default, 2,000,000, is about two
seconds of work. Whatever still computes ``SAMPLING_REQUEST_DEADLINE`` seconds after the
request began is stopped and answered with a 503 and ``Retry-After``
(:mod:`service.web.deadline`); the deadline may be a decimal (``2.5``). A request carrying a
population file is bounded by ``SAMPLING_MAX_FILE_BYTES`` and
``SAMPLING_UPLOAD_DEADLINE`` instead of the cost budget: reading ten million records
legitimately takes tens of seconds.

**Uploaded files.** A ``multipart/form-data`` request's file part is streamed to a
temporary file, never held whole in memory, and the file is removed once the answer is
made, whatever happens (:mod:`service.http.uploads`). Its ``request`` part (the JSON
request) is limited like any other body, by ``SAMPLING_MAX_BODY_BYTES``.

**API keys.** Keys are never configured in clear: each accepted key is given by its
digest, ``sha256:`` and the 64 hex digits of SHA-256 of the key's UTF-8 bytes, separated
by commas in ``SAMPLING_API_KEYS`` or one per line in ``SAMPLING_API_KEYS_FILE`` (blank
lines and lines starting with ``#`` are skipped). ``python -m service.web.access_keys new``
prints a new key and its digest. When any digest is set, every endpoint except health,
readiness and the OpenAPI document requires ``Authorization: Bearer <key>``
(:mod:`service.web.access`).

**CORS.** ``SAMPLING_CORS_ORIGINS`` lists, separated by commas, the exact origins
(``https://audit.example.com``, scheme, host and optional port) whose pages may read
answers, or ``*`` for any origin. Unset, no CORS header is sent.

Every setting is read once, at start-up, into one frozen :class:`Settings`. A bad value,
or a ``SAMPLING_`` variable that is not a setting (a typo would otherwise be ignored),
stops start-up with a message naming the variable; digests are not repeated back in it.
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, fields
from pathlib import Path

PREFIX = "SAMPLING_"
_MAX_DIGITS = 18
# ASCII digits only (str.isdigit also accepts other scripts' digits and superscripts).
_WHOLE_NUMBER = re.compile(rf"[0-9](?:_?[0-9]){{0,{_MAX_DIGITS - 1}}}")
_DIGEST = re.compile(r"sha256:([0-9a-f]{64})")
_ORIGIN = re.compile(r"https?://[A-Za-z0-9.-]+(?::[0-9]{1,5})?")
_MAX_KEY_FILE_BYTES = 1_048_576


class SettingsError(ValueError):
    """A setting in the environment is invalid."""


def whole_number(raw: str) -> int:
    """A positive whole number written in ASCII digits, underscores allowed between them."""
    if not _WHOLE_NUMBER.fullmatch(raw.strip()):
        raise ValueError(
            f"{raw[:40]!r}: must be a positive whole number of at most {_MAX_DIGITS} digits "
            "(underscores may group them)"
        )
    value = int(raw.strip().replace("_", ""))
    if value < 1:
        raise ValueError(f"{raw[:40]!r}: must be at least 1")
    return value


def seconds(raw: str) -> float:
    """A positive number of seconds: digits with an optional decimal part, at most 3600."""
    if not re.fullmatch(r"[0-9]{1,4}(?:\.[0-9]{1,3})?", raw.strip()):
        raise ValueError(f"{raw[:40]!r}: must be a number of seconds such as 10 or 2.5")
    value = float(raw.strip())
    if not 0 < value <= 3600:
        raise ValueError(f"{raw[:40]!r}: must be above 0 and at most 3600")
    return value


def _digests(entries: list[str], where: str) -> frozenset[bytes]:
    found: set[bytes] = set()
    for number, entry in enumerate(entries, start=1):
        match = _DIGEST.fullmatch(entry.strip().lower())
        if match is None:
            # The entry itself is not repeated: it may be a key pasted by mistake.
            raise ValueError(
                f"{where} {number} is not of the form sha256:<64 hex digits> "
                "(give each key's digest, never the key; see python -m service.web.access_keys)"
            )
        found.add(bytes.fromhex(match.group(1)))
    return frozenset(found)


def _key_list(raw: str) -> frozenset[bytes]:
    entries = [entry for entry in raw.split(",") if entry.strip()]
    if not entries:
        raise ValueError("is set but holds no digest (unset it to turn API keys off)")
    return _digests(entries, "entry")


def _key_file(raw: str) -> frozenset[bytes]:
    path = Path(raw)
    try:
        if path.stat().st_size > _MAX_KEY_FILE_BYTES:
            raise ValueError(f"{raw!r}: is larger than {_MAX_KEY_FILE_BYTES:,} bytes")
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ValueError(f"{raw!r}: cannot be read ({type(exc).__name__})") from None
    lines = [line for line in text.splitlines() if line.strip() and not line.startswith("#")]
    if not lines:
        raise ValueError(f"{raw!r}: holds no digest")
    return _digests(lines, "line")


def _origins(raw: str) -> tuple[str, ...]:
    origins = tuple(dict.fromkeys(entry.strip() for entry in raw.split(",") if entry.strip()))
    if not origins:
        raise ValueError("is set but holds no origin (unset it to send no CORS header)")
    if "*" in origins and len(origins) > 1:
        raise ValueError("'*' allows every origin and cannot be listed with others")
    for origin in origins:
        if origin != "*" and not _ORIGIN.fullmatch(origin):
            raise ValueError(
                f"{origin[:80]!r}: must be '*' or an origin such as https://audit.example.com "
                "(scheme, host and optional port; no path or trailing slash)"
            )
    return origins


@dataclass(frozen=True)
class Settings:
    max_body_bytes: int = field(default=1_048_576, metadata={"parse": whole_number})
    max_sample_size: int = field(default=10_000_000, metadata={"parse": whole_number})
    max_items: int = field(default=1_000_000, metadata={"parse": whole_number})
    # A million identifiers of a dozen characters are about 16 MB of JSON.
    max_list_body_bytes: int = field(default=67_108_864, metadata={"parse": whole_number})
    max_batch_operations: int = field(default=1_000, metadata={"parse": whole_number})
    max_batch_work: int = field(default=1_000_000, metadata={"parse": whole_number})
    max_file_bytes: int = field(default=2_147_483_648, metadata={"parse": whole_number})
    max_file_line_bytes: int = field(default=1_048_576, metadata={"parse": whole_number})
    max_request_cost: int = field(default=2_000_000, metadata={"parse": whole_number})
    request_deadline: float = field(default=10.0, metadata={"parse": seconds})
    upload_deadline: float = field(default=300.0, metadata={"parse": seconds})
    api_keys: frozenset[bytes] = field(default=frozenset(), metadata={"parse": _key_list})
    api_keys_file: frozenset[bytes] = field(default=frozenset(), metadata={"parse": _key_file})
    cors_origins: tuple[str, ...] = field(default=(), metadata={"parse": _origins})

    @property
    def key_digests(self) -> frozenset[bytes]:
        """Every accepted key's SHA-256 digest, from the variable and the file together."""
        return self.api_keys | self.api_keys_file

    @classmethod
    def from_environ(cls, environ: Mapping[str, str] | None = None) -> Settings:
        """The settings from ``environ`` (default: the process environment).

        Every bad value, and every ``SAMPLING_`` variable that is not a setting, is named
        in one :class:`SettingsError`.
        """
        environ = os.environ if environ is None else environ
        specs = {variable(spec.name): spec for spec in fields(cls)}
        values: dict[str, object] = {}
        problems: list[str] = []
        for name in sorted(environ):
            if not name.startswith(PREFIX):
                continue
            spec = specs.get(name)
            if spec is None:
                problems.append(
                    f"{name}: is not a setting of this service (known: {', '.join(specs)})"
                )
                continue
            parse: Callable[[str], object] = spec.metadata["parse"]
            try:
                values[spec.name] = parse(environ[name])
            except ValueError as exc:
                problems.append(f"{name}: {exc}")
        if problems:
            raise SettingsError("invalid configuration: " + "; ".join(problems))
        return cls(**values)  # type: ignore[arg-type]


def variable(setting: str) -> str:
    """The environment variable of a setting: ``max_items`` → ``SAMPLING_MAX_ITEMS``."""
    return PREFIX + setting.upper()
