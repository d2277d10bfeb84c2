"""The command line end to end in process: the app answers through a fake transport."""

from __future__ import annotations

import csv
import io
import json
import os
import re
from pathlib import Path
from typing import Any

import pytest
import requests

from sampling_client import cli
from sampling_client.api import (
    AuthenticationFailed,
    RequestRejected,
    SamplingClient,
    ServiceUnavailable,
    UnexpectedAnswer,
)
from service.sampling.wording import CAUTION
from tests.unit.client.fakes import AppAdapter, ScriptedSession

ROOT = Path(__file__).resolve().parents[3]
EXAMPLE = ROOT / "examples" / "month-end-controls.csv"


def scripted(monkeypatch: pytest.MonkeyPatch, *script: Any) -> ScriptedSession:
    session = ScriptedSession(list(script))

    def make(*args: Any, **kwargs: Any) -> SamplingClient:
        return SamplingClient(*args, session=session, sleep=lambda s: None,  # type: ignore[arg-type]
                              **kwargs)

    monkeypatch.setattr(cli, "SamplingClient", make)
    return session


def run(capsys: pytest.CaptureFixture[bytes], *argv: str) -> tuple[int, str, str]:
    status = cli.main(list(argv))
    out, err = capsys.readouterr()
    return status, out.decode("utf-8"), err.decode("utf-8")


@pytest.fixture
def capsys(capsysbinary: pytest.CaptureFixture[bytes]) -> pytest.CaptureFixture[bytes]:
    # The command writes bytes to standard output, so capture bytes.
    return capsysbinary


def test_sample_size_prints_a_table(through_app: requests.Session, adapter: AppAdapter,
                                    capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, err = run(capsys, "sample-size", "--tolerable-rate", "0.05", "--expected-rate",
                           "0.01", "--confidence", "0.95", "--population-size", "4200")
    assert status == 0
    assert "attribute-sampling" not in err  # the app's own log lines go to stderr too
    assert re.search(r"^Sample size +93$", out, re.MULTILINE)
    assert " ".join(out.split()).endswith(CAUTION)
    (sent,) = adapter.sent
    assert json.loads(sent.body or b"") == {"population": {"size": 4200}, "tolerable_rate": 0.05,
                                            "expected_rate": 0.01, "confidence": 0.95}
    assert adapter.timeouts == [10.0]


def test_json_is_printed_exactly(through_app: requests.Session, adapter: AppAdapter,
                                 capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, _ = run(capsys, "evaluation", "--sample-size", "59", "--deviations", "0",
                         "--json", "--timeout", "3")
    assert status == 0
    direct = adapter.client.post("/v1/evaluation", json={"sample_size": 59, "deviations": 0})
    assert out == direct.get_data(as_text=True) + "\n"
    assert adapter.timeouts == [3.0]


def test_selection_csv_is_written_byte_for_byte(through_app: requests.Session, adapter: AppAdapter,
                                                capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, _ = run(capsys, "selection", "--population-size", "500", "--sample-size", "3",
                         "--seed", "nt", "--csv")
    assert status == 0
    direct = adapter.client.post("/v1/selection", headers={"Accept": "text/csv"},
                                 json={"population": {"size": 500}, "sample_size": 3,
                                       "seed": "nt"})
    assert out.encode("utf-8") == direct.data
    assert out.startswith("\ufeffselection,Selection of sample items\r\n")
    assert "\r\nrecords in draw order\r\ndraw,item,position\r\n" in out


def test_markdown(through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, _ = run(capsys, "sample-size", "--tolerable-rate", "0.05", "--markdown")
    assert status == 0
    assert out.startswith("### Sample size for a test of controls")
    assert out.rstrip().endswith(f"> {CAUTION}")


def test_a_refused_value_exits_3_naming_the_flag_and_the_field(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, err = run(capsys, "sample-size", "--tolerable-rate", "5")
    assert status == cli.EXIT_REFUSED == 3
    assert out == ""
    assert "refused the request (HTTP 422 Invalid input)" in err
    assert "--tolerable-rate (tolerable_rate): must be a fraction strictly between 0 and 1; got 5" \
        in err


def test_a_nested_field_is_named_by_its_flag(through_app: requests.Session,
                                             capsys: pytest.CaptureFixture[bytes]) -> None:
    status, _, err = run(capsys, "selection", "--population-items", "a", "--population-items",
                         "a", "--sample-size", "1")
    assert status == 3
    assert "--population-items (population.items" in err


def test_a_refused_entry_of_an_items_file_is_named_by_its_line(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    # Harbour Lane Provisions Ltd (fictional) goods-received notes: a blank line between
    # the second and the fourth note, and blank lines after the last one.
    path = tmp_path / "grn.txt"
    path.write_text("HLP-GRN-0001\nHLP-GRN-0002\n\nHLP-GRN-0004\n\n\n", encoding="utf-8")
    status, out, err = run(capsys, "selection", "--items-file", str(path), "--sample-size", "2",
                           "--seed", "hlp-2026-11")
    assert (status, out) == (3, "")
    # The service names the entry by its 0-based index; the file's own line is 1-based.
    assert json.loads(adapter.sent[0].body or b"")["population"]["items"][2] == ""
    assert f"  line 3 of {path} (population.items[2]): identifiers must not be empty" in err
    assert "items[5]" not in err and "items[4]" not in err  # the trailing blanks were not sent

    path.write_text("HLP-GRN-0001\nHLP-GRN-0002\nHLP-GRN-0004\n\n", encoding="utf-8")
    status, out, _ = run(capsys, "selection", "--items-file", str(path), "--sample-size", "2",
                         "--seed", "hlp-2026-11", "--json")
    assert status == 0
    assert json.loads(out)["population_size"] == 3


def test_repeated_entries_of_an_items_file_are_named_by_their_lines(
    through_app: requests.Session, tmp_path: Path, capsys: pytest.CaptureFixture[bytes]
) -> None:
    # Harbour Lane Provisions Ltd (fictional) invoices, two of them listed twice.
    path = tmp_path / "invoices.txt"
    path.write_text("HLP-INV-7\nHLP-INV-8\nHLP-INV-7\nHLP-INV-9\nHLP-INV-8\nHLP-INV-7\n\n",
                    encoding="utf-8")
    status, _, err = run(capsys, "selection", "--items-file", str(path), "--sample-size", "2",
                         "--seed", "hlp-2026-11-inv")
    assert status == 3
    lines = err.splitlines()
    (at,) = [k for k, line in enumerate(lines) if line.startswith(f"  {path} (population.items)")]
    assert lines[at + 1:at + 3] == ["    'HLP-INV-7' is on lines 1, 3 and 6",
                                    "    'HLP-INV-8' is on lines 2 and 5"]


def test_a_missing_required_field_is_the_services_message(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, _, err = run(capsys, "sample-size")
    assert status == 3
    assert "--tolerable-rate (tolerable_rate):" in err


def test_the_month_end_file_is_one_batch(through_app: requests.Session, adapter: AppAdapter,
                                         capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, err = run(capsys, "sample-size", "--controls", str(EXAMPLE))
    assert status == 0
    assert "attribute-sampling" not in err
    (sent,) = adapter.sent
    assert sent.url.endswith("/v1/batch")  # type: ignore[union-attr]
    operations = json.loads(sent.body or b"")["operations"]
    assert len(operations) == 40
    assert {op["operation"] for op in operations} == {"sample-size"}
    lines = out.splitlines()
    assert lines[2].split() == ["NT-P2P-01", "93", "1"]
    # NT-ITG-03 plans a Poisson (with-replacement) sample above 10% of its population: the
    # row keeps its warning.
    (warned,) = [line.split() for line in lines if line.startswith("NT-ITG-03 ")]
    assert warned[-1] == "[1]"
    assert "40 of 40 answered; 0 refused; 1 with warnings." in out
    assert "\nWarnings:\n[1] NT-ITG-03: " in out


def test_flags_apply_to_every_row(through_app: requests.Session, adapter: AppAdapter,
                                  tmp_path: Path, capsys: pytest.CaptureFixture[bytes]) -> None:
    path = tmp_path / "c.csv"
    path.write_text("control_id,tolerable_rate,population_label\nA,0.05,\nB,0.1,POs\n")
    status, _, _ = run(capsys, "sample-size", "--controls", str(path), "--confidence", "0.9",
                       "--population-size", "800")
    assert status == 0
    operations = json.loads(adapter.sent[0].body or b"")["operations"]
    assert [op["request"] for op in operations] == [
        {"population": {"size": 800}, "confidence": 0.9, "tolerable_rate": 0.05},
        {"population": {"size": 800, "label": "POs"}, "confidence": 0.9, "tolerable_rate": 0.1}]


def test_a_field_both_in_the_file_and_a_flag_is_a_usage_error(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, _, err = run(capsys, "sample-size", "--controls", str(EXAMPLE), "--confidence", "0.9")
    assert status == 2
    assert "confidence is given both on the command line and in the file" in err
    assert adapter.sent == []


def test_some_refused_rows_print_every_row_and_exit_3(
    through_app: requests.Session, tmp_path: Path, capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "c.csv"
    path.write_text("control_id,tolerable_rate,expected_rate\nA,0.05,0.01\nB,0.05,0.06\n")
    status, out, _ = run(capsys, "sample-size", "--controls", str(path))
    assert status == 3
    assert out.splitlines()[2].split()[:3] == ["A", "93", "1"]
    assert "expected_rate: expected_rate 0.06 must be below tolerable_rate 0.05" in out
    status, out, _ = run(capsys, "sample-size", "--controls", str(path), "--csv")
    assert status == 3
    assert out.splitlines()[2].startswith("B,422,,,,expected_rate:")
    status, out, _ = run(capsys, "sample-size", "--controls", str(path), "--json")
    assert status == 3
    assert [r["status"] for r in json.loads(out)["results"]] == [200, 422]


def test_a_bad_controls_file_sends_nothing_and_exits_2(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "c.csv"
    path.write_text("control_id,tolerable_rate\nA,0.05\nB,5%\n")
    status, out, err = run(capsys, "sample-size", "--controls", str(path))
    assert (status, out) == (2, "")
    assert f"{path}, line 3, column tolerable_rate: '5%' is not a number" in err
    assert adapter.sent == []


def test_a_whole_batch_refusal_names_the_file_row(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "c.csv"
    path.write_text("control_id,tolerable_rate\nA,0.05\n" + "B" * 201 + ",0.05\n")
    problem = {"title": "Invalid input", "status": 422, "detail": "…",
               "errors": {"operations[1].id": ["must be from 1 to 200 characters"]}}
    scripted(monkeypatch, (422, problem, None))
    status, _, err = run(capsys, "sample-size", "--controls", str(path))
    assert status == 3
    assert f"line 3 of {path} (control 'BBB" in err
    assert "), id: must be from 1 to 200 characters" in err


def test_markdown_is_not_offered_for_a_controls_file(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, _, err = run(capsys, "sample-size", "--controls", str(EXAMPLE), "--markdown")
    assert status == 2
    assert "--markdown is not offered with --controls" in err


def test_csv_without_a_csv_answer_needs_controls(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, _, err = run(capsys, "evaluation", "--sample-size", "9", "--deviations", "0", "--csv")
    assert status == 2
    assert "--csv for evaluation needs --controls" in err


def test_a_batch_from_a_body_file(through_app: requests.Session, tmp_path: Path,
                                  capsys: pytest.CaptureFixture[bytes]) -> None:
    path = tmp_path / "b.json"
    path.write_text(json.dumps({"operations": [
        {"id": "a", "operation": "sample-size", "request": {"tolerable_rate": 0.05}},
        {"id": "b", "operation": "evaluation", "request": {"sample_size": 5, "deviations": 9}}]}))
    status, out, _ = run(capsys, "batch", "--body", str(path))
    assert status == 3
    lines = out.splitlines()
    assert lines[2].split()[:5] == ["a", "sample-size", "200", "Sample", "size"]
    assert lines[3].split()[:3] == ["b", "evaluation", "422"]
    assert "deviations: deviations 9 must not exceed sample_size 5" in lines[3]


@pytest.mark.parametrize("text", ["[1]", "{", '{"a": NaN}'])
def test_a_body_that_is_not_a_json_object_is_a_usage_error(
    through_app: requests.Session, tmp_path: Path, text: str,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "b.json"
    path.write_text(text)
    status, _, err = run(capsys, "sample-size", "--body", str(path))
    assert status == 2
    assert f"--body {path}:" in err


def test_health_and_ready(through_app: requests.Session,
                          capsys: pytest.CaptureFixture[bytes]) -> None:
    status, out, _ = run(capsys, "health")
    assert status == 0
    assert out.splitlines()[1].split() == ["Status", "ok"]
    status, out, _ = run(capsys, "ready", "--json")
    assert (status, json.loads(out)) == (0, {"status": "ready"})


def test_a_401_exits_5_and_says_where_the_key_goes(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[bytes]
) -> None:
    problem = {"title": "Unauthorized", "status": 401, "detail": "needs a key"}
    scripted(monkeypatch, (401, problem, {"WWW-Authenticate": "Bearer"}))
    status, _, err = run(capsys, "sample-size", "--tolerable-rate", "0.05")
    assert status == cli.EXIT_AUTHENTICATION == 5
    assert "it needs an API key and none was given" in err
    assert "ATTRIBUTE_SAMPLING_API_KEY" in err


def test_the_key_comes_from_the_environment(monkeypatch: pytest.MonkeyPatch,
                                            capsys: pytest.CaptureFixture[bytes]) -> None:
    monkeypatch.setenv("ATTRIBUTE_SAMPLING_API_KEY", "nt-key")
    monkeypatch.setenv("ATTRIBUTE_SAMPLING_URL", "http://127.0.0.1:9911")
    session = scripted(monkeypatch, (200, {"status": "ok", "version": "0"}, None))
    assert run(capsys, "health")[0] == 0
    assert session.calls[0]["url"] == "http://127.0.0.1:9911/v1/health"
    assert session.calls[0]["headers"]["Authorization"] == "Bearer nt-key"


def test_an_unreachable_service_exits_4_naming_the_url(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[bytes]
) -> None:
    session = scripted(monkeypatch, *[requests.ConnectionError("[Errno 111] Connection refused")]
                       * 2)
    status, _, err = run(capsys, "sample-size", "--tolerable-rate", "0.05", "--url",
                         "http://127.0.0.1:9", "--retries", "1")
    assert status == cli.EXIT_UNAVAILABLE == 4
    assert "cannot reach the attribute sampling service at http://127.0.0.1:9" in err
    assert "'attribute-sampling serve' starts one" in err
    assert len(session.calls) == 2


@pytest.mark.parametrize("argv", [
    ["sample-size", "--tolerable-rate"],
    ["sample-size", "--tolerable", "0.05"],  # no prefix matching of flag names
    ["sample-size", "--retries", "-1"],
    ["sample-size", "--timeout", "0"],
    ["no-such-command"],
    [],
])
def test_usage_errors_exit_2(argv: list[str], capsys: pytest.CaptureFixture[bytes]) -> None:
    with pytest.raises(SystemExit) as caught:
        cli.main(argv)
    assert caught.value.code == cli.EXIT_USAGE == 2


def test_a_url_that_is_not_http_is_a_usage_error(capsys: pytest.CaptureFixture[bytes]) -> None:
    status, _, err = run(capsys, "health", "--url", "127.0.0.1:8000")
    assert status == 2
    assert "must be an http:// or https:// address" in err


@pytest.mark.parametrize(("error", "status"), [
    (AuthenticationFailed(challenge=None, key_sent=True, url="u", method="POST", status=401,
                          title="Unauthorized", detail=""), 5),
    (RequestRejected(url="u", method="POST", status=422, title="Invalid input", detail=""), 3),
    (RequestRejected(url="u", method="POST", status=413, title="Too Large", detail=""), 3),
    (ServiceUnavailable("down", url="u", status=None, attempts=4), 4),
    (ServiceUnavailable("failed", url="u", status=500, attempts=1), 4),
    (UnexpectedAnswer("html", url="u"), 4),
])
def test_exit_status_of_each_error(error: Exception, status: int) -> None:
    assert cli.exit_status(error) == status  # type: ignore[arg-type]


def test_the_exit_statuses_are_documented_in_the_help(
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    with pytest.raises(SystemExit):
        cli.main(["--help"])
    out = capsys.readouterr().out.decode()
    for code in ("0  success", "2  usage error", "3  the service refused", "4  the service could",
                 "5  the service needs an API key"):
        assert code in out


def test_serve_runs_gunicorn_with_the_service_config(
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[bytes]
) -> None:
    started: list[Any] = []

    def fake_exec(program: Any, argv: list[str]) -> None:
        started.append((str(program), argv, {k: os.environ.get(k) for k in
                                             ("HOST", "PORT", "WEB_CONCURRENCY")}))
        raise SystemExit(0)

    monkeypatch.setattr(cli.os, "execv", fake_exec)
    monkeypatch.delenv("WEB_CONCURRENCY", raising=False)
    monkeypatch.setenv("HOST", "127.0.0.1")
    monkeypatch.setenv("PORT", "8000")
    with pytest.raises(SystemExit):
        cli.main(["serve", "--port", "9123", "--workers", "3"])
    ((program, argv, env),) = started
    assert program.endswith("/gunicorn")
    assert argv[1:] == ["--config", "python:service.web.gunicorn_config", "service.wsgi:app"]
    assert env == {"HOST": "127.0.0.1", "PORT": "9123", "WEB_CONCURRENCY": "3"}


def test_serve_refuses_a_port_that_is_not_one(capsys: pytest.CaptureFixture[bytes]) -> None:
    with pytest.raises(SystemExit) as caught:
        cli.main(["serve", "--port", "70000"])
    assert caught.value.code == 2


def test_python_dash_m_is_the_same_command(monkeypatch: pytest.MonkeyPatch,
                                           capsys: pytest.CaptureFixture[bytes]) -> None:
    import runpy

    monkeypatch.setattr("sys.argv", ["python -m sampling_client", "--version"])
    with pytest.raises(SystemExit) as caught:
        runpy.run_module("sampling_client", run_name="__main__")
    assert caught.value.code == 0
    assert capsys.readouterr().out.decode().startswith("attribute-sampling ")


def test_the_service_commands_do_not_load_the_schemas(monkeypatch: pytest.MonkeyPatch) -> None:
    # serve and health are built without the operations, which load the whole service.
    monkeypatch.setattr(cli, "_operations", lambda: pytest.fail("operations were loaded"))
    parser = cli.build_parser(with_operations=False)
    assert parser.parse_args(["health"]).command == "health"
    assert parser.parse_args(["serve", "--port", "9000"]).port == 9000


def test_more_controls_than_one_batch_takes_are_sent_in_chunks(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[bytes]
) -> None:
    monkeypatch.setattr(cli.api, "MAX_BATCH_OPERATIONS", 3)  # instead of 1,000 rows
    path = tmp_path / "many.csv"
    rows = [f"NT-{i},0.05,{'0.01' if i % 2 else '0'}" for i in range(7)]
    path.write_text("control_id,tolerable_rate,expected_rate\n" + "\n".join(rows) + "\n")
    status, out, _ = run(capsys, "sample-size", "--controls", str(path), "--csv")
    assert status == 0
    assert [len(json.loads(r.body or b"")["operations"]) for r in adapter.sent] == [3, 3, 1]
    lines = out.removeprefix("\ufeff").splitlines()
    # AICPA table A-1 (recalled from memory): 59 items with 0% expected, 93 with 1%.
    assert lines[1:] == [f"NT-{i},200,{'93,1' if i % 2 else '59,0'},," for i in range(7)]
    status, out, _ = run(capsys, "sample-size", "--controls", str(path), "--json")
    assert [r["id"] for r in json.loads(out)["results"]] == [f"NT-{i}" for i in range(7)]


def test_a_body_from_standard_input(through_app: requests.Session, adapter: AppAdapter,
                                    monkeypatch: pytest.MonkeyPatch,
                                    capsys: pytest.CaptureFixture[bytes]) -> None:
    import io

    monkeypatch.setattr("sys.stdin", io.StringIO('{"tolerable_rate": 0.05, "confidence": 0.9}'))
    status, _, _ = run(capsys, "sample-size", "--body", "-", "--confidence", "0.95", "--json")
    assert status == 0
    assert json.loads(adapter.sent[0].body or b"") == {"tolerable_rate": 0.05, "confidence": 0.95}


# Harbour Lane Provisions Ltd (fictional): three month-end selections, one without a seed.
SELECTIONS = (
    "control_id,population_size,sample_size,seed,method\n"
    "HLP-BR-01,12,2,hlp-2026-11-bank,\n"
    "HLP-GRN-02,400,5,,\n"
    "HLP-INV-03,250,4,hlp-2026-11-inv,systematic\n"
)


def direct_selection(adapter: AppAdapter, size: int, n: int, seed: str,
                     method: str = "random") -> dict[str, Any]:
    answer = adapter.client.post("/v1/selection", json={
        "population": {"size": size}, "sample_size": n, "seed": seed, "method": method})
    assert answer.status_code == 200
    document: dict[str, Any] = answer.get_json()
    return document


def generated_seeds(err: str) -> dict[str, str]:
    found = re.findall(r"warning: control (\S+): no seed was given, so the service generated "
                       r"(\"[^\"]*\"); record it", err)
    return {control: json.loads(seed) for control, seed in found}


def test_a_selection_file_writes_every_item_to_one_csv(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "selections.csv"
    path.write_text(SELECTIONS, encoding="utf-8")
    out_file = tmp_path / "items.csv"
    status, out, err = run(capsys, "selection", "--controls", str(path), "--items-out",
                           str(out_file))
    assert status == 0
    seeds = generated_seeds(err)
    assert list(seeds) == ["HLP-GRN-02"]
    # Each control's rows against the same selection asked of the service on its own; the
    # generated seed printed on standard error re-performs the selection.
    expected = [("HLP-BR-01", direct_selection(adapter, 12, 2, "hlp-2026-11-bank")),
                ("HLP-GRN-02", direct_selection(adapter, 400, 5, seeds["HLP-GRN-02"])),
                ("HLP-INV-03", direct_selection(adapter, 250, 4, "hlp-2026-11-inv",
                                                "systematic"))]
    data = out_file.read_bytes()
    assert data.startswith(b"\xef\xbb\xbfcontrol_id,draw,item,position\r\n")
    assert data.count(b"\r\n") == 1 + 2 + 5 + 4
    rows = list(csv.reader(io.StringIO(data.decode("utf-8-sig"), newline="")))
    assert rows[1:] == [[control, str(draw), str(item), str(position)]
                        for control, chosen in expected
                        for draw, (item, position) in enumerate(
                            zip(chosen["items"], chosen["positions"], strict=True), 1)]
    assert f"Selected items: 11 rows written to {out_file}." in out
    generated = out.splitlines()[3].split()
    assert generated[0] == "HLP-GRN-02"
    assert seeds["HLP-GRN-02"] in generated and "yes" in generated


def test_a_selection_file_lists_the_items_under_the_table(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "selections.csv"
    path.write_text(SELECTIONS, encoding="utf-8")
    status, out, err = run(capsys, "selection", "--controls", str(path))
    assert status == 0
    bank = direct_selection(adapter, 12, 2, "hlp-2026-11-bank")
    listed = out[out.index("Selected items, in draw order:\n"):]
    assert f"HLP-BR-01 (2 of 12): {', '.join(map(str, bank['items']))}\n" in listed
    seed = generated_seeds(err)["HLP-GRN-02"]
    grn = direct_selection(adapter, 400, 5, seed)
    assert f"HLP-GRN-02 (5 of 400): {', '.join(map(str, grn['items']))}\n" in listed
    # The control with the generated seed carries the service's warning, numbered.
    row = out.splitlines()[3].split()
    assert (row[0], row[-1]) == ("HLP-GRN-02", "[1]")
    assert seed in row
    assert "\nWarnings:\n[1] HLP-GRN-02: " in out


def test_a_blank_seed_is_reported_on_every_run_and_kept_in_the_rows(
    through_app: requests.Session, tmp_path: Path, capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "selections.csv"
    path.write_text(SELECTIONS, encoding="utf-8")
    first = run(capsys, "selection", "--controls", str(path), "--csv")
    second = run(capsys, "selection", "--controls", str(path), "--json")
    seeds = [generated_seeds(err)["HLP-GRN-02"] for _, _, err in (first, second)]
    assert seeds[0] != seeds[1]  # a new seed each run, and each one said
    rows = {row["control_id"]: row for row in csv.DictReader(
        io.StringIO(first[1].removeprefix("\ufeff")))}
    assert (rows["HLP-GRN-02"]["seed"], rows["HLP-GRN-02"]["seed_generated"]) == (seeds[0],
                                                                                  "true")
    assert rows["HLP-BR-01"]["seed_generated"] == "false"
    assert "--items-out FILE writes them" in first[2]
    answers = {r["id"]: r["result"] for r in json.loads(second[1])["results"]}
    assert answers["HLP-GRN-02"]["seed"] == seeds[1]


def test_items_out_is_refused_before_anything_is_sent(
    through_app: requests.Session, adapter: AppAdapter, tmp_path: Path,
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    path = tmp_path / "selections.csv"
    path.write_text(SELECTIONS, encoding="utf-8")
    status, _, err = run(capsys, "selection", "--controls", str(path), "--items-out",
                         str(tmp_path / "no-such-folder" / "items.csv"))
    assert status == 2
    assert "--items-out" in err and "no such folder" in err
    status, _, err = run(capsys, "selection", "--controls", str(path), "--items-out",
                         str(tmp_path))
    assert status == 2
    assert "is a folder" in err
    status, _, err = run(capsys, "selection", "--population-size", "12", "--sample-size", "2",
                         "--items-out", str(tmp_path / "items.csv"))
    assert status == 2
    assert "--items-out needs --controls" in err
    assert adapter.sent == []
    assert list(tmp_path.iterdir()) == [path]


def test_a_single_selection_as_csv_without_a_seed_says_so(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, err = run(capsys, "selection", "--population-size", "12", "--sample-size", "2",
                           "--csv")
    assert status == 0
    assert out.startswith("\ufeffselection,")
    assert "\r\ndraw,item,position\r\n" in out
    seed_row = next(line for line in out.splitlines() if line.startswith("seed,"))
    assert len(seed_row.split(",")[1]) == 32  # the generated seed, in the answer itself
    assert "warning: no --seed given" in err and "record the seed" in err
    status, _, err = run(capsys, "selection", "--population-size", "12", "--sample-size", "2",
                         "--seed", "hlp-2026-11-bank", "--csv")
    assert status == 0
    assert "warning" not in err


def test_the_selection_help_documents_the_items_file(
    capsys: pytest.CaptureFixture[bytes]
) -> None:
    with pytest.raises(SystemExit):
        cli.main(["selection", "--help"])
    text = " ".join(capsys.readouterr().out.decode().split())
    assert "--items-out FILE with --controls: write every selected item to FILE as one CSV " \
        "of control_id,draw,item,position" in text
    assert "prints it on standard error with the warning to record it" in text
def test_monetary_commands_from_a_csv_ledger(through_app: requests.Session,
                                             capsys: pytest.CaptureFixture[bytes],
                                             tmp_path: Path) -> None:
    # A fictional receivables ledger (Kestrel Valley Foods Ltd) written by Python's csv module.
    ledger = tmp_path / "receivables.csv"
    with ledger.open("w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out)
        writer.writerow(["id", "amount"])
        writer.writerows([f"KV-{i:04d}", f"{150 + 41 * i}.10"] for i in range(1, 31))
    status, out, _ = run(capsys, "monetary-selection", "--population-file", str(ledger),
                         "--sample-size", "5", "--seed", "kestrel", "--json")
    assert status == 0, out
    chosen = json.loads(out)
    assert chosen["book_value"] == f"{sum(150 + 41 * i for i in range(1, 31)) + 3:.2f}"
    status, out, _ = run(capsys, "monetary-sample-size", "--book-value", "2500000.00",
                         "--tolerable-misstatement", "125000", "--json")
    assert status == 0 and json.loads(out)["sample_size"] == 60
    status, out, _ = run(capsys, "monetary-evaluation", "--book-value", "600000.00",
                         "--sample-size", "60", "--json")
    assert status == 0 and json.loads(out)["overstatement"]["projected_misstatement"] == "0.00"


STAGES_JSON = ('[{"cumulative_sample_size": 66, "accept_if_at_most": 0, "fail_if_at_least": 2},'
               ' {"cumulative_sample_size": 135, "accept_if_at_most": 2, "fail_if_at_least": 3}]')


def test_the_staged_curve_chart_is_written_exactly(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, _ = run(capsys, "staged-curve", "--stages", STAGES_JSON, "--tolerable-rate",
                         "0.05", "--expected-rate", "0.01", "--svg")
    assert status == 0
    direct = adapter.client.post("/v1/plans/staged/curve", headers={"Accept": "image/svg+xml"},
                                 json={"stages": json.loads(STAGES_JSON),
                                       "tolerable_rate": 0.05, "expected_rate": 0.01})
    assert out.encode("utf-8") == direct.data
    assert 'id="expected-size-curve"' in out


def test_a_staged_plan_table_shows_expected_sizes_as_items(
    through_app: requests.Session, capsys: pytest.CaptureFixture[bytes]
) -> None:
    status, out, _ = run(capsys, "staged-plan", "--tolerable-rate", "0.05", "--expected-rate",
                         "0.01")
    assert status == 0
    line = re.search(r"^Expected sample size at expected rate +(\S+)$", out, re.MULTILINE)
    assert line is not None
    assert not line.group(1).endswith("%")
    assert float(line.group(1)) < 93  # fewer than the fixed-size plan's items, on average
    assert re.search(r"^Risk of overreliance +4\.[0-9]+%$", out, re.MULTILINE)


def test_evaluation_with_a_strata_file(
    through_app: requests.Session, adapter: AppAdapter, capsys: pytest.CaptureFixture[bytes],
    tmp_path: Path,
) -> None:
    strata = tmp_path / "strata.csv"
    with strata.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(["label", "population_size", "sample_size", "deviations"])
        writer.writerow(["Harbour Lane, Leeds", 1200, 45, 0])
        writer.writerow(["Harbour Lane, Lyon", 800, 40, 1])
    status, out, _ = run(capsys, "evaluation", "--strata-file", str(strata),
                         "--tolerable-rate", "0.1")
    assert status == 0, out
    (sent,) = adapter.sent
    assert json.loads(sent.body or b"")["strata"][1] == {
        "label": "Harbour Lane, Lyon", "population_size": 800, "sample_size": 40,
        "deviations": 1}
    assert re.search(r"^Upper deviation count +211$", out, re.MULTILINE)
    assert "Harbour Lane, Leeds" in out
    assert " ".join(out.split()).endswith(CAUTION)
