"""Test sheets: the workbooks in which the results of a test are recorded.

``layout`` fixes the names and words the writer and the reader share; ``reading`` reads a
completed sheet back; ``results`` checks its rows against the selection and counts the
deviations per attribute. ``monetary_layout``, ``monetary_reading`` and
``monetary_results`` do the same for a monetary-unit test sheet, whose rows record audited
amounts. Both read their workbook through ``workbook`` (archive bounds, sheets, record
sheet, headings) and match their rows to the selection through ``matching``.
"""
