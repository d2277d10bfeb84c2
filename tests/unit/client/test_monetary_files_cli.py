"""The monetary commands with a ledger file and a test sheet, in process: the app answers
through a fake transport. The ledger is the README's (Kestrel Valley Foods Ltd, fictional)."""

from __future__ import annotations

import json
from pathlib import Path

import openpyxl
import pytest

from sampling_client import cli

ROOT = Path(__file__).resolve().parents[3]
LEDGER = ROOT / "examples" / "kestrel-receivables-ledger.csv"
# The README's test vector, for the same 20 items sent as a JSON list.
FINGERPRINT = "d1cd7d4483dd7f385157708c6d5eb64bb3592b430d5b9d9e471b8f882bbd6654"
SELECT = ["monetary-selection", "--file", str(LEDGER), "--id-column", "invoice",
          "--amount-column", "balance", "--sample-size", "8",
          "--seed", "kestrel-valley-ar-2026-12"]


pytestmark = pytest.mark.usefixtures("through_app")


def test_a_ledger_selects_as_its_items(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main([*SELECT, "--json"]) == cli.EXIT_OK
    answer = json.loads(capsys.readouterr().out)
    assert answer["selection_fingerprint"] == FINGERPRINT
    assert answer["columns"] == ["invoice", "customer", "invoice_date", "balance"]


def test_the_sheet_is_written_then_evaluated(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sheet = tmp_path / "sheet.xlsx"
    assert cli.main([*SELECT, "--xlsx", "--output", str(sheet)]) == cli.EXIT_OK
    book = openpyxl.load_workbook(sheet)
    tests = book["Tests"]
    at = {cell.value: cell.column for cell in tests[1]}
    for row in range(2, tests.max_row + 1):
        tests.cell(row, at["audited amount"], tests.cell(row, at["book amount"]).value)
    tests.cell(3, at["audited amount"]).value = None  # one item not tested
    book.save(sheet)
    capsys.readouterr()
    refused = cli.main(["monetary-evaluation", "--test-sheet", str(sheet), "--json"])
    assert refused == cli.EXIT_REFUSED
    assert "not_tested" in capsys.readouterr().err
    treated = cli.main(["monetary-evaluation", "--test-sheet", str(sheet),
                        "--not-tested", "count_as_misstated", "--json"])
    assert treated == cli.EXIT_OK
    answer = json.loads(capsys.readouterr().out)
    assert answer["items_not_tested"] == 1
    assert answer["selection_fingerprint"] == FINGERPRINT


@pytest.mark.parametrize(
    ("argv", "expected"),
    [
        (["monetary-selection", "--file", "no-such-ledger.csv", "--id-column", "invoice",
          "--amount-column", "balance", "--sample-size", "3"], "no-such-ledger.csv"),
        ([*SELECT, "--xlsx", "--output", "."], "--output"),
        ([*SELECT, "--population", '[{"id": "A", "amount": "1.00"}]'],
         "cannot be given with --file"),
    ],
)
def test_usage_problems_are_refused_before_sending(
    argv: list[str], expected: str, capsys: pytest.CaptureFixture[str]
) -> None:
    assert cli.main(argv) == cli.EXIT_USAGE
    assert expected in capsys.readouterr().err
