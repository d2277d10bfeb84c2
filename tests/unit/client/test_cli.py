"""The command line end to end in process: the app answers through a fake transport."""

from __future__ import annotations

import json
import os
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


@pytest.fixture
def through_app(monkeypatch: pytest.MonkeyPatch,
                app_session: requests.Session) -> requests.Session:
    """Every client the command makes sends through the app in process."""

    def make(*args: Any, **kwargs: Any) -> SamplingClient:
        return SamplingClient(*args, session=app_session, **kwargs)

    monkeypatch.setattr(cli, "SamplingClient", make)
    return app_session


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
    assert "Sample size            93" in out
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
    assert "40 of 40 answered; 0 refused." in out


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
    assert out.splitlines()[2].startswith("B,422,,,expected_rate:")
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
    assert f"{path}, row 3, column tolerable_rate: '5%' is not a number" in err
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
    assert "row 3 (control 'BBB" in err
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
    assert argv[1:] == ["--config", "python:service.gunicorn_config", "service.wsgi:app"]
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
    assert lines[1:] == [f"NT-{i},200,{'93,1' if i % 2 else '59,0'}," for i in range(7)]
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
