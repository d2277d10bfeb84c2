"""The layout of a monetary-unit test sheet, shared by the writer and the reader.

A monetary-unit test sheet is an XLSX workbook with three sheets:

* ``Tests``: one row per item to test, the individually significant items first, then the
  items hit by the selection in canonical order: ``line`` (1, 2, ...), ``selection``
  (``individually significant`` or ``sampled``), ``item``, ``book amount``, ``hits``,
  ``units`` (the 1-based currency units that hit the item, space-separated), for a file
  population ``where in the file`` and the record's own columns, then
  ``audited amount`` (restricted by data validation to a decimal number) and ``notes``;
* ``Selection``: the inputs, seed, method, algorithm, both fingerprints, the interval, the
  summary, the warnings and the caution, for people to read;
* ``record``: a very hidden, protected sheet holding the same facts and the items as the
  service reads them back (key in column A, value in column B; after the row ``items``,
  one row per item: line, selection, item, book amount in smallest currency units, hits).

Amounts on the record sheet are whole numbers of the smallest currency unit written as
text, so that they read back exactly. The selection fingerprint is also the workbook's
defined name ``SelectionFingerprint`` and its custom document property
``selection_fingerprint``, as on the attribute test sheet.
"""

from __future__ import annotations

from typing import Final

LAYOUT: Final = "monetary-test-sheet/1"
"""Identifier of this layout, written on the record sheet; a reader refuses any other."""

SAMPLED: Final = "sampled"
SIGNIFICANT: Final = "individually significant"
KINDS: Final = (SIGNIFICANT, SAMPLED)

LINE: Final = "line"
KIND: Final = "selection"
ITEM: Final = "item"
BOOK: Final = "book amount"
HITS: Final = "hits"
UNITS: Final = "units"
WHERE: Final = "where in the file"
AUDITED: Final = "audited amount"
NOTES: Final = "notes"

LEADING: Final = (LINE, KIND, ITEM, BOOK, HITS, UNITS)
"""The service's columns before a file's own columns."""
TRAILING: Final = (AUDITED, NOTES)
"""The columns the auditor fills in, after the file's own columns."""
OWN: Final = (*LEADING, WHERE, *TRAILING)
"""Every heading of the service's own; a file column of the same name is shown as
``file: <name>``."""

RECORD_KEYS: Final = (
    "layout",
    "selection_fingerprint",
    "population_fingerprint",
    "population_items",
    "sample_size",
    "units_drawn",
    "seed",
    "method",
    "algorithm",
    "currency_decimals",
    "book_value",
    "sampled_value",
    "excluded_count",
    "excluded_total",
)
"""Keys of the record sheet, in order; amounts in smallest currency units, as text."""

ITEMS_MARKER: Final = "items"
