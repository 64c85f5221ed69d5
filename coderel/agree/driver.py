"""The :func:`agreement` driver: checks the bootstrap settings, builds every variable's matrix,
makes ONE seeded set of unit weights and evaluates every coefficient over it."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from coderel.agree.conventions import MIN_UNITS_FOR_INTERVAL, THIN_DATA
from coderel.agree.matrices import Target
from coderel.agree.numeric import attach as attach_numeric
from coderel.agree.prepare import Prepared, prepare
from coderel.agree.results import AgreementResult
from coderel.agree.variable_row import variable_row
from coderel.codebook import Codebook
from coderel.codings import Codings
from coderel.errors import UsageError
from coderel.progress import report
from coderel.stats.bootstrap import (
    DEFAULT_MEMORY,
    SCHEMES,
    Evaluated,
    evaluate_plans,
    make_weights,
)
from coderel.stats.intervals import INTERVAL_METHODS
from coderel.stats.plan import build_plan

#: Sums every plan's contributions with the unit weights: ``evaluate(plans, weights, *,
#: progress, memory)`` -> one dict of :class:`Evaluated` per plan.
Evaluator = Callable[..., list[dict[str, Evaluated]]]


def check_settings(
    replicates: Any, seed: Any, ci_level: Any, interval_method: Any, scheme: Any = "poisson"
) -> None:
    """Refuse bootstrap settings that would give no interval, a wrong one, or a numpy error."""
    if isinstance(replicates, bool) or not isinstance(replicates, int | np.integer):
        raise UsageError(f"replicates must be a whole number, not {replicates!r}")
    if replicates < 0:
        raise UsageError(f"replicates must be 0 (no intervals) or more, not {replicates}")
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        raise UsageError(f"seed must be a whole number of 0 or more, not {seed!r}")
    if isinstance(ci_level, bool) or not isinstance(ci_level, int | float):
        raise UsageError(f"ci_level must be a number between 0 and 1, not {ci_level!r}")
    if not 0 < ci_level < 1:
        raise UsageError(f"ci_level must lie between 0 and 1 (for example 0.95), not {ci_level}")
    if interval_method not in INTERVAL_METHODS:
        raise UsageError(
            f"interval_method must be one of {', '.join(INTERVAL_METHODS)}, not {interval_method!r}"
        )
    if scheme not in SCHEMES:
        raise UsageError(f"bootstrap must be one of {', '.join(SCHEMES)}, not {scheme!r}")


def agreement(
    codings: Codings | Prepared,
    *,
    replicates: int = 2000,
    seed: int = 20261202,
    ci_level: float = 0.95,
    interval_method: str = "bca",
    icc_ordinal: bool = False,
    progress: Callable[[int, int], None] | None = None,
    bootstrap: str = "poisson",
    memory: int = DEFAULT_MEMORY,
) -> AgreementResult:
    """Every coefficient of every variable, with bootstrap intervals from one weight matrix.

    Parameters
    ----------
    codings
        The long table (values outside the codebook are already ``None``), or what
        :func:`coderel.agree.prepare.prepare` kept of it (a caller that drops the table then
        runs the bootstrap without it).
    replicates, seed
        Bootstrap replicates and the seed of the one matrix of unit weights.
    ci_level, interval_method
        Interval level and ``"bca"`` (Efron 1987) or ``"percentile"``.
    icc_ordinal
        Also give ordinal variables the intraclass correlations, Lin's coefficient and limits of
        agreement, on their category positions (interval and ratio variables always get them).
    progress
        Called as ``progress(done, total, phase)`` while the work advances; phases "summarising
        units", "resampling units", "intervals per variable" (:mod:`coderel.progress`).
    bootstrap
        ``"poisson"`` (unit weights a pure function of seed, unit ID and replicate; results do not
        depend on row order or blocking) or ``"multinomial"`` (the classic draw of U units per
        replicate); see :mod:`coderel.stats.bootstrap`.
    memory
        Bytes the bootstrap's blocks of unit weights may take (sets the block of units).

    Returns
    -------
    AgreementResult
        One :class:`VariableAgreement` per variable, plus one per variable with ``applies_when``
        for agreement on applicability.

    References
    ----------
    Krippendorff, K. (2004). *Content Analysis* (2nd ed.). Hayes, A. F., & Krippendorff, K.
    (2007). Answering the call for a standard reliability measure for coding data.
    *Communication Methods and Measures*, 1(1), 77-89. Fleiss, J. L., Cohen, J., & Everitt,
    B. S. (1969). Large sample standard errors of kappa and weighted kappa. *Psychological
    Bulletin*, 72(5), 323-327. Fleiss, J. L., Nee, J. C. M., & Landis, J. R. (1979). Large sample
    variance of kappa in the case of different sets of raters. *Psychological Bulletin*, 86(5),
    974-977.
    """
    check_settings(replicates, seed, ci_level, interval_method, bootstrap)
    if isinstance(codings, Prepared):
        p = codings
    else:
        report(progress, 0, 1, "summarising units")
        p = prepare(codings)
    return agreement_of_targets(
        p.codebook,
        list(p.targets),
        p.units,
        p.coders,
        replicates=replicates,
        seed=seed,
        ci_level=ci_level,
        interval_method=interval_method,
        icc_ordinal=icc_ordinal,
        progress=progress,
        bootstrap=bootstrap,
        memory=memory,
    )


def agreement_of_targets(
    cb: Codebook,
    targets: list[Target],
    units: list[str],
    coders: list[str],
    *,
    replicates: int,
    seed: int,
    ci_level: float,
    interval_method: str,
    icc_ordinal: bool = False,
    progress: Callable[[int, int], None] | None = None,
    bootstrap: str = "poisson",
    memory: int = DEFAULT_MEMORY,
    evaluate: Evaluator = evaluate_plans,
) -> AgreementResult:
    """:func:`agreement` from the rows to compute (:func:`coderel.agree.matrices.build_targets`).

    ``evaluate`` sums the plans' contributions with the unit weights (``evaluate_plans`` in this
    process, or the same sums made partition-wise by :mod:`coderel.engine`); everything else is
    the same code for every engine.
    """
    check_settings(replicates, seed, ci_level, interval_method, bootstrap)
    # Each row over the coders who coded it (a coder of other variables is not one of them), in
    # 64-bit indices made one row at a time (rows may be stored in smaller integers).
    plans = [build_plan(t.own().x, t.scale, icc_ordinal=icc_ordinal) for t in targets]
    n_rows = len(plans)
    steps = [0]  # steps of the bootstrap, then one per variable's row

    def step(done: int, total: int) -> None:
        steps[0] = total
        report(progress, done, total + n_rows, "resampling units")

    # ONE seeded set of unit weights over the project's units, reused for every variable and
    # coefficient: a unit without values for a variable contributes nothing to its sums.
    try:
        weights = make_weights(units, replicates, seed, bootstrap)
        evaluated_all = evaluate(plans, weights, progress=step, memory=memory)
    except MemoryError:
        raise UsageError(
            f"not enough memory for {replicates:,} bootstrap replicates over {len(units):,} "
            "units; use fewer replicates (2,000 are usual; 0 gives no intervals)"
        ) from None
    rows = []
    for stored, evaluated in zip(targets, evaluated_all, strict=True):
        t = stored.own()
        rows.append(agreement_row(t, evaluated, ci_level, interval_method, icc_ordinal, units))
        report(progress, steps[0] + len(rows), steps[0] + n_rows, "intervals per variable")
    return result_of(cb, rows, coders, replicates, seed, interval_method, ci_level, bootstrap)


def result_of(
    cb: Codebook,
    rows: list,
    coders: list[str],
    replicates: int,
    seed: int,
    interval_method: str,
    ci_level: float,
    scheme: str,
) -> AgreementResult:
    """The result of every engine from its rows (:func:`agreement_row`) and settings."""
    return AgreementResult(
        tuple(rows),
        replicates,
        seed,
        interval_method,
        ci_level,
        coders=tuple(coders),
        codebook_title=str(cb.title or ""),
        codebook_version=str(cb.version or ""),
        scheme=scheme,
    )


def agreement_row(
    t: Target,
    evaluated: dict[str, Evaluated],
    ci_level: float,
    interval_method: str,
    icc_ordinal: bool,
    units: list[str],
):
    """One row of the result: its coefficients with intervals, and for a variable (not its
    applicability) the numeric extras (ICC table, Lin's coefficient per pair, limits)."""
    row = variable_row(t, evaluated, ci_level, interval_method)
    if t.kind != "variable":
        return row
    return attach_numeric(
        row,
        t.x,
        t.scale,
        list(t.coders),
        ci_level,
        icc_ordinal=icc_ordinal,
        min_units=MIN_UNITS_FOR_INTERVAL,
        thin_reason=THIN_DATA,
        units=units,
    )
