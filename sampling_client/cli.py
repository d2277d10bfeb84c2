"""The ``attribute-sampling`` command: the service's operations from a shell, and ``serve``.

One subcommand per operation of the service (its operationId), with one flag per request
field (:mod:`sampling_client.flags`), both read from the service's OpenAPI document that
ships with this package (:mod:`sampling_client.contract`), so a new endpoint or field is on
the command line without new code here, and without the service installed. An operation
that reads a file takes it with ``--file`` (a population file) or ``--test-sheet`` (a
completed test sheet, for ``evaluation``), and an answer that is a file (``--xlsx``) goes
to ``--output``.
``serve`` runs the service itself under gunicorn; ``health`` and ``ready`` ask a running
one how it is.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import os
import re
import sys
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, NoReturn

import requests

from sampling_client import api, contract, controls, flags, tables
from sampling_client.api import (
    DEFAULT_URL,
    JSON,
    MARKDOWN,
    XLSX,
    AuthenticationFailed,
    RequestRejected,
    SamplingClient,
    ServiceError,
    ServiceUnavailable,
)

PROG = "attribute-sampling"
URL_VARIABLE = "ATTRIBUTE_SAMPLING_URL"
KEY_VARIABLE = "ATTRIBUTE_SAMPLING_API_KEY"

EXIT_OK = 0
EXIT_USAGE = 2
EXIT_REFUSED = 3
EXIT_UNAVAILABLE = 4
EXIT_AUTHENTICATION = 5

EPILOG = f"""\
exit status:
  0  success
  2  usage error: an unknown flag, a value that is not a number, a file that cannot be
     read, or a controls file with a bad row or column (nothing is sent)
  3  the service refused the input (HTTP 4xx), naming the field; for --controls or
     batch, at least one item was refused (every item's answer is still printed)
  4  the service could not be reached, did not answer in time, or failed (HTTP 5xx)
  5  the service needs an API key, or refused the one given (HTTP 401 or 403)
  serve ends with gunicorn's own exit status.

environment:
  {URL_VARIABLE}      the service's address (default {DEFAULT_URL})
  {KEY_VARIABLE}  API key, sent as Authorization: Bearer <key>

Rates are fractions: 5% is 0.05. The results support, and do not replace,
professional judgement and the auditing standards that apply."""

_FORMAT_FLAGS = {"text/csv": "csv", "image/svg+xml": "svg", XLSX: "xlsx"}
# Answers that are not text: written to --output FILE, or to a standard output that is not
# a terminal.
_BINARY = frozenset({"xlsx"})

#: Shorter names of some commands, beside their operationIds.
ALIASES = {
    "population-profile": ["profile"],
    "population-stratified-selection": ["stratified-selection"],
}
#: Read timeout of a call that sends a file, unless --timeout is given: reading a file of
#: millions of records takes the service seconds to minutes.
FILE_READ_SECONDS = 600.0
DEFAULT_SECONDS = 10.0
# ASCII digits only: str.isdigit also takes superscripts, which int() refuses.
_DIGITS = re.compile(r"[0-9]{1,9}")


class UsageProblem(Exception):
    """A usage error found after parsing (a file, a flag combination); exit status 2."""


def _operations() -> list[contract.Operation]:
    """The service's operations, from its OpenAPI document (names, paths, requests, answers)."""
    return contract.operations()


def _positive_seconds(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number of seconds") from None
    if not value > 0 or value == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive number of seconds")
    return value


def _count(text: str) -> int:
    if not _DIGITS.fullmatch(text):
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number of at least 0")
    return int(text)


def _port(text: str) -> int:
    if not _DIGITS.fullmatch(text) or not 1 <= int(text) <= 65535:
        raise argparse.ArgumentTypeError(f"{text!r} is not a port from 1 to 65535")
    return int(text)


def _connection_options() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False, allow_abbrev=False)
    group = common.add_argument_group("connection")
    group.add_argument("--url", default=os.environ.get(URL_VARIABLE) or DEFAULT_URL,
                       help=f"the service's address (default: ${URL_VARIABLE}, else "
                       f"{DEFAULT_URL})")
    group.add_argument("--api-key", default=os.environ.get(KEY_VARIABLE) or None,
                       help=f"API key (default: ${KEY_VARIABLE}); prefer the variable, since "
                       "a flag shows in the process list")
    group.add_argument("--timeout", type=_positive_seconds, default=None,
                       help=f"seconds to wait for the connection and for the answer "
                       f"(default {DEFAULT_SECONDS:g}; for an answer to a file sent with "
                       f"--file or --test-sheet, {FILE_READ_SECONDS:g})")
    group.add_argument("--retries", type=_count, default=3,
                       help="further tries when the connection fails or the service answers "
                       "503 (default 3)")
    group.add_argument("--request-id", help="sent as X-Request-ID, to find the call in the "
                       "service's logs")
    return common


def _offered(operation: contract.Operation) -> list[str]:
    """The media types of ``operation`` that have a flag, its file form's too."""
    types = list(operation.media_types)
    if operation.file_form is not None:
        types += [t for t in operation.file_form.media_types if t not in types]
    return [t for t in types if t in _FORMAT_FLAGS]


def _output_options(parser: argparse.ArgumentParser, operation: contract.Operation,
                    single: bool) -> None:
    group = parser.add_argument_group("output (default: an aligned table)")
    choice = group.add_mutually_exclusive_group()
    choice.add_argument("--json", dest="output", action="store_const", const="json",
                        help="print the service's JSON answer exactly")
    choice.add_argument("--markdown", dest="output", action="store_const", const="markdown",
                        help="print the service's ticket-ready Markdown block")
    offered = _offered(operation)
    names = ["json", "markdown"]
    for media_type in offered:
        name = _FORMAT_FLAGS[media_type]
        names.append(name)
        extra = "; with --controls, the rows as CSV" if name == "csv" and single else ""
        if name == "xlsx" and operation.file_form is not None:
            extra = (" (with --test-sheet: the workbook again, with an Evaluation sheet "
                     "added)")
        elif name == "xlsx":
            extra = " (a test sheet when --attributes are named)"
        choice.add_argument(f"--{name}", dest="output", action="store_const", const=name,
                            help=f"print the service's {media_type} answer exactly{extra}")
    if single and "text/csv" not in offered:
        names.append("csv")
        choice.add_argument("--csv", dest="output", action="store_const", const="csv",
                            help="with --controls: the rows as CSV (UTF-8 with a byte order "
                            "mark, CRLF line ends)")
    choice.add_argument("--accept", dest="output", choices=names, metavar="FORMAT",
                        help=f"the same as the flag of that name: one of {', '.join(names)}")
    group.add_argument("--output", dest="output_file", metavar="FILE",
                       help="write the answer to FILE (whole, or not at all) instead of "
                       "standard output. An XLSX answer needs it, unless standard output "
                       "is redirected to a file or a pipe.")


def _add_operation(subparsers: Any, operation: contract.Operation,
                   common: argparse.ArgumentParser) -> None:
    schema = operation.request_schema
    specs = contract.field_specs(schema)
    single = operation.name != "batch"
    parser = subparsers.add_parser(
        operation.name, help=operation.summary, parents=[common], allow_abbrev=False,
        aliases=ALIASES.get(operation.name, []),
        description=textwrap.fill(
            f"{operation.summary} (POST {operation.path}). {operation.description}",
            flags.HELP_WIDTH),
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.set_defaults(command="operation", operation=operation, specs=specs, output=None,
                        sheet_specs=None)
    flags.add_flags(parser, specs, contract.group_descriptions(schema))
    if operation.accepts_file:
        parser.add_argument(
            "--file", metavar="PATH", dest="upload",
            help="the population file (CSV, XLSX or Parquet), sent as the file part of a "
            "multipart/form-data request and read from disk as it is sent; describe it "
            "with --id-column (or --row-numbers), --amount-column and the other "
            "population.file flags"
            + ("" if operation.file_required else ", instead of a --population-size, "
               "ranges or items"),
        )
    if operation.file_form is not None:
        _add_test_sheet(parser, operation, specs)
    parser.add_argument("--body", metavar="FILE",
                        help="the request as a JSON object from FILE ('-' for standard "
                        "input); flags given set their fields on top of it")
    if single:
        columns = ", ".join(controls.column_specs(specs))
        parser.add_argument(
            "--controls", metavar="CSV",
            help=f"one row per control, sent as one batch (in chunks of "
            f"{api.MAX_BATCH_OPERATIONS:,}): a CSV file whose header names {controls.ID_COLUMN} "
            f"and any of {columns}. Numbers are plain decimals (0.05, not 5%% or 0,05); a "
            "blank cell leaves the field to the service's default; flags given apply to "
            "every row. Prints one row per control, its warnings numbered under the table."
            + (f" A {controls.FILE_COLUMN} column names each control's population file "
               "(relative to the controls file's folder); such a control is sent with its "
               "file, on its own." if operation.accepts_file else ""),
        )
    if operation.name == "selection":
        parser.add_argument(
            "--items-out", metavar="FILE",
            help="with --controls: write every selected item to FILE as one CSV of "
            f"{','.join(tables.ITEMS_COLUMNS)} (one row per item, each control's items in "
            "draw order, UTF-8 with a byte order mark, CRLF line ends). Without it the table "
            "lists each control's items under the rows. A control with a blank seed gets one "
            "generated by the service, different on every run: the command prints it on "
            "standard error with the warning to record it, and the rows show it.",
        )
    _output_options(parser, operation, single)


def _add_test_sheet(parser: argparse.ArgumentParser, operation: contract.Operation,
                    specs: list[flags.FieldSpec]) -> None:
    """The flag of the file form's upload and the flags of its request that the JSON form
    lacks: ``--file`` when the form reads a population file (``population.file``), else
    ``--test-sheet`` (a completed test sheet)."""
    form = operation.file_form
    if form is None:
        raise ValueError(f"{operation.name} has no file form")
    sheet_specs = contract.field_specs(form.request_schema)
    known = {spec.path for spec in specs}
    extra = [spec for spec in sheet_specs if spec.path not in known]
    reads_population = any(spec.path[:2] == flags.SHORT_PREFIX for spec in sheet_specs)
    title = "population file" if reads_population else "completed test sheet"
    group = parser.add_argument_group(
        title,
        textwrap.fill(f"{form.summary} (POST {form.path} as multipart/form-data). "
                      f"{form.description}", flags.HELP_WIDTH),
    )
    if reads_population:
        group.add_argument(
            "--file", metavar="PATH", dest="upload",
            help="the population file (CSV, XLSX or Parquet), sent as the file part of a "
            "multipart/form-data request and read from disk as it is sent; describe it with "
            "the population.file flags (--id-column, --amount-column, ...)",
        )
        flags.add_flags(parser, extra, contract.group_descriptions(form.request_schema))
    else:
        group.add_argument(
            "--test-sheet", metavar="PATH", dest="upload",
            help="the completed test sheet (XLSX), sent as the file part. With it, only "
            + ", ".join(spec.flag for spec in sheet_specs) + " apply; the sheet holds the "
            "selection and the results.",
        )
        flags.add_flags(group, extra)
    parser.set_defaults(sheet_specs=sheet_specs,
                        upload_flag="--file" if reads_population else "--test-sheet")


#: Commands that need no request schema: their parser is built without the operations.
SERVICE_COMMANDS = frozenset({"serve", "health", "ready"})


def build_parser(with_operations: bool = True) -> argparse.ArgumentParser:
    """The whole command line: one subcommand per operation, then serve, health, ready.

    ``with_operations=False`` leaves the operations out, for the commands that need none:
    reading the OpenAPI document and making a parser per operation is time that ``serve``
    and ``health`` (often a probe) are spared.
    """
    parser = argparse.ArgumentParser(
        prog=PROG, allow_abbrev=False, epilog=EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
        description=textwrap.fill(
            "Statistical sampling for tests of controls, from the attribute sampling "
            "service: size a sample, select its items, evaluate the deviations found.",
            flags.HELP_WIDTH),
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {api.VERSION}")
    subparsers = parser.add_subparsers(title="commands", metavar="COMMAND", required=True)
    common = _connection_options()
    for operation in _operations() if with_operations else ():
        _add_operation(subparsers, operation, common)

    serve = subparsers.add_parser(
        "serve", help="run the service here under gunicorn", allow_abbrev=False,
        description="Run the service under gunicorn with service.web.gunicorn_config, as the "
        "container does. The flags set HOST, PORT and WEB_CONCURRENCY, which that "
        "configuration reads; the other variables it reads (GUNICORN_*, SAMPLING_*) pass "
        "through from the environment. The exit status is gunicorn's.",
    )
    serve.set_defaults(command="serve")
    serve.add_argument("--host", help="address to listen on (default: $HOST, else 127.0.0.1)")
    serve.add_argument("--port", type=_port, help="port (default: $PORT, else 8000)")
    serve.add_argument("--workers", type=_port, metavar="N",
                       help="worker processes (default: $WEB_CONCURRENCY, else one per core, "
                       "at most 8)")
    for name, what in (("health", "liveness and version"), ("ready", "readiness")):
        sub = subparsers.add_parser(name, help=f"ask a running service its {what}",
                                    parents=[common], allow_abbrev=False, epilog=EPILOG,
                                    formatter_class=argparse.RawDescriptionHelpFormatter)
        sub.set_defaults(command=name, output=None)
        sub.add_argument("--json", dest="output", action="store_const", const="json",
                         help="print the JSON answer")
    return parser


# --------------------------------------------------------------------------- running


def _client(args: argparse.Namespace, sends_files: bool = False) -> SamplingClient:
    timeout: float | tuple[float, float] = args.timeout or DEFAULT_SECONDS
    if args.timeout is None and sends_files:
        timeout = (DEFAULT_SECONDS, FILE_READ_SECONDS)
    try:
        return SamplingClient(args.url, api_key=args.api_key, timeout=timeout,
                              retries=args.retries)
    except ValueError as problem:
        raise UsageProblem(str(problem)) from None


def _write(text: str) -> None:
    """Write the text as UTF-8 bytes, exactly (no newline translation)."""
    sys.stdout.buffer.write(text.encode("utf-8"))
    sys.stdout.flush()


def _read_body(path: str | None) -> dict[str, Any]:
    if path is None:
        return {}
    try:
        text = sys.stdin.read() if path == "-" else Path(path).read_text(encoding="utf-8-sig")
    except OSError as exc:
        raise UsageProblem(f"--body {path}: {exc.strerror}") from None
    except UnicodeDecodeError as exc:
        raise UsageProblem(f"--body {path}: not UTF-8 text (byte {exc.start})") from None
    try:
        body = flags.strict_json(text)
    except flags.ValueProblem as problem:
        raise UsageProblem(f"--body {path}: {problem}") from None
    if not isinstance(body, dict):
        raise UsageProblem(f"--body {path}: must hold a JSON object")
    return body


def _body(args: argparse.Namespace) -> dict[str, Any]:
    specs = _request_specs(args)
    try:
        return flags.build_body(args, specs, _read_body(args.body))
    except flags.ValueProblem as problem:
        raise UsageProblem(str(problem)) from None


def _request_specs(args: argparse.Namespace) -> list[flags.FieldSpec]:
    """The fields of the request sent: the test sheet's with --test-sheet, else the
    operation's; a flag of the other form given is a usage error."""
    sheet_specs = args.sheet_specs
    if sheet_specs is None:
        return list(args.specs)
    with_sheet = args.upload is not None
    used = sheet_specs if with_sheet else args.specs
    other = args.specs if with_sheet else sheet_specs
    paths = {spec.path for spec in used}
    given = [spec.flag for spec, _ in flags.iter_values(args, other) if spec.path not in paths]
    upload_flag = _upload_flag(args)
    if given and with_sheet and upload_flag == "--test-sheet":
        raise UsageProblem(f"{', '.join(given)} cannot be given with --test-sheet: the sheet "
                           "holds the sample and its results")
    if given and with_sheet:
        raise UsageProblem(f"{', '.join(given)} cannot be given with {upload_flag}: the file "
                           "holds the population")
    if given:
        raise UsageProblem(f"{', '.join(given)} needs {upload_flag}")
    return list(used)


def _merge(base: Mapping[str, Any], extra: Mapping[str, Any]) -> dict[str, Any]:
    merged = dict(base)
    for key, value in extra.items():
        if isinstance(value, Mapping) and isinstance(merged.get(key), Mapping):
            merged[key] = _merge(merged[key], value)
        else:
            merged[key] = value
    return merged


def _leaf_names(body: Mapping[str, Any], prefix: str = "") -> set[str]:
    names: set[str] = set()
    for key, value in body.items():
        name = f"{prefix}_{key}" if prefix else key
        names |= _leaf_names(value, name) if isinstance(value, Mapping) else {name}
    return names


def _run_operation(args: argparse.Namespace) -> int:
    operation = args.operation
    body = _body(args)
    upload = getattr(args, "upload", None)
    if args.output_file is not None:
        _check_writable("--output", args.output_file)
    if getattr(args, "controls", None):
        if upload is not None and operation.accepts_file:
            raise UsageProblem(f"--file cannot be given with --controls; give each control's "
                               f"file in the {controls.FILE_COLUMN} column")
        if upload is not None:
            raise UsageProblem(f"{_upload_flag(args)} cannot be given with --controls")
        return _run_controls(args, body)
    if args.output in _BINARY and args.output_file is None and sys.stdout.isatty():
        raise UsageProblem(f"--{args.output} writes a binary file: give --output FILE, or "
                           "redirect standard output to a file")
    if getattr(args, "items_out", None):
        raise UsageProblem("--items-out needs --controls; a single selection's items are "
                           "its --csv")
    if upload is not None or operation.file_required:
        return _run_upload(args, body)
    if "file" in (body.get("population") or {}):
        raise UsageProblem("the population.file flags describe a population file: send the "
                           "file with --file PATH")
    if args.output in _BINARY:
        raise UsageProblem(f"--{args.output} for {operation.name} needs "
                           f"{_upload_flag(args)}")
    if operation.name == "selection" and "seed" not in body and args.output in ("csv",
                                                                                "markdown"):
        _say(args, f"warning: no --seed given: the service generates one on every call, so "
             f"each run selects other items; record the seed written in the "
             f"{args.output.upper()} answer, or give --seed.")
    if args.output == "csv" and "text/csv" not in operation.media_types:
        raise UsageProblem(f"--csv for {operation.name} needs --controls")
    with _client(args) as client:
        if args.output is None:
            document = client.call(operation.name, body, request_id=args.request_id)
            if operation.name == "batch":
                _emit(args, tables.batch_text(body.get("operations") or [],
                                              document["results"]))
                return _batch_status(document["results"])
            _emit(args, tables.document_text(operation.summary, document))
            return EXIT_OK
        media_type = {"json": JSON, "markdown": MARKDOWN}.get(args.output) or next(
            t for t, name in _FORMAT_FLAGS.items() if name == args.output)
        text = client.call_text(operation.name, body, media_type, request_id=args.request_id)
        _emit(args, text if text.endswith("\n") or media_type != JSON else text + "\n")
        if operation.name == "batch" and media_type == JSON:
            return _batch_status(json.loads(text)["results"])
        return EXIT_OK


def _upload_flag(args: argparse.Namespace) -> str:
    return str(getattr(args, "upload_flag", None) or "--file")


def _run_upload(args: argparse.Namespace, body: dict[str, Any]) -> int:
    """Send the file of --file or --test-sheet with the request, streamed from disk."""
    operation = args.operation
    path = args.upload
    if path is None:
        raise UsageProblem(f"{operation.name} reads a population file: give it with "
                           "--file PATH")
    form = operation.file_form or operation
    if args.output == "csv" and "text/csv" not in form.media_types:
        raise UsageProblem(f"--csv is not offered for {operation.name} with a file")
    if operation.name in ("selection", "monetary-selection") and "seed" not in body \
            and args.output not in (None, "json"):
        _say(args, "warning: no --seed given: the service generates one on every call, so "
             "each run selects other items; record the seed written in the answer, or give "
             "--seed.")
    try:
        with _client(args, sends_files=True) as client:
            if args.output is None:
                document = client.call_file(operation.name, path, body,
                                            request_id=args.request_id)
                _emit(args, tables.document_text(form.summary, document))
                return EXIT_OK
            media_type = {"json": JSON, "markdown": MARKDOWN}.get(args.output) or next(
                t for t, name in _FORMAT_FLAGS.items() if name == args.output)
            data = client.call_file_bytes(operation.name, path, body, media_type,
                                          request_id=args.request_id)
    except requests.RequestException:
        raise  # an OSError too, but the transport's, not the file's
    except OSError as exc:
        raise UsageProblem(f"{_upload_flag(args)} {path}: {exc.strerror or exc}") from None
    if media_type == JSON and not data.endswith(b"\n"):
        data += b"\n"
    _emit(args, data)
    return EXIT_OK


def _emit(args: argparse.Namespace, data: str | bytes) -> None:
    """The answer, to --output FILE when given, else to standard output, exactly."""
    raw = data.encode("utf-8") if isinstance(data, str) else data
    if args.output_file is None:
        sys.stdout.buffer.write(raw)
        sys.stdout.flush()
    else:
        _write_file("--output", args.output_file, raw)


def _send_controls(args: argparse.Namespace, client: SamplingClient,
                   rows: Sequence[controls.Control],
                   items: list[dict[str, Any]]) -> dict[str, Any]:
    """The answers of every control, in the file's order, as a batch answers them: the
    controls with a population file each sent with it, the others as one batch."""
    operation = args.operation.name
    answers = iter(client.batch(items, chunk_size=api.MAX_BATCH_OPERATIONS,
                                request_id=args.request_id)["results"] if items else [])
    results: list[dict[str, Any]] = []
    for row in rows:
        if row.file is None:
            results.append(next(answers))
            continue
        try:
            result = client.call_file(operation, row.file, row.request,
                                      request_id=args.request_id)
        except AuthenticationFailed:
            raise
        except RequestRejected as refused:
            results.append({"id": row.control_id, "status": refused.status,
                            "problem": refused.problem})
            continue
        except requests.RequestException:
            raise
        except OSError as exc:
            raise UsageProblem(f"{args.controls}, line {row.line}, column "
                               f"{controls.FILE_COLUMN}: {row.file}: "
                               f"{exc.strerror or exc}") from None
        results.append({"id": row.control_id, "status": 200, "result": result})
    return {"results": results}


def _batch_status(results: Sequence[Mapping[str, Any]]) -> int:
    return EXIT_OK if all(r.get("status") == 200 for r in results) else EXIT_REFUSED


def _run_controls(args: argparse.Namespace, shared: dict[str, Any]) -> int:
    operation = args.operation
    if args.output in _BINARY:
        raise UsageProblem(f"--{args.output} is not offered with --controls; use the table, "
                           "--csv or --json")
    if args.output == "markdown":
        raise UsageProblem("--markdown is not offered with --controls; use the table, --csv or "
                           "--json, or send the controls to /v1/batch with Accept: "
                           "text/markdown for one workpaper block per control")
    given = _leaf_names(shared)
    try:
        rows = controls.read_controls(args.controls, args.specs, files=operation.accepts_file,
                                      file_required=operation.file_required)
    except controls.ControlsFileError as problem:
        raise UsageProblem(str(problem)) from None
    twice = sorted(given & {name for row in rows for name in _leaf_names(row.request)})
    if twice:
        raise UsageProblem(f"{args.controls}: {', '.join(twice)} is given both on the command "
                           "line and in the file; give each field in one place")
    merged = [controls.Control(r.control_id, r.line, _merge(shared, r.request), r.file)
              for r in rows]
    batched = [row for row in merged if row.file is None]
    items = controls.batch_operations(batched, operation.name)
    ids = [r.control_id for r in rows]
    items_out = getattr(args, "items_out", None)
    if items_out is not None:
        _check_writable("--items-out", items_out)
    args.control_rows = batched  # so that a refusal of the whole batch can name the rows
    text = None
    with _client(args, sends_files=len(batched) < len(merged)) as client:
        if len(batched) < len(merged):
            document = _send_controls(args, client, merged, items)
            results = document["results"]
        elif args.output == "json" and len(items) <= api.MAX_BATCH_OPERATIONS:
            text = client.call_text("batch", {"operations": items}, JSON,
                                    request_id=args.request_id)
            results = json.loads(text)["results"]
        else:
            document = client.batch(items, chunk_size=api.MAX_BATCH_OPERATIONS,
                                    request_id=args.request_id)
            results = document["results"]
    if items_out is not None:
        _write_file("--items-out", items_out, tables.selected_items_csv(ids, results))
    _report_generated_seeds(args, ids, results)
    if text is not None:
        _emit(args, text if text.endswith("\n") else text + "\n")
    elif args.output == "json":
        _emit(args, json.dumps(document, ensure_ascii=False) + "\n")
    elif args.output == "csv":
        _emit(args, tables.controls_csv(ids, operation.name, results))
    else:
        _emit(args, tables.controls_text(ids, operation.name, results, items_out))
    if operation.name == "selection" and items_out is None and args.output == "csv":
        _say(args, "note: the selected items are not in these rows; --items-out FILE "
             "writes them as CSV")
    return _batch_status(results)


def _say(args: argparse.Namespace, text: str) -> None:
    """A line for the person at the terminal, on standard error."""
    print(f"{PROG} {args.operation.name}: {text}", file=sys.stderr)


def _report_generated_seeds(args: argparse.Namespace, ids: Sequence[str],
                            results: Sequence[Mapping[str, Any]]) -> None:
    """Say, on standard error, each seed the service generated, and that it must be kept."""
    for control, answer in zip(ids, results, strict=True):
        result = answer.get("result")
        if isinstance(result, Mapping) and result.get("seed_generated") is True:
            _say(args, f"warning: control {control}: no seed was given, so the service "
                 f"generated {json.dumps(result.get('seed'), ensure_ascii=False)}; record it "
                 "with the selection (a run without a seed selects other items), or put it in "
                 "the file's seed column.")


def _check_writable(flag: str, path: str) -> None:
    """Refuse, before anything is sent, a file that could not be written."""
    target = Path(path)
    if target.is_dir():
        raise UsageProblem(f"{flag} {path}: is a folder; name a file")
    if not target.resolve().parent.is_dir():
        raise UsageProblem(f"{flag} {path}: no such folder {str(target.parent)!r}")


def _write_file(flag: str, path: str, data: str | bytes) -> None:
    """Write ``data`` to ``path`` (text as UTF-8), whole or not at all."""
    target = Path(path)
    partial = target.with_name(f".{target.name}.partial")
    try:
        partial.write_bytes(data.encode("utf-8") if isinstance(data, str) else data)
        partial.replace(target)
    except OSError as exc:
        with contextlib.suppress(OSError):
            partial.unlink(missing_ok=True)
        raise UsageProblem(f"{flag} {path}: {exc.strerror}") from None


def _run_meta(args: argparse.Namespace) -> int:
    with _client(args) as client:
        document = client.health() if args.command == "health" else client.ready()
    if args.output == "json":
        _write(json.dumps(document, ensure_ascii=False) + "\n")
    else:
        rows = [[tables.label(k), tables.value_text(k, v)] for k, v in document.items()]
        _write("\n".join([*tables.aligned([["Service", client.base_url], *rows])]) + "\n")
    return EXIT_OK


def _serve(args: argparse.Namespace) -> NoReturn:
    for variable, value in (("HOST", args.host), ("PORT", args.port),
                            ("WEB_CONCURRENCY", args.workers)):
        if value is not None:
            os.environ[variable] = str(value)
    gunicorn = Path(sys.executable).parent / "gunicorn"
    argv = [str(gunicorn), "--config", "python:service.web.gunicorn_config", "service.wsgi:app"]
    try:
        # A fixed program beside this Python, its arguments fixed too, and no shell.
        os.execv(gunicorn, argv)  # noqa: S606  # nosec B606
    except OSError as exc:
        print(f"{PROG} serve: cannot start {gunicorn}: {exc.strerror}", file=sys.stderr)
        raise SystemExit(1) from None


# --------------------------------------------------------------------------- errors


_ITEM_FIELD = re.compile(r"operations\[([0-9]+)\](?:\.request)?\.?(.*)")
_ENTRY_FIELD = re.compile(r"(.*)\[([0-9]+)\](.*)")


@dataclass(frozen=True)
class Sources:
    """The files a request was read from, so that a refusal names their own lines.

    ``lists`` maps a list field (``population.items``) to the ``-file`` it was read from;
    ``controls_file`` is the controls file and ``rows`` its controls, in batch order.
    """

    lists: Mapping[str, str] = field(default_factory=dict)
    controls_file: str | None = None
    rows: Sequence[controls.Control] = ()
    #: The flag and path of the file sent with the request (--file, --test-sheet).
    upload: tuple[str, str] | None = None


def sources(args: argparse.Namespace) -> Sources:
    """Where the request of ``args`` came from (see :class:`Sources`)."""
    lists = {spec.dotted: path for spec in getattr(args, "specs", ())
             if (path := getattr(args, flags.file_dest(spec), None)) is not None}
    upload = getattr(args, "upload", None)
    return Sources(lists, getattr(args, "controls", None), getattr(args, "control_rows", ()),
                   None if upload is None else (_upload_flag(args), upload))


def _field_flag(name: str, specs: Sequence[flags.FieldSpec], where: Sources = Sources()) -> str:
    """``tolerable_rate`` → ``--tolerable-rate (tolerable_rate)``, when a flag sets it;
    ``population.items[4]`` → ``line 5 of items.txt (population.items[4])`` when the list
    was read from that file; ``operations[3].id`` → ``line 5 of controls.csv (control
    'NT-P2P-04'), id`` in a controls batch."""
    item = _ITEM_FIELD.fullmatch(name) if where.rows else None
    if item is not None and int(item.group(1)) < len(where.rows):
        row = where.rows[int(item.group(1))]
        return (f"line {row.line} of {where.controls_file} (control {row.control_id!r}), "
                f"{item.group(2) or 'request'}")
    if name in where.lists:
        return f"{where.lists[name]} ({name})"
    if name == "file" and where.upload is not None:
        return f"{where.upload[0]} {where.upload[1]} (file)"
    entry = _ENTRY_FIELD.fullmatch(name)
    if entry is not None and entry.group(1) in where.lists:
        # file_lines keeps every line up to the last entry, so entry k is on line k + 1.
        return f"line {int(entry.group(2)) + 1} of {where.lists[entry.group(1)]} ({name})"
    for spec in specs:
        if name == spec.dotted or name.startswith((spec.dotted + "[", spec.dotted + ".")):
            return f"{spec.flag} ({name})"
    return name


#: At most this many repeated entries of a list file are named, with their lines.
SHOWN_REPEATS = 5


def repeated_lines(path: str) -> list[str]:
    """Each entry that a list file holds more than once, with the file's lines it is on."""
    try:
        entries = flags.file_lines(path)
    except flags.ValueProblem:
        return []  # read once already; a file changed since is not worth a second error
    where: dict[str, list[int]] = {}
    for number, entry in enumerate(entries, 1):
        where.setdefault(entry, []).append(number)
    repeated = [(entry, lines) for entry, lines in where.items() if len(lines) > 1]
    texts = []
    for entry, lines in repeated[:SHOWN_REPEATS]:
        numbers = ", ".join(map(str, lines[:-1])) + f" and {lines[-1]}"
        texts.append(f"{entry!r} is on lines {numbers}")
    if len(repeated) > SHOWN_REPEATS:
        texts.append(f"and {len(repeated) - SHOWN_REPEATS:,} more entries are repeated")
    return texts


def explain(error: ServiceError, specs: Sequence[flags.FieldSpec] = (),
            where: Sources = Sources()) -> list[str]:
    """The lines printed for ``error``: what happened, each field, and what to do."""
    if isinstance(error, AuthenticationFailed):
        lines = [str(error)]
        if not error.key_sent:
            lines.append(f"Give the key in {KEY_VARIABLE} (or --api-key).")
        return lines
    if isinstance(error, RequestRejected):
        head = f"the service refused the request (HTTP {error.status} {error.title})"
        if not error.errors:
            return [f"{head}: {error.detail}"]
        lines = [f"{head}:"]
        for name, messages in error.errors.items():
            lines.append(f"  {_field_flag(name, specs, where)}: {' '.join(messages)}")
            if name in where.lists:
                lines += [f"    {text}" for text in repeated_lines(where.lists[name])]
        if error.request_id:
            lines.append(f"  (request id {error.request_id})")
        return lines
    lines = [str(error)]
    if isinstance(error, ServiceUnavailable) and error.status is None:
        lines.append(f"Is the service running there? '{PROG} serve' starts one; --url or "
                     f"{URL_VARIABLE} points elsewhere.")
    return lines


def exit_status(error: ServiceError) -> int:
    """The exit status for an error of the client (see the epilog)."""
    if isinstance(error, AuthenticationFailed):
        return EXIT_AUTHENTICATION
    if isinstance(error, RequestRejected):
        return EXIT_REFUSED
    return EXIT_UNAVAILABLE


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status."""
    arguments = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(with_operations=not arguments or arguments[0] not in SERVICE_COMMANDS)
    args = parser.parse_args(arguments)
    try:
        if args.command == "serve":
            _serve(args)
        if args.command in ("health", "ready"):
            return _run_meta(args)
        return _run_operation(args)
    except UsageProblem as problem:
        name = getattr(args, "operation", None)
        print(f"{PROG} {name.name if name else args.command}: error: {problem}",
              file=sys.stderr)
        return EXIT_USAGE
    except ServiceError as error:
        first, *rest = explain(error, getattr(args, "specs", ()), sources(args))
        print("\n".join([f"{PROG}: {first}", *rest]), file=sys.stderr)
        return exit_status(error)
    except BrokenPipeError:
        # The reader (head, less) went away: send what Python still flushes at exit
        # nowhere, instead of a second error.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return EXIT_OK


if __name__ == "__main__":
    raise SystemExit(main())
