"""The report as an xlsx workbook: one sheet per section (two for agreement and categories).

Sheets hold plain numbers (estimates, bounds, counts) rather than formatted text, so the workbook
can be analysed further. Every text cell is neutralised against formula injection and the file is
byte-reproducible (:mod:`coderel.io.tables`).
"""

from __future__ import annotations

import os

from coderel.io.tables import write_xlsx
from coderel.report.model import ReportContent
from coderel.report.sections import section_frames


def write_report_xlsx(content: ReportContent, path: str | os.PathLike[str]) -> None:
    """Write the report's sections as sheets of one workbook, atomically.

    Sheets, in order: summary, agreement, coefficients, intervals, categories, confusion,
    coders, adjudication (with decisions only), methods, ethics, reproducibility.
    """
    write_xlsx(section_frames(content), path)
