"""The reliability report: content assembled once (:mod:`coderel.report.model`), then rendered."""

from coderel.report.model import ReportContent, build_report

__all__ = ["ReportContent", "build_report"]
