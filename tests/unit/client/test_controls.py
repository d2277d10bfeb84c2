"""Reading a controls file: strict cells, errors that name the row and the column."""

from __future__ import annotations

from pathlib import Path

import pytest

from sampling_client import contract, controls, flags

ROOT = Path(__file__).resolve().parents[3]
EXAMPLE = ROOT / "examples" / "month-end-controls.csv"


def request_fields(component: str) -> list[flags.FieldSpec]:
    """The fields of a request, as the command reads them from the OpenAPI document."""
    return contract.field_specs(contract.component(component))


SIZING = request_fields("SampleSizeRequest")


def write(tmp_path: Path, text: str, name: str = "controls.csv") -> str:
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8"))
    return str(path)


def refusal(tmp_path: Path, text: str) -> controls.ControlsFileError:
    with pytest.raises(controls.ControlsFileError) as caught:
        controls.read_controls(write(tmp_path, text), SIZING)
    return caught.value


def test_the_example_file_holds_forty_controls_with_typed_requests() -> None:
    rows = controls.read_controls(str(EXAMPLE), SIZING)
    assert len(rows) == 40
    assert len({row.control_id for row in rows}) == 40
    assert [row.line for row in rows] == list(range(2, 42))
    first = rows[0]
    assert first.control_id == "NT-P2P-01"
    assert first.request == {
        "population": {"label": "Purchase orders over 10000 approved before release",
                       "size": 4200},
        "tolerable_rate": 0.05, "expected_rate": 0.01, "confidence": 0.95}
    # Blank cells are left out, so the service applies its defaults.
    assert rows[-1].request == {"tolerable_rate": 0.05, "expected_rate": 0.01,
                                "confidence": 0.95}
    assert isinstance(first.request["population"]["size"], int)


def test_the_batch_items_carry_the_control_ids() -> None:
    rows = controls.read_controls(str(EXAMPLE), SIZING)[:2]
    assert controls.batch_operations(rows, "sample-size") == [
        {"id": "NT-P2P-01", "operation": "sample-size", "request": rows[0].request},
        {"id": "NT-P2P-02", "operation": "sample-size", "request": rows[1].request}]


def test_a_byte_order_mark_quotes_and_blank_rows_are_read(tmp_path: Path) -> None:
    path = write(tmp_path, '\ufeffcontrol_id,tolerable_rate,population_label\r\n'
                 '"NT,1",0.05,"Orders, ""large"""\r\n,,\r\n\r\nNT-2,0.10,\r\n')
    rows = controls.read_controls(path, SIZING)
    assert [(r.control_id, r.line) for r in rows] == [("NT,1", 2), ("NT-2", 5)]
    assert rows[1].request == {"tolerable_rate": 0.10}


def test_messages_name_the_files_own_line_after_a_cell_with_line_breaks(
    tmp_path: Path
) -> None:
    # Harbour Lane Provisions Ltd (fictional): a quoted label over two lines puts the third
    # control on line 5 of the file, though it is the fourth CSV row.
    text = ('control_id,tolerable_rate,population_label\n'
            'HLP-01,0.05,"Cold-store temperature log,\nsigned daily"\n'
            'HLP-02,0.05,Weekly stock count\n'
            'HLP-03,5%,Monthly supplier statement reconciliation\n')
    error = refusal(tmp_path, text)
    assert (error.line, error.column) == (5, "tolerable_rate")
    assert str(error).startswith(f"{tmp_path / 'controls.csv'}, line 5, column tolerable_rate")
    fixed = text.replace("5%", "0.05")
    rows = controls.read_controls(write(tmp_path, fixed), SIZING)
    assert [(r.control_id, r.line) for r in rows] == [("HLP-01", 2), ("HLP-02", 4),
                                                     ("HLP-03", 5)]
    assert [line.split(",")[0] for line in fixed.splitlines()][4] == "HLP-03"


def test_an_evaluation_file(tmp_path: Path) -> None:
    specs = request_fields("EvaluationRequest")
    path = write(tmp_path, "control_id,sample_size,deviations,tolerable_rate\nNT-1,93,1,0.05\n")
    (row,) = controls.read_controls(path, specs)
    assert row.request == {"sample_size": 93, "deviations": 1, "tolerable_rate": 0.05}


@pytest.mark.parametrize(("cell", "words"), [
    ("5%", "'5%' is not a number (rates are decimals: 5% is 0.05)"),
    ('"0,05"', "'0,05' is not a number (use a point as the decimal separator"),
    ("1e-2", "'1e-2' is not a number (write a plain decimal"),
    (".05", "'.05' is not a number"),
    ("0.05.1", "is not a number"),
])
def test_a_number_that_is_not_a_plain_decimal_names_row_and_column(
    tmp_path: Path, cell: str, words: str
) -> None:
    error = refusal(tmp_path, f"control_id,tolerable_rate\nNT-1,0.05\nNT-2,{cell}\n")
    assert (error.line, error.column) == (3, "tolerable_rate")
    assert str(error).startswith(f"{tmp_path / 'controls.csv'}, line 3, column tolerable_rate: ")
    assert words in str(error)


def test_a_blank_required_cell(tmp_path: Path) -> None:
    error = refusal(tmp_path, "control_id,tolerable_rate\nNT-1,\n")
    assert (error.line, error.column) == (2, "tolerable_rate")
    assert "is blank, but tolerable_rate is required" in str(error)


def test_a_nested_field_is_required_only_when_its_object_is_given(tmp_path: Path) -> None:
    text = "control_id,tolerable_rate,population_size,population_label\nNT-1,0.05,,\n"
    assert controls.read_controls(write(tmp_path, text), SIZING)[0].request == {
        "tolerable_rate": 0.05}
    error = refusal(tmp_path, text + "NT-2,0.05,,Orders\n")
    assert (error.line, error.column) == (3, "population_size")
    assert "is blank, but population.size is required" in str(error)


def test_a_missing_required_column(tmp_path: Path) -> None:
    error = refusal(tmp_path, "control_id,expected_rate\nNT-1,0.01\n")
    assert error.line == 1
    assert "the header has no tolerable_rate column, which is required" in str(error)


def test_a_missing_id_column(tmp_path: Path) -> None:
    assert "no control_id column" in str(refusal(tmp_path, "tolerable_rate\n0.05\n"))


def test_an_unknown_column_is_refused_not_ignored(tmp_path: Path) -> None:
    # A misspelt expected_rate left out would size for no expected deviation at all.
    error = refusal(tmp_path, "control_id,tolerable_rate,expected_rte\nNT-1,0.05,0.01\n")
    assert (error.line, error.column) == (1, "expected_rte")
    assert "is not a request field; the columns are control_id, population_size" in str(error)


def test_a_list_column_is_refused(tmp_path: Path) -> None:
    path = write(tmp_path, "control_id,margin,methods\nNT-1,0.05,exact\n")
    with pytest.raises(controls.ControlsFileError, match="methods: is a list field"):
        controls.read_controls(path, request_fields("EstimationRequest"))


def test_a_repeated_column(tmp_path: Path) -> None:
    error = refusal(tmp_path, "control_id,tolerable_rate,tolerable_rate\nNT-1,0.05,0.05\n")
    assert (error.line, error.column) == (1, "tolerable_rate")


def test_a_blank_or_repeated_control_id(tmp_path: Path) -> None:
    blank = refusal(tmp_path, "control_id,tolerable_rate\n ,0.05\n")
    assert (blank.line, blank.column) == (2, "control_id")
    repeated = refusal(tmp_path, "control_id,tolerable_rate\nNT-1,0.05\nNT-2,0.05\nNT-1,0.1\n")
    assert (repeated.line, repeated.column) == (4, "control_id")
    assert "repeats the control id 'NT-1' of line 2" in str(repeated)


def test_a_row_of_the_wrong_length(tmp_path: Path) -> None:
    error = refusal(tmp_path, "control_id,tolerable_rate\nNT-1,0.05,0.01\n")
    assert error.line == 2
    assert "has 3 cells; the header has 2" in str(error)


def test_a_semicolon_separated_file(tmp_path: Path) -> None:
    error = refusal(tmp_path, "control_id;tolerable_rate\nNT-1;0,05\n")
    assert "separate the columns with commas" in str(error)


@pytest.mark.parametrize(("text", "words"), [
    ("", "is empty"),
    ("control_id,tolerable_rate\n", "has no controls below the header"),
    ('control_id,tolerable_rate\n"NT-1,0.05\n', "is not valid CSV"),
])
def test_files_with_nothing_to_send(tmp_path: Path, text: str, words: str) -> None:
    assert words in str(refusal(tmp_path, text))


def test_a_file_that_is_not_utf8_or_not_there(tmp_path: Path) -> None:
    path = tmp_path / "latin1.csv"
    path.write_bytes("control_id,population_label,tolerable_rate\nNT-1,Caf\xe9,0.05\n"
                     .encode("latin-1"))
    with pytest.raises(controls.ControlsFileError, match="is not UTF-8 text"):
        controls.read_controls(str(path), SIZING)
    with pytest.raises(controls.ControlsFileError, match="no such file"):
        controls.read_controls(str(tmp_path / "none.csv"), SIZING)
