"""The reliability report: content built once (:mod:`coderel.report.assemble`), then rendered.

:func:`build_report` turns an agreement result (and a merge result) into :class:`ReportContent`;
:func:`write_report` writes it as a self-contained HTML file, Markdown with SVG charts, or xlsx.
"""

from coderel.report.assemble import build_report
from coderel.report.model import ReportContent
from coderel.report.write import FORMATS, report_paths, write_report

__all__ = ["FORMATS", "ReportContent", "build_report", "report_paths", "write_report"]
