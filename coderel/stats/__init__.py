"""Agreement statistics: a pure numpy core (no I/O, no pandas).

Every coefficient is a function of per-unit summary counts. The modules build those per-unit
contributions (:mod:`coderel.stats.counts`, :mod:`coderel.stats.plan`), turn weighted sums of them
into coefficients (:mod:`coderel.stats.alpha`, :mod:`coderel.stats.kappa`,
:mod:`coderel.stats.chance`) and resample units with one shared matrix of bootstrap weights
(:mod:`coderel.stats.bootstrap`, :mod:`coderel.stats.intervals`). Undefined results carry a
machine-readable reason (:mod:`coderel.stats.undefined`).
"""

from coderel.stats.kappa import cohen_kappa_table, percent_agreement_table

__all__ = ["cohen_kappa_table", "percent_agreement_table"]
