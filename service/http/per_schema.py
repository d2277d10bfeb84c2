"""Functions made from a schema once per schema instance: the compiled dumpers and loaders."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from marshmallow import Schema

Made = Callable[[Any], Any]


class PerSchema:
    """``make(schema)``, made once per schema instance and kept.

    Keyed by the instance's id, with the instance kept beside what was made, so that an
    instance made later at a freed address is never given another's function.
    """

    def __init__(self, make: Callable[[Schema], Made]) -> None:
        self._make = make
        self._made: dict[int, tuple[Schema, Made]] = {}

    def __call__(self, schema: Schema) -> Made:
        kept = self._made.get(id(schema))
        if kept is None or kept[0] is not schema:
            kept = (schema, self._make(schema))
            self._made[id(schema)] = kept
        return kept[1]
