"""The guard against spreadsheet formula injection, for every CSV and XLSX the service writes.

A spreadsheet program reads a cell that starts with ``=``, ``+``, ``-`` or ``@`` as a formula
(a tab or carriage return is stripped first and the rest read again), so an identifier such
as ``=HYPERLINK(...)`` would run when the file is opened.

* CSV has no cell types: such a text is written with a single quote ``'`` in front, which
  the spreadsheet shows as text; strip it to recover the value.
* XLSX has them: every text is written as a string cell (``write_string``), never as a
  formula, so the value is kept exactly and nothing is prefixed.
"""

from __future__ import annotations

from typing import Final

FORMULA_STARTS: Final = ("=", "+", "-", "@", "\t", "\r")


def csv_text(value: str) -> str:
    """``value`` as written to a CSV cell: prefixed with ``'`` when it could run as a formula.

    >>> csv_text("=SUM(A1:A9)"), csv_text("PO-10001")
    ("'=SUM(A1:A9)", 'PO-10001')
    """
    return "'" + value if value.startswith(FORMULA_STARTS) else value


def csv_cell(value: int | str) -> int | str:
    """A number unchanged, a text through :func:`csv_text`."""
    return csv_text(value) if isinstance(value, str) else value
