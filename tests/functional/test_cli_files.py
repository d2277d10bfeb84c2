"""Population files and test sheets from the command line, run as a program against the
real gunicorn server: profile, selection as a test sheet, stratified selection, a controls
file that points at a population file, and the evaluation of the completed sheet.

Each command is compared with the same request sent directly with requests, so what is
checked is that the command sends the file and the request it was given and returns the
answer exactly. The files are the project's example export of Harbour Lane Provisions Ltd
(fictional).
"""

from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
from collections.abc import Iterator, Mapping
from decimal import Decimal
from pathlib import Path
from typing import Any

import openpyxl
import pytest
import requests

from tests.functional.servers import ROOT, running_server

pytestmark = pytest.mark.functional

# ``python -m sampling_client`` is the command (the same main as the installed script), run
# from the project folder so that it is this tree's code.
COMMAND = [sys.executable, "-m", "sampling_client"]
ORDERS = ROOT / "examples" / "harbour-lane-purchase-orders.csv"
RUN_SECONDS = 300.0  # only keeps a hung run from hanging the suite
ATTRIBUTES = ("approved before release", "three-way match")
FILE = {"id_column": "doc_no", "amount_column": "amount"}
SEED = "harbour-lane-2026-q3"


@pytest.fixture(scope="module")
def url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    with running_server(tmp_path_factory.mktemp("cli-files")) as server:
        yield server.url


@pytest.fixture(scope="module")
def work(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("cli-files-work")
    (folder / "exports").mkdir()
    (folder / "exports" / "orders.csv").write_bytes(ORDERS.read_bytes())
    (folder / "controls.csv").write_text(
        "control_id,file,id_column,amount_column,population_size,sample_size,seed\n"
        f"HLP-PO-01,exports/orders.csv,doc_no,amount,,6,{SEED}\n"
        "HLP-BR-01,,,,12,2,hlp-2026-11-bank\n", encoding="utf-8")
    return folder


def commands(work: Path) -> dict[str, list[str]]:
    file_flags = ["--file", str(ORDERS), "--id-column", "doc_no", "--amount-column", "amount"]
    return {
        "profile": ["profile", *file_flags, "--control-total", "56192.76", "--control-count",
                    "60", "--strata", "3", "--top-threshold", "3000", "--json"],
        "sheet": ["selection", *file_flags, "--sample-size", "12", "--seed", SEED,
                  "--attributes", ATTRIBUTES[0], "--attributes", ATTRIBUTES[1],
                  "--accept", "xlsx", "--output", str(work / "sheet.xlsx")],
        "strata": ["stratified-selection", *file_flags, "--strata-bands", '["500"]',
                   "--strata-top-threshold", "3000", "--strata-allocation", "neyman",
                   "--sample-size", "10", "--seed", SEED, "--json"],
        "controls": ["selection", "--controls", str(work / "controls.csv"), "--items-out",
                     str(work / "items.csv"), "--csv"],
    }


def _start(argv: list[str], url: str) -> subprocess.Popen[bytes]:
    env = {**os.environ, "ATTRIBUTE_SAMPLING_URL": url}
    env.pop("ATTRIBUTE_SAMPLING_API_KEY", None)
    return subprocess.Popen([*COMMAND, *argv], env=env, cwd=ROOT, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)


def _finish(argv: list[str], process: subprocess.Popen[bytes]
            ) -> subprocess.CompletedProcess[bytes]:
    try:
        out, err = process.communicate(timeout=RUN_SECONDS)
    except subprocess.TimeoutExpired:
        process.kill()
        out, err = process.communicate()
    return subprocess.CompletedProcess(argv, process.returncode, out, err)


Runs = dict[str, subprocess.CompletedProcess[bytes]]


@pytest.fixture(scope="module")
def runs(url: str, work: Path) -> Runs:
    """The commands of this module, run side by side (each loads the schemas first)."""
    started = {name: (argv, _start(argv, url)) for name, argv in commands(work).items()}
    return {name: _finish(argv, process) for name, (argv, process) in started.items()}


def _direct(url: str, path: str, request: Mapping[str, Any],
            accept: str = "application/json") -> requests.Response:
    with ORDERS.open("rb") as handle:
        answer = requests.post(f"{url}{path}", headers={"Accept": accept}, timeout=30,
                               files={"file": (ORDERS.name, handle),
                                      "request": (None, json.dumps(request),
                                                  "application/json")})
    assert answer.status_code == 200, answer.text
    return answer


def test_profile_is_the_services_answer_and_reconciles(runs: Runs, url: str) -> None:
    done = runs["profile"]
    assert done.returncode == 0, done.stderr
    answer = json.loads(done.stdout)
    direct = _direct(url, "/v1/populations/profile", {
        "population": {"file": FILE}, "control_total": "56192.76", "control_count": 60,
        "strata": 3, "top_threshold": "3000"}).json()
    assert answer == direct
    # The total computed apart, with the csv and decimal modules.
    with ORDERS.open(encoding="utf-8-sig", newline="") as handle:
        total = sum((Decimal(row["amount"].replace(",", "")) for row in csv.DictReader(handle)),
                    Decimal(0))
    assert Decimal(answer["amounts"]["total"]) == total
    assert answer["reconciliation"]["reconciles"] is True


def test_the_test_sheet_holds_the_selection(runs: Runs, url: str, work: Path) -> None:
    done = runs["sheet"]
    assert (done.returncode, done.stdout) == (0, b""), done.stderr
    chosen = _direct(url, "/v1/selection", {"population": {"file": FILE}, "sample_size": 12,
                                            "seed": SEED}).json()
    rows = list(openpyxl.load_workbook(work / "sheet.xlsx", read_only=True)["Tests"]
                .iter_rows(values_only=True))
    item = rows[0].index("item")
    assert [row[item] for row in rows[1:]] == chosen["items"]


def test_stratified_selection_is_the_services_answer(runs: Runs, url: str) -> None:
    done = runs["strata"]
    assert done.returncode == 0, done.stderr
    direct = _direct(url, "/v1/populations/stratified-selection", {
        "population": {"file": FILE}, "sample_size": 10, "seed": SEED,
        "strata": {"bands": ["500"], "top_threshold": "3000", "allocation": "neyman"}}).json()
    assert json.loads(done.stdout) == direct


def test_a_control_that_points_at_a_file_selects_from_it(runs: Runs, url: str,
                                                         work: Path) -> None:
    done = runs["controls"]
    assert done.returncode == 0, done.stderr
    rows = {row["control_id"]: row for row in csv.DictReader(
        io.StringIO(done.stdout.decode("utf-8-sig")))}
    assert rows["HLP-PO-01"]["population_size"] == "60"
    items = list(csv.DictReader(io.StringIO((work / "items.csv").read_text("utf-8-sig"))))
    direct = _direct(url, "/v1/selection", {"population": {"file": FILE}, "sample_size": 6,
                                            "seed": SEED}).json()
    assert [r["item"] for r in items if r["control_id"] == "HLP-PO-01"] == direct["items"]
    assert [r["item"] for r in items if r["control_id"] == "HLP-BR-01"] == ["10", "3"]


def test_the_completed_sheet_evaluates_as_its_counts_do(runs: Runs, url: str,
                                                        work: Path) -> None:
    assert runs["sheet"].returncode == 0, runs["sheet"].stderr
    book = openpyxl.load_workbook(work / "sheet.xlsx")
    tests = book["Tests"]
    header = [cell.value for cell in tests[1]]
    column = {name: header.index(name) + 1 for name in header}
    for row in range(2, tests.max_row + 1):
        tests.cell(row, column[f"{ATTRIBUTES[0]}: result"], "passed")
        tests.cell(row, column[f"{ATTRIBUTES[1]}: result"],
                   "deviation" if tests.cell(row, column["draw"]).value == 3 else "passed")
    book.save(work / "completed.xlsx")
    argv = ["evaluation", "--test-sheet", str(work / "completed.xlsx"), "--tolerable-rates",
            json.dumps({a: 0.1 for a in ATTRIBUTES}), "--json"]
    done = _finish(argv, _start(argv, url))
    assert done.returncode == 0, done.stderr
    evaluations = json.loads(done.stdout)["evaluations"]
    for evaluation, deviations in zip(evaluations, (0, 1), strict=True):
        plain = requests.post(f"{url}/v1/evaluation", timeout=30, json={
            "sample_size": 12, "deviations": deviations, "tolerable_rate": 0.1,
            "population": {"size": 60}}).json()
        assert {k: evaluation[k] for k in plain} == plain
