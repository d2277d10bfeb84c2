"""Population files and test sheets from the command line, in process: the app answers
through a fake transport, so what is sent and what comes back can both be checked.

The files are the project's example export of Harbour Lane Provisions Ltd (fictional).
"""

from __future__ import annotations

import csv
import io
import json
import sys
from decimal import Decimal
from pathlib import Path
from typing import Any

import openpyxl
import pytest
import requests

from sampling_client import FileUpload, SamplingClient, cli, multipart
from sampling_client.api import XLSX
from tests.sheet_results import fill_attribute_results
from tests.unit.client.fakes import AppAdapter, ScriptedSession

ROOT = Path(__file__).resolve().parents[3]
ORDERS = ROOT / "examples" / "harbour-lane-purchase-orders.csv"
ATTRIBUTES = ("approved before release", "three-way match")


@pytest.fixture
def capsys(capsysbinary: pytest.CaptureFixture[bytes]) -> pytest.CaptureFixture[bytes]:
    return capsysbinary


def _rows(workbook: Any, sheet: str) -> list[tuple[Any, ...]]:
    """A sheet's rows; a read-only workbook keeps its file open until closed."""
    book = openpyxl.load_workbook(workbook, read_only=True)
    try:
        return list(book[sheet].iter_rows(values_only=True))
    finally:
        book.close()


def _sheet_names(workbook: Any) -> list[str]:
    book = openpyxl.load_workbook(workbook, read_only=True)
    try:
        return list(book.sheetnames)
    finally:
        book.close()


def run(capsys: pytest.CaptureFixture[bytes], *argv: str) -> tuple[int, str, str]:
    status = cli.main(list(argv))
    out, err = capsys.readouterr()
    return status, out.decode("utf-8"), err.decode("utf-8")


def _parts(sent: requests.PreparedRequest) -> tuple[dict[str, Any], bytes]:
    """The JSON request part and the file part of a multipart body the client sent."""
    content_type = sent.headers["Content-Type"]
    assert content_type.startswith("multipart/form-data; boundary=")
    boundary = content_type.split("boundary=", 1)[1].encode()
    body = sent.body if isinstance(sent.body, bytes) else b"".join(sent.body)  # type: ignore[arg-type]
    assert len(body) == int(sent.headers["Content-Length"])
    found: dict[bytes, bytes] = {}
    for part in body.split(b"--" + boundary)[1:-1]:
        head, _, content = part.removeprefix(b"\r\n").partition(b"\r\n\r\n")
        name = head.split(b'name="', 1)[1].split(b'"', 1)[0]
        found[name] = content.removesuffix(b"\r\n")
    return json.loads(found[b"request"]), found[b"file"]


def _ledger() -> tuple[Decimal, int]:
    """The example file's total and count, computed apart with the csv and decimal modules."""
    with ORDERS.open(encoding="utf-8-sig", newline="") as handle:
        amounts = [Decimal(row["amount"].replace(",", "")) for row in csv.DictReader(handle)]
    return sum(amounts, Decimal(0)), len(amounts)


# --------------------------------------------------------------------------- profile


def test_profile_sends_the_file_and_reconciles_with_an_independent_total(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes]
) -> None:
    total, count = _ledger()
    status, out, err = run(capsys, "profile", "--file", str(ORDERS), "--id-column", "doc_no",
                           "--amount-column", "amount", "--control-total", str(total),
                           "--control-count", str(count), "--json")
    assert status == 0, err
    answer = json.loads(out)
    assert Decimal(answer["amounts"]["total"]) == total
    assert answer["rows_kept"] == count
    assert answer["reconciliation"]["reconciles"] is True
    (sent,) = adapter.sent
    request, content = _parts(sent)
    assert content == ORDERS.read_bytes()
    assert request == {"population": {"file": {"id_column": "doc_no", "amount_column": "amount"}},
                       "control_total": float(total), "control_count": count}


def test_the_profile_table_names_the_suggested_strata(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, err = run(capsys, "population-profile", "--file", str(ORDERS), "--id-column",
                           "doc_no", "--amount-column", "amount", "--strata", "3",
                           "--top-threshold", "3000")
    assert status == 0, err
    assert out.startswith("Profile and reconcile a population file\n")
    assert "Suggested amount strata:" in out


def test_a_file_that_cannot_be_read_is_a_usage_error(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    tmp_path: Path,
) -> None:
    status, _, err = run(capsys, "profile", "--file", str(tmp_path / "missing.csv"),
                         "--id-column", "doc_no")
    assert status == 2
    assert f"--file {tmp_path / 'missing.csv'}: No such file or directory" in err
    assert adapter.sent == []


@pytest.mark.parametrize(("argv", "message"), [
    (["profile", "--id-column", "doc_no"],
     "population-profile reads a population file: give it with --file PATH"),
    (["selection", "--id-column", "doc_no", "--sample-size", "5"],
     "the population.file flags describe a population file: send the file with --file PATH"),
    (["selection", "--population-size", "60", "--sample-size", "5", "--xlsx", "--output",
      "x.xlsx"], "--xlsx for selection needs --file"),
    (["evaluation", "--test-sheet", str(ORDERS), "--sample-size", "5"],
     "--sample-size cannot be given with --test-sheet: the sheet holds the sample"),
    (["evaluation", "--sample-size", "5", "--deviations", "0", "--not-tested", "drop"],
     "--not-tested needs --test-sheet"),
    (["selection", "--file", str(ORDERS), "--controls", str(ORDERS)],
     "--file cannot be given with --controls; give each control's file in the file column"),
    (["evaluation", "--test-sheet", str(ORDERS), "--controls", str(ORDERS)],
     "--test-sheet cannot be given with --controls"),
    (["profile", "--file", str(ORDERS), "--id-column", "doc_no", "--output",
      "no-such-folder/profile.txt"], "--output no-such-folder/profile.txt: no such folder"),
])
def test_argument_errors_send_nothing(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    argv: list[str], message: str,
) -> None:
    status, out, err = run(capsys, *argv)
    assert status == 2
    assert message in err
    assert out == ""
    assert adapter.sent == []


def test_an_xlsx_answer_is_not_written_to_a_terminal(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    monkeypatch.setattr(sys.stdout, "isatty", lambda: True)
    status, _, err = run(capsys, "selection", "--file", str(ORDERS), "--id-column", "doc_no",
                         "--sample-size", "5", "--seed", "s", "--accept", "xlsx")
    assert status == 2
    assert "--xlsx writes a binary file: give --output FILE" in err
    assert adapter.sent == []


# --------------------------------------------------------------------------- selection


def test_selection_as_a_test_sheet_to_a_file(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes], tmp_path: Path
) -> None:
    base = ["selection", "--file", str(ORDERS), "--id-column", "doc_no", "--sample-size", "8",
            "--seed", "harbour-lane-2026-q3"]
    status, out, err = run(capsys, *base, "--json")
    assert status == 0, err
    chosen = json.loads(out)
    target = tmp_path / "picks.xlsx"
    status, out, err = run(capsys, *base, "--attributes", ATTRIBUTES[0], "--attributes",
                           ATTRIBUTES[1], "--accept", "xlsx", "--output", str(target))
    assert (status, out) == (0, ""), err
    rows = _rows(target, "Tests")
    header = list(rows[0])
    assert f"{ATTRIBUTES[1]}: result" in header
    assert [row[header.index("item")] for row in rows[1:]] == chosen["items"]
    assert not list(tmp_path.glob(".*.partial"))


def test_selection_csv_from_a_file_is_the_services_csv(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, err = run(capsys, "selection", "--file", str(ORDERS), "--id-column", "doc_no",
                           "--sample-size", "3", "--seed", "hl-3", "--csv")
    assert status == 0, err
    (sent,) = adapter.sent
    assert sent.headers["Accept"] == "text/csv"
    request, _ = _parts(sent)
    direct = adapter.client.post("/v1/selection", headers={"Accept": "text/csv"},
                                 content_type="multipart/form-data",
                                 data={"file": (ORDERS.open("rb"), ORDERS.name),
                                       "request": json.dumps(request)})
    assert out.encode("utf-8") == direct.data


# --------------------------------------------------------------------------- test sheets


def _completed(tmp_path: Path, capsys: pytest.CaptureFixture[bytes], deviation_draw: int) -> Path:
    sheet = tmp_path / "sheet.xlsx"
    status, _, err = run(capsys, "selection", "--file", str(ORDERS), "--id-column", "doc_no",
                         "--sample-size", "20", "--seed", "harbour-lane-2026-q4",
                         "--attributes", ATTRIBUTES[0], "--attributes", ATTRIBUTES[1],
                         "--xlsx", "--output", str(sheet))
    assert status == 0, err
    done = tmp_path / "completed.xlsx"
    fill_attribute_results(sheet, done, ATTRIBUTES, deviation_draw)
    return done


def test_a_completed_sheet_evaluates_as_its_counts_do(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    tmp_path: Path,
) -> None:
    done = _completed(tmp_path, capsys, deviation_draw=4)
    status, out, err = run(capsys, "evaluation", "--test-sheet", str(done), "--tolerable-rates",
                           json.dumps({a: 0.1 for a in ATTRIBUTES}), "--json")
    assert status == 0, err
    evaluations = json.loads(out)["evaluations"]
    assert [(e["attribute"], e["deviations"]) for e in evaluations] == [
        (ATTRIBUTES[0], 0), (ATTRIBUTES[1], 1)]
    for evaluation in evaluations:
        # The same counts sent as a plain JSON evaluation: the population of 60 orders.
        status, out, err = run(capsys, "evaluation", "--sample-size", "20", "--deviations",
                               str(evaluation["deviations"]), "--tolerable-rate", "0.1",
                               "--population-size", "60", "--json")
        assert status == 0, err
        plain = json.loads(out)
        assert {k: evaluation[k] for k in plain} == plain


def test_the_evaluated_workbook_comes_back(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes], tmp_path: Path
) -> None:
    done = _completed(tmp_path, capsys, deviation_draw=2)
    target = tmp_path / "evaluated.xlsx"
    status, _, err = run(capsys, "evaluation", "--test-sheet", str(done), "--not-tested",
                         "count_as_deviation", "--xlsx", "--output", str(target))
    assert status == 0, err
    assert "Evaluation" in _sheet_names(target)


def test_a_tampered_sheet_is_refused_naming_the_flag(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes], tmp_path: Path
) -> None:
    done = _completed(tmp_path, capsys, deviation_draw=2)
    book = openpyxl.load_workbook(done)
    book["Tests"].delete_rows(3)
    book.save(done)
    status, _, err = run(capsys, "evaluation", "--test-sheet", str(done))
    assert status == 3
    assert f"--test-sheet {done} (file): the sheet's rows are not exactly the selection's" in err


# --------------------------------------------------------------------------- controls


def test_controls_point_at_their_files_and_the_rest_go_as_one_batch(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    tmp_path: Path,
) -> None:
    (tmp_path / "exports").mkdir()
    (tmp_path / "exports" / "orders.csv").write_bytes(ORDERS.read_bytes())
    controls = tmp_path / "controls.csv"
    controls.write_text(
        "control_id,file,id_column,population_size,sample_size,seed\n"
        "HLP-PO-01,exports/orders.csv,doc_no,,5,hlp-po\n"
        "HLP-BR-01,,,12,2,hlp-2026-11-bank\n"
        "HLP-PO-02,exports/orders.csv,no_such_column,,3,hlp-po-2\n", encoding="utf-8")
    status, out, err = run(capsys, "selection", "--controls", str(controls), "--json")
    assert status == 3, err
    results = json.loads(out)["results"]
    assert [(r["id"], r["status"]) for r in results] == [
        ("HLP-PO-01", 200), ("HLP-BR-01", 200), ("HLP-PO-02", 422)]
    assert "no column 'no_such_column'" in json.dumps(results[2]["problem"])
    batch, first, _ = adapter.sent  # the batch goes first, then each file
    assert json.loads(batch.body or b"")["operations"] == [
        {"id": "HLP-BR-01", "operation": "selection",
         "request": {"population": {"size": 12}, "sample_size": 2, "seed": "hlp-2026-11-bank"}}]
    request, content = _parts(first)
    assert content == ORDERS.read_bytes()
    assert request == {"population": {"file": {"id_column": "doc_no"}}, "sample_size": 5,
                       "seed": "hlp-po"}
    # The file's selection is the one a single command gives.
    status, out, _ = run(capsys, "selection", "--file", str(ORDERS), "--id-column", "doc_no",
                         "--sample-size", "5", "--seed", "hlp-po", "--json")
    assert results[0]["result"]["items"] == json.loads(out)["items"]


def test_a_profile_per_control_reconciles_each_file(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes], tmp_path: Path
) -> None:
    total, count = _ledger()
    controls = tmp_path / "ledgers.csv"
    controls.write_text(
        "control_id,file,id_column,amount_column,control_total,control_count\n"
        f"HLP-AP-01,{ORDERS},doc_no,amount,{total},{count}\n"
        f"HLP-AP-02,{ORDERS},doc_no,amount,{total + Decimal('0.01')},{count}\n",
        encoding="utf-8")
    status, out, err = run(capsys, "profile", "--controls", str(controls), "--csv")
    assert status == 0, err
    rows = list(csv.DictReader(io.StringIO(out.removeprefix("\ufeff"))))
    assert [(r["reconciliation.reconciles"], r["reconciliation.total_difference"])
            for r in rows] == [("true", "0.00"), ("false", "-0.01")]


@pytest.mark.parametrize(("header", "row", "message"), [
    ("control_id,file,id_column,control_count", "C1,missing.csv,doc_no,5",
     "line 2, column file: '{folder}/missing.csv': no such file"),
    ("control_id,id_column,control_count", "C1,doc_no,5",
     "the header has no file column: each control needs its population file"),
    ("control_id,file,id_column,control_count", "C1,,doc_no,5",
     "line 2, column file: is blank; each control needs its population file"),
    ("control_id,file,id_column,population_file_id_column", "C1,o.csv,doc_no,doc_no",
     "column population_file_id_column: is population_file_id_column again"),
    ("control_id,file,control_total", "C1,o.csv,12%",
     "column control_total: '12%' is not a number"),
])
def test_a_bad_controls_file_with_files_sends_nothing(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    tmp_path: Path, header: str, row: str, message: str,
) -> None:
    (tmp_path / "o.csv").write_bytes(ORDERS.read_bytes())
    controls = tmp_path / "controls.csv"
    controls.write_text(f"{header}\n{row}\n", encoding="utf-8")
    status, _, err = run(capsys, "profile", "--controls", str(controls))
    assert status == 2
    assert message.format(folder=tmp_path) in err
    assert adapter.sent == []


# --------------------------------------------------------------------------- the body


def test_the_upload_is_streamed_in_blocks_of_known_total_length(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setattr(multipart, "BLOCK_BYTES", 1000)
    path = tmp_path / "orders.csv"
    path.write_bytes(ORDERS.read_bytes() * 3)
    body = FileUpload(path, {"sample_size": 5})
    blocks = list(body)
    assert max(len(block) for block in blocks[1:-1]) == 1000
    assert sum(map(len, blocks)) == len(body)
    assert list(body) == blocks  # a second pass, as a retry makes, sends the same bytes


def test_a_file_that_grows_while_it_is_sent_is_not_sent_short(tmp_path: Path) -> None:
    path = tmp_path / "orders.csv"
    path.write_bytes(b"doc_no\nA\n")
    body = FileUpload(path, {})
    path.write_bytes(b"doc_no\nA\nB\n")
    with pytest.raises(multipart.FileChanged):
        list(body)


def test_a_retry_after_503_sends_the_whole_file_again(tmp_path: Path) -> None:
    session = ScriptedSession([(503, {"title": "busy"}, {"Retry-After": "0"}),
                               (200, {"rows_read": 60}, None)])
    client = SamplingClient(session=session, sleep=lambda s: None)  # type: ignore[arg-type]
    answer = client.population_profile(ORDERS, population={"file": {"id_column": "doc_no"}})
    assert answer == {"rows_read": 60}
    first, second = (b"".join(call["data"]) for call in session.calls)
    assert first.count(ORDERS.read_bytes()) == 1
    assert first.replace(first.split(b"\r\n")[0], b"") == second.replace(
        second.split(b"\r\n")[0], b"")


def test_the_client_returns_the_workbook_bytes(
    app_session: requests.Session,
) -> None:
    client = SamplingClient(session=app_session)
    data = client.selection_from_file_as(
        XLSX, ORDERS, population={"file": {"id_column": "doc_no"}}, sample_size=4, seed="hl",
        attributes=list(ATTRIBUTES))
    assert data.startswith(b"PK")
    assert "Tests" in _sheet_names(io.BytesIO(data))


def test_the_stratified_table_lists_each_stratums_items(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes]
) -> None:
    argv = ["stratified-selection", "--file", str(ORDERS), "--id-column", "doc_no",
            "--amount-column", "amount", "--strata-bands", '["500"]', "--strata-top-threshold",
            "3000", "--sample-size", "6", "--seed", "hl-strata"]
    status, out, err = run(capsys, *argv, "--json")
    assert status == 0, err
    strata = json.loads(out)["strata"]
    status, out, err = run(capsys, *argv)
    assert status == 0, err
    listed = " ".join(out.split("Selected items, in draw order:\n", 1)[1].split("\n\n")[0].split())
    assert listed == " ".join(
        f"{s['label']} ({len(s['items'])}): {', '.join(s['items'])}" for s in strata if s["items"])
    # A call that sends a file waits longer for its answer than the default 10 s.
    assert adapter.timeouts[-1] == (10.0, 600.0)


def _aborted_by(cause: BaseException) -> requests.ConnectionError:
    """The error requests raises when the body raised ``cause`` while urllib3 sent it."""
    from urllib3.exceptions import ProtocolError

    try:
        try:
            raise cause
        except BaseException as raised:
            raise ProtocolError("Connection aborted.", raised) from None
    except ProtocolError as aborted:
        return requests.ConnectionError(aborted)


def test_a_file_that_changes_while_sent_is_said_so_and_not_tried_again(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[bytes]
) -> None:
    session = ScriptedSession([_aborted_by(multipart.FileChanged("orders.csv changed size")),
                               (200, {"rows_read": 60}, None)])

    def make(*args: Any, **kwargs: Any) -> SamplingClient:
        return SamplingClient(*args, session=session, sleep=lambda s: None,  # type: ignore[arg-type]
                              **kwargs)

    monkeypatch.setattr(cli, "SamplingClient", make)
    status, _, err = run(capsys, "profile", "--file", str(ORDERS), "--id-column", "doc_no")
    assert status == 2
    assert f"--file {ORDERS}: orders.csv changed size" in err
    assert len(session.calls) == 1
