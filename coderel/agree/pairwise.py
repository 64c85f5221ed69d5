"""What sits beside a variable's coefficients: agreement per pair of coders (with confusion
tables), agreement per category, and the published standard errors with Fleiss' z test."""

from __future__ import annotations

from dataclasses import replace
from itertools import combinations
from typing import Any

import numpy as np

from coderel.agree.matrices import Target
from coderel.agree.results import Estimate, PairAgreement, finite
from coderel.stats import undefined as U
from coderel.stats.counts import confusion_table
from coderel.stats.kappa import (
    cohen_kappa_table,
    fleiss_category_kappas,
    fleiss_null_se,
    p_value_text,
    z_test,
)
from coderel.stats.plan import Scale, alpha_point


def pair_agreements(t: Target) -> tuple[tuple[PairAgreement, ...], dict]:
    x, k, coders = t.x, t.scale.size, t.coders
    categorical = t.scale.kind == "categorical"
    pairs, confusion = [], {}
    # columns held contiguously and each pair's work on the units both coded (a crowd design
    # has many coders, each unit coded by a few)
    columns = np.asfortranarray(x)
    present = columns >= 0
    for i, j in combinations(range(x.shape[1]), 2):
        rows = np.flatnonzero(present[:, i] & present[:, j])
        n = len(rows)
        if n == 0:
            continue
        a, b = columns[rows, i], columns[rows, j]
        same = float(np.mean(a == b))
        kappa, table = None, None
        if categorical:
            table = confusion_table(a, b, k)
            confusion[(coders[i], coders[j])] = table
            kappa = finite(cohen_kappa_table(table)[0])
        # only units both coded are pairable: the others add nothing to alpha's sums
        alpha = finite(alpha_point(np.column_stack((a, b)), t.scale))
        pairs.append(
            PairAgreement(
                coders[i],
                coders[j],
                n,
                same,
                kappa,
                alpha,
                tuple(tuple(int(c) for c in row) for row in table) if table is not None else None,
            )
        )
    return tuple(pairs), confusion


def category_agreement(
    t: Target, confusion: dict, fleiss_counts: np.ndarray
) -> dict[Any, dict[str, float | None]]:
    """Per category: Fleiss' (1971, eq. 11) kappa on the units with the most common number of
    values and the proportion of specific agreement pooled over coder pairs
    (2 n_kk / (n_k. + n_.k)); for multi-select variables, Krippendorff's nominal alpha on
    "chosen or not" per category (``alpha_chosen_or_not``)."""
    var = t.var
    out: dict[Any, dict[str, float | None]] = {}
    if t.kind == "variable" and var.multiple:
        sets = t.scale.sets
        for code in var.codes:
            has = np.array([code in s for s in sets] + [False], dtype=int)
            xb = np.where(t.x >= 0, has[t.x], -1)
            a = alpha_point(xb, Scale("categorical", "nominal", 2))
            used = int((xb == 1).sum())
            out[code] = {"alpha_chosen_or_not": finite(a), "values_with_category": used}
        return out
    if t.scale.kind != "categorical":
        return out
    k = t.scale.size
    pooled = np.zeros((k, k))
    for table in confusion.values():
        pooled += table + table.T
    fk = fleiss_category_kappas(fleiss_counts) if len(fleiss_counts) else np.full(k, np.nan)
    diag, marg = np.diag(pooled), pooled.sum(axis=1)
    for idx, code in enumerate(t.categories):
        specific = 2 * diag[idx] / (2 * marg[idx]) if marg[idx] > 0 else None
        out[code] = {
            "fleiss_kappa": finite(float(fk[idx])),
            "specific_agreement": finite(specific) if specific is not None else None,
            "share_of_values": finite(float(marg[idx] / pooled.sum())) if pooled.sum() else None,
        }
    return out


def standard_errors(
    t: Target, coefs: dict[str, Estimate | None], confusion: dict, fleiss_counts: np.ndarray
) -> dict[str, Estimate | None]:
    """Published standard errors: Cohen's (weighted) kappa, Fleiss, Cohen & Everitt (1969);
    Fleiss' kappa under the null, Fleiss, Nee & Landis (1979), with its z test."""
    out = dict(coefs)
    if t.scale.kind == "categorical" and t.x.shape[1] == 2 and len(confusion) == 1:
        table = next(iter(confusion.values()))
        # A coder who used one category only: kappa is 0 by construction and the large-sample
        # variance degenerates to 0 (or rounding noise of 1e-9); statsmodels gives 0 or NaN.
        one_sided = min(int((table.sum(axis=1) > 0).sum()), int((table.sum(axis=0) > 0).sum()))
        for key, weights in (
            ("cohen_kappa", "identity"),
            ("weighted_kappa_linear", "linear"),
            ("weighted_kappa_quadratic", "quadratic"),
        ):
            est = out.get(key)
            if est is None or est.estimate is None:
                continue
            se = finite(cohen_kappa_table(table, weights)[1])
            se_reason = None
            if one_sided < 2:
                se, se_reason = None, U.ONE_CATEGORY_PER_CODER
            elif se is None or se <= 0:
                se, se_reason = None, U.DEGENERATE_SE
            out[key] = replace(est, se=se, se_reason=se_reason)
    est = out.get("fleiss_kappa")
    if est is not None and est.estimate is not None and len(fleiss_counts):
        m = int(fleiss_counts[0].sum())
        p = fleiss_counts.sum(axis=0) / fleiss_counts.sum()
        se = finite(fleiss_null_se(p, len(fleiss_counts), m))
        z, pv = z_test(est.estimate, se)
        below = p_value_text(pv) if z is not None else None
        out["fleiss_kappa"] = replace(
            est,
            se=se,
            se_reason=None if se is not None else U.DEGENERATE_SE,
            z=finite(z),
            p_value=None if below else finite(pv),
            p_value_reason=below,
        )
    return out
