"""The report's sections and their tables, shared by the HTML, Markdown and xlsx renderers.

Every renderer walks :func:`sections` in order and reads the same tables from here, so the three
forms show the same numbers in the same words. Display tables hold text formatted in journal
style (:mod:`coderel.report.fmt`); the ``*_frame`` tables for xlsx hold plain numbers.
"""

from __future__ import annotations

from dataclasses import dataclass

import pandas as pd

from coderel.report.fmt import coef_interval, coef_value, pct, plain
from coderel.report.methods_text import common_thresholds, fmt_coef, reason_text
from coderel.report.model import COEFFICIENTS, STATUSES, ReportContent, VariableRow
from coderel.report.numeric import icc_frame, limits_frame, stability_frame


@dataclass(frozen=True, slots=True)
class Section:
    """One section: its key (HTML id, xlsx sheet), heading and what it shows, in one sentence."""

    key: str
    title: str
    about: str
    sheets: tuple[str, ...]


SECTIONS: tuple[Section, ...] = (
    Section(
        "summary",
        "Summary",
        "The project at a glance: how much was coded and how many variables are reliable.",
        ("summary",),
    ),
    Section(
        "agreement",
        "Agreement per variable",
        "Krippendorff's alpha with its bootstrap interval and verdict per variable, then every "
        "other coefficient. Read the interval, not only the point estimate.",
        ("agreement", "coefficients"),
    ),
    Section(
        "intervals",
        "Alpha with intervals",
        "One row per variable: the dot is alpha, the bar its bootstrap interval; the lines mark "
        "the conventions of the field (.800 reliable, .667 tentative; Krippendorff, 2004).",
        ("intervals",),
    ),
    Section(
        "categories",
        "Categories",
        "For each categorical variable: which categories the coders confused (counts off the "
        "diagonal) and the agreement on each category.",
        ("categories", "confusion"),
    ),
    Section(
        "numeric",
        "Numeric variables",
        "Intraclass correlations (Shrout & Fleiss, 1979) with F-test and bootstrap intervals, "
        "Lin's concordance coefficient and Bland-Altman limits of agreement per pair of coders, "
        "with a plot of differences against means.",
        ("icc", "limits"),
    ),
    Section(
        "coders",
        "Coders",
        "Agreement of each pair of coders over all variables; with decisions, each coder's "
        "agreement with the final (settled) value. A coder far below the others may need "
        "retraining; it is not a measure of who is right.",
        ("coders",),
    ),
    Section(
        "training",
        "Training against the key",
        "Each trainee's agreement with the answer key per variable, and pass or fail against "
        "the training threshold (a convention). Agreement with a key is not proof that the key "
        "is right.",
        ("training",),
    ),
    Section(
        "rounds",
        "Reliability across rounds",
        "Alpha per variable in each round (pilot, training, production) with its interval and "
        "the change between rounds, and each coder's agreement with the others by round.",
        ("rounds", "rounds_coders"),
    ),
    Section(
        "stability",
        "Stability",
        "Each coder against their own second coding of the same units (test-retest, "
        "intra-coder reliability; Krippendorff, 2004): consistency over time, not agreement "
        "between coders.",
        ("stability",),
    ),
    Section(
        "adjudication",
        "Adjudication progress",
        "How each cell of the final dataset was settled, by variable.",
        ("adjudication",),
    ),
    Section(
        "methods",
        "Methods paragraph",
        "Ready to paste into a methods section; check it against your own reporting rules.",
        ("methods",),
    ),
    Section(
        "ethics",
        "Ethics and data protection",
        "What this report holds and what to keep in mind when sharing it.",
        ("ethics",),
    ),
    Section(
        "reproducibility",
        "Reproducibility",
        "Everything needed to compute the same numbers again.",
        ("reproducibility",),
    ),
)

ETHICS_NOTES: tuple[str, ...] = (
    "This report holds no narrative text: only codes, counts and coefficients.",
    "The coders' sheets and the adjudication list do hold the narrative reports. Keep them "
    "under your ethics board's approval and your data-protection rules (who may see them, "
    "where they are stored, how long they are kept).",
    "When you quote or describe a narrative report in a publication, remove details that "
    "could identify a person.",
)


def sections(content: ReportContent) -> tuple[Section, ...]:
    """The sections this report has (adjudication only with a decisions file; training and
    rounds only with their results; numeric variables and stability only when there are any)."""
    protocol = content.protocol
    present = {
        "adjudication": content.adjudication is not None,
        "training": protocol is not None and bool(protocol.training),
        "rounds": protocol is not None and bool(protocol.rounds),
        "numeric": bool(content.numeric),
        "stability": content.stability is not None,
    }
    return tuple(s for s in SECTIONS if present.get(s.key, True))


def _s(n: int) -> str:
    return "" if n == 1 else "s"


def level_text(content: ReportContent) -> str:
    """``95%``: the interval level."""
    return f"{round(content.reproducibility.ci_level * 100)}%"


# ---- summary -------------------------------------------------------------------------------


def summary_rows(content: ReportContent) -> list[tuple[str, str]]:
    """The summary as (item, value) pairs of text."""
    s = content.summary
    main = [r for r in content.table if r.kind == "variable"]
    extra = len(content.table) - len(main)
    base = common_thresholds(main)
    th_r, th_t = fmt_coef(base[0], 3), fmt_coef(base[1], 3)
    own = [r.variable for r in main if (r.reliable, r.tentative) != base]
    own_text = f"; {', '.join(own)} by the codebook's own thresholds" if own else ""
    counts = dict(s.verdicts)
    blank = s.cells_total - s.cells_filled - s.cells_not_applicable
    rows = [
        ("Project", s.title),
        ("Units", s.units_text()),
        ("Coders", f"{len(s.coders)}: {', '.join(s.coders)}"),
        (
            "Variables",
            f"{s.variables}"
            + (f" (and {extra} applicability row{_s(extra)} for skip logic)" if extra else ""),
        ),
        ("Reliable", f"{counts.get('reliable', 0)} (α ≥ {th_r}{own_text})"),
        ("Tentative", f"{counts.get('tentative', 0)} ({th_t} ≤ α < {th_r}{own_text})"),
        ("Unreliable", f"{counts.get('unreliable', 0)} (α < {th_t}{own_text})"),
    ]
    if counts.get("too few units"):
        rows.append(
            (
                "Too few units",
                f"{counts['too few units']} (alpha rests on fewer than 10 units: no interval "
                "and no verdict)",
            )
        )
    if counts.get("undefined"):
        rows.append(("Undefined", f"{counts['undefined']} (alpha has no value; see the table)"))
    rows.append(
        (
            "Completeness",
            f"{pct(s.completeness)} of {s.cells_total:,} cells (units × coders × variables) hold "
            f"a value; {s.cells_not_applicable:,} do not apply by the codebook's skip logic; "
            f"{max(blank, 0):,} are blank, missing codes or not coded",
        )
    )
    return rows


# ---- agreement -----------------------------------------------------------------------------


def present_coefficients(content: ReportContent) -> list[str]:
    """Coefficient keys shown for at least one row, in the report's order."""
    keys = {c.key for r in content.table for c in r.coefficients}
    return [k for k in COEFFICIENTS if k in keys] + sorted(keys - set(COEFFICIENTS))


def agreement_rows(content: ReportContent) -> list[dict[str, str]]:
    """One display row per table row: variable, level, units, alpha, interval, verdict, notes."""
    out = []
    for r in content.table:
        a = r.alpha
        out.append(
            {
                "variable": r.variable,
                "label": r.label,
                "kind": r.kind,
                "level": r.level,
                "units": f"{r.units:,}",
                "coders": str(r.coders),
                "alpha": coef_value(a) if a is not None else "–",
                "interval": coef_interval(a) if a is not None else "",
                "se": fmt_coef(a.se, 3) if a is not None and a.se is not None else "",
                "verdict": r.verdict,
                "notes": "; ".join(r.notes),
                "reason": reason_text(a.reason) if a is not None and a.estimate is None else "",
            }
        )
    return out


def coefficient_parts(row: VariableRow, key: str) -> tuple[str, str, str, str]:
    """One coefficient of one row as text: (estimate or ``undefined``, interval, SE, why)."""
    c = row.coefficient(key)
    if c is None:
        return "–", "", "", ""
    if c.estimate is None:
        return "undefined", "", "", reason_text(c.reason)
    se = fmt_coef(c.se, 3) if c.se is not None else ""
    return coef_value(c), coef_interval(c), se, ""


def coefficient_cell(row: VariableRow, key: str) -> str:
    """One coefficient of one row as ``.842 [.791, .880] SE .023`` (or ``undefined (why)``)."""
    value, interval, se, why = coefficient_parts(row, key)
    if why:
        return f"{value} ({why})"
    return " ".join(x for x in (value, interval, f"SE {se}" if se else "") if x)


def agreement_frame(content: ReportContent) -> pd.DataFrame:
    """Per row: variable, label, kind, level, units, coders, alpha, interval, verdict, notes."""
    rows = []
    for r in content.table:
        a = r.alpha
        rows.append(
            {
                "variable": r.variable,
                "label": r.label,
                "kind": r.kind,
                "level": r.level,
                "units": r.units,
                "coders": r.coders,
                "alpha": a.estimate if a else None,
                "ci_low": a.ci_low if a else None,
                "ci_high": a.ci_high if a else None,
                "se": a.se if a else None,
                "verdict": r.verdict,
                "threshold_reliable": r.reliable,
                "threshold_tentative": r.tentative,
                "notes": "; ".join(r.notes),
            }
        )
    return pd.DataFrame(rows)


def coefficients_frame(content: ReportContent) -> pd.DataFrame:
    """Tidy: one row per variable and coefficient, with interval, SE and reason."""
    rows = [
        {
            "variable": r.variable,
            "kind": r.kind,
            "level": r.level,
            "coefficient": c.key,
            "name": c.name,
            "estimate": c.estimate,
            "ci_low": c.ci_low,
            "ci_high": c.ci_high,
            "se": c.se,
            "undefined_because": c.reason if c.estimate is None else None,
        }
        for r in content.table
        for c in r.coefficients
    ]
    return pd.DataFrame(
        rows,
        columns=[
            "variable",
            "kind",
            "level",
            "coefficient",
            "name",
            "estimate",
            "ci_low",
            "ci_high",
            "se",
            "undefined_because",
        ],
    )


def intervals_frame(content: ReportContent) -> pd.DataFrame:
    """The interval chart's data."""
    return pd.DataFrame(
        [
            {
                "variable": r.variable,
                "alpha": r.alpha.estimate if r.alpha else None,
                "ci_low": r.alpha.ci_low if r.alpha else None,
                "ci_high": r.alpha.ci_high if r.alpha else None,
                "verdict": r.verdict,
                "threshold_reliable": r.reliable,
                "threshold_tentative": r.tentative,
            }
            for r in content.table
        ],
        columns=[
            "variable",
            "alpha",
            "ci_low",
            "ci_high",
            "verdict",
            "threshold_reliable",
            "threshold_tentative",
        ],
    )


# ---- categories ----------------------------------------------------------------------------

#: Column titles of the per-category table.
CATEGORY_TITLES: dict[str, str] = {
    "code": "Code",
    "label": "Category",
    "fleiss_kappa": "Fleiss' κ",
    "specific_agreement": "Specific agreement",
    "alpha_chosen_or_not": "α (chosen or not)",
    "share_of_values": "Share of values",
    "values_with_category": "Values with the category",
}


def category_cell(column: str, value: object) -> str:
    """A per-category statistic as text (``–`` when undefined)."""
    if column in ("specific_agreement", "share_of_values") and isinstance(value, float):
        return pct(value)
    if isinstance(value, int) and not isinstance(value, bool):
        return f"{value:,}"
    return plain(value)


def categories_frame(content: ReportContent) -> pd.DataFrame:
    """Long: one row per variable and category with every per-category statistic."""
    rows = []
    for p in content.categories:
        for values in p.category_rows:
            rows.append(
                {"variable": p.variable, **dict(zip(p.category_columns, values, strict=True))}
            )
    return pd.DataFrame(rows)


def confusion_frame(content: ReportContent) -> pd.DataFrame:
    """Long: one row per variable and cell of its summed coder-by-coder table."""
    rows = [
        {
            "variable": p.variable,
            "first_coder_code": p.codes[i],
            "second_coder_code": p.codes[j],
            "units": n,
        }
        for p in content.categories
        if p.matrix is not None
        for i, line in enumerate(p.matrix)
        for j, n in enumerate(line)
    ]
    return pd.DataFrame(
        rows, columns=["variable", "first_coder_code", "second_coder_code", "units"]
    )


# ---- coders --------------------------------------------------------------------------------


def pair_text(content: ReportContent, i: int, j: int) -> str:
    """``91.4% · α .88 · κ .85`` for coders i and j (``–`` on the diagonal or without data)."""
    c = content.coders
    p = c.pair_percent[i][j]
    a = c.pair_alpha[i][j] if c.pair_alpha else None
    k = c.pair_kappa[i][j]
    if p is None and k is None and a is None:
        return "–"
    parts = [pct(p)] if p is not None else []
    if a is not None:
        parts.append(f"α {fmt_coef(a)}")
    if k is not None:
        parts.append(f"κ {fmt_coef(k)}")
    return " · ".join(parts)


def coders_frame(content: ReportContent) -> pd.DataFrame:
    """Pairs of coders, then (with decisions) each coder against the final value."""
    c = content.coders
    rows = []
    for i, a in enumerate(c.coders):
        for j in range(i + 1, len(c.coders)):
            rows.append(
                {
                    "comparison": "pair of coders",
                    "coder": a,
                    "with": c.coders[j],
                    "values_compared": c.pair_units[i][j],
                    "percent_agreement": c.pair_percent[i][j],
                    "mean_krippendorff_alpha": c.pair_alpha[i][j] if c.pair_alpha else None,
                    "mean_cohen_kappa": c.pair_kappa[i][j],
                }
            )
    for f in c.final:
        rows.append(
            {
                "comparison": "coder against final value",
                "coder": f.coder,
                "with": "final value",
                "values_compared": f.units,
                "percent_agreement": f.percent_agreement,
                "mean_cohen_kappa": f.mean_kappa,
            }
        )
    return pd.DataFrame(
        rows,
        columns=[
            "comparison",
            "coder",
            "with",
            "values_compared",
            "percent_agreement",
            "mean_krippendorff_alpha",
            "mean_cohen_kappa",
        ],
    )


# ---- adjudication --------------------------------------------------------------------------


def adjudication_frame(content: ReportContent) -> pd.DataFrame:
    """Statuses of the final cells by variable, with a total row."""
    adj = content.adjudication
    if adj is None:
        return pd.DataFrame()
    rows = []
    for name, counts in adj.by_variable:
        row = {"variable": name, **dict(zip(STATUSES, counts, strict=True))}
        row["settled"] = sum(row[s] for s in ("agreed", "majority", "adjudicated", "single"))
        rows.append(row)
    total = {"variable": "all variables", **dict(adj.totals)}
    total["settled"] = adj.resolved
    rows.append(total)
    return pd.DataFrame(rows, columns=["variable", *STATUSES, "settled"])


STATUS_MEANING: dict[str, str] = {
    "agreed": "every coder gave the same value",
    "within_tolerance": "the coders' numbers lie within the variable's tolerance (median kept)",
    "majority": "most coders agreed and the rule accepts a majority",
    "adjudicated": "an adjudicator decided",
    "single": "only one coder gave a value",
    "unresolved": "coders disagree and no decision was made yet",
    "not_applicable": "the variable does not apply (skip logic)",
}


# ---- methods, ethics, reproducibility ------------------------------------------------------


def methods_frame(content: ReportContent) -> pd.DataFrame:
    m = content.methods
    rows = [{"part": "methods paragraph", "text": m.paragraph}]
    rows += [{"part": "caution", "text": t} for t in m.cautions]
    rows += [{"part": "reference", "text": t} for t in m.references]
    return pd.DataFrame(rows, columns=["part", "text"])


def ethics_frame(content: ReportContent) -> pd.DataFrame:
    """The ethics notes (the same for every report; takes the content like the others)."""
    del content
    return pd.DataFrame({"note": list(ETHICS_NOTES)})


def reproducibility_rows(content: ReportContent) -> list[tuple[str, str, str]]:
    """(item, value, SHA-256) rows of the reproducibility block."""
    r = content.reproducibility
    rows = [
        ("coderel version", r.coderel_version, ""),
        ("codebook", f"{r.codebook_title}, version {r.codebook_version}", ""),
    ]
    if r.codebook_file is not None:
        rows.append(
            (
                "codebook file",
                f"{r.codebook_file.name} ({r.codebook_file.size:,} bytes)",
                r.codebook_file.sha256,
            )
        )
    for src in r.sources:
        rows.append(("coder sheet", f"{src.name} ({src.size:,} bytes)", src.sha256))
    if r.decisions_file is not None:
        d = r.decisions_file
        rows.append(("decisions file", f"{d.name} ({d.size:,} bytes)", d.sha256))
    rows += [
        ("bootstrap replicates", f"{r.replicates:,}", ""),
        ("seed", "–" if r.seed is None else str(r.seed), ""),
        ("interval", f"{round(r.ci_level * 100)}% {_interval_name(r.interval)}", ""),
        ("date", r.generated_utc, ""),
    ]
    if r.command:
        rows.append(("command", r.command, ""))
    return rows


def _interval_name(method: str) -> str:
    return {"bca": "bias-corrected and accelerated (BCa, Efron 1987)"}.get(
        method.lower(), method or "percentile"
    )


def reproducibility_frame(content: ReportContent) -> pd.DataFrame:
    return pd.DataFrame(reproducibility_rows(content), columns=["item", "value", "sha256"])


def section_frames(content: ReportContent) -> dict[str, pd.DataFrame]:
    """Sheet name -> table, one or more sheets per section, in section order."""
    builders = {
        "summary": lambda c: pd.DataFrame(summary_rows(c), columns=["item", "value"]),
        "agreement": agreement_frame,
        "coefficients": coefficients_frame,
        "intervals": intervals_frame,
        "categories": categories_frame,
        "confusion": confusion_frame,
        "coders": coders_frame,
        "adjudication": adjudication_frame,
        "methods": methods_frame,
        "ethics": ethics_frame,
        "reproducibility": reproducibility_frame,
        "icc": lambda c: icc_frame(c.numeric),
        "limits": lambda c: limits_frame(c.numeric),
        "stability": lambda c: stability_frame(c.stability),
    }
    extra = dict(content.protocol.frames) if content.protocol is not None else {}
    frames: dict[str, pd.DataFrame] = {}
    for s in sections(content):
        for sheet in s.sheets:
            frames[sheet] = extra[sheet] if sheet in extra else builders[sheet](content)
        if s.key == "coders":
            frames.update({k: v for k, v in extra.items() if k.startswith("coders_")})
    return frames
