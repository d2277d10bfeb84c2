"""The selected records as an XLSX workbook: the selection, the records, the pull list.

Three sheets: ``Selection`` (the header block: the facts, summary, warnings and caution),
``Records`` (``draw``, ``item``, ``position`` and a file population's own columns, in draw
order) and ``Pull list`` (the same records sorted by identifier, ``item`` first). Every text
is a string cell, never a formula (:mod:`service.render.xlsx`).
"""

from __future__ import annotations

from service.render.selection_report import SelectionReport
from service.render.xlsx import new_workbook, write_facts, write_table


def render_records_xlsx(report: SelectionReport) -> bytes:
    """The report as the bytes of an XLSX workbook."""
    workbook, buffer = new_workbook()
    bold = workbook.add_format({"bold": True})
    wrap = workbook.add_format({"text_wrap": True, "valign": "top"})
    write_facts(workbook.add_worksheet("Selection"), report, bold, wrap)
    for name, table in (("Records", report.records), ("Pull list", report.pull_list)):
        sheet = workbook.add_worksheet(name)
        write_table(sheet, table, bold)
        sheet.freeze_panes(1, 0)
    workbook.close()
    return buffer.getvalue()
