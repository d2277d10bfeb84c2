"""HTTP layer: one module per resource, each a blueprint of thin operations.

``RESOURCES`` lists every resource module; the app factory registers their
blueprints and the spec generator reads their ``OPERATIONS``. A new endpoint
is a new :class:`~service.http.operations.Operation` in one of them.
"""

from __future__ import annotations

from service.http import (
    attributes,
    batch,
    estimation,
    monetary,
    periodic,
    plans,
    populations,
    selection,
    sequential,
)
from service.http.operations import Operation

RESOURCES = [
    attributes, estimation, plans, periodic, sequential, selection, populations, monetary,
    batch,
]


def all_operations() -> list[Operation]:
    return [op for module in RESOURCES for op in module.OPERATIONS]
