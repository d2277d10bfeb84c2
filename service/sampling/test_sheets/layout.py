"""The layout of a test sheet, shared by the writer and the reader.

A test sheet is an XLSX workbook with three sheets:

* ``Tests``: one row per selected item in draw order (``draw``, ``item``, ``position``, the
  record's own columns for a file population), then, for each attribute tested, a result
  column ``<attribute>: result`` restricted to :data:`RESULT_WORDS` and a notes column
  ``<attribute>: notes``;
* ``Selection``: the inputs, seed, method, algorithm, both fingerprints, the summary, the
  warnings and the caution, for people to read;
* ``record``: a very hidden, protected sheet holding the same facts and the selected items
  as the service reads them back (key in column A, value in column B; after the row
  ``items``, one row per item with its draw, item and position).

The selection fingerprint is also the workbook's defined name ``SelectionFingerprint`` and
its custom document property ``selection_fingerprint``, for other tools; the service reads
the ``record`` sheet.
"""

from __future__ import annotations

from typing import Final

LAYOUT: Final = "test-sheet/1"
"""Identifier of this layout, written on the record sheet; a reader refuses any other."""

TESTS_SHEET: Final = "Tests"
SELECTION_SHEET: Final = "Selection"
RECORD_SHEET: Final = "record"
EVALUATION_SHEET: Final = "Evaluation"

PASSED: Final = "passed"
DEVIATION: Final = "deviation"
NOT_TESTED: Final = "not tested"
RESULT_WORDS: Final = (PASSED, DEVIATION, NOT_TESTED)
"""The three values a result cell may hold."""

FINGERPRINT_NAME: Final = "SelectionFingerprint"
FINGERPRINT_PROPERTY: Final = "selection_fingerprint"

ITEMS_MARKER: Final = "items"
"""The key on the record sheet after which the selected items follow, one per row."""

RECORD_KEYS: Final = (
    "layout",
    "selection_fingerprint",
    "population_fingerprint",
    "population_size",
    "sample_size",
    "seed",
    "method",
    "algorithm",
    "attributes",
    "population",
)
"""Keys of the record sheet, in order. ``attributes`` holds a JSON array of strings;
``population`` the population as the request gave it (JSON) when it is a count of numbered
items or ranges, so that the selection can be re-derived, and is empty otherwise."""

MAX_ATTRIBUTES: Final = 20
MAX_ATTRIBUTE_LENGTH: Final = 100
MAX_SHEET_ROWS: Final = 1_048_576
"""Rows of an XLSX worksheet (Office Open XML, ECMA-376); the header takes one."""


def result_header(attribute: str) -> str:
    """Heading of an attribute's result column."""
    return f"{attribute}: result"


def notes_header(attribute: str) -> str:
    """Heading of an attribute's notes column."""
    return f"{attribute}: notes"
