"""The report's content: the frozen dataclasses the three renderers read.

:func:`coderel.report.assemble.build_report` fills them from the results; HTML, Markdown and xlsx
renderers read only :class:`ReportContent`.
"""

from __future__ import annotations

import hashlib
import math
import re
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field
from typing import Any

import pandas as pd

from coderel.merge.result import SETTLED, STATUSES
from coderel.report.blocks import ProtocolParts

#: Coefficient keys of the engine in the order the report shows them, with display names.
COEFFICIENTS: dict[str, str] = {
    "krippendorff_alpha": "Krippendorff's α",
    "percent_agreement": "Percent agreement",
    "cohen_kappa": "Cohen's κ",
    "weighted_kappa_linear": "Weighted κ (linear)",
    "weighted_kappa_quadratic": "Weighted κ (quadratic)",
    "light_kappa": "Light's κ",
    "fleiss_kappa": "Fleiss' κ",
    "scott_pi": "Scott's π",
    "brennan_prediger": "Brennan-Prediger κ",
    "gwet_ac1": "Gwet's AC1",
    "gwet_ac2": "Gwet's AC2",
    "pabak": "PABAK",
    "icc_1_1": "ICC(1,1) one-way",
    "icc_2_1": "ICC(2,1) absolute agreement",
    "icc_3_1": "ICC(3,1) consistency",
    "icc_1_k": "ICC(1,k) one-way, mean",
    "icc_2_k": "ICC(2,k) absolute agreement, mean",
    "icc_3_k": "ICC(3,k) consistency, mean",
    "ccc": "Lin's concordance ρc",
}
VERDICTS: tuple[str, ...] = ("reliable", "tentative", "unreliable", "too few units", "undefined")


def number_or_none(value: Any) -> float | None:
    if value is None:
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


@dataclass(frozen=True, slots=True)
class Coefficient:
    """One coefficient of one variable: estimate, interval, or the reason it is undefined."""

    key: str
    name: str
    estimate: float | None
    ci_low: float | None
    ci_high: float | None
    reason: str | None = None
    se: float | None = None


@dataclass(frozen=True, slots=True)
class VariableRow:
    """One row of the agreement table (a variable, or a variable's applicability)."""

    variable: str
    label: str
    level: str
    kind: str
    units: int
    coders: int
    coefficients: tuple[Coefficient, ...]
    verdict: str
    notes: tuple[str, ...]
    reliable: float
    tentative: float
    multiple: bool = False
    conditional: bool = False

    @property
    def slug(self) -> str:
        """Stable id part of this row: ``species``, ``species-applies`` (HTML ids, file names)."""
        return _slug(self.variable)

    @property
    def row_id(self) -> str:
        """Id of the row in the agreement table (``row-species``)."""
        return f"row-{self.slug}"

    @property
    def chart_id(self) -> str:
        """Id of the row's mark in the interval chart (``chart-species``)."""
        return f"chart-{self.slug}"

    def coefficient(self, key: str) -> Coefficient | None:
        for c in self.coefficients:
            if c.key == key:
                return c
        return None

    @property
    def alpha(self) -> Coefficient | None:
        return self.coefficient("krippendorff_alpha")


@dataclass(frozen=True, slots=True)
class CategoryPanel:
    """Confusion matrix and per-category agreement of one categorical variable."""

    variable: str
    label: str
    codes: tuple[str, ...]
    labels: tuple[str, ...]
    matrix: tuple[tuple[int, ...], ...] | None
    matrix_caption: str
    row_title: str
    column_title: str
    category_columns: tuple[str, ...]
    category_rows: tuple[tuple[Any, ...], ...]
    multiple: bool = False

    @property
    def panel_id(self) -> str:
        """Id of the variable's block in the categories section (``cat-species``)."""
        return f"cat-{_slug(self.variable)}"

    @property
    def heatmap_id(self) -> str:
        """Id of the variable's heat map (``heatmap-species``)."""
        return f"heatmap-{_slug(self.variable)}"


@dataclass(frozen=True, slots=True)
class CoderFinal:
    """One coder's agreement with the final (settled) values, over variables."""

    coder: str
    units: int
    percent_agreement: float | None
    mean_kappa: float | None
    variables: int
    per_variable: tuple[tuple[str, int, float | None, float | None], ...]


@dataclass(frozen=True, slots=True)
class CoderPanel:
    """Pairwise agreement between coders and, with decisions, each coder against the final value."""

    coders: tuple[str, ...]
    pair_percent: tuple[tuple[float | None, ...], ...]
    pair_kappa: tuple[tuple[float | None, ...], ...]
    pair_units: tuple[tuple[int, ...], ...]
    final: tuple[CoderFinal, ...] = ()
    #: Krippendorff's alpha of the two coders at each variable's level, averaged over variables.
    pair_alpha: tuple[tuple[float | None, ...], ...] = ()


@dataclass(frozen=True, slots=True)
class Adjudication:
    """Statuses of the final values, in total and by variable (from the merge)."""

    rule: str
    totals: tuple[tuple[str, int], ...]
    by_variable: tuple[tuple[str, tuple[int, ...]], ...]
    statuses: tuple[str, ...] = STATUSES
    #: (variable, tolerance) of the merge's ``--tolerance`` options
    tolerance: tuple[tuple[str, float], ...] = ()

    @property
    def cells(self) -> int:
        """Units x variables: what the totals add up to."""
        return sum(n for _, n in self.totals)

    def count(self, status: str) -> int:
        return dict(self.totals).get(status, 0)

    @property
    def resolved(self) -> int:
        return sum(n for s, n in self.totals if s in SETTLED)

    @property
    def unresolved(self) -> int:
        return sum(n for s, n in self.totals if s == "unresolved")


@dataclass(frozen=True, slots=True)
class Summary:
    """Headline figures of the project."""

    title: str
    units: int
    coders: tuple[str, ...]
    variables: int
    verdicts: tuple[tuple[str, int], ...]
    cells_total: int
    cells_filled: int
    cells_not_applicable: int
    units_all_coders: int
    #: (coder, units the coder coded), coders in the summary's order
    units_per_coder: tuple[tuple[str, int], ...] = ()
    #: units coded by one coder only (left out of agreement)
    units_one_coder: int = 0

    def units_text(self) -> str:
        """``80 (78 coded by every coder: ana 80, ben 79, cai 78)``: the one wording of the unit
        counts, for the summary table and the methods paragraph."""
        text = f"{self.units:,} ({self.units_all_coders:,} coded by every coder"
        if self.units_all_coders < self.units and self.units_per_coder:
            text += ": " + ", ".join(f"{c} {n:,}" for c, n in self.units_per_coder)
        if self.units_one_coder:
            text += f"; {self.units_one_coder:,} coded by one coder only, left out of agreement"
        return text + ")"

    @property
    def completeness(self) -> float | None:
        return self.cells_filled / self.cells_total if self.cells_total else None


@dataclass(frozen=True, slots=True)
class SourceRow:
    name: str
    sha256: str
    size: int


@dataclass(frozen=True, slots=True)
class Reproducibility:
    """What is needed to reproduce the numbers."""

    coderel_version: str
    codebook_title: str
    codebook_version: str
    sources: tuple[SourceRow, ...]
    seed: int | None
    replicates: int
    interval: str
    ci_level: float
    generated_utc: str
    command: str
    decisions_file: SourceRow | None = None
    codebook_file: SourceRow | None = None


@dataclass(frozen=True, slots=True)
class MethodsText:
    """The methods paragraph, its reference list and the cautions shown beside it."""

    paragraph: str
    references: tuple[str, ...]
    cautions: tuple[str, ...]


@dataclass(frozen=True)
class ReportContent:
    """Everything the report shows; the three renderers read only this."""

    summary: Summary
    table: tuple[VariableRow, ...]
    categories: tuple[CategoryPanel, ...]
    coders: CoderPanel
    adjudication: Adjudication | None
    methods: MethodsText
    reproducibility: Reproducibility
    extra: Mapping[str, Any] = field(default_factory=dict)
    #: Coder diagnostics, training against the key, rounds (:mod:`coderel.report.protocol`).
    protocol: ProtocolParts | None = None
    #: :class:`coderel.report.numeric.NumericPanel` per numeric variable (ICC, limits).
    numeric: tuple[Any, ...] = ()
    #: :class:`coderel.report.numeric.StabilityPanel` when a second occasion was given.
    stability: Any = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready content (summary, table, categories, coders, adjudication, methods, ...)."""
        out = {
            "summary": {**asdict(self.summary), "completeness": self.summary.completeness},
            "table": [
                {
                    **asdict(r),
                    "id": r.row_id,
                    "chart_id": r.chart_id,
                    "coefficients": [asdict(c) for c in r.coefficients],
                }
                for r in self.table
            ],
            "categories": [
                {**asdict(p), "id": p.panel_id, "heatmap_id": p.heatmap_id} for p in self.categories
            ],
            "coders": asdict(self.coders),
            "adjudication": None,
            "methods": asdict(self.methods),
            "reproducibility": asdict(self.reproducibility),
            "numeric": [asdict(p) for p in self.numeric],
            "stability": asdict(self.stability) if self.stability is not None else None,
        }
        if self.protocol is not None:
            out.update(self.protocol.data)
        if self.adjudication is not None:
            out["adjudication"] = {
                **asdict(self.adjudication),
                "resolved": self.adjudication.resolved,
                "unresolved": self.adjudication.unresolved,
            }
        return out

    def to_frame(self) -> pd.DataFrame:
        """The agreement table, one row per variable and coefficient."""
        rows = [
            {
                "variable": r.variable,
                "kind": r.kind,
                "level": r.level,
                "coefficient": c.key,
                "estimate": c.estimate,
                "ci_low": c.ci_low,
                "ci_high": c.ci_high,
                "se": c.se,
                "reason": c.reason,
                "verdict": r.verdict,
            }
            for r in self.table
            for c in r.coefficients
        ]
        return pd.DataFrame(rows)


def _slug(text: str) -> str:
    """A unique HTML id part (and file name) for ``text``: letters, digits, ``_`` and single ``-``.

    A name that already is such a slug is kept (``species``); any other gets a short hash of the
    whole name (``'species [applies]' -> 'species-applies-3f2a9c1b'``), so that names which read
    alike (``a b`` and ``a-b``, names in other scripts) never share an id and no panel shows
    another variable's chart.
    """
    text = str(text)
    out = "".join(ch if ch.isascii() and (ch.isalnum() or ch == "_") else "-" for ch in text)
    out = re.sub(r"-+", "-", out).strip("-")
    if out == text and out:
        return out
    digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:8]
    return f"{out or 'x'}-{digest}"
