"""One variable's row: its coefficients with intervals or the reason there is none, SEs,
pairs, per-category agreement, verdict and notes."""

from __future__ import annotations

import numpy as np

from coderel.agree.conventions import (
    COEFFICIENTS,
    MIN_UNITS_FOR_INTERVAL,
    ONE_VALUE_USED,
    PERFECT_AGREEMENT,
    THIN_DATA,
    TOO_FEW_REPLICATES,
    min_replicates,
)
from coderel.agree.matrices import Target
from coderel.agree.notes import notes_for, verdict
from coderel.agree.pairwise import category_agreement, pair_agreements, standard_errors
from coderel.agree.results import Estimate, VariableAgreement, finite
from coderel.stats import undefined as U
from coderel.stats.bootstrap import Evaluated
from coderel.stats.counts import fleiss_units as fleiss_units_of
from coderel.stats.counts import value_counts
from coderel.stats.intervals import interval, share_below


def undefined_reason(key: str, t: Target, pairable_values: int) -> str:
    """Why a coefficient has no value on these data (a slug of :mod:`coderel.stats.undefined`)."""
    if pairable_values < 2:
        return U.TOO_FEW_PAIRABLE
    if key == "brennan_prediger" and t.scale.size < 2:
        return U.ONE_CATEGORY
    return U.NO_VARIATION


def variable_row(
    t: Target,
    evaluated: dict[str, Evaluated],
    ci_level: float,
    interval_method: str,
) -> VariableAgreement:
    x = t.x
    per_unit = (x >= 0).sum(axis=1)
    pairable_units = int((per_unit >= 2).sum())
    pairable_values = int(per_unit[per_unit >= 2].sum())
    categorical = t.scale.kind == "categorical"
    modal, fleiss_m = fleiss_units_of(x) if categorical else (np.zeros(len(x), bool), 0)
    fleiss_units = int(modal.sum())
    pairable_x = x[per_unit >= 2]
    used = int(np.unique(pairable_x[pairable_x >= 0]).size)
    one_value = used == 1
    # Every pairable unit's values identical (and more than one value used): each bootstrap
    # resample agrees perfectly too, and the interval would collapse to a confident [1, 1].
    perfect = (
        pairable_units > 0
        and not one_value
        and bool(
            np.all(
                np.where(pairable_x >= 0, pairable_x, -1).max(axis=1)
                == np.where(pairable_x >= 0, pairable_x, np.iinfo(np.int64).max).min(axis=1)
            )
        )
    )
    replicates = max((ev.replicates.size for ev in evaluated.values()), default=0)
    few_replicates = 0 < replicates < min_replicates(ci_level)
    if one_value:
        thin_reason = ONE_VALUE_USED
    elif pairable_units < MIN_UNITS_FOR_INTERVAL:
        thin_reason = THIN_DATA
    elif perfect:
        thin_reason = PERFECT_AGREEMENT
    else:
        thin_reason = TOO_FEW_REPLICATES
    thin = pairable_units < MIN_UNITS_FOR_INTERVAL or one_value or perfect or few_replicates
    coefs: dict[str, Estimate | None] = {}
    for key in COEFFICIENTS:
        ev = evaluated.get(key)
        if ev is None:
            coefs[key] = None
            continue
        point = finite(ev.point)
        if point is None:
            coefs[key] = Estimate(None, reason=undefined_reason(key, t, pairable_values))
            continue
        ci = None
        if not thin and ev.replicates.size:
            ci = interval(ev.replicates, ev.point, ev.jackknife, ci_level, interval_method)
        undefined = int(np.count_nonzero(~np.isfinite(ev.replicates)))
        coefs[key] = Estimate(
            point, ci, None, thin_reason if thin else None, undefined_replicates=undefined
        )
    pairs, confusion = pair_agreements(t)
    fleiss_counts = value_counts(x[modal], t.scale.size) if categorical else np.empty(0)
    coefs = standard_errors(t, coefs, confusion, fleiss_counts)
    cat_agree = category_agreement(t, confusion, fleiss_counts)
    alpha = coefs.get("krippendorff_alpha")
    below = None
    if alpha is not None and alpha.estimate is not None and not thin:
        below = share_below(evaluated["krippendorff_alpha"].replicates, t.thresholds.tentative)
    return VariableAgreement(
        variable=t.name,
        label=t.label,
        level=t.level,
        units=pairable_units,
        coders=int((x >= 0).any(axis=0).sum()),
        pairable_values=pairable_values,
        coefficients=coefs,
        alpha_below_min=below,
        verdict=verdict(alpha, t.thresholds, pairable_units),
        notes=tuple(
            notes_for(
                t,
                coefs,
                pairable_units,
                (fleiss_units, fleiss_m),
                cat_agree,
                replicates,
                ci_level,
            )
        ),
        kind=t.kind,
        fleiss_units=fleiss_units,
        fleiss_values_per_unit=fleiss_m,
        categories=t.categories,
        confusion=confusion,
        category_agreement=cat_agree,
        pairs=pairs,
    )
