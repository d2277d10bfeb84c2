"""Flags derived from the request schemas, and the JSON bodies built from them.

The command reads the request schemas from the OpenAPI document the service generates
from them (and the client ships), so each schema here goes through that document.
"""

from __future__ import annotations

import argparse
import csv
from pathlib import Path
from typing import Any

import pytest
from marshmallow import Schema, fields

from sampling_client import contract, flags
from sampling_client.cli import build_parser
from schemas.attributes import EvaluationRequest, SampleSizeRequest
from schemas.batch import BatchRequest
from schemas.estimation import EstimationRequest
from schemas.fields import Rate, StrictString
from schemas.monetary import MonetaryEvaluationRequest, MonetarySelectionRequest
from schemas.selection import SelectionRequest
from service.http import all_operations
from service.web.openapi import build_spec


def contract_schema(schema: Schema) -> contract.Schema:
    """``schema`` as the command reads it: its component of the shipped OpenAPI document,
    or, for a schema the service does not have, of a document generated with it."""
    name = type(schema).__name__
    if name in contract.document()["components"]["schemas"]:
        return contract.component(name)
    spec = build_spec()
    spec.components.schema(name, schema=schema)
    return contract.component(name, spec.to_dict())


def field_specs(schema: Schema) -> list[flags.FieldSpec]:
    return contract.field_specs(contract_schema(schema))


def by_name(schema: Schema) -> dict[str, flags.FieldSpec]:
    return {spec.name: spec for spec in field_specs(schema)}


def parse(operation: str, *argv: str) -> argparse.Namespace:
    return build_parser().parse_args([operation, *argv])


def body(operation: str, *argv: str) -> dict[str, Any]:
    args = parse(operation, *argv)
    return flags.build_body(args, args.specs)


def test_sample_size_fields_become_flags_with_their_descriptions() -> None:
    specs = by_name(SampleSizeRequest())
    assert list(specs) == ["population_size", "population_label", "tolerable_rate",
                           "expected_rate", "confidence", "method", "attributes",
                           "underreliance_risk", "prior_type", "prior_expected_rate",
                           "prior_strength", "prior_sample_size", "prior_deviations",
                           "prior_weight"]
    assert specs["population_size"].flag == "--population-size"
    assert specs["population_size"].dotted == "population.size"
    assert specs["tolerable_rate"].kind == flags.NUMBER
    # Required unless attributes is given (always, in a controls file).
    assert not specs["tolerable_rate"].required
    assert specs["tolerable_rate"].required_unless == ("attributes",)
    assert specs["tolerable_rate"].description.startswith(
        "Tolerable deviation rate, as a fraction.")
    assert specs["attributes"].kind == flags.RECORDS  # JSON text, or a CSV file of them
    assert specs["underreliance_risk"].kind == flags.NUMBER
    assert specs["confidence"].default == 0.95
    assert specs["method"].choices == ("binomial", "hypergeometric", "poisson")


def test_each_kind_of_list_in_the_schemas_is_recognised() -> None:
    selection = by_name(SelectionRequest())
    assert selection["population_ranges"].kind == flags.PAIRS
    assert selection["population_ranges"].pair == ("first", "last")
    assert selection["population_exclude"].kind == flags.NUMBERS  # data_key, not the attribute
    assert selection["population_items"].kind == flags.STRINGS
    assert by_name(EstimationRequest())["methods"].kind == flags.CHOICES
    assert by_name(BatchRequest())["operations"].kind == flags.RAW_JSON
    monetary = by_name(MonetarySelectionRequest())["population"]
    assert monetary.kind == flags.RECORDS
    assert monetary.columns == (("id", flags.STRING), ("amount", flags.STRING))
    found = by_name(MonetaryEvaluationRequest())["misstatements"]
    assert found.kind == flags.RECORDS
    assert dict(found.columns)["hits"] == flags.NUMBER
    assert dict(found.columns)["individually_significant"] == flags.BOOLEAN


def test_a_field_added_to_a_schema_is_a_flag_without_new_code() -> None:
    class Future(Schema):
        risk_weight = Rate(metadata={"description": "A new rate."})
        region = StrictString()
        flagged = fields.Boolean()
        tags = fields.List(fields.Dict())

    specs = by_name(Future())
    assert [(s.name, s.kind) for s in specs.values()] == [
        ("risk_weight", flags.NUMBER), ("region", flags.STRING), ("flagged", flags.BOOLEAN),
        ("tags", flags.RAW_JSON)]
    parser = argparse.ArgumentParser()
    flags.add_flags(parser, list(specs.values()))
    args = parser.parse_args(["--risk-weight", "0.2", "--no-flagged", "--tags", '[{"a": 1}]'])
    assert flags.build_body(args, list(specs.values())) == {
        "risk_weight": 0.2, "flagged": False, "tags": [{"a": 1}]}


def test_the_issue_example_builds_typed_json() -> None:
    assert body("sample-size", "--tolerable-rate", "0.05", "--expected-rate", "0.01",
                "--confidence", "0.95", "--population-size", "4200") == {
        "population": {"size": 4200}, "tolerable_rate": 0.05, "expected_rate": 0.01,
        "confidence": 0.95}


def test_numbers_are_not_coerced_so_the_service_can_judge_them() -> None:
    sent = body("sample-size", "--tolerable-rate", "5", "--population-size", "60.5")
    assert sent == {"population": {"size": 60.5}, "tolerable_rate": 5}
    assert isinstance(sent["tolerable_rate"], int)
    assert body("evaluation", "--sample-size", "1e2") == {"sample_size": 100.0}


@pytest.mark.parametrize(("text", "words"), [
    ("5%", "rates are fractions: 5% is 0.05"),
    ("0,05", "use a point, not a comma"),
    ("five", "is not a number"),
    ("", "is blank"),
    ("0x10", "is not a number"),
    ("nan", "is not a number"),
])
def test_a_value_that_is_not_a_number_is_a_usage_error(
    text: str, words: str, capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.raises(SystemExit) as caught:
        parse("sample-size", "--tolerable-rate", text)
    assert caught.value.code == 2
    error = capsys.readouterr().err
    assert "argument --tolerable-rate:" in error
    assert words in error


def test_text_and_choices_are_passed_as_given() -> None:
    # The service, not the command line, says that a method is unknown.
    assert body("sample-size", "--method", "Binomial ", "--population-label", " Q3 ") == {
        "population": {"label": " Q3 "}, "method": "Binomial "}


def test_choice_lists_take_commas_and_repeats() -> None:
    assert body("estimation-sample-size", "--methods", "exact,wilson", "--methods",
                "hoeffding") == {"methods": ["exact", "wilson", "hoeffding"]}


def test_ranges_and_excluded_numbers() -> None:
    assert body("selection", "--population-ranges", "10001-14200,20001-20010",
                "--population-exclude", "10007,10233", "--population-exclude", "20005") == {
        "population": {"ranges": [{"first": 10001, "last": 14200},
                                  {"first": 20001, "last": 20010}],
                       "exclude": [10007, 10233, 20005]}}


@pytest.mark.parametrize("text", ["10001", "10001-", "a-b", "10001-14200,"])
def test_a_range_that_is_not_first_last_is_a_usage_error(text: str) -> None:
    with pytest.raises(SystemExit) as caught:
        parse("selection", "--population-ranges", text)
    assert caught.value.code == 2


def test_identifiers_are_one_per_flag_commas_kept() -> None:
    assert body("selection", "--population-items", "PO-1,a", "--population-items", "PO-2") == {
        "population": {"items": ["PO-1,a", "PO-2"]}}


def test_identifiers_from_a_file_exactly_as_written(tmp_path: Path) -> None:
    path = tmp_path / "items.txt"
    path.write_bytes("\ufeffPO-1\r\n PO-2 \nPO,3\n".encode())
    assert body("selection", "--items-file", str(path)) == {
        "population": {"items": ["PO-1", " PO-2 ", "PO,3"]}}
    assert body("selection", "--population-items-file", str(path))["population"]["items"][0] == (
        "PO-1")


def test_blank_lines_at_the_end_of_a_file_are_not_entries(tmp_path: Path) -> None:
    # Harbour Lane Provisions Ltd (fictional) delivery notes, saved with blank lines after
    # the last one; a blank line in the middle stays an entry for the service to judge.
    path = tmp_path / "delivery-notes.txt"
    path.write_bytes(b"HLP-DN-0101\r\nHLP-DN-0102\r\n\r\nHLP-DN-0104\r\n\r\n \r\n\r\n")
    assert body("selection", "--items-file", str(path)) == {
        "population": {"items": ["HLP-DN-0101", "HLP-DN-0102", "", "HLP-DN-0104"]}}
    path.write_bytes(b"\n\n")
    assert flags.file_lines(str(path)) == []


def test_a_bad_line_of_a_number_file_names_the_line(tmp_path: Path) -> None:
    path = tmp_path / "voided.txt"
    path.write_text("10007\n10,233\n")
    args = parse("selection", "--exclude-file", str(path))
    with pytest.raises(flags.ValueProblem, match=r"voided.txt, line 2: '10,233' is not a number"):
        flags.build_body(args, args.specs)


def test_a_missing_file_is_named(tmp_path: Path) -> None:
    args = parse("selection", "--items-file", str(tmp_path / "none.txt"))
    with pytest.raises(flags.ValueProblem, match=r"none\.txt: no such file"):
        flags.build_body(args, args.specs)


def test_a_list_and_its_file_cannot_both_be_given(tmp_path: Path) -> None:
    with pytest.raises(SystemExit):
        parse("selection", "--population-items", "a", "--items-file", str(tmp_path / "x"))


def test_free_shaped_json_from_a_flag_or_a_file(tmp_path: Path) -> None:
    items = '[{"id": "a", "operation": "sample-size", "request": {"tolerable_rate": 0.05}}]'
    path = tmp_path / "operations.json"
    path.write_text(items)
    expected = {"operations": [{"id": "a", "operation": "sample-size",
                                "request": {"tolerable_rate": 0.05}}]}
    assert body("batch", "--operations", items) == expected
    assert body("batch", "--operations-file", str(path)) == expected
    with pytest.raises(SystemExit):
        parse("batch", "--operations", "[NaN]")


def test_flags_are_set_on_top_of_a_base_body() -> None:
    args = parse("evaluation", "--deviations", "1", "--population-label", "POs")
    base = {"sample_size": 60, "deviations": 3, "population": {"size": 4200}}
    assert flags.build_body(args, args.specs, base) == {
        "sample_size": 60, "deviations": 1, "population": {"size": 4200, "label": "POs"}}
    assert base["deviations"] == 3  # the base itself is left alone


def test_the_help_shows_description_default_and_requirement(
    capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.raises(SystemExit):
        parse("evaluation", "--help")
    text = " ".join(capsys.readouterr().out.split())
    assert ("--sample-size SAMPLE_SIZE Items tested. Required unless strata is given. "
            "Required unless --strata is given.") in text
    assert "Required unless --attributes or --strata is given." in text
    assert "Service default: 0.95." in text
    assert "Required when population is given." in text
    assert "exit status:" in text


def test_every_operation_of_the_service_is_a_command() -> None:
    parser = build_parser()
    for operation in all_operations():
        args = parser.parse_args([operation.name])
        assert (args.operation.name, args.operation.path) == (operation.name, operation.path)
        assert [s.name for s in args.specs] == [
            s.name for s in field_specs(operation.request())]


def test_evaluation_fields_cover_the_schema() -> None:
    # Every top-level field of the schema is reached by some flag.
    schema = EvaluationRequest()
    roots = {spec.path[0] for spec in field_specs(schema)}
    assert roots == {field.data_key or name for name, field in schema.fields.items()}


def test_records_from_a_csv_file_keep_amounts_as_written(tmp_path: Path) -> None:
    # Python's csv module (RFC 4180) writes the reference file: a quoted comma, a BOM.
    path = tmp_path / "receivables.csv"
    with path.open("w", encoding="utf-8-sig", newline="") as out:
        writer = csv.writer(out)
        writer.writerows([["id", "amount"], ["KV-1001", "12500.10"], ["KV,1002", "0.10"]])
    assert body("monetary-selection", "--population-file", str(path),
                "--sample-size", "2") == {
        "population": [{"id": "KV-1001", "amount": "12500.10"},
                       {"id": "KV,1002", "amount": "0.10"}],
        "sample_size": 2}


def test_records_columns_are_typed_and_empty_cells_left_out(tmp_path: Path) -> None:
    path = tmp_path / "found.csv"
    path.write_text("id,book_amount,audited_amount,hits,individually_significant\n"
                    "A,4000.00,2000.00,2,\nB,5000,4000,,true\n")
    assert body("monetary-evaluation", "--misstatements-file", str(path))["misstatements"] == [
        {"id": "A", "book_amount": "4000.00", "audited_amount": "2000.00", "hits": 2},
        {"id": "B", "book_amount": "5000", "audited_amount": "4000",
         "individually_significant": True}]


def test_a_bad_records_cell_names_line_and_column(tmp_path: Path) -> None:
    path = tmp_path / "found.csv"
    path.write_text("id,book_amount,audited_amount,hits\nA,1,0,two\n")
    args = parse("monetary-evaluation", "--misstatements-file", str(path))
    with pytest.raises(flags.ValueProblem, match=r"found.csv, line 2, column hits"):
        flags.build_body(args, args.specs)


def test_records_as_json_text() -> None:
    assert body("monetary-selection", "--population", '[{"id": "A", "amount": "1.10"}]') == {
        "population": [{"id": "A", "amount": "1.10"}]}


def test_attributes_prior_and_underreliance_risk_reach_the_command_line() -> None:
    assert body("sample-size", "--attributes",
                '[{"name": "approval", "tolerable_rate": 0.05}]') == {
        "attributes": [{"name": "approval", "tolerable_rate": 0.05}]}
    assert body("sample-size", "--tolerable-rate", "0.05", "--expected-rate", "0.01",
                "--underreliance-risk", "0.1") == {
        "tolerable_rate": 0.05, "expected_rate": 0.01, "underreliance_risk": 0.1}
    assert body("evaluation", "--sample-size", "60", "--deviations", "1",
                "--prior-type", "previous_sample", "--prior-sample-size", "80",
                "--prior-deviations", "0", "--prior-weight", "0.5") == {
        "sample_size": 60, "deviations": 1,
        "prior": {"type": "previous_sample", "sample_size": 80, "deviations": 0, "weight": 0.5}}
    assert body("evaluation", "--sample-size", "60", "--attributes",
                '[{"name": "a", "deviations": 0, "tolerable_rate": 0.05}]') == {
        "sample_size": 60, "attributes": [{"name": "a", "deviations": 0, "tolerable_rate": 0.05}]}


def test_periodic_plans_reach_the_command_line() -> None:
    assert body("plan-periodic", "--frequency", "monthly", "--tolerable-rate", "0.1",
                "--occurrences", "13", "--common-practice-low", "2",
                "--common-practice-high", "4") == {
        "frequency": "monthly", "tolerable_rate": 0.1, "occurrences": 13,
        "common_practice": {"low": 2, "high": 4}}


def test_the_staged_endpoints_reach_the_command_line() -> None:
    assert body("staged-plan", "--tolerable-rate", "0.05", "--expected-rate", "0.01",
                "--max-stages", "3", "--population-size", "4200") == {
        "population": {"size": 4200}, "tolerable_rate": 0.05, "expected_rate": 0.01,
        "max_stages": 3}
    stages = ('[{"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},'
              ' {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}]')
    built = body("staged-evaluation", "--stages", stages, "--stage-reached", "2",
                 "--deviations", "2", "--tolerable-rate", "0.05")
    assert built["stages"][1] == {"cumulative_sample_size": 135, "accept_if_at_most": 2,
                                  "fail_if_at_least": 3}
    assert (built["stage_reached"], built["deviations"]) == (2, 2)
    assert body("staged-curve", "--stages", stages, "--points", "11")["points"] == 11
    strata = '[{"label": "A", "population_size": 100, "sample_size": 20, "deviations": 0}]'
    assert body("strata-evaluation", "--strata", strata, "--confidence", "0.9") == {
        "strata": [{"label": "A", "population_size": 100, "sample_size": 20, "deviations": 0}],
        "confidence": 0.9}
    # The same strata reach POST /v1/evaluation, as a CSV file of strata or JSON text.
    assert body("evaluation", "--strata", strata, "--tolerable-rate", "0.1") == {
        "strata": [{"label": "A", "population_size": 100, "sample_size": 20, "deviations": 0}],
        "tolerable_rate": 0.1}
    # A list of true/false flags is read as JSON text.
    assert body("sequence-evaluation", "--results", "[false, true, 0]")["results"] == [
        False, True, 0]
