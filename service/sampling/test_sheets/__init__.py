"""Test sheets: the workbook in which the results of a test of controls are recorded.

``layout`` fixes the names and words the writer and the reader share; ``reading`` reads a
completed sheet back; ``results`` checks its rows against the selection and counts the
deviations per attribute.
"""
