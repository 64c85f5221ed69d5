"""A variable's verdict (thresholds are conventions of the field) and its notes in plain words:
thin data, perfect agreement, the prevalence paradox, rare categories, the units Fleiss' kappa
uses."""

from __future__ import annotations

from coderel.agree.conventions import (
    MIN_UNITS_FOR_INTERVAL,
    ONE_VALUE_USED,
    PARADOX_AGREEMENT,
    PERFECT_AGREEMENT,
    RARE_SHARE,
    TOO_FEW_REPLICATES,
    TOO_FEW_UNITS_VERDICT,
    min_replicates,
)
from coderel.agree.matrices import Target
from coderel.agree.results import Estimate
from coderel.codebook.model import Thresholds
from coderel.stats import undefined as U


def verdict(alpha: Estimate | None, th: Thresholds, pairable_units: int | None = None) -> str:
    if alpha is None or alpha.estimate is None:
        return "undefined"
    if pairable_units is not None and pairable_units < MIN_UNITS_FOR_INTERVAL:
        return TOO_FEW_UNITS_VERDICT
    a = alpha.estimate
    if a >= th.reliable:
        return "reliable"
    return "tentative" if a >= th.tentative else "unreliable"


def share_in_words(x: float) -> str:
    """A share in words: one decimal below 10% (``1.5%``), whole percent above (``25%``)."""
    return f"{x:.1%}" if x < 0.1 else f"{x:.0%}"


def notes_for(
    t: Target,
    coefs: dict[str, Estimate | None],
    pairable_units: int,
    fleiss: tuple[int, int],
    cat_agree: dict,
    replicates: int = 0,
    ci_level: float = 0.95,
) -> list[str]:
    notes: list[str] = []
    th = t.thresholds
    withheld = {e.reason for e in coefs.values() if e is not None and e.estimate is not None}
    if pairable_units < MIN_UNITS_FOR_INTERVAL:
        notes.append(
            f"only {pairable_units} units have two or more values: too few for a "
            "meaningful interval or a verdict, none is given"
        )
    if PERFECT_AGREEMENT in withheld:
        # Rule of three: with no event in n trials, 3/n is an approximate 95% upper bound of
        # its rate (Hanley & Lippman-Hand 1983, JAMA 249(13), 1743-1745; from memory).
        notes.append(
            f"the coders agreed on every one of the {pairable_units} units: every bootstrap "
            "resample agrees too, so no interval is given (it would be [1, 1] and claim "
            "certainty); even so, up to about "
            f"{share_in_words(min(1.0, 3 / pairable_units))} of units could be disagreements in "
            "a larger sample (rule of three, 95%)"
        )
    if TOO_FEW_REPLICATES in withheld:
        notes.append(
            f"{replicates} bootstrap replicate(s) are too few for a {ci_level:.0%} interval "
            f"(at least {min_replicates(ci_level)}; 1,000 or more is usual): none is given"
        )
    if any(e is not None and e.reason == ONE_VALUE_USED for e in coefs.values()):
        notes.append(
            "every pairable value is the same: alpha and the kappas are undefined, while percent "
            "agreement, Brennan-Prediger, AC1 and PABAK are 1 by their definitions; this says "
            "nothing about reliability, and no interval is given"
        )
    gaps = [
        f"{key} in {e.undefined_replicates:,}"
        for key, e in coefs.items()
        if e is not None and e.ci is not None and e.undefined_replicates
    ]
    if gaps:
        notes.append(
            f"undefined in some of the {replicates:,} bootstrap replicates (a resample can hold "
            "one category only): " + ", ".join(gaps) + "; each interval rests on the others"
        )
    alpha = coefs.get("krippendorff_alpha")
    if alpha is not None and alpha.estimate is None and alpha.reason:
        notes.append(f"alpha is undefined: {U.describe(alpha.reason)}")
    pa = coefs.get("percent_agreement")
    if (
        pa
        and alpha
        and pa.estimate is not None
        and alpha.estimate is not None
        and pa.estimate >= PARADOX_AGREEMENT
        and alpha.estimate < th.tentative
    ):
        notes.append(
            f"high percent agreement ({pa.estimate:.0%}) but low alpha ({alpha.estimate:.2f}): "
            "one category holds most values, so chance agreement is high (the prevalence "
            "paradox); report both and look at the per-category agreement"
        )
    rare = [
        f"{code} = {t.var.label_of(code)}" if t.kind == "variable" else str(code)
        for code, s in cat_agree.items()
        if s.get("share_of_values") is not None and 0 < s["share_of_values"] < RARE_SHARE
    ]
    if rare:
        notes.append(
            "categories used for under 5% of values: " + ", ".join(rare) + "; agreement on "
            "them rests on very few units"
        )
    fk = coefs.get("fleiss_kappa")
    fleiss_units, fleiss_m = fleiss
    if fk is not None and fk.estimate is not None and fleiss_units < pairable_units:
        left = pairable_units - fleiss_units
        notes.append(
            f"Fleiss' kappa: the {fleiss_units} of {pairable_units} units with {fleiss_m} values "
            f"each (the most common number of values); {left} unit(s) with another number left "
            "out. Its SE holds under kappa = 0 only (for the z test)"
        )
    if t.kind == "variable" and t.var.multiple:
        notes.append(
            "multi-select: alpha uses the Jaccard set distance; alpha per category (chosen or "
            "not: alpha_chosen_or_not) is in the per-category table"
        )
    if t.kind == "applicability":
        notes.append(
            "agreement on whether the variable applies, from each coder's own value of "
            f"'{t.var.applies_when.variable}'"
        )
    elif t.var.applies_when is not None:
        notes.append("computed on the units where the coder's own values say it applies")
    return notes
