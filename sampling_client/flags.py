"""Command-line flags derived from a request schema, and the JSON body built from them.

Each field of a marshmallow request schema becomes one flag, so a field added to a schema
is a flag of the command without new code:

- ``tolerable_rate`` → ``--tolerable-rate``; a nested field ``population.size`` →
  ``--population-size``; the help text is the field's ``description`` metadata; the
  fields of a population file's description also go by their own names
  (``--id-column``, see :func:`short_names`);
- numbers are read as JSON numbers and sent as numbers (``5`` stays the integer 5, so the
  service can say that it looks like a percentage); nothing else is checked here, so
  every range and consistency message is the service's own;
- a list of numbers or of fixed choices takes commas or repeats
  (``--methods exact,wilson``); a list of free text (identifiers, which may hold commas)
  takes one value per flag; every list also has a ``-file`` form reading one entry per
  line; a list of ``{first, last}`` pairs takes ``FIRST-LAST``;
- a list of flat objects (records, such as ``{"id", "amount"}`` items) takes JSON text, and
  its ``-file`` form reads a CSV file (RFC 4180, UTF-8) whose header names the fields: a
  number column is sent as a JSON number, an amount column (a field that accepts decimal
  text) as the text written, so no digit is lost; an empty cell leaves the field out;
- anything else (an object of free shape) takes JSON text, or a file of JSON.

The values go into the body at the field's path, in the schema's order.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import re
import textwrap
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import marshmallow
from marshmallow import Schema, fields, validate

NUMBER = "number"
STRING = "string"
BOOLEAN = "boolean"
NUMBERS = "numbers"
STRINGS = "strings"
CHOICES = "choices"
PAIRS = "pairs"
RECORDS = "records"
RAW_JSON = "json"

# Width of the help paragraphs this module wraps itself (argparse leaves them raw).
HELP_WIDTH = 78

LIST_KINDS = frozenset({NUMBERS, STRINGS, CHOICES, PAIRS, RECORDS})

# JSON's number grammar, with leading zeros let through (they change no value).
_JSON_NUMBER = re.compile(r"-?[0-9]+(\.[0-9]+)?([eE][+-]?[0-9]+)?")
_PAIR = re.compile(r"([0-9]+)-([0-9]+)")


@dataclass(frozen=True)
class FieldSpec:
    """One leaf field of a request: where it goes in the body and how it is read."""

    path: tuple[str, ...]
    kind: str
    required: bool
    description: str = ""
    choices: tuple[str, ...] = ()
    default: Any = None
    pair: tuple[str, str] = ("first", "last")
    # RECORDS: how each column of a record is read (a kind of this module, by field name).
    columns: tuple[tuple[str, str], ...] = ()
    # The list fields whose presence makes this one optional (``attributes`` for
    # ``tolerable_rate``): where no list can be given, as in a controls file, it is required.
    required_unless: tuple[str, ...] = ()
    # An exact amount, which a table cell (a controls file's) gives as the text written.
    amount: bool = False

    @property
    def name(self) -> str:
        """``population_size``: the argparse destination and the CSV column."""
        return "_".join(self.path)

    @property
    def dotted(self) -> str:
        """``population.size``: the field as the service names it in errors."""
        return ".".join(self.path)

    @property
    def flag(self) -> str:
        return "--" + self.name.replace("_", "-")


def _choices(field: fields.Field[Any]) -> tuple[str, ...]:
    for validator in field.validators:
        if isinstance(validator, validate.OneOf):
            return tuple(str(choice) for choice in validator.choices)
    return ()


def _description(field: fields.Field[Any]) -> str:
    return str(field.metadata.get("description", ""))


def _leaf_kind(field: fields.Field[Any]) -> str | None:
    if isinstance(field, fields.Boolean):
        return BOOLEAN
    if isinstance(field, fields.Number):
        return NUMBER
    if isinstance(field, fields.String):
        return STRING
    return None


def _list_kind(field: fields.List[Any]) -> str:
    inner = field.inner
    if isinstance(inner, fields.Number):
        return NUMBERS
    if isinstance(inner, fields.String):
        return CHOICES if _choices(inner) else STRINGS
    if isinstance(inner, fields.Nested) and isinstance(inner.schema, Schema):
        members = list(inner.schema.fields.values())
        if len(members) == 2 and all(isinstance(m, fields.Integer) for m in members):
            return PAIRS
        if members and all(_leaf_kind(m) or _accepts_text(m) for m in members):
            return RECORDS
    return RAW_JSON


def _accepts_text(field: fields.Field[Any]) -> bool:
    """A field that takes a number written as text (an exact amount)."""
    return bool(getattr(field, "accepts_text", False))


def _key(name: str, field: fields.Field[Any]) -> str:
    return field.data_key or name


def field_specs(schema: Schema, prefix: tuple[str, ...] = ()) -> list[FieldSpec]:
    """Every leaf field of ``schema``, nested objects flattened, in declaration order."""
    specs: list[FieldSpec] = []
    for name, field in schema.fields.items():
        if field.dump_only:
            continue
        path = (*prefix, _key(name, field))
        if isinstance(field, fields.Nested) and isinstance(field.schema, Schema) and not field.many:
            specs.extend(field_specs(field.schema, path))
            continue
        if isinstance(field, fields.List):
            kind = _list_kind(field)
            choices = _choices(field.inner) if kind == CHOICES else ()
            pair: tuple[str, str] = ("first", "last")
            inner = field.inner
            if kind == PAIRS and isinstance(inner, fields.Nested):
                first, last = (_key(n, f) for n, f in inner.schema.fields.items())
                pair = (first, last)
            columns: tuple[tuple[str, str], ...] = ()
            if kind == RECORDS and isinstance(inner, fields.Nested):
                columns = tuple(
                    (_key(n, f), STRING if _accepts_text(f) else _leaf_kind(f) or STRING)
                    for n, f in inner.schema.fields.items()
                )
            specs.append(FieldSpec(path, kind, field.required, _description(field), choices,
                                   pair=pair, columns=columns))
            continue
        kind = _leaf_kind(field) or RAW_JSON
        default = field.load_default
        default = None if default is None or callable(default) or _is_missing(default) else default
        specs.append(FieldSpec(path, kind, field.required, _description(field),
                               _choices(field), default,
                               required_unless=_required_unless(field),
                               amount=_accepts_text(field)))
    return specs


def _required_unless(field: fields.Field[Any]) -> tuple[str, ...]:
    """The ``required_unless`` metadata (one field name or several) as a tuple."""
    names = field.metadata.get("required_unless") or ()
    return (names,) if isinstance(names, str) else tuple(names)


def _is_missing(value: Any) -> bool:
    return value is marshmallow.missing


def group_descriptions(schema: Schema, prefix: tuple[str, ...] = ()) -> dict[tuple[str, ...], str]:
    """The description of each nested object, by its path (for help groups)."""
    found: dict[tuple[str, ...], str] = {}
    for name, field in schema.fields.items():
        if isinstance(field, fields.Nested) and isinstance(field.schema, Schema) and not field.many:
            path = (*prefix, _key(name, field))
            found[path] = _description(field)
            found.update(group_descriptions(field.schema, path))
    return found


# --------------------------------------------------------------------------- values


class ValueProblem(ValueError):
    """A value that cannot be sent as the JSON its field takes; the message says why."""


def json_number(text: str) -> int | float:
    """``text`` as a JSON number: an integer when written without a point or exponent.

    >>> json_number("0.05"), json_number("4200"), json_number("1e-2")
    (0.05, 4200, 0.01)
    """
    candidate = text.strip()
    if not _JSON_NUMBER.fullmatch(candidate):
        raise ValueProblem(_not_a_number(text))
    if candidate.lstrip("-").isdigit():
        return int(candidate)
    value = float(candidate)
    if value in (float("inf"), float("-inf")):
        raise ValueProblem(f"{text!r} is too large a number")
    return value


def _not_a_number(text: str) -> str:
    hint = "write decimals with a point, such as 0.05"
    stripped = text.strip()
    if stripped.endswith("%"):
        hint = "rates are fractions: 5% is 0.05"
    elif "," in stripped:
        hint = "use a point, not a comma, as the decimal separator, and no thousands separator"
    elif not stripped:
        return "is blank; give a number"
    return f"{text!r} is not a number ({hint})"


def _pair(text: str, names: tuple[str, str]) -> dict[str, int]:
    match = _PAIR.fullmatch(text.strip())
    if not match:
        raise ValueProblem(f"{text!r} is not a range; write FIRST-LAST, such as 10001-14200")
    return {names[0]: int(match.group(1)), names[1]: int(match.group(2))}


def _comma_list(text: str) -> list[str]:
    parts = text.split(",")
    if any(not part.strip() for part in parts):
        raise ValueProblem(f"{text!r} has an empty entry between commas")
    return [part.strip() for part in parts]


def _argparse_type(convert: Any) -> Any:
    """``convert`` with :class:`ValueProblem` turned into argparse's own error (exit 2)."""

    def parse(text: str) -> Any:
        try:
            return convert(text)
        except ValueProblem as problem:
            raise argparse.ArgumentTypeError(str(problem)) from None

    return parse


def strict_json(text: str) -> Any:
    def refuse(name: str) -> Any:
        raise ValueProblem(f"{name} is not JSON")

    try:
        return json.loads(text, parse_constant=refuse)
    except json.JSONDecodeError as exc:
        raise ValueProblem(f"is not JSON ({exc.msg} at line {exc.lineno} column {exc.colno})") \
            from None


def file_lines(path: str) -> list[str]:
    """The lines of a UTF-8 text file, without their line ends, a leading BOM dropped.

    Blank lines (empty or only white space) at the end of the file are left out. Entries
    are taken exactly as written otherwise: no trimming, and a blank line in the middle is
    an (empty) entry for the service to judge, so entry k is always on line k + 1.
    """
    lines = [line.removesuffix("\r") for line in _read_text(path).split("\n")]
    while lines and not lines[-1].strip():
        lines.pop()
    return lines


def _read_text(path: str) -> str:
    try:
        return Path(path).read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise ValueProblem(f"{path}: no such file") from None
    except UnicodeDecodeError as exc:
        raise ValueProblem(f"{path}: not UTF-8 text (byte {exc.start})") from None
    except OSError as exc:
        raise ValueProblem(f"{path}: {exc.strerror}") from None


def read_records(spec: FieldSpec, path: str) -> list[dict[str, Any]]:
    """The rows of a CSV file with a header, as records of the field's columns."""
    kinds = dict(spec.columns)
    rows = csv.reader(io.StringIO(_read_text(path), newline=""))
    header = next(rows, None)
    if not header:
        raise ValueProblem(f"{path}: empty; the first line names the columns")
    records: list[dict[str, Any]] = []
    for number, row in enumerate(rows, start=2):
        if not row:
            continue
        if len(row) != len(header):
            raise ValueProblem(
                f"{path}, line {number}: {len(row)} cells under a header of {len(header)}"
            )
        record: dict[str, Any] = {}
        for name, cell in zip(header, row, strict=True):
            if cell == "":
                continue
            try:
                record[name] = _cell(kinds.get(name, STRING), cell)
            except ValueProblem as problem:
                raise ValueProblem(f"{path}, line {number}, column {name}: {problem}") from None
        records.append(record)
    return records


def _cell(kind: str, text: str) -> Any:
    if kind == NUMBER:
        return json_number(text)
    if kind == BOOLEAN:
        lowered = text.strip().lower()
        if lowered not in ("true", "false"):
            raise ValueProblem(f"{text!r} is not true or false")
        return lowered == "true"
    return text


def read_list_file(spec: FieldSpec, path: str) -> list[Any]:
    """The entries of a ``-file`` flag, one per line, read as the field's entries are."""
    if spec.kind == RAW_JSON:
        return [strict_json(_read_text(path))]
    if spec.kind == RECORDS:
        return read_records(spec, path)
    entries: list[Any] = []
    for number, line in enumerate(file_lines(path), start=1):
        try:
            entries.append(_entry(spec, line))
        except ValueProblem as problem:
            raise ValueProblem(f"{path}, line {number}: {problem}") from None
    return entries


def _entry(spec: FieldSpec, text: str) -> Any:
    if spec.kind == NUMBERS:
        return json_number(text)
    if spec.kind == PAIRS:
        return _pair(text, spec.pair)
    if spec.kind == CHOICES:
        return text.strip()
    return text


# --------------------------------------------------------------------------- argparse


def _help(spec: FieldSpec) -> str:
    parts = [spec.description.rstrip(".") + "." if spec.description else ""]
    if spec.choices:
        parts.append(f"One of {', '.join(spec.choices)}.")
    if spec.default is not None:
        parts.append(f"Service default: {spec.default}.")
    if spec.required and len(spec.path) == 1:
        parts.append("Required.")
    elif spec.required:
        parts.append(f"Required when {'.'.join(spec.path[:-1])} is given.")
    elif spec.required_unless:
        flags = " or ".join(f"--{name.replace('_', '-')}" for name in spec.required_unless)
        parts.append(f"Required unless {flags} is given.")
    if spec.kind == NUMBERS:
        parts.append("Numbers, comma-separated or repeated.")
    elif spec.kind == CHOICES:
        parts.append("Comma-separated or repeated.")
    elif spec.kind == STRINGS:
        parts.append("One entry per flag, repeated.")
    elif spec.kind == PAIRS:
        parts.append("Each as FIRST-LAST, comma-separated or repeated.")
    elif spec.kind == RAW_JSON:
        parts.append("JSON text.")
    elif spec.kind == RECORDS:
        columns = ", ".join(name for name, _ in spec.columns)
        parts.append(f"A JSON array of objects; its -file form reads CSV with columns {columns}.")
    # argparse formats help with %, so a literal percent sign must be doubled.
    return " ".join(p for p in parts if p).replace("%", "%%")


#: The object whose fields also go by their own names, as their command-line flags and
#: controls-file columns: ``--id-column`` for ``--population-file-id-column``.
SHORT_PREFIX = ("population", "file")


def short_names(specs: list[FieldSpec]) -> dict[str, FieldSpec]:
    """Short names (``id_column``) of the fields under :data:`SHORT_PREFIX`, by name.

    A field goes by its last name alone when no other field of the request ends with that
    name and no top-level field is called so: ``population.file.exclude`` is ``exclude``
    in a profile, but not in a selection, which has ``population.exclude`` too.
    """
    leaves: dict[str, int] = {}
    for spec in specs:
        leaves[spec.path[-1]] = leaves.get(spec.path[-1], 0) + 1
    return {
        spec.path[-1]: spec
        for spec in specs
        if spec.path[:-1] == SHORT_PREFIX and leaves[spec.path[-1]] == 1
    }


def file_dest(spec: FieldSpec) -> str:
    return spec.name + "__file"


def add_flags(
    parser: argparse.ArgumentParser | argparse._ArgumentGroup,
    specs: list[FieldSpec],
    groups: Mapping[tuple[str, ...], str] | None = None,
) -> None:
    """Add one flag per spec (and a ``-file`` flag per list), grouped by nested object."""
    groups = groups or {}
    made: dict[tuple[str, ...], Any] = {}
    depths: dict[str, list[tuple[str, ...]]] = {}
    for spec in specs:
        depths.setdefault(spec.path[-1], []).append(spec.path)
    shallowest = {
        leaf: min(paths, key=len)
        for leaf, paths in depths.items()
        if [len(p) for p in paths].count(min(len(p) for p in paths)) == 1
    }

    def container(spec: FieldSpec) -> Any:
        parent = spec.path[:-1]
        if not parent:
            return parser
        if parent not in made:
            about = textwrap.fill(groups.get(parent) or "", HELP_WIDTH) or None
            made[parent] = parser.add_argument_group(".".join(parent), about)
        return made[parent]

    short = {id(spec): "--" + name.replace("_", "-")
             for name, spec in short_names(specs).items()}
    for spec in specs:
        target = container(spec)
        metavar = spec.path[-1].upper()
        names = [spec.flag, *([short[id(spec)]] if id(spec) in short else [])]
        common: dict[str, Any] = {"dest": spec.name, "help": _help(spec), "default": None}
        if spec.kind == BOOLEAN:
            target.add_argument(*names, action=argparse.BooleanOptionalAction, **common)
            continue
        if spec.kind in (NUMBER, STRING):
            convert: Any = _argparse_type(json_number) if spec.kind == NUMBER else str
            if spec.choices:
                metavar = "{" + ",".join(spec.choices) + "}"
            target.add_argument(*names, type=convert, metavar=metavar, **common)
            continue
        # A list, or free-shaped JSON: the flag or its file, not both.
        exclusive = target.add_mutually_exclusive_group()
        if spec.kind in (RAW_JSON, RECORDS):
            exclusive.add_argument(*names, type=_argparse_type(strict_json),
                                   metavar="JSON", **common)
        elif spec.kind == STRINGS:
            exclusive.add_argument(*names, action="append", metavar="TEXT", **common)
        else:
            exclusive.add_argument(
                *names, action="extend", metavar=metavar,
                type=_argparse_type(lambda text, spec=spec: [
                    _entry(spec, part) for part in _comma_list(text)]),
                **common,
            )
        names = [spec.flag + "-file"]
        # A short alias for a nested list's file (--items-file), when no other field as
        # shallow has that last name (population.exclude keeps --exclude-file beside
        # population.file.exclude).
        if len(spec.path) > 1 and shallowest.get(spec.path[-1]) == spec.path:
            names.append(f"--{spec.path[-1].replace('_', '-')}-file")
        what = {RAW_JSON: "a JSON file", RECORDS: "a CSV file with a header row"}.get(
            spec.kind, "a UTF-8 file, one entry per line")
        exclusive.add_argument(
            *names, dest=file_dest(spec), metavar="FILE", default=None,
            help=f"{spec.dotted} from {what} (instead of {spec.flag}).",
        )


def iter_values(namespace: argparse.Namespace, specs: list[FieldSpec]) -> Iterator[
        tuple[FieldSpec, Any]]:
    """Each spec given on the command line with its value (a ``-file`` flag read now)."""
    for spec in specs:
        value = getattr(namespace, spec.name, None)
        path = getattr(namespace, file_dest(spec), None)
        if path is not None:
            entries = read_list_file(spec, path)
            value = entries[0] if spec.kind == RAW_JSON else entries
        if value is not None:
            yield spec, value


def put(body: dict[str, Any], path: tuple[str, ...], value: Any) -> None:
    """Set ``body[path[0]][path[1]]... = value``, making the objects on the way."""
    node = body
    for key in path[:-1]:
        child = node.get(key)
        if not isinstance(child, dict):
            child = node[key] = {}
        node = child
    node[path[-1]] = value


def build_body(
    namespace: argparse.Namespace, specs: list[FieldSpec], base: Mapping[str, Any] | None = None
) -> dict[str, Any]:
    """The request body: ``base`` (from ``--body``) with the flags given set on top of it."""
    body: dict[str, Any] = json.loads(json.dumps(base)) if base else {}
    for spec, value in iter_values(namespace, specs):
        put(body, spec.path, value)
    return body
