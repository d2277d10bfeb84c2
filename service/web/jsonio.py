"""Strict JSON: what the service reads and writes.

Python's ``json`` module accepts ``NaN`` and ``Infinity``, silently keeps the
last of duplicated keys and turns ``1e400`` into infinity. None of that is
JSON (RFC 8259) a client meant to send, so :func:`loads` refuses each with a
:class:`JSONDecodeProblem` naming what was wrong; :func:`dumps` never emits
non-finite numbers.

A number with a fraction or an exponent is read as a
:class:`~service.sampling.rates.WrittenDecimal`: the nearest double that also
keeps the decimal as written, so that counts computed from rates use the
caller's decimal at any length. A number too small for a double (``1e-400``)
reads as 0.0 with its written decimal kept, and the field that receives it
refuses it by name.
"""

from __future__ import annotations

import json
import math
import re
from typing import Any

from service.sampling.rates import WrittenDecimal


class JSONDecodeProblem(ValueError):
    """The body is not strict JSON."""


def _refuse_constant(name: str) -> Any:
    raise JSONDecodeProblem(f"{name} is not valid JSON; send a finite number")


def _finite_float(text: str) -> float:
    if len(text) > 1000:
        raise JSONDecodeProblem(f"the number {text[:40]}... has more than 1,000 characters")
    value = WrittenDecimal(text)
    if not math.isfinite(value):
        raise JSONDecodeProblem(f"the number {text[:40]} is too large to represent")
    return value


def _unique_keys(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    result: dict[str, Any] = {}
    for key, value in pairs:
        if key in result:
            raise JSONDecodeProblem(f"the key {key[:80]!r} appears more than once in one object")
        result[key] = value
    return result


# One decoder and one encoder for every call: json.loads and json.dumps with options build
# a new one each time. Neither keeps state between calls.
_DECODER = json.JSONDecoder(
    parse_constant=_refuse_constant, parse_float=_finite_float, object_pairs_hook=_unique_keys
)
_ENCODER = json.JSONEncoder(allow_nan=False, ensure_ascii=False)


def loads(data: bytes) -> Any:
    """Parse ``data`` (UTF-8) as strict JSON."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise JSONDecodeProblem(f"the body is not valid UTF-8 (byte {exc.start})") from None
    if not text.strip():
        raise JSONDecodeProblem("the body is empty; send a JSON object")
    try:
        return _DECODER.decode(text)
    except JSONDecodeProblem:
        raise
    except json.JSONDecodeError as exc:
        raise JSONDecodeProblem(
            f"malformed JSON at line {exc.lineno} column {exc.colno}: {exc.msg}"
        ) from None
    except RecursionError:
        raise JSONDecodeProblem("the JSON is nested too deeply") from None
    except ValueError:  # an integer literal with more digits than Python converts
        raise JSONDecodeProblem(
            "a number in the body has too many digits (more than 4,300) to be read"
        ) from None


def dumps(obj: Any, **kwargs: Any) -> str:
    """Serialise ``obj`` as JSON; NaN and Infinity raise instead of being written."""
    if not kwargs:
        return _ENCODER.encode(obj)
    return json.dumps(obj, allow_nan=False, ensure_ascii=False, **kwargs)


_LONE_SURROGATE = re.compile("[\ud800-\udfff]")
#: Lone surrogates named in one answer; a list of many is not repeated back whole.
_NAMED_SURROGATES = 20


def lone_surrogates(value: Any, path: str = "") -> dict[str, list[str]]:
    """The paths (``population.label``, ``attributes[0].name``) of strings, and of objects
    whose member names, holding a lone surrogate (``\\ud800``): JSON escapes can spell one,
    but it is not a character and cannot be written as UTF-8, so an answer or a log line
    that repeated it would fail.

    >>> sorted(lone_surrogates({"a": ["ok", "x\\ud800"], "b\\udfff": 1}))
    ['a[1]', 'body']
    >>> print(lone_surrogates({"a": "\\ud800"})["a"][0][:31])
    holds a lone surrogate (\ud800)
    """
    found: dict[str, list[str]] = {}
    stack: list[tuple[str, Any]] = [(path, value)]
    while stack and len(found) < _NAMED_SURROGATES:
        where, item = stack.pop()
        if isinstance(item, str):
            match = _LONE_SURROGATE.search(item)
            if match is not None:
                shown = match.group().encode("unicode_escape").decode("ascii")
                found[where or "body"] = [
                    f"holds a lone surrogate ({shown}), which cannot be encoded as UTF-8; "
                    "send valid Unicode text"
                ]
        elif isinstance(item, dict):
            for key, member in reversed(item.items()):
                if _LONE_SURROGATE.search(key):
                    found.setdefault(where or "body", []).append(
                        "a member name holds a lone surrogate, which cannot be encoded as "
                        "UTF-8; send valid Unicode text"
                    )
                    continue
                stack.append((f"{where}.{key}" if where else key, member))
        elif isinstance(item, list):
            stack.extend((f"{where}[{i}]", member) for i, member in reversed(list(enumerate(item))))
    return found
