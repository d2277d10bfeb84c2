"""Settings: read once from the environment; a bad value stops start-up, naming it."""

from __future__ import annotations

import dataclasses
import hashlib
from pathlib import Path

import pytest

import service.settings as settings_module
from service.settings import Settings, SettingsError, variable


def test_defaults_when_nothing_is_set() -> None:
    assert Settings.from_environ({"PATH": "/bin", "OTHER_MAX_ITEMS": "x"}) == Settings()


LIMITS = [spec for spec in dataclasses.fields(Settings) if spec.type == "int"]
DURATIONS = [spec for spec in dataclasses.fields(Settings) if spec.type == "float"]
DIGEST_ABC = "sha256:" + hashlib.sha256(b"abc").hexdigest()
DIGEST_XYZ = "sha256:" + hashlib.sha256(b"xyz").hexdigest()


def test_every_limit_is_read_from_its_variable() -> None:
    environ = {variable(f.name): str(1000 + i) for i, f in enumerate(LIMITS)}
    loaded = Settings.from_environ(environ)
    for i, spec in enumerate(LIMITS):
        assert getattr(loaded, spec.name) == 1000 + i


def test_underscores_may_group_digits() -> None:
    assert Settings.from_environ({"SAMPLING_MAX_ITEMS": " 2_000_000 "}).max_items == 2_000_000


def test_the_table_lists_every_setting_with_its_default() -> None:
    doc = settings_module.__doc__ or ""
    for spec in dataclasses.fields(Settings):
        row = next(line for line in doc.splitlines() if line.startswith(variable(spec.name) + " "))
        expected = "(unset)"
        if spec in LIMITS:
            expected = str(spec.default)
        elif spec in DURATIONS:
            expected = f"{spec.default:g}"
        assert row.split()[1] == expected
        assert spec in LIMITS or spec in DURATIONS or not spec.default


@pytest.mark.parametrize(("raw", "seconds"), [("10", 10.0), ("2.5", 2.5), (" 0.25 ", 0.25)])
def test_deadlines_are_read_in_seconds(raw: str, seconds: float) -> None:
    loaded = Settings.from_environ({"SAMPLING_REQUEST_DEADLINE": raw})
    assert loaded.request_deadline == seconds


@pytest.mark.parametrize("raw", ["0", "0.0", "-1", "1e3", "ten", "3601", "1.2345", ""])
def test_a_bad_deadline_is_refused(raw: str) -> None:
    with pytest.raises(SettingsError, match="SAMPLING_REQUEST_DEADLINE"):
        Settings.from_environ({"SAMPLING_REQUEST_DEADLINE": raw})


@pytest.mark.parametrize(
    "raw", ["", "lots", "0", "-5", "1.5", "1e6", "٣", "²", "1__0", "_1", "9" * 19, "10 000"]
)
def test_a_bad_value_is_refused_naming_the_variable(raw: str) -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_MAX_SAMPLE_SIZE": raw})
    assert "SAMPLING_MAX_SAMPLE_SIZE" in str(caught.value)


def test_an_unknown_sampling_variable_is_refused() -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_MAX_ITEM": "5"})
    message = str(caught.value)
    assert "SAMPLING_MAX_ITEM:" in message and "SAMPLING_MAX_ITEMS" in message


def test_every_problem_is_named_at_once() -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_MAX_ITEMS": "0", "SAMPLING_MAX_BATCH_WORK": "x"})
    assert "SAMPLING_MAX_ITEMS" in str(caught.value)
    assert "SAMPLING_MAX_BATCH_WORK" in str(caught.value)


def test_keys_are_off_and_cors_closed_by_default() -> None:
    assert Settings().key_digests == frozenset()
    assert Settings().cors_origins == ()


def test_key_digests_come_from_the_variable_and_the_file_together(tmp_path: Path) -> None:
    key_file = tmp_path / "keys"
    key_file.write_text(f"# month-end scripts\n\n{DIGEST_XYZ}\n", encoding="utf-8")
    loaded = Settings.from_environ({
        "SAMPLING_API_KEYS": f" {DIGEST_ABC.upper().replace('SHA256', 'sha256')} , ",
        "SAMPLING_API_KEYS_FILE": str(key_file),
    })
    assert loaded.key_digests == {hashlib.sha256(b"abc").digest(), hashlib.sha256(b"xyz").digest()}


@pytest.mark.parametrize(
    "raw",
    ["", " , ", "abc", "sha256:abc", "md5:" + "0" * 32, DIGEST_ABC + "0", "sha256: " + "0" * 64],
)
def test_a_bad_digest_list_is_refused_without_repeating_it(raw: str) -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_API_KEYS": raw})
    message = str(caught.value)
    assert "SAMPLING_API_KEYS:" in message
    if raw.strip(" ,"):
        assert raw.strip() not in message


def test_a_plain_key_by_mistake_is_not_echoed() -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_API_KEYS": f"{DIGEST_ABC},my-secret-key"})
    assert "entry 2" in str(caught.value)
    assert "my-secret-key" not in str(caught.value)


def test_an_unreadable_or_empty_key_file_is_refused(tmp_path: Path) -> None:
    empty = tmp_path / "empty"
    empty.write_text("# nothing yet\n", encoding="utf-8")
    bad_line = tmp_path / "bad"
    bad_line.write_text(f"{DIGEST_ABC}\nplain-key\n", encoding="utf-8")
    for path, expected in [
        (tmp_path / "missing", "cannot be read"),
        (empty, "holds no digest"),
        (bad_line, "line 2"),
    ]:
        with pytest.raises(SettingsError) as caught:
            Settings.from_environ({"SAMPLING_API_KEYS_FILE": str(path)})
        assert "SAMPLING_API_KEYS_FILE" in str(caught.value)
        assert expected in str(caught.value)
        assert "plain-key" not in str(caught.value)


def test_cors_origins_are_exact_origins_or_a_star() -> None:
    loaded = Settings.from_environ(
        {"SAMPLING_CORS_ORIGINS": "https://audit.example.com, http://127.0.0.1:5173"}
    )
    assert loaded.cors_origins == ("https://audit.example.com", "http://127.0.0.1:5173")
    assert Settings.from_environ({"SAMPLING_CORS_ORIGINS": "*"}).cors_origins == ("*",)


@pytest.mark.parametrize(
    "raw",
    ["", "audit.example.com", "https://audit.example.com/", "https://a.example/path",
     "*, https://audit.example.com", "ftp://audit.example.com", "https://audit.example.com:123456"],
)
def test_a_bad_origin_is_refused(raw: str) -> None:
    with pytest.raises(SettingsError) as caught:
        Settings.from_environ({"SAMPLING_CORS_ORIGINS": raw})
    assert "SAMPLING_CORS_ORIGINS" in str(caught.value)
