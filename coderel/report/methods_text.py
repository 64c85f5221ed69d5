"""The ready-to-paste methods paragraph, its references and the cautions that go with it.

Numbers follow journal style (APA 7th ed., section 6.36): coefficients that cannot exceed 1 lose
the leading zero (``α = .84, 95% CI [.79, .88]``), negative values take a minus sign.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from coderel.report.model import MethodsText

if TYPE_CHECKING:
    from coderel.report.model import Adjudication, Reproducibility, Summary, VariableRow

MINUS = "\u2212"

#: Short reference list; a coefficient's key names the references its sentence cites.
REFERENCES: dict[str, str] = {
    "krippendorff2004": (
        "Krippendorff, K. (2004). Content analysis: An introduction to its methodology "
        "(2nd ed.). Sage."
    ),
    "krippendorff2011": (
        "Krippendorff, K. (2011). Computing Krippendorff's alpha-reliability. Departmental "
        "Papers (ASC), 43. Annenberg School for Communication, University of Pennsylvania."
    ),
    "jaccard1912": (
        "Jaccard, P. (1912). The distribution of the flora in the alpine zone. New Phytologist, "
        "11(2), 37-50."
    ),
    "hayes2007": (
        "Hayes, A. F., & Krippendorff, K. (2007). Answering the call for a standard reliability "
        "measure for coding data. Communication Methods and Measures, 1(1), 77-89."
    ),
    "hanley2006": (
        "Hanley, J. A., & MacGibbon, B. (2006). Creating non-parametric bootstrap samples using "
        "Poisson frequencies. Computer Methods and Programs in Biomedicine, 83(1), 57-62."
    ),
    "efron1987": (
        "Efron, B. (1987). Better bootstrap confidence intervals. Journal of the American "
        "Statistical Association, 82(397), 171-185."
    ),
    "cohen1960": (
        "Cohen, J. (1960). A coefficient of agreement for nominal scales. Educational and "
        "Psychological Measurement, 20(1), 37-46."
    ),
    "cohen1968": (
        "Cohen, J. (1968). Weighted kappa: Nominal scale agreement with provision for scaled "
        "disagreement or partial credit. Psychological Bulletin, 70(4), 213-220."
    ),
    "fleiss1971": (
        "Fleiss, J. L. (1971). Measuring nominal scale agreement among many raters. "
        "Psychological Bulletin, 76(5), 378-382."
    ),
    "light1971": (
        "Light, R. J. (1971). Measures of response agreement for qualitative data: Some "
        "generalizations and alternatives. Psychological Bulletin, 76(5), 365-377."
    ),
    "scott1955": (
        "Scott, W. A. (1955). Reliability of content analysis: The case of nominal scale "
        "coding. Public Opinion Quarterly, 19(3), 321-325."
    ),
    "brennan1981": (
        "Brennan, R. L., & Prediger, D. J. (1981). Coefficient kappa: Some uses, misuses, and "
        "alternatives. Educational and Psychological Measurement, 41(3), 687-699."
    ),
    "gwet2008": (
        "Gwet, K. L. (2008). Computing inter-rater reliability and its variance in the presence "
        "of high agreement. British Journal of Mathematical and Statistical Psychology, 61(1), "
        "29-48."
    ),
    "gwet2014": (
        "Gwet, K. L. (2014). Handbook of inter-rater reliability (4th ed.). Advanced Analytics."
    ),
    "shrout1979": (
        "Shrout, P. E., & Fleiss, J. L. (1979). Intraclass correlations: Uses in assessing rater "
        "reliability. Psychological Bulletin, 86(2), 420-428."
    ),
    "mcgraw1996": (
        "McGraw, K. O., & Wong, S. P. (1996). Forming inferences about some intraclass "
        "correlation coefficients. Psychological Methods, 1(1), 30-46."
    ),
    "lin1989": (
        "Lin, L. I.-K. (1989). A concordance correlation coefficient to evaluate "
        "reproducibility. Biometrics, 45(1), 255-268."
    ),
    "blandaltman1986": (
        "Bland, J. M., & Altman, D. G. (1986). Statistical methods for assessing agreement "
        "between two methods of clinical measurement. The Lancet, 327(8476), 307-310."
    ),
    "blandaltman1999": (
        "Bland, J. M., & Altman, D. G. (1999). Measuring agreement in method comparison "
        "studies. Statistical Methods in Medical Research, 8(2), 135-160."
    ),
    "byrt1993": (
        "Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. Journal of "
        "Clinical Epidemiology, 46(5), 423-429."
    ),
}

#: Coefficient key -> (name in the paragraph, citation in the text, reference keys).
_CITED: dict[str, tuple[str, str, tuple[str, ...]]] = {
    "percent_agreement": ("percent agreement", "", ()),
    "cohen_kappa": ("Cohen's kappa", "Cohen, 1960", ("cohen1960",)),
    "weighted_kappa_linear": (
        "weighted kappa with linear weights",
        "Cohen, 1968",
        ("cohen1968",),
    ),
    "weighted_kappa_quadratic": (
        "weighted kappa with quadratic weights",
        "Cohen, 1968",
        ("cohen1968",),
    ),
    "light_kappa": ("Light's kappa", "Light, 1971", ("light1971",)),
    "fleiss_kappa": ("Fleiss' kappa", "Fleiss, 1971", ("fleiss1971",)),
    "scott_pi": ("Scott's pi", "Scott, 1955", ("scott1955",)),
    "brennan_prediger": (
        "the Brennan-Prediger coefficient",
        "Brennan & Prediger, 1981",
        ("brennan1981",),
    ),
    "gwet_ac1": ("Gwet's AC1", "Gwet, 2008", ("gwet2008",)),
    "gwet_ac2": ("Gwet's AC2 with ordinal weights", "Gwet, 2014", ("gwet2014",)),
    "pabak": ("prevalence- and bias-adjusted kappa (PABAK)", "Byrt et al., 1993", ("byrt1993",)),
}

_NUMBER_WORDS = ("zero", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine")


def fmt_coef(value: float | None, digits: int = 2) -> str:
    """A coefficient bounded by 1 in journal style: ``.84``, ``−.12``, ``1.00``; ``–`` if None.

    >>> fmt_coef(0.8412), fmt_coef(-0.1234), fmt_coef(1.0), fmt_coef(0.8, 3)
    ('.84', '−.12', '1.00', '.800')
    """
    if value is None:
        return "–"
    text = f"{abs(value):.{digits}f}"
    if text.startswith("0."):
        text = text[1:]
    if value < 0 and text.strip("0.") != "":
        text = MINUS + text
    return text


def fmt_interval(low: float | None, high: float | None, digits: int = 2) -> str:
    """``[.79, .88]``, or an empty string when the interval is unknown."""
    if low is None or high is None:
        return ""
    return f"[{fmt_coef(low, digits)}, {fmt_coef(high, digits)}]"


def number_word(n: int, *, capital: bool = False) -> str:
    """Journal style: words below ten, numerals from ten."""
    word = _NUMBER_WORDS[n] if 0 <= n < len(_NUMBER_WORDS) else f"{n:,}"
    return word[:1].upper() + word[1:] if capital else word


def _count(n: int, *, numerals: bool = False) -> str:
    """A count of variables: ``none`` for zero, else words below ten (numerals if asked)."""
    if n == 0:
        return "none"
    return f"{n:,}" if numerals else number_word(n)


#: Reasons of the report's own that the engine's list does not name.
_MORE_REASONS: dict[str, str] = {
    "too-few-units": "too few units with values from two or more coders for an interval",
    "perfect-agreement": "the coders agreed on every unit, so the bootstrap shows no uncertainty",
    "too-few-replicates": "too few bootstrap replicates for an interval",
    "one-value-used": "every pairable value is the same, so the estimate says nothing about "
    "reliability",
}
#: Why no interval is given for a variable whose alpha stands, as the end of a sentence.
_NO_CI_WHY: dict[str, str] = {
    "too-few-units": "too few units held values from two or more coders",
    "perfect-agreement": "the coders agreed on every unit, so every bootstrap resample agrees "
    "too and an interval would claim a certainty the sample cannot give",
    "too-few-replicates": "too few bootstrap replicates were drawn",
}


def reason_text(reason: str | None) -> str:
    """Plain words for an engine's reason slug (``no-variation`` -> a sentence fragment)."""
    from coderel.stats.undefined import describe

    if not reason:
        return ""
    return _MORE_REASONS.get(reason) or describe(reason)


def alpha_phrase(estimate: float | None, low: float | None, high: float | None, level: int) -> str:
    """``α = .84, 95% CI [.79, .88]``."""
    text = f"α = {fmt_coef(estimate)}"
    interval = fmt_interval(low, high)
    if interval:
        text += f", {level}% CI {interval}"
    return text


def _join(items: Sequence[str]) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    if len(items) == 2:
        return f"{items[0]} and {items[1]}"
    return ", ".join(items[:-1]) + f", and {items[-1]}"


_SETTLED_BY: dict[str, str] = {
    "agreed": "{be} agreed by every coder who coded the unit",
    "within_tolerance": "{be} settled because the coders' numbers lay within the tolerance "
    "(their median kept)",
    "majority": "{be} settled by a majority of the coders",
    "adjudicated": "{be} decided by an adjudicator",
    "single": "{be} coded by one coder only",
    "not_applicable": "did not apply by the codebook's skip logic",
    "unresolved": "{remain} unresolved",
}


def adjudication_sentence(adjudication: Adjudication) -> str:
    """How the final values were reached, with the merge's counts (e.g. ``Of the 2,000 cells
    (units × variables) of the final dataset, 1,315 were agreed ..., 510 were decided by an
    adjudicator ...``)."""
    parts = []
    for status, n in adjudication.totals:
        if n:
            phrase = _SETTLED_BY.get(status, "{be} " + status.replace("_", " "))
            phrase = phrase.format(
                be="was" if n == 1 else "were", remain="remains" if n == 1 else "remain"
            )
            parts.append(f"{n:,} {phrase}")
    rule = (
        "a majority of more than half of the coders settled a disagreement"
        if adjudication.rule == "majority"
        else "only unanimous values were accepted without an adjudicator"
    )
    if adjudication.tolerance:
        rule += (
            "; numbers within "
            + _join([f"{v:g} for {n}" for n, v in adjudication.tolerance])
            + " counted as agreeing"
        )
    return (
        f"Of the {adjudication.cells:,} cells (units × variables) of the final dataset, "
        f"{_join(parts)} (rule: {rule})."
    )


def methods_text(
    *,
    summary: Summary,
    table: Sequence[VariableRow],
    repro: Reproducibility,
    extra: tuple[Sequence[str], Sequence[str]] = ((), ()),
    adjudication: Adjudication | None = None,
) -> MethodsText:
    """Write the methods paragraph from the report's summary, table and reproducibility block.

    ``extra`` holds further sentences (numeric variables, stability) and their reference keys;
    they come before the closing sentence on validity. Every count comes from ``summary`` and
    ``adjudication`` (the objects the summary and adjudication tables show).
    """
    level = round(repro.ci_level * 100)
    rows = [r for r in table if r.kind == "variable"]
    refs = ["krippendorff2004", "krippendorff2011"]
    n_coders = len(summary.coders)
    levels = sorted({r.level for r in rows}, key=("nominal", "ordinal", "interval", "ratio").index)
    s = []
    s.append(
        f"{number_word(n_coders, capital=True)} "
        f"{'coders independently' if n_coders != 1 else 'coder'} coded "
        f"{summary.units:,} units on {number_word(len(rows))} "
        f"variable{'s' if len(rows) != 1 else ''} defined in a codebook "
        f"({repro.codebook_title}, version {repro.codebook_version})"
        + (
            f"; {summary.units_all_coders:,} of the units were coded by every coder ("
            + ", ".join(f"{c} {n:,}" for c, n in summary.units_per_coder)
            + ")."
            if summary.units_all_coders < summary.units and n_coders > 1
            else "."
        )
    )
    if n_coders < 2:
        s.append(
            "Intercoder reliability could not be assessed: it needs at least two coders coding "
            "the same units."
        )
        # Stability (one coder against their own recoding) needs no second coder.
        s.extend(extra[0])
        keys = sorted(set(extra[1]), key=REFERENCES_ORDER.index)
        return MethodsText(
            paragraph=" ".join(s),
            references=tuple(REFERENCES[k] for k in keys),
            cautions=_cautions(common_thresholds(rows)),
        )
    s.append(
        "Intercoder reliability was assessed per variable with Krippendorff's alpha "
        "(Krippendorff, 2004, 2011), using the difference function of each variable's level of "
        f"measurement ({_join(levels)})."
    )
    multi = [r.variable for r in rows if r.multiple]
    if multi:
        s.append(
            f"For the multi-select variable{'s' if len(multi) > 1 else ''} {_join(multi)}, the "
            "difference between two coders' sets of codes was the Jaccard distance (one minus "
            "the share of codes in common; Jaccard, 1912), and alpha was also computed per "
            "category on whether it was chosen."
        )
        refs.append("jaccard1912")
    conditional = [r.variable for r in rows if r.conditional]
    if conditional:
        s.append(
            f"The variable{'s' if len(conditional) > 1 else ''} {_join(conditional)} "
            f"{'was' if len(conditional) == 1 else 'were'} coded only where the codebook's skip "
            "logic applied, and agreement on whether "
            f"{'it' if len(conditional) == 1 else 'they'} applied is reported separately."
        )
    present = [
        key
        for key in _CITED
        if any((c := r.coefficient(key)) is not None and c.estimate is not None for r in rows)
    ]
    if present:
        names = []
        for key in present:
            name, cite, keys = _CITED[key]
            names.append(f"{name} ({cite})" if cite else name)
            refs.extend(k for k in keys if k not in refs)
        s.append(f"For comparison we also report {_join(names)}.")
    any_ci = any(
        (c := r.coefficient(key)) is not None and c.ci_low is not None and c.ci_high is not None
        for r in rows
        for key in ("krippendorff_alpha", *_CITED)
    )
    if repro.replicates and any_ci:
        refs.extend(["hayes2007", "hanley2006"])
        if repro.interval.lower() == "bca":
            kind = "bias-corrected and accelerated (BCa) intervals (Efron, 1987)"
            refs.append("efron1987")
        else:
            kind = f"{repro.interval or 'percentile'} intervals"
        seed = f", random seed {repro.seed}" if repro.seed is not None else ""
        s.append(
            f"{level}% confidence intervals were obtained by bootstrapping units "
            f"(Hayes & Krippendorff, 2007; {repro.replicates:,} replicates{seed}; Poisson(1) unit "
            f"weights, Hanley & MacGibbon, 2006) as {kind}; "
            "the coders were treated as fixed, so the intervals do not include the variation "
            "from choosing other coders."
        )
    defined = [(r, r.alpha) for r in rows if r.alpha is not None and r.alpha.estimate is not None]
    if defined:
        values = [a.estimate for _, a in defined]
        lo, hi = min(values), max(values)
        if len(defined) > 1:
            s.append(f"Alpha ranged from {fmt_coef(lo)} to {fmt_coef(hi)} across variables.")
        reliable = sum(1 for r in rows if r.verdict == "reliable")
        tentative = sum(1 for r in rows if r.verdict == "tentative")
        below = sum(1 for r in rows if r.verdict == "unreliable")
        base = common_thresholds(rows)
        th_r, th_t = fmt_coef(base[0], 3), fmt_coef(base[1], 3)
        own = [r for r in rows if (r.reliable, r.tentative) != base]
        others = ""
        if own:
            others = (
                " (the codebook sets its own thresholds for "
                + _join(
                    [
                        f"{r.variable}, {fmt_coef(r.reliable, 3)} and {fmt_coef(r.tentative, 3)}"
                        for r in own
                    ]
                )
                + ")"
            )
        few = [r.variable for r in rows if r.verdict == "too few units"]
        judged = len(rows) - len(few)
        # APA 7th ed. 6.32: numbers compared with a number of 10 or more are all numerals.
        big = len(rows) >= 10
        of = (
            f"Of {number_word(len(rows))} variables"
            if not few
            else f"Of the {number_word(judged)} variable{'s' if judged != 1 else ''} with "
            "enough units"
        )
        verdicts = (
            f"{of}, {_count(reliable, numerals=big)} reached "
            f"α ≥ {th_r}, {_count(tentative, numerals=big)} reached only α ≥ {th_t} (acceptable "
            f"for tentative conclusions) and {_count(below, numerals=big)} fell below {th_t}"
            f"{others}; these thresholds are conventions of the field (Krippendorff, 2004), not "
            "statistical tests."
        )
        if judged:
            s.append(verdicts)
        if few:
            s.append(
                f"No verdict is given for {_join(few)}: alpha rests on fewer than ten units "
                "coded by two or more coders."
            )
        parts = [
            f"{r.variable}, {alpha_phrase(a.estimate, a.ci_low, a.ci_high, level)}"
            for r, a in defined
        ]
        s.append("Per variable: " + "; ".join(parts) + ".")
        no_ci: dict[str, list[str]] = {}
        for r, a in defined:
            if a.ci_low is None or a.ci_high is None:
                why = _NO_CI_WHY.get(a.reason or "too-few-units", _NO_CI_WHY["too-few-units"])
                no_ci.setdefault(why, []).append(r.variable)
        if repro.replicates and no_ci:
            parts = [f"{_join(names)}: {why}" for why, names in no_ci.items()]
            s.append("No interval is given for " + "; and for ".join(parts) + ".")
    undefined = [r for r in rows if r.alpha is None or r.alpha.estimate is None]
    if undefined:
        groups: dict[str, list[str]] = {}
        for r in undefined:
            reason = r.alpha.reason if r.alpha is not None and r.alpha.reason else "no-variation"
            groups.setdefault(reason_text(reason), []).append(r.variable)
        parts = [f"{_join(names)}: {why}" for why, names in groups.items()]
        s.append("Alpha was undefined for " + "; and for ".join(parts) + ".")
    if adjudication is not None:
        s.append(adjudication_sentence(adjudication))
    s.extend(extra[0])
    refs.extend(k for k in extra[1] if k not in refs)
    s.append(
        "Agreement between coders shows that the codebook was applied consistently; it does not "
        "show that the codes are valid measures of what they are meant to capture."
    )
    return MethodsText(
        paragraph=" ".join(s),
        references=tuple(REFERENCES[k] for k in sorted(set(refs), key=REFERENCES_ORDER.index)),
        cautions=_cautions(common_thresholds(rows)),
    )


def common_thresholds(rows: Sequence[VariableRow]) -> tuple[float, float]:
    """The (reliable, tentative) pair most variables use (the first variable's on a tie)."""
    pairs = [(r.reliable, r.tentative) for r in rows]
    if not pairs:
        return (0.800, 0.667)
    return max(pairs, key=lambda p: (pairs.count(p), -pairs.index(p)))


def _cautions(thresholds: tuple[float, float] = (0.800, 0.667)) -> tuple[str, ...]:
    th_r, th_t = fmt_coef(thresholds[0], 3), fmt_coef(thresholds[1], 3)
    return (
        "Reliability is not validity: coders can agree on a wrong reading of the text. Check "
        "validity separately (for example against an expert standard or other data).",
        f"The thresholds {th_r} and {th_t} are conventions of the field (Krippendorff, 2004), "
        "not tests; report the interval, not only whether a threshold was passed.",
        "When you describe or quote the narrative reports, follow your ethics board's approval "
        "and your data-protection rules. This report contains no narrative text.",
    )


REFERENCES_ORDER: list[str] = sorted(REFERENCES, key=lambda k: REFERENCES[k])
