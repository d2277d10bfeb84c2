"""Population files and test sheets from the command line, run as a program against the
real gunicorn server.

The commands are the README's own (its section "Population files from the command line
and Python"): each ``$`` line of its ``console`` blocks is run with bash, ``attribute-sampling``
being this tree's ``python -m sampling_client``, and must print what the README shows under
it. A ``$ cat FILE`` of a file that no command made is the README showing an input: the
file is written from it. The completed test sheet is filled in as the README says, with
openpyxl. Beside them, two commands whose ``--json`` answer must be exactly what the same
request sent directly with requests gets, and the files the commands wrote are checked
against direct requests too. The files are the project's example export of Harbour Lane
Provisions Ltd (fictional).
"""

from __future__ import annotations

import csv
import io
import json
import os
import re
import shlex
import subprocess
import sys
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path
from typing import Any

import openpyxl
import pytest
import requests

from tests.functional.servers import ROOT, running_server
from tests.sheet_results import fill_attribute_results

pytestmark = pytest.mark.functional

README = ROOT / "README.md"
SECTION = "### Population files from the command line and Python"
# The command, as this tree's code: PYTHONPATH puts the tree first wherever it runs.
COMMAND = f"{shlex.quote(sys.executable)} -m sampling_client"
ORDERS = ROOT / "examples" / "harbour-lane-purchase-orders.csv"
EXPORT = "exports/hlp-purchase-orders-2026-q3.csv"  # the README's copy of the example export
SHEET, COMPLETED = "harbour-lane-file-sheet.xlsx", "harbour-lane-file-completed.xlsx"
RUN_SECONDS = 300.0  # only keeps a hung run from hanging the suite
ATTRIBUTES = ("approved before release", "three-way match")
FILE = {"id_column": "doc_no", "amount_column": "amount"}
SEED = "harbour-lane-2026-q3"


@dataclass(frozen=True)
class Shown:
    """One ``$`` command of the README and the output it shows under it."""

    command: str
    output: str

    @property
    def shows_an_input(self) -> bool:
        return self.command.startswith("cat ")


def readme_commands() -> list[Shown]:
    """The ``$`` commands of the section's ``console`` blocks, in order."""
    text = README.read_text(encoding="utf-8")
    start = text.index(SECTION)
    section = text[start:text.index("\n## ", start)]
    found: list[Shown] = []
    for block in re.findall(r"```console\n(.*?)```", section, re.DOTALL):
        lines = block.splitlines()
        index = 0
        while index < len(lines):
            command = lines[index].removeprefix("$ ")
            while command.endswith("\\"):
                index += 1
                command = command[:-1] + " " + lines[index].strip()
            index += 1
            output = []
            while index < len(lines) and not lines[index].startswith("$ "):
                output.append(lines[index])
                index += 1
            found.append(Shown(command, "\n".join(output)))
    return found


COMMANDS = readme_commands()
# Files the commands write; a ``$ cat`` of any other file shows an input.
WRITTEN = {name for shown in COMMANDS
           for name in re.findall(r"--(?:output|items-out) (\S+)", shown.command)}
INPUTS = [s for s in COMMANDS if s.shows_an_input and s.command[4:] not in WRITTEN]
CHECKED = [s for s in COMMANDS if s not in INPUTS]


@pytest.fixture(scope="module")
def url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    with running_server(tmp_path_factory.mktemp("cli-files")) as server:
        yield server.url


@pytest.fixture(scope="module")
def work(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("cli-files-work")
    (folder / "examples").symlink_to(ROOT / "examples")
    (folder / EXPORT).parent.mkdir()
    (folder / EXPORT).write_bytes(ORDERS.read_bytes())
    return folder


def _start(command: str, url: str, work: Path) -> subprocess.Popen[bytes]:
    env = {**os.environ, "ATTRIBUTE_SAMPLING_URL": url,
           "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    env.pop("ATTRIBUTE_SAMPLING_API_KEY", None)
    shell = command.replace("attribute-sampling ", f"{COMMAND} ")
    return subprocess.Popen(["bash", "-c", shell], env=env, cwd=work, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)


def _finish(command: str, process: subprocess.Popen[bytes]
            ) -> subprocess.CompletedProcess[bytes]:
    try:
        out, err = process.communicate(timeout=RUN_SECONDS)
    except subprocess.TimeoutExpired:
        process.kill()
        out, err = process.communicate()
    return subprocess.CompletedProcess(command, process.returncode, out, err)


def _complete_the_sheet(work: Path) -> None:
    """What the README's reviewer does: every item passed both attributes, except draw 7,
    a deviation for "three-way match"."""
    fill_attribute_results(work / SHEET, work / COMPLETED, ATTRIBUTES, deviation_draw=7)


# Two commands checked against the same requests sent directly.
FILE_FLAGS = f"--file {ORDERS} --id-column doc_no --amount-column amount"
DIRECT = {
    "profile": f"attribute-sampling profile {FILE_FLAGS} --control-total 56192.76 "
               "--control-count 60 --strata 3 --top-threshold 3000 --json",
    "strata": f"attribute-sampling stratified-selection {FILE_FLAGS} --strata-bands '[\"500\"]' "
              f"--strata-top-threshold 3000 --strata-allocation neyman --sample-size 10 "
              f"--seed {SEED} --json",
}

Runs = dict[str, subprocess.CompletedProcess[bytes]]


@pytest.fixture(scope="module")
def runs(url: str, work: Path) -> Runs:
    """Every command, by its text: the README's that need nothing made by another and the
    direct ones side by side (each loads the schemas first), then the rest in order."""
    for shown in INPUTS:
        (work / shown.command[4:]).write_text(shown.output + "\n", encoding="utf-8")
    later = [s for s in CHECKED if s.shows_an_input or "--test-sheet" in s.command]
    first = [*[s.command for s in CHECKED if s not in later], *DIRECT.values()]
    started = {command: _start(command, url, work) for command in first}
    done = {command: _finish(command, process) for command, process in started.items()}
    _complete_the_sheet(work)
    for shown in later:
        done[shown.command] = _finish(shown.command, _start(shown.command, url, work))
    return done


def test_the_readme_shows_the_commands() -> None:
    assert [s.command for s in INPUTS] == ["cat hlp-month-end.csv", "cat ledgers.csv"]
    named = " ".join(shown.command for shown in CHECKED)
    for part in ("profile --file", "selection --file", "--xlsx --output",
                 "evaluation --test-sheet", "stratified-selection --file",
                 "selection --controls", "profile --controls"):
        assert part in named


@pytest.mark.parametrize("shown", CHECKED, ids=lambda s: s.command[:60])
def test_each_readme_command_prints_what_the_readme_shows(runs: Runs, shown: Shown) -> None:
    done = runs[shown.command]
    assert done.returncode == 0, done.stderr.decode()
    got = [line.rstrip() for line in
           done.stdout.decode("utf-8").removeprefix("\ufeff").strip("\n").splitlines()]
    assert got == [line.rstrip() for line in shown.output.strip("\n").splitlines()]


def _direct(url: str, path: str, request: Mapping[str, Any]) -> dict[str, Any]:
    with ORDERS.open("rb") as handle:
        answer = requests.post(f"{url}{path}", timeout=30, files={
            "file": (ORDERS.name, handle),
            "request": (None, json.dumps(request), "application/json")})
    assert answer.status_code == 200, answer.text
    document: dict[str, Any] = answer.json()
    return document


def test_profile_is_the_services_answer_and_reconciles(runs: Runs, url: str) -> None:
    done = runs[DIRECT["profile"]]
    assert done.returncode == 0, done.stderr
    answer = json.loads(done.stdout)
    assert answer == _direct(url, "/v1/populations/profile", {
        "population": {"file": FILE}, "control_total": "56192.76", "control_count": 60,
        "strata": 3, "top_threshold": "3000"})
    # The total computed apart, with the csv and decimal modules.
    with ORDERS.open(encoding="utf-8-sig", newline="") as handle:
        total = sum((Decimal(row["amount"].replace(",", "")) for row in csv.DictReader(handle)),
                    Decimal(0))
    assert Decimal(answer["amounts"]["total"]) == total
    assert answer["reconciliation"]["reconciles"] is True


def test_stratified_selection_is_the_services_answer(runs: Runs, url: str) -> None:
    done = runs[DIRECT["strata"]]
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout) == _direct(url, "/v1/populations/stratified-selection", {
        "population": {"file": FILE}, "sample_size": 10, "seed": SEED,
        "strata": {"bands": ["500"], "top_threshold": "3000", "allocation": "neyman"}})


def test_the_test_sheet_holds_the_selection(runs: Runs, url: str, work: Path) -> None:
    chosen = _direct(url, "/v1/selection", {
        "population": {"file": {**FILE, "filters": [
            {"column": "amount", "comparison": ">", "value": 0}]}},
        "sample_size": 20, "seed": SEED})
    # A read-only workbook keeps its file open until closed.
    book = openpyxl.load_workbook(work / SHEET, read_only=True)
    try:
        rows = list(book["Tests"].iter_rows(values_only=True))
    finally:
        book.close()
    item = rows[0].index("item")
    assert [row[item] for row in rows[1:]] == chosen["items"]


def test_a_control_that_points_at_a_file_selects_from_it(runs: Runs, url: str,
                                                         work: Path) -> None:
    (items_file,) = work.glob("*-items.csv")
    items = list(csv.DictReader(io.StringIO(items_file.read_text("utf-8-sig"))))
    with (work / "hlp-month-end.csv").open(encoding="utf-8", newline="") as handle:
        (control, *_) = [row for row in csv.DictReader(handle) if row["file"]]
    direct = _direct(url, "/v1/selection", {
        "population": {"file": FILE}, "sample_size": int(control["sample_size"]),
        "seed": control["seed"]})
    assert [r["item"] for r in items if r["control_id"] == control["control_id"]] == \
        direct["items"]
