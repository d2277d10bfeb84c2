"""The operations and request fields the command reads from the service's OpenAPI document."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from marshmallow import Schema, fields

from sampling_client import contract, flags, tables
from service.http import all_operations
from service.render.cells import csv_cell
from service.sampling.wording import CAUTION

ROOT = Path(__file__).resolve().parents[3]


def loaded_fields(schema: Schema, prefix: str = "") -> dict[str, Any]:
    """Every leaf field a request loads, by its dotted path (nested objects flattened)."""
    found: dict[str, Any] = {}
    for name, field in schema.fields.items():
        if field.dump_only:
            continue
        path = prefix + (field.data_key or name)
        if isinstance(field, fields.Nested) and not field.many:
            found.update(loaded_fields(field.schema, path + "."))
        else:
            found[path] = field
    return found


@pytest.mark.parametrize("operation", all_operations(), ids=lambda op: op.name)
def test_each_operation_is_read_as_the_service_declares_it(operation: Any) -> None:
    read = {op.name: op for op in contract.operations()}[operation.name]
    assert (read.path, read.summary, read.description) == (
        operation.path, operation.summary, operation.description)
    assert read.media_types == tuple(operation.media_types)
    assert (read.accepts_file, read.file_required) == (
        operation.accepts_file, operation.file_required)
    forms = [(operation, read)]
    if operation.file_form is None:
        assert read.file_form is None
    else:
        form = operation.file_form
        assert read.file_form is not None
        assert (read.file_form.name, read.file_form.summary, read.file_form.description,
                read.file_form.media_types) == (
            form.name, form.summary, form.description, tuple(form.media_types))
        forms.append((form, read.file_form))
    for declared, found in forms:
        specs = {spec.dotted: spec for spec in contract.field_specs(found.request_schema)}
        loaded = loaded_fields(declared.request_schema)
        assert list(specs) == list(loaded)
        for path, field in loaded.items():
            spec = specs[path]
            assert spec.required == field.required, path
            assert spec.amount == bool(getattr(field, "accepts_text", False)), path
            unless = field.metadata.get("required_unless") or ()
            assert spec.required_unless == ((unless,) if isinstance(unless, str)
                                            else tuple(unless)), path
            assert spec.description == field.metadata.get("description", ""), path


def test_a_document_with_only_the_standard_keywords_reads_its_fields() -> None:
    # A request written by hand in JSON Schema 2020-12, as OpenAPI 3.1 carries it.
    spec = {"components": {"schemas": {
        "Span": {"type": "object", "properties": {"from": {"type": "integer"},
                                                  "to": {"type": "integer"}}},
        "Line": {"type": "object", "properties": {
            "ref": {"type": "string"},
            "value": {"type": ["number", "string"], "x-accepts-text": True},
            "checked": {"type": "boolean"}}},
        "Owner": {"type": "object", "description": "Who answers for it.",
                  "properties": {"name": {"type": "string"}}, "required": ["name"]},
        "Request": {"type": "object", "required": ["rate"], "properties": {
            "rate": {"type": "number", "default": 0.95, "description": "A rate."},
            "kind": {"type": ["string", "null"], "enum": ["a", "b", None]},
            "owner": {"$ref": "#/components/schemas/Owner", "description": "The owner."},
            "deputy": {"anyOf": [{"$ref": "#/components/schemas/Owner"}, {"type": "null"}]},
            "spans": {"type": "array", "items": {"$ref": "#/components/schemas/Span"}},
            "lines": {"type": "array", "items": {"$ref": "#/components/schemas/Line"}},
            "tags": {"type": "array", "items": {"type": "string"}},
            "modes": {"type": "array", "items": {"type": "string", "enum": ["x", "y"]}},
            "flags": {"type": "array", "items": {"type": "boolean"}},
            "extra": {"type": "object", "additionalProperties": True},
            "id": {"type": "string", "readOnly": True},
        }},
    }}}
    schema = contract.component("Request", spec)
    specs = {s.name: s for s in contract.field_specs(schema)}
    assert [(name, s.kind) for name, s in specs.items()] == [
        ("rate", flags.NUMBER), ("kind", flags.STRING), ("owner_name", flags.STRING),
        ("deputy_name", flags.STRING), ("spans", flags.PAIRS), ("lines", flags.RECORDS),
        ("tags", flags.STRINGS), ("modes", flags.CHOICES), ("flags", flags.RAW_JSON),
        ("extra", flags.RAW_JSON)]
    assert (specs["rate"].required, specs["rate"].default) == (True, 0.95)
    assert specs["kind"].choices == ("a", "b")
    assert specs["owner_name"].required  # when owner is given
    assert specs["spans"].pair == ("from", "to")
    assert specs["lines"].columns == (("ref", flags.STRING), ("value", flags.STRING),
                                      ("checked", flags.BOOLEAN))
    assert specs["modes"].choices == ("x", "y")
    assert contract.group_descriptions(schema) == {("owner",): "The owner.", ("deputy",): ""}


def test_a_ref_that_points_nowhere_or_in_a_circle_is_named() -> None:
    spec = {"components": {"schemas": {
        "A": {"$ref": "#/components/schemas/B"}, "B": {"$ref": "#/components/schemas/A"},
        "C": {"type": "object", "properties": {"x": {"$ref": "#/components/schemas/None"}}},
    }}}
    with pytest.raises(contract.ContractError, match="cannot follow"):
        contract.field_specs(contract.component("A", spec))
    with pytest.raises(contract.ContractError, match="points nowhere"):
        contract.field_specs(contract.component("C", spec))


def test_an_operation_without_a_json_request_is_named() -> None:
    spec = {"paths": {"/v1/x": {"post": {"operationId": "x", "responses": {}}}}}
    with pytest.raises(contract.ContractError, match=r"POST /v1/x \(x\)"):
        contract.operations(spec)


def test_the_caution_is_the_services() -> None:
    assert contract.caution() == CAUTION
    assert tables.caution() == CAUTION


@pytest.mark.parametrize("cell", ["=SUM(A1:A9)", "+1", "-7", "@x", "\tA", "\rA", "'a", "A=1",
                                  "", "NT-P2P-01", 42, -3])
def test_the_csv_formula_guard_is_the_services(cell: int | str) -> None:
    assert tables.csv_cell(cell) == csv_cell(cell)


def test_the_command_runs_without_the_service_installed(tmp_path: Path) -> None:
    # The server's packages (and the computation libraries they load) made unimportable:
    # every subcommand's parser is still built, and a controls table still ends with the
    # caution, from the shipped document alone.
    script = (
        "import sys, importlib.abc\n"
        "class Refuse(importlib.abc.MetaPathFinder):\n"
        "    def find_spec(self, name, path=None, target=None):\n"
        "        if name.split('.')[0] in {'service', 'schemas', 'marshmallow', 'apispec',\n"
        "                                  'flask', 'numpy', 'scipy'}:\n"
        "            raise ImportError('refused: ' + name)\n"
        "sys.meta_path.insert(0, Refuse())\n"
        "from sampling_client import cli, tables\n"
        "parser = cli.build_parser()\n"
        "print(len(cli._operations()))\n"
        "print(tables.controls_text(['NT-1'], 'sample-size',\n"
        "      [{'status': 200, 'result': {'sample_size': 93, 'allowed_deviations': 1}}]))\n"
    )
    done = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True,
                          text=True, timeout=60, check=False)
    assert done.returncode == 0, done.stderr
    count, table = done.stdout.split("\n", 1)
    assert int(count) == len(all_operations())
    assert " ".join(table.split()).endswith(CAUTION)
