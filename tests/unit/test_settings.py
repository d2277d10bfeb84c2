"""Settings: read once from the environment; a bad value stops start-up, naming it."""

from __future__ import annotations

import dataclasses

import pytest

import service.settings as settings_module
from service.settings import Settings, SettingsError, variable


def test_defaults_when_nothing_is_set() -> None:
    assert Settings.from_environ({"PATH": "/bin", "OTHER_MAX_ITEMS": "x"}) == Settings()


def test_every_setting_is_read_from_its_variable() -> None:
    environ = {variable(f.name): str(1000 + i) for i, f in enumerate(dataclasses.fields(Settings))}
    loaded = Settings.from_environ(environ)
    for i, spec in enumerate(dataclasses.fields(Settings)):
        assert getattr(loaded, spec.name) == 1000 + i


def test_underscores_may_group_digits() -> None:
    assert Settings.from_environ({"SAMPLING_MAX_ITEMS": " 2_000_000 "}).max_items == 2_000_000


def test_the_table_lists_every_setting_with_its_default() -> None:
    doc = settings_module.__doc__ or ""
    for spec in dataclasses.fields(Settings):
        row = next(line for line in doc.splitlines() if line.startswith(variable(spec.name) + " "))
        assert row.split()[1] == str(spec.default)


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
