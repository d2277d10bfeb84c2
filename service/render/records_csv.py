"""The selected records as one CSV file: a header block, the records, the pull list.

Layout (RFC 4180: fields quoted when they hold a comma, a quote or a line break, quotes
doubled, CRLF after every record; UTF-8 starting with a byte order mark, without which the
most common spreadsheet program garbles non-ASCII text):

1. the header block: the row ``selection,<title>``, then one ``<fact>,<value>`` row per fact
   (population, sizes, seed, method, algorithm, both fingerprints), ``summary``, one
   ``warning`` row per warning and ``caution``;
2. an empty record, the row ``records in draw order``, then the table: ``draw``, ``item``,
   ``position`` and, for a file population, the record's own columns;
3. an empty record, the row ``pull list sorted by identifier``, then the same records with
   ``item`` first, in identifier order.

Every text cell goes through the formula guard of :mod:`service.render.cells`.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Iterable

from service.render.cells import csv_cell
from service.render.selection_report import Cell, SelectionReport

RECORDS_HEADING = "records in draw order"
PULL_LIST_HEADING = "pull list sorted by identifier"


def _guarded(rows: Iterable[Iterable[Cell]]) -> Iterable[list[Cell]]:
    return ([csv_cell(cell) for cell in row] for row in rows)


def render_records_csv(report: SelectionReport) -> str:
    """The report as CSV text (with its byte order mark)."""
    out = io.StringIO()
    out.write("\ufeff")
    writer = csv.writer(out, lineterminator="\r\n")
    block: list[tuple[Cell, ...]] = [("selection", report.title), *report.facts]
    block.append(("summary", report.summary))
    block += [("warning", warning) for warning in report.warnings]
    block.append(("caution", report.caution))
    writer.writerows(_guarded(block))
    for heading, table in (
        (RECORDS_HEADING, report.records),
        (PULL_LIST_HEADING, report.pull_list),
    ):
        writer.writerow(())
        writer.writerow((heading,))
        writer.writerows(_guarded((table.columns, *table.rows)))
    return out.getvalue()
