"""The ``attribute-sampling`` command, run as a program, against the real gunicorn server."""

from __future__ import annotations

import csv
import io
import json
import os
import re
import signal
import subprocess
import sys
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
import requests

from service.sampling.attributes import size_sample
from service.sampling.wording import CAUTION
from tests.functional.servers import ROOT, START_SECONDS, free_port, running_server

pytestmark = pytest.mark.functional

CLI = Path(sys.executable).parent / "attribute-sampling"
EXAMPLE = ROOT / "examples" / "month-end-controls.csv"
RUN_SECONDS = 300.0  # only keeps a hung run from hanging the suite (a loaded machine is slow)


@pytest.fixture(scope="module")
def url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    assert CLI.exists(), f"{CLI} is missing: install the package (pip install -e .)"
    with running_server(tmp_path_factory.mktemp("cli")) as server:
        yield server.url


# Harbour Lane Provisions Ltd (fictional): month-end selections, one without a seed.
SELECTIONS = ("control_id,population_size,sample_size,seed\n"
              "HLP-BR-01,12,2,hlp-2026-11-bank\n"
              "HLP-GRN-02,400,5,\n")


@pytest.fixture(scope="module")
def work(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("cli-files")
    (folder / "selections.csv").write_text(SELECTIONS, encoding="utf-8")
    return folder


def commands(down_url: str, work: Path) -> dict[str, list[str]]:
    """The command lines this module checks, by name."""
    return {
        "table": ["sample-size", "--tolerable-rate", "0.05", "--expected-rate", "0.01",
                  "--confidence", "0.95", "--population-size", "4200"],
        "json": ["sample-size", "--tolerable-rate", "0.05", "--population-size", "4200",
                 "--json"],
        "evaluation": ["evaluation", "--sample-size", "93", "--deviations", "1",
                       "--tolerable-rate", "0.05", "--population-size", "4200"],
        "selection": ["selection", "--population-ranges", "10001-14200", "--population-exclude",
                      "10007,10233", "--sample-size", "60", "--seed", "northwind-2026-q3",
                      "--csv"],
        "month_end_csv": ["sample-size", "--controls", str(EXAMPLE), "--csv"],
        "refused": ["sample-size", "--tolerable-rate", "5", "--expected-rate", "0.01"],
        "unreachable": ["sample-size", "--tolerable-rate", "0.05", "--retries", "0",
                        "--url", down_url],
        "usage": ["sample-size", "--tolerable-rate", "5%"],
        "selections": ["selection", "--controls", str(work / "selections.csv"), "--items-out",
                       str(work / "items.csv"), "--csv"],
    }


@pytest.fixture(scope="module")
def down_url() -> str:
    return f"http://127.0.0.1:{free_port()}"  # nothing listens there


@pytest.fixture(scope="module")
def runs(url: str, down_url: str, work: Path) -> dict[str, subprocess.CompletedProcess[bytes]]:
    """Every command of this module, run as a program, all started at once.

    Each run loads the service's schemas before it sends anything (a couple of seconds of
    CPU), so they run side by side rather than one after the other.
    """
    env = {**os.environ, "ATTRIBUTE_SAMPLING_URL": url}
    env.pop("ATTRIBUTE_SAMPLING_API_KEY", None)
    started = {
        name: (argv, subprocess.Popen([str(CLI), *argv], env=env, cwd=ROOT,
                                      stdout=subprocess.PIPE, stderr=subprocess.PIPE))
        for name, argv in commands(down_url, work).items()
    }
    done = {}
    for name, (argv, process) in started.items():
        try:
            out, err = process.communicate(timeout=RUN_SECONDS)
        except subprocess.TimeoutExpired:
            process.kill()
            out, err = process.communicate()
        done[name] = subprocess.CompletedProcess(argv, process.returncode, out, err)
    return done


Runs = dict[str, subprocess.CompletedProcess[bytes]]


def test_sample_size_table(runs: Runs) -> None:
    done = runs["table"]
    assert done.returncode == 0, done.stderr
    lines = done.stdout.decode().splitlines()
    assert lines[0] == "Sample size for a test of controls"
    # AICPA Audit Guide "Audit Sampling", table A-1 (recalled from memory): 93 items, 1
    # deviation allowed; a population of 4,200 does not change it.
    assert any(re.fullmatch(r"Sample size +93", line) for line in lines)
    assert any(re.fullmatch(r"Allowed deviations +1", line) for line in lines)
    assert " ".join(" ".join(lines[-3:]).split()).endswith(CAUTION)


def test_json_is_the_services_answer_exactly(runs: Runs, url: str) -> None:
    done = runs["json"]
    assert done.returncode == 0, done.stderr
    direct = requests.post(f"{url}/v1/sample-size", timeout=10,
                           json={"population": {"size": 4200}, "tolerable_rate": 0.05})
    assert done.stdout == direct.content + b"\n"


LATER = {
    "staged": ["staged-plan", "--tolerable-rate", "0.05", "--expected-rate", "0.01",
               "--max-stages", "3", "--json"],
    "sequence": ["sequence-evaluation", "--results", "[0, 0, 1, 0]", "--json"],
}


@pytest.fixture(scope="module")
def later_runs(url: str, runs: Runs) -> Runs:
    """The commands of the newer endpoints, run once the first batch is done (not beside
    it, so as not to slow it down)."""
    env = {**os.environ, "ATTRIBUTE_SAMPLING_URL": url}
    env.pop("ATTRIBUTE_SAMPLING_API_KEY", None)
    started = {name: subprocess.Popen([str(CLI), *argv], env=env, cwd=ROOT,
                                      stdout=subprocess.PIPE, stderr=subprocess.PIPE)
               for name, argv in LATER.items()}
    done = {}
    for name, process in started.items():
        try:
            out, err = process.communicate(timeout=RUN_SECONDS)
        except subprocess.TimeoutExpired:
            process.kill()
            out, err = process.communicate()
        done[name] = subprocess.CompletedProcess(LATER[name], process.returncode, out, err)
    return done


@pytest.mark.parametrize(("name", "path", "body"), [
    ("staged", "/v1/plans/staged",
     {"tolerable_rate": 0.05, "expected_rate": 0.01, "max_stages": 3}),
    ("sequence", "/v1/evaluation/sequence", {"results": [0, 0, 1, 0]}),
])
def test_the_staged_and_sequence_endpoints_answer_on_the_command_line(
    later_runs: Runs, url: str, name: str, path: str, body: dict[str, object]
) -> None:
    done = later_runs[name]
    assert done.returncode == 0, done.stderr
    direct = requests.post(f"{url}{path}", json=body, timeout=30)
    assert json.loads(done.stdout) == direct.json()


def test_evaluation_table(runs: Runs) -> None:
    done = runs["evaluation"]
    assert done.returncode == 0, done.stderr
    text = done.stdout.decode()
    assert re.search(r"^Conclusion +supports_reliance$", text, re.MULTILINE)
    assert re.search(r"^Deviations +1$", text, re.MULTILINE)


def test_selection_csv_is_the_services_csv(runs: Runs, url: str) -> None:
    done = runs["selection"]
    assert done.returncode == 0, done.stderr
    direct = requests.post(f"{url}/v1/selection", headers={"Accept": "text/csv"}, timeout=10,
                           json={"population": {"ranges": [{"first": 10001, "last": 14200}],
                                                "exclude": [10007, 10233]},
                                 "sample_size": 60, "seed": "northwind-2026-q3"})
    assert done.stdout == direct.content
    header, records, _pull_list = done.stdout.split(b"\r\n\r\n")
    assert header.startswith(b"\xef\xbb\xbfselection,")
    assert records.split(b"\r\n")[:2] == [b"records in draw order", b"draw,item,position"]
    assert records.count(b"\r\n") == 61  # the heading, the column names and 60 records


def test_the_month_end_batch_of_forty_controls(runs: Runs) -> None:
    done = runs["month_end_csv"]
    assert done.returncode == 0, done.stderr
    text = done.stdout.decode("utf-8")
    assert text.startswith(
        "\ufeffcontrol_id,status,sample_size,allowed_deviations,warnings,problem\r\n")
    answers = list(csv.DictReader(io.StringIO(text.removeprefix("\ufeff"))))
    with EXAMPLE.open(encoding="utf-8", newline="") as handle:
        controls = list(csv.DictReader(handle))
    assert len(answers) == len(controls) == 40
    for control, answer in zip(controls, answers, strict=True):
        assert answer["control_id"] == control["control_id"]
        assert answer["status"] == "200"
        # Each row against the computation core called directly with the row's values.
        plan = size_sample(
            float(control["tolerable_rate"]),
            float(control["expected_rate"]),
            float(control["confidence"]),
            int(control["population_size"]) if control["population_size"] else None,
            control["method"] or None,
        )
        assert (int(answer["sample_size"]), int(answer["allowed_deviations"])) == (
            plan.sample_size, plan.allowed_deviations), control["control_id"]


def test_the_month_end_rows_carry_the_services_warnings(runs: Runs, url: str) -> None:
    text = runs["month_end_csv"].stdout.decode("utf-8")
    answers = list(csv.DictReader(io.StringIO(text.removeprefix("\ufeff"))))
    with EXAMPLE.open(encoding="utf-8", newline="") as handle:
        operations = [{"id": row.pop("control_id"), "operation": "sample-size", "request": {
            "tolerable_rate": float(row["tolerable_rate"]),
            "expected_rate": float(row["expected_rate"]),
            "confidence": float(row["confidence"]),
            **({"population": {"size": int(row["population_size"]),
                               "label": row["population_label"]}}
               if row["population_size"] else {}),
            **({"method": row["method"]} if row["method"] else {})}}
            for row in csv.DictReader(handle)]
    direct = requests.post(f"{url}/v1/batch", json={"operations": operations}, timeout=30)
    assert direct.status_code == 200
    expected = [" | ".join(r["result"]["warnings"]) for r in direct.json()["results"]]
    assert any(expected)
    assert [answer["warnings"] for answer in answers] == expected


def test_selections_write_every_item_and_say_the_generated_seed(
    runs: Runs, url: str, work: Path
) -> None:
    done = runs["selections"]
    assert done.returncode == 0, done.stderr
    err = done.stderr.decode()
    (seed,) = re.findall(r"warning: control HLP-GRN-02: no seed was given, so the service "
                         r"generated (\"[^\"]*\"); record it", err)
    rows = {row["control_id"]: row for row in csv.DictReader(
        io.StringIO(done.stdout.decode("utf-8-sig")))}
    assert (rows["HLP-GRN-02"]["seed"], rows["HLP-GRN-02"]["seed_generated"]) == (
        json.loads(seed), "true")
    items = list(csv.DictReader(io.StringIO((work / "items.csv").read_text("utf-8-sig"))))
    for control, size, n, chosen_seed in (("HLP-BR-01", 12, 2, "hlp-2026-11-bank"),
                                          ("HLP-GRN-02", 400, 5, json.loads(seed))):
        direct = requests.post(f"{url}/v1/selection", timeout=10, json={
            "population": {"size": size}, "sample_size": n, "seed": chosen_seed}).json()
        assert [(r["draw"], r["item"], r["position"]) for r in items
                if r["control_id"] == control] == [
            (str(draw), str(item), str(position)) for draw, (item, position)
            in enumerate(zip(direct["items"], direct["positions"], strict=True), 1)]


def test_refused_input_exits_3_naming_the_field(runs: Runs) -> None:
    done = runs["refused"]
    assert done.returncode == 3
    assert done.stdout == b""
    error = done.stderr.decode()
    assert "the service refused the request (HTTP 422 Invalid input)" in error
    assert "--tolerable-rate (tolerable_rate): must be a fraction strictly between 0 and 1; " \
        "got 5, which looks like a percentage" in error


def test_an_unreachable_service_exits_4(runs: Runs, down_url: str) -> None:
    done = runs["unreachable"]
    assert done.returncode == 4
    assert f"cannot reach the attribute sampling service at {down_url} (connection refused" \
        in done.stderr.decode()


def test_a_usage_error_exits_2(runs: Runs) -> None:
    done = runs["usage"]
    assert done.returncode == 2
    assert "argument --tolerable-rate: '5%' is not a number (rates are fractions: 5% is 0.05)" \
        in done.stderr.decode()


def test_serve_starts_a_server_that_answers_and_stops_on_sigterm(tmp_path: Path) -> None:
    port = free_port()
    env = {k: v for k, v in os.environ.items() if k not in ("HOST", "PORT", "WEB_CONCURRENCY")}
    with (tmp_path / "serve.log").open("wb") as log:
        process = subprocess.Popen([str(CLI), "serve", "--host", "127.0.0.1", "--port", str(port),
                                    "--workers", "1"], env=env, stdout=log,
                                   stderr=subprocess.STDOUT, cwd=tmp_path)
        try:
            deadline = time.monotonic() + START_SECONDS
            while True:
                assert process.poll() is None, (tmp_path / "serve.log").read_text()
                try:
                    health = requests.get(f"http://127.0.0.1:{port}/v1/health", timeout=1)
                    break
                except requests.ConnectionError:
                    assert time.monotonic() < deadline, "serve did not answer in time"
                    time.sleep(0.1)
            assert health.json()["status"] == "ok"
            process.send_signal(signal.SIGTERM)
            assert process.wait(timeout=30) == 0
        finally:
            if process.poll() is None:
                process.kill()
                process.wait(timeout=10)
