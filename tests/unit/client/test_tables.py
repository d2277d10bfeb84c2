"""Text for people: aligned tables, labels, percentages, the caution last; batch CSV."""

from __future__ import annotations

import csv
import io
from typing import Any

import pytest
from flask.testing import FlaskClient

from sampling_client import tables
from service.sampling.wording import CAUTION


def answer(client: FlaskClient, path: str, body: dict[str, Any]) -> dict[str, Any]:
    response = client.post(path, json=body)
    assert response.status_code == 200, response.get_data(as_text=True)
    document: dict[str, Any] = response.get_json()
    return document


def test_labels_and_values() -> None:
    assert tables.label("risk_of_overreliance") == "Risk of overreliance"
    assert tables.label("interval.low") == "Interval, lower bound"
    assert tables.label("confidence_interval.high") == "Confidence interval, upper bound"
    assert tables.value_text("confidence_interval.low", 0.00047619) == "0.047619%"
    assert tables.value_text("tolerable_rate", 0.05) == "5%"
    assert tables.value_text("risk_of_overreliance", 0.04825581725606304) == "4.82558%"
    assert tables.value_text("population_size", 4200) == "4,200"
    assert tables.value_text("population_size", None) == "none"
    assert tables.value_text("seed_generated", False) == "no"
    assert tables.value_text("interval", 70.01666) == "70.0167"  # a systematic interval
    assert tables.value_text("methods", ["exact", "wilson"]) == "exact, wilson"


def test_columns_are_aligned_and_the_header_underlined() -> None:
    assert tables.aligned([["a", "1"], ["bbb", "22"]], ["Key", "V"]) == [
        "Key  V", "---  --", "a    1", "bbb  22"]


def test_a_plan_reads_as_a_table_and_ends_with_the_caution_once(client: FlaskClient) -> None:
    plan = answer(client, "/v1/sample-size", {"tolerable_rate": 0.05, "expected_rate": 0.01,
                                              "population": {"size": 4200}})
    text = tables.document_text("Sample size for a test of controls", plan)
    lines = text.splitlines()
    assert lines[0] == "Sample size for a test of controls"
    width = lines[2].index("93")  # the value column starts where the first value does
    assert "Sample size".ljust(width) + "93" in lines
    assert "Allowed deviations".ljust(width) + "1" in lines
    assert "Population size".ljust(width) + "4,200" in lines
    assert "Curve request" not in text and "Links" not in text  # they are for programs
    assert " ".join(text.split()).endswith(CAUTION)
    assert text.count(CAUTION[:40]) == 1
    assert "Test 93 items from a population of 4,200 items" in " ".join(text.split())


def test_warnings_are_listed(client: FlaskClient) -> None:
    plan = answer(client, "/v1/sample-size", {"tolerable_rate": 0.05, "population": {"size": 60}})
    assert plan["warnings"]
    text = tables.document_text("Sample size", plan)
    assert "\nWarnings:\n- " in text


def test_a_selection_lists_draw_item_and_position(client: FlaskClient) -> None:
    chosen = answer(client, "/v1/selection", {"population": {"ranges": [
        {"first": 10001, "last": 10100}]}, "sample_size": 3, "seed": "nt-2026"})
    text = tables.document_text("Select sample items reproducibly", chosen)
    lines = text.splitlines()
    start = lines.index("Selected items:")
    assert lines[start + 2].split() == ["Draw", "Item", "Position"]
    rows = [line.split() for line in lines[start + 4:start + 7]]
    assert rows == [[str(k + 1), str(item), str(position)] for k, (item, position) in
                    enumerate(zip(chosen["items"], chosen["positions"], strict=True))]
    assert "10,0" not in text  # document numbers are not grouped like amounts


def test_lists_of_objects_become_tables(client: FlaskClient) -> None:
    sizes = answer(client, "/v1/estimation/sample-size",
                   {"margin": 0.05, "methods": ["exact", "hoeffding"]})
    text = tables.document_text("Estimation", sizes)
    assert "Rows:" in text
    assert any(line.split()[:2] == ["exact", str(sizes["rows"][0]["sample_size"])]
               for line in text.splitlines() if line.strip())


RESULTS = [
    {"id": "NT-1", "status": 200, "result": {"sample_size": 93, "allowed_deviations": 1}},
    {"id": "=SUM(A1)", "status": 200, "result": {"sample_size": 59, "allowed_deviations": 0}},
    {"id": "NT-3", "status": 422, "problem": {
        "title": "Invalid input", "status": 422,
        "errors": {"operations[2].request.expected_rate": [
            "expected_rate 0.06 must be below tolerable_rate 0.05"]}}},
]
IDS = ["NT-1", "=SUM(A1)", "NT-3"]


def test_a_controls_table_shows_each_row_or_its_problem() -> None:
    text = tables.controls_text(IDS, "sample-size", RESULTS)
    lines = text.splitlines()
    assert lines[0].split() == ["Control", "Sample", "size", "Allowed", "deviations", "Problem"]
    assert lines[2].split() == ["NT-1", "93", "1"]
    assert lines[4].split()[0] == "NT-3"
    assert lines[4].endswith("refused (HTTP 422): expected_rate: expected_rate 0.06 must be "
                             "below tolerable_rate 0.05")
    assert "2 of 3 answered; 1 refused; 0 with warnings." in text
    assert "Warnings" not in text
    assert " ".join(text.split()).endswith(CAUTION)


def test_a_controls_table_without_refusals_has_no_problem_column() -> None:
    text = tables.controls_text(IDS[:2], "sample-size", RESULTS[:2])
    assert "Problem" not in text
    assert "2 of 2 answered; 0 refused; 0 with warnings." in text


def test_the_controls_csv() -> None:
    text = tables.controls_csv(IDS, "sample-size", RESULTS)
    assert text.startswith(
        "\ufeffcontrol_id,status,sample_size,allowed_deviations,warnings,problem\r\n")
    rows = list(csv.reader(io.StringIO(text.removeprefix("\ufeff"))))
    assert rows[1] == ["NT-1", "200", "93", "1", "", ""]
    assert rows[2] == ["'=SUM(A1)", "200", "59", "0", "", ""]  # the selection CSV's formula guard
    assert rows[3] == ["NT-3", "422", "", "", "",
                       "expected_rate: expected_rate 0.06 must be below tolerable_rate 0.05"]


def test_an_evaluation_batch_shows_the_sample_and_the_deviations_found() -> None:
    results = [{"id": "NT-1", "status": 200, "result": {
        "sample_size": 93, "deviations": 1,
        "sample_deviation_rate": 0.0107, "upper_deviation_limit": 0.0495,
        "conclusion": "supports_reliance", "method": "binomial"}}]
    lines = tables.controls_text(["NT-1"], "evaluation", results).splitlines()
    assert lines[0].split() == ["Control", "Sample", "size", "Deviations", "Sample", "deviation",
                                "rate", "Upper", "deviation", "limit", "Conclusion"]
    assert lines[2].split() == ["NT-1", "93", "1", "1.07%", "4.95%", "supports_reliance"]
    rows = list(csv.reader(io.StringIO(
        tables.controls_csv(["NT-1"], "evaluation", results).removeprefix("\ufeff"))))
    assert rows[0][:4] == ["control_id", "status", "sample_size", "deviations"]
    assert rows[1][:4] == ["NT-1", "200", "93", "1"]


# Two fictional controls of Harbour Lane Provisions Ltd, the second with two warnings.
WARNED = [
    {"id": "HLP-01", "status": 200, "result": {"sample_size": 25, "allowed_deviations": 0,
                                               "warnings": []}},
    {"id": "HLP-02", "status": 200, "result": {
        "sample_size": 12, "allowed_deviations": 0,
        "warnings": ["First caution about the weekly stock count, long enough to be wrapped "
                     "under its number when the table is printed for a reviewer to read.",
                     "=Second caution, which a spreadsheet would run as a formula."]}},
]


def test_a_controls_table_numbers_every_warning_under_the_table() -> None:
    text = tables.controls_text(["HLP-01", "HLP-02"], "sample-size", WARNED)
    lines = text.splitlines()
    assert lines[0].split()[-1] == "Warnings"
    assert lines[2].split() == ["HLP-01", "25", "0"]
    assert lines[3].split() == ["HLP-02", "12", "0", "[1]", "[2]"]
    assert "2 of 2 answered; 0 refused; 1 with warnings." in text
    notes = " ".join(text[text.index("\nWarnings:\n"):].split())
    first, second = WARNED[1]["result"]["warnings"]  # type: ignore[index]
    assert f"[1] HLP-02: {first} [2] HLP-02: {second}" in notes
    assert all(len(line) <= tables.WIDTH for line in lines)
    assert " ".join(text.split()).endswith(CAUTION)


def test_the_controls_csv_has_every_warning_of_the_row_in_one_cell() -> None:
    text = tables.controls_csv(["HLP-01", "HLP-02"], "sample-size", WARNED)
    rows = list(csv.DictReader(io.StringIO(text.removeprefix("\ufeff"))))
    assert rows[0]["warnings"] == ""
    first, second = WARNED[1]["result"]["warnings"]  # type: ignore[index]
    # The guard applies to the cell as a whole; the separator is documented.
    assert rows[1]["warnings"] == f"{first} | {second}"
    assert rows[1]["warnings"].split(tables.WARNING_SEPARATOR) == [first, second]


def test_whole_population_and_with_replacement_rows_keep_their_warnings(
    client: FlaskClient
) -> None:
    # Harbour Lane Provisions Ltd (fictional): an annual, a quarterly and a monthly control,
    # each tested in full, and a binomial plan of 93 items from 400 (above 10%).
    plans = [({"size": 1}, 0.1, None), ({"size": 4}, 0.1, None), ({"size": 12}, 0.05, None),
             ({"size": 400}, 0.05, "binomial")]
    operations = []
    for number, (population, rate, method) in enumerate(plans, 1):
        request: dict[str, Any] = {"population": population, "tolerable_rate": rate}
        if method:
            request["method"] = method
        operations.append({"id": f"HLP-{number:02}", "operation": "sample-size",
                           "request": request})
    results = answer(client, "/v1/batch", {"operations": operations})["results"]
    ids = [op["id"] for op in operations]
    expected = [r["result"]["warnings"] for r in results]
    assert expected[-1], "the service warns of a with-replacement sample above 10%"
    text = " ".join(tables.controls_text(ids, "sample-size", results).split())
    rows = list(csv.DictReader(io.StringIO(
        tables.controls_csv(ids, "sample-size", results).removeprefix("\ufeff"))))
    for control, warnings, row in zip(ids, expected, rows, strict=True):
        for warning in warnings:
            assert f"{control}: {' '.join(warning.split())}" in text
        assert row["warnings"] == " | ".join(warnings)


def test_a_generic_batch_table() -> None:
    operations = [{"id": "a", "operation": "sample-size", "request": {}},
                  {"id": "b", "operation": "new-thing", "request": {}}]
    results = [{"id": "a", "status": 200, "result": {"sample_size": 59, "allowed_deviations": 0,
                                                      "summary": "x"}},
               {"id": "b", "status": 200, "result": {"score": 3, "rows": [1]}}]
    lines = tables.batch_text(operations, results).splitlines()
    assert lines[2].split() == ["a", "sample-size", "200", "Sample", "size", "59;", "Allowed",
                                "deviations", "0"]
    assert lines[3].split() == ["b", "new-thing", "200", "Score", "3"]


def test_selected_items_of_identifier_populations(client: FlaskClient) -> None:
    # Harbour Lane Provisions Ltd (fictional) credit notes, one that a spreadsheet would
    # run as a formula and one holding a comma.
    notes = ["HLP-CN-1", "=HLP-CN-2", "HLP-CN,3", "HLP-CN-4"]
    chosen = answer(client, "/v1/selection", {"population": {"items": notes},
                                              "sample_size": 4, "seed": "hlp-2026-11-cn"})
    results = [{"id": "HLP-CN", "status": 200, "result": chosen},
               {"id": "HLP-X", "status": 422, "problem": {"title": "Invalid input"}}]
    text = tables.selected_items_csv(["HLP-CN", "HLP-X"], results)
    rows = list(csv.reader(io.StringIO(text.removeprefix("\ufeff"), newline="")))
    assert rows[0] == list(tables.ITEMS_COLUMNS)
    guarded = ["'" + item if item.startswith("=") else item for item in chosen["items"]]
    assert rows[1:] == [["HLP-CN", str(draw), item, str(position)] for draw, (item, position)
                        in enumerate(zip(guarded, chosen["positions"], strict=True), 1)]
    listing = tables.controls_text(["HLP-CN", "HLP-X"], "selection", results)
    shown = [item if item != "HLP-CN,3" else '"HLP-CN,3"' for item in chosen["items"]]
    assert f"HLP-CN (4 of 4): {', '.join(shown)}\n" in listing
    assert "HLP-X (" not in listing


@pytest.mark.parametrize(("interval", "sampling"), [
    ("interval", "interval"),  # the names of services before the rename
    ("confidence_interval", "sampling_interval"),
])
def test_interval_fields_read_under_either_name(interval: str, sampling: str) -> None:
    evaluation = {"sample_size": 93, "deviations": 1,
                  interval: {"low": 0.00047619, "high": 0.0578571}}
    lines = tables.document_text("Evaluation", evaluation).splitlines()
    words = "Confidence interval" if interval == "confidence_interval" else "Interval"
    assert f"{words}, lower bound" in " ".join(lines)
    assert any(line.split()[-1] == "0.047619%" for line in lines if "lower bound" in line)
    chosen = {"sample_size": 60, sampling: 70.01666, f"{sampling}_exact": "4201/60"}
    text = tables.document_text("Selection", chosen)
    label = tables.label(sampling)
    assert any(line.startswith(label) and line.split()[-1] == "70.0167"
               for line in text.splitlines())
    assert f"{tables.label(sampling + '_exact')}" in text


def test_every_probability_of_the_plans_reads_as_a_percentage_and_sizes_as_items() -> None:
    assert tables.value_text("sizes.confidence_against_1_deviant", 0.25) == "25%"
    assert tables.value_text("sizes.upper_deviation_limit_if_none_found", 0.2063) == "20.63%"
    assert tables.value_text("sizes.achieved_confidence_at_tolerable", 0.5) == "50%"
    assert tables.value_text("posterior_upper_limit", 0.0487) == "4.87%"
    assert tables.value_text("underreliance_risk", 0.1) == "10%"
    assert tables.value_text("plan_risk_of_overreliance", 0.0496855) == "4.96855%"
    assert tables.value_text("points.fixed_size_upper_deviation_limit", 0.05) == "5%"
    # An expected sample size at a rate is a number of items.
    assert tables.value_text("expected_sample_size_at_expected_rate", 89.69630740149498) == (
        "89.6963")
    assert tables.value_text("points.expected_sample_size", 66.0) == "66"
    assert tables.value_text("prior.strength", 50.0) == "50"
