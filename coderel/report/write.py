"""Writing a report in one or more forms (HTML, Markdown, xlsx), each atomically."""

from __future__ import annotations

import os
import re
import secrets
from collections.abc import Callable, Iterable, Mapping
from functools import partial
from pathlib import Path

from coderel.errors import UsageError
from coderel.io.atomic import open_atomic, write_text
from coderel.progress import Progress, report
from coderel.report.charts import chart_makers, report_charts, standalone_svg
from coderel.report.html import inline_svg, render_html
from coderel.report.markdown import chart_file, render_markdown
from coderel.report.model import ReportContent
from coderel.report.xlsx import write_report_xlsx

#: Report forms and their file extensions.
FORMATS: dict[str, str] = {"html": ".html", "md": ".md", "xlsx": ".xlsx"}
_ALIASES = {"htm": "html", "markdown": "md"}


def report_format(name: str) -> str:
    """A form's name (``html``, ``md``, ``xlsx``) from a name or an extension; else UsageError."""
    key = name.lower().lstrip(".")
    key = _ALIASES.get(key, key)
    if key not in FORMATS:
        raise UsageError(
            f"unknown report format {name!r}: choose html, md or xlsx "
            "(by the output's extension or --format)"
        )
    return key


def report_paths(path: str | os.PathLike[str], formats: Iterable[str] | None = None) -> list[Path]:
    """The files a report writes: ``path`` itself, or one file per form with ``path``'s stem."""
    path = Path(path)
    if not formats:
        if not path.suffix:
            raise UsageError(
                f"cannot tell the report's form from {path.name!r}: end it in .html, .md or "
                ".xlsx, or name the forms with --format"
            )
        return [path.with_suffix(FORMATS[report_format(path.suffix)])]
    forms = list(dict.fromkeys(report_format(f) for f in formats))
    return [path.with_suffix(FORMATS[f]) for f in forms]


def charts_folder(md_path: Path) -> Path:
    """The folder of a Markdown report's SVG charts: ``report.md`` -> ``report-charts/``."""
    return md_path.with_name(f"{md_path.stem}-charts")


def write_report(
    content: ReportContent,
    path: str | os.PathLike[str],
    formats: Iterable[str] | None = None,
    *,
    progress: Progress | None = None,
) -> list[Path]:
    """Write the report in the forms asked for; return every file written.

    Parameters
    ----------
    content
        The report's content from :func:`coderel.report.build_report`.
    path
        Output path. Its extension names the form when ``formats`` is empty; otherwise each form
        is written beside it with the same stem (``report.html``, ``report.md``, ...).
    formats
        Any of ``html``, ``md``, ``xlsx``.
    progress
        Told of each phase ("drawing charts", "writing report.html", or with HTML alone
        "drawing charts, writing report.html", chart by chart; :mod:`coderel.progress`).

    Returns
    -------
    list of Path
        The report files, then (for Markdown) its chart files.
    """
    targets = report_paths(path, formats)
    charts: dict[str, str] | None = None
    written: list[Path] = []
    extra: list[Path] = []
    steps = len(targets) + 1
    with_md = any(report_format(t.suffix) == "md" for t in targets)
    for done, target in enumerate(targets):
        form = report_format(target.suffix)
        if with_md and charts is None:
            report(progress, done, steps, "drawing charts")
            charts = report_charts(content)
        # with HTML alone, each chart is drawn where the page places it and let go of after
        lazy = form == "html" and charts is None
        phase = f"drawing charts, writing {target.name}" if lazy else f"writing {target.name}"
        report(progress, done + 1, steps, phase)
        if form == "html":
            if lazy:
                write_html(
                    target,
                    content,
                    chart_makers(content),
                    progress=lambda i, n, phase=phase: report(progress, i, n, phase),
                )
            else:
                write_html(target, content, {k: partial(str, v) for k, v in (charts or {}).items()})
        elif form == "md":
            folder = charts_folder(target)
            for chart_id, svg in (charts or {}).items():
                chart_path = folder / chart_file(chart_id)
                write_text(chart_path, standalone_svg(svg))
                extra.append(chart_path)
            write_text(target, render_markdown(content, charts, folder=folder.name))
        else:
            write_report_xlsx(content, target)
        written.append(target)
    report(progress, steps, steps)
    return written + extra


def write_html(
    target: str | os.PathLike[str],
    content: ReportContent,
    charts: Mapping[str, Callable[[], str]],
    *,
    progress: Callable[[int, int], None] | None = None,
) -> None:
    """Write the HTML report atomically, placing each chart as it comes: the same bytes as
    ``render_html(content, report_charts(content))``, without the whole page, the charts or its
    encoded bytes in memory at once (on a hundred thousand units its Bland-Altman plots make a
    page of about 180 MB).

    The page is rendered with a short slot in each chart's place (a tag with a fresh random mark,
    which :func:`coderel.report.html.render_html` leaves as it is); the file is then written piece
    by piece, each chart drawn (``charts[chart_id]()``) when its slot comes; ``progress(done,
    total)`` is told of each chart placed.
    """
    mark = secrets.token_hex(8)
    ids = list(charts)
    slots = {chart_id: f"<svg {mark}-{i}>" for i, chart_id in enumerate(ids)}
    page = render_html(content, slots)
    pieces = re.split(rf"<svg {mark}-(\d+)>", page)
    del page
    total = len(pieces) // 2
    with open_atomic(target, "wb") as fh:
        for i, piece in enumerate(pieces):
            if i % 2:
                if progress is not None:
                    progress(i // 2, total)
                fh.write(inline_svg(charts[ids[int(piece)]]()).encode("utf-8"))
            else:
                fh.write(piece.encode("utf-8"))
    if progress is not None:
        progress(total, total)
