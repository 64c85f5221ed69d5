"""Per-variable plans: per-unit contributions (U x M) and the formulas that turn their sums into
coefficients.

A plan's ``contributions`` row u holds unit u's share of every sum a coefficient needs (value
counts, coincidences, coder-pair indicators, per-unit disagreement). Any vector of unit weights
w gives the sums ``w @ contributions``; ones give the point estimate, a bootstrap row of
multinomial counts gives a replicate, a leave-one-out vector gives a jackknife value. Each
formula maps a matrix of sums (R x M) to R coefficient values, so a coefficient is never
re-computed in a Python loop over replicates.

Scott's pi, Brennan-Prediger, AC1/AC2 and PABAK follow one missing-data rule for two coders and
for more, the raw-data form of Gwet (2014, *Handbook of Inter-Rater Reliability*, 4th ed.,
ch. 2-3): observed agreement p_a averages, over units with two or more values,
sum_k r_ik (r_ik - 1) / (r_i (r_i - 1)); category proportions pi_k average r_ik / r_i over
units with at least one value (every coded value counts, also a unit's only value). With two
coders and no missing values these are the usual two-coder formulas. Cohen's (weighted) kappa
and Light's kappa (the mean of Cohen's kappa over coder pairs, Light 1971) use the units both
coders of a pair coded. Fleiss' kappa proper uses the units with the most common number of
values (:func:`coderel.stats.counts.fleiss_units`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
from scipy import sparse

from coderel.stats import alpha as A
from coderel.stats import chance as CH
from coderel.stats import kappa as KA
from coderel.stats.counts import (
    coder_pairs,
    coincidences_upper,
    fleiss_units,
    one_hot,
    unit_agreeing_pairs,
    unit_disagreement,
    unit_value_sums,
    value_counts,
    values_per_unit,
)
from coderel.stats.numeric_plan import NumericFacts, add_numeric, numeric_values
from coderel.stats.packed import Packed, dense_column_sums, pack
from coderel.stats.pair_tables import div as _div
from coderel.stats.pair_tables import light_from_tables, light_leave_one_out, pair_tables
from coderel.stats.pair_tables import nanmean_rows as _nanmean_rows

Formula = Callable[[np.ndarray], np.ndarray]
#: ``leave_one_out(total)(own)``: a formula's jackknife values for the units whose contributions
#: are the rows ``own``, from the column sums ``total`` of all units (prepared once per plan).
LeaveOneOut = Callable[[np.ndarray], Callable[[Any], np.ndarray]]
ScaleKind = Literal["categorical", "numeric", "set"]


@dataclass(frozen=True)
class Scale:
    """The value domain of a variable, as the statistics need it.

    ``categorical``: ``size`` codebook categories in codebook order, ``ordinal`` when ordered;
    ``numeric``: ``values`` the distinct observed numbers (level interval or ratio);
    ``set``: ``sets`` the distinct observed code sets of a multi-select variable (Jaccard distance).
    """

    kind: ScaleKind
    level: str
    size: int
    values: np.ndarray | None = None
    sets: tuple[frozenset, ...] = ()

    @property
    def ordinal(self) -> bool:
        return self.kind == "categorical" and self.level == "ordinal"


@dataclass(frozen=True)
class Plan:
    """Per-unit contributions and the coefficient formulas over their weighted sums.

    ``contributions`` is a units x M array (as built, :class:`coderel.stats.packed.Packed`: the
    same float64 numbers in fewer bytes), or :class:`MixedColumns` (dense columns, then sparse
    ones). ``leave_one_out`` gives some formulas a jackknife of their own (see
    :data:`LeaveOneOut`); with :class:`MixedColumns` every other formula reads only the dense
    columns.
    """

    contributions: Any
    formulas: dict[str, Formula] = field(default_factory=dict)
    leave_one_out: dict[str, LeaveOneOut] = field(default_factory=dict)

    def point(self, name: str) -> float:
        """A coefficient on the full sample (all unit weights 1); ``nan`` when undefined."""
        total = column_sums(self.contributions)[None, :]
        return float(self.formulas[name](total)[0])


@dataclass(frozen=True)
class ProjectFacts:
    """What a plan built on some of a project's units (a partition, on a worker of the dask
    engine, :mod:`coderel.engine.plans`) needs to know of all of them, so that its columns and
    formulas are those of the whole project's plan: the number of units (the sparse choice),
    Fleiss' number of values m (:func:`coderel.stats.counts.fleiss_units`; 0 when no unit has
    two) and, for numbers, :class:`NumericFacts`."""

    n_units: int
    fleiss_m: int
    numeric: NumericFacts | None = None


#: A plan whose coder-pair columns would hold more numbers than this over all units keeps its
#: contributions sparse (crowd designs: many coders, each unit coded by a few).
SPARSE_PAIR_CELLS = 20_000_000


@dataclass(frozen=True)
class MixedColumns:
    """Units x M contributions kept as dense columns followed by sparse (CSR) ones.

    A crowd design's coder-pair columns are almost all zero (:mod:`coderel.stats.pair_tables`),
    while every unit has numbers in the other columns: the weighted sums take the dense columns
    (an array or :class:`coderel.stats.packed.Packed`) through one dense product and only the
    pair columns through a sparse one. Rows are selected with ``[rows]`` (a slice or
    positions); ``w @ columns`` is the R x M weighted sums.
    """

    dense: Any
    thin: sparse.csr_matrix

    __array_ufunc__ = None  # ``w @ columns`` calls __rmatmul__ rather than numpy's matmul

    @property
    def shape(self) -> tuple[int, int]:
        return self.dense.shape[0], self.dense.shape[1] + self.thin.shape[1]

    def __getitem__(self, rows: Any) -> MixedColumns:
        return MixedColumns(self.dense[rows], self.thin[rows])

    def __rmatmul__(self, w: np.ndarray) -> np.ndarray:
        """``w @ columns`` (R x M) for unit weights ``w`` (R x units)."""
        out = np.empty((w.shape[0], self.shape[1]))
        width = self.dense.shape[1]
        out[:, :width] = w @ self.dense
        # (C^T W^T)^T: scipy's fastest product, sparse rows times a C-ordered block
        out[:, width:] = (self.thin.T.tocsr() @ np.ascontiguousarray(w.T)).T
        return out

    def column_sums(self) -> np.ndarray:
        thin = np.asarray(self.thin.sum(axis=0)).ravel()
        return np.concatenate([column_sums(self.dense), thin])

    def nonzero_rows(self) -> np.ndarray:
        """Positions of the units with a non-zero contribution."""
        if isinstance(self.dense, Packed):
            dense = np.zeros(self.dense.shape[0], dtype=bool)
            dense[self.dense.nonzero_rows()] = True
        else:
            dense = np.any(self.dense != 0, axis=1)
        return np.flatnonzero(dense | (self.thin.getnnz(axis=1) > 0))


class _Builder:
    def __init__(self, n_units: int) -> None:
        self.n_units = n_units
        self.blocks: list[Any] = []
        self.thin: list[Any] = []
        self.width = 0

    def add(self, block: Any):
        """Add a block of columns (units x m, or one column); returns its column or columns.

        Sparse blocks come after every dense one (:class:`MixedColumns`).
        """
        if sparse.issparse(block):
            start = self.width
            self.thin.append(block)
            self.width += block.shape[1]
            return slice(start, self.width) if block.shape[1] > 1 else start
        if self.thin:
            raise ValueError("dense columns after sparse ones")
        arr = np.asarray(block, dtype=float)
        if arr.ndim == 1:
            self.blocks.append(arr[:, None])
            self.width += 1
            return self.width - 1
        self.blocks.append(arr)
        start = self.width
        self.width += arr.shape[1]
        return slice(start, self.width)

    def contributions(self) -> Any:
        """U x M contributions: the dense columns packed (:func:`coderel.stats.packed.pack`),
        or :class:`MixedColumns` of them and the sparse ones when a block was sparse."""
        dense = np.hstack(self.blocks) if self.blocks else np.zeros((self.n_units, 0))
        self.blocks = []
        dense = pack(dense)
        if self.thin:
            thin = sparse.hstack(self.thin, format="csr") if len(self.thin) > 1 else self.thin[0]
            return MixedColumns(dense, sparse.csr_matrix(thin))
        return dense


def column_sums(contributions: Any) -> np.ndarray:
    """Sums over units (the point estimate's sums) of dense or sparse contributions."""
    if isinstance(contributions, MixedColumns | Packed):
        return contributions.column_sums()
    if sparse.issparse(contributions):
        return np.asarray(contributions.sum(axis=0)).ravel()
    return dense_column_sums(contributions)


def _domain_distance(scale: Scale):
    if scale.kind == "numeric":
        values = np.asarray(scale.values, dtype=float)
        if scale.level == "ratio":
            return A.ratio_distance(values)
        return A.interval_distance(_standardise(values))
    if scale.kind == "set":
        return A.jaccard_distance(list(scale.sets))
    return lambda a, b: (a != b).astype(float)


def _standardise(values: np.ndarray) -> np.ndarray:
    """Interval values centred and divided by their spread.

    Interval alpha is unchanged by any linear change of scale; working on standardised values
    keeps the test for zero expected disagreement (``_alpha``) independent of the unit of
    measurement (values a millionth apart are not "no variation").
    """
    if not len(values):
        return values
    centred = values - float(np.mean(values))
    spread = float(np.max(np.abs(centred)))
    return centred / spread if spread > 0 else centred


def add_percent(b: _Builder, x: np.ndarray) -> Formula:
    """Pairwise percent agreement: equal ordered pairs / all ordered pairs of pairable values."""
    equal, pairs = unit_agreeing_pairs(x)
    s_eq, s_all = b.add(equal), b.add(pairs)
    return lambda s: _div(s[:, s_eq], s[:, s_all])


def add_alpha(b: _Builder, x: np.ndarray, scale: Scale) -> Formula:
    """Krippendorff's alpha at the scale's level (coincidence sums per unit).

    Categorical variables sum per-unit value counts; interval variables the count, sum and sum
    of squares of their values; ratio and set variables the features of
    :func:`coderel.stats.alpha.metric_factor` (K x rank numbers instead of a K x K matrix of
    distances, and rank numbers per unit instead of K).
    """
    if scale.kind == "categorical":
        counts = value_counts(x, scale.size)
        cp = counts * (counts.sum(axis=1) >= 2)[:, None]
        if scale.ordinal:
            iu = np.triu_indices(scale.size, 1)
            s_n, s_o = b.add(cp), b.add(coincidences_upper(cp, iu))
            return lambda s: A.alpha_ordinal(s[:, s_n], s[:, s_o], iu)
        # nominal: the unequal ordered pairs per unit, m (m - 1) less the equal ones
        equal, pairs = unit_agreeing_pairs(x)
        m = counts.sum(axis=1)
        d = np.zeros(len(m))
        ok = m >= 2
        d[ok] = (pairs[ok] - equal[ok]) / (m[ok] - 1.0)
        s_n, s_d = b.add(cp), b.add(d)
        return lambda s: A.alpha_nominal(s[:, s_n], s[:, s_d])
    m = values_per_unit(x)
    pairable = m >= 2
    d = unit_disagreement(x, _domain_distance(scale))
    s_m = b.add(np.where(pairable, m, 0.0))
    if scale.kind == "numeric" and scale.level == "interval":
        v = _standardise(np.asarray(scale.values, dtype=float))
        s_1, s_2 = b.add(unit_value_sums(x, v, pairable)), b.add(unit_value_sums(x, v**2, pairable))
        s_d = b.add(d)
        return lambda s: A.alpha_interval_moments(s[:, s_m], s[:, s_1], s[:, s_2], s[:, s_d])
    if scale.kind == "numeric":
        factor = A.ratio_factor(np.asarray(scale.values, dtype=float))
    else:
        factor = A.jaccard_factor(list(scale.sets))
    if factor is None:  # ratio values of both signs: the K x K distances
        delta = A.ratio_delta(np.asarray(scale.values, dtype=float))
        counts = value_counts(x, scale.size)
        s_n, s_d = b.add(counts * pairable[:, None]), b.add(d)
        return lambda s: A.alpha_with_metric(s[:, s_n], s[:, s_d], delta)
    s_g = b.add(unit_value_sums(x, factor.diagonal, pairable))
    s_f = _as_slice(b.add(unit_value_sums(x, factor.factor, pairable)))
    s_d = b.add(d)
    return lambda s: A.alpha_factored(s[:, s_m], s[:, s_g], s[:, s_f], s[:, s_d], factor)


@dataclass(frozen=True)
class _PairSlices:
    both: int
    agree: int
    rows: slice
    cols: slice
    weighted: dict[str, int]


def _add_pair(
    b: _Builder, a: np.ndarray, c: np.ndarray, k: int, weights: dict[str, np.ndarray]
) -> _PairSlices:
    both = (a >= 0) & (c >= 0)
    ai, ci = np.maximum(a, 0), np.maximum(c, 0)
    return _PairSlices(
        both=b.add(both.astype(float)),
        agree=b.add((both & (a == c)).astype(float)),
        rows=b.add(one_hot(a, k, both)),
        cols=b.add(one_hot(c, k, both)),
        weighted={n: b.add(np.where(both, w[ai, ci], 0.0)) for n, w in weights.items()},
    )


def _as_slice(index: int | slice) -> slice:
    return index if isinstance(index, slice) else slice(index, index + 1)


def _pair_parts(s: np.ndarray, p: _PairSlices):
    n = s[:, p.both]
    return _div(s[:, p.agree], n), _div(s[:, p.rows], n[:, None]), _div(s[:, p.cols], n[:, None])


def _cohen(p: _PairSlices) -> Formula:
    def f(s: np.ndarray) -> np.ndarray:
        p_o, r, c = _pair_parts(s, p)
        return KA.cohen_from_margins(p_o, r, c)

    return f


def categorical_plan(
    x: np.ndarray, scale: Scale, *, icc_ordinal: bool = False, facts: ProjectFacts | None = None
) -> Plan:
    """All coefficients of a single-choice categorical variable (nominal or ordinal).

    With ``icc_ordinal`` an ordinal variable also gets the intraclass correlations and Lin's
    coefficient on its category positions 1, 2, ... in codebook order. ``facts``: the whole
    project's facts when ``x`` holds only some of its units.
    """
    b = _Builder(x.shape[0])
    k, n_coders = scale.size, x.shape[1]
    f: dict[str, Formula] = {
        "percent_agreement": add_percent(b, x),
        "krippendorff_alpha": add_alpha(b, x, scale),
    }
    if icc_ordinal and scale.ordinal:
        f.update(_numeric(b, x, np.arange(1.0, k + 1.0), facts))
    w_gwet = KA.agreement_weights(k, "gwet-ordinal")
    weights: dict[str, np.ndarray] = {}
    if scale.ordinal:
        weights = {
            "linear": KA.agreement_weights(k, "linear"),
            "quadratic": KA.agreement_weights(k, "quadratic"),
        }
    pairs = coder_pairs(n_coders)
    counts = value_counts(x, k)
    m = counts.sum(axis=1)

    # Fleiss (1971) on the units with the most common number of values (same m, any coders).
    modal, m_fleiss = fleiss_units(x) if facts is None else _modal(m, facts.fleiss_m)
    s_fc = b.add(modal.astype(float))
    s_fn = b.add(counts * modal[:, None])
    s_fq = b.add((counts**2).sum(axis=1) * modal)
    f["fleiss_kappa"] = lambda s: KA.fleiss_from_sums(s[:, s_fc], s[:, s_fn], s[:, s_fq], m_fleiss)

    # Pairwise coefficients: units coded by both coders of a pair.
    if n_coders == 2:
        p = _add_pair(b, x[:, 0], x[:, 1], k, weights)
        f["cohen_kappa"] = f["light_kappa"] = _cohen(p)
        if scale.ordinal:
            for name in ("linear", "quadratic"):
                w, col = weights[name], p.weighted[name]
                f[f"weighted_kappa_{name}"] = lambda s, w=w, col=col, p=p: KA.weighted_from_margins(
                    _div(s[:, col], s[:, p.both]), *_pair_parts(s, p)[1:], w
                )
    n_units = x.shape[0] if facts is None else facts.n_units
    thin = n_coders > 2 and len(pairs) * (2 * k + 2) * n_units > SPARSE_PAIR_CELLS
    if thin:  # pair tables, sparse, after every dense column (added below)
        f["light_kappa"] = _undefined
    elif n_coders > 2:
        slices = [_add_pair(b, x[:, i], x[:, j], k, {}) for i, j in pairs]
        cohens = [_cohen(p) for p in slices]
        f["light_kappa"] = lambda s: _nanmean_rows(np.stack([g(s) for g in cohens]))

    # One missing-data rule for any number of coders (Gwet 2014, raw-data form): p_a over units
    # with two or more values, category shares pi_k over every unit with a value.
    pairable = m >= 2
    denom = np.where(pairable, m * (m - 1.0), 1.0)
    pa = np.where(pairable, (counts * (counts - 1.0)).sum(axis=1) / denom, 0.0)
    star = counts @ w_gwet.T
    pa_w = np.where(pairable, (counts * (star - 1.0)).sum(axis=1) / denom, 0.0)
    coded = m >= 1
    pi_u = np.where(coded[:, None], counts / np.where(coded, m, 1.0)[:, None], 0.0)
    s_pu, s_pa, s_pw = b.add(pairable.astype(float)), b.add(pa), b.add(pa_w)
    s_cu, s_pi = b.add(coded.astype(float)), b.add(pi_u)

    def p_a(s: np.ndarray) -> np.ndarray:
        return _div(s[:, s_pa], s[:, s_pu])

    def pi(s: np.ndarray) -> np.ndarray:
        return _div(s[:, s_pi], s[:, s_cu][:, None])

    f["scott_pi"] = lambda s: CH.scott_pi(p_a(s), pi(s))
    f["brennan_prediger"] = lambda s: CH.brennan_prediger(p_a(s), k)
    f["gwet_ac1"] = lambda s: CH.gwet_ac(p_a(s), pi(s))
    if k == 2:
        f["pabak"] = lambda s: CH.pabak(p_a(s))
    if scale.ordinal:
        f["gwet_ac2"] = lambda s: CH.gwet_ac(_div(s[:, s_pw], s[:, s_pu]), pi(s), w_gwet)
    leave_one_out: dict[str, LeaveOneOut] = {}
    if thin:
        # One non-zero per unit and pair present (coderel.stats.pair_tables): the joint table.
        s_t = _as_slice(b.add(pair_tables(x, pairs, k)))
        f["light_kappa"] = lambda s: light_from_tables(s[:, s_t], k)
        # the tables are the plan's only sparse columns: ``own.thin`` is their rows
        leave_one_out["light_kappa"] = lambda total: _on_thin(light_leave_one_out(total[s_t], k))
    return Plan(b.contributions(), f, leave_one_out)


def _modal(m: np.ndarray, m_fleiss: int) -> tuple[np.ndarray, int]:
    """Fleiss' units given the project's m (as :func:`fleiss_units` finds it over all units)."""
    return (m == m_fleiss) if m_fleiss > 0 else np.zeros(len(m), dtype=bool), m_fleiss


def _numeric(b: _Builder, x: np.ndarray, values: np.ndarray, facts: ProjectFacts | None):
    """The ICC and Lin's columns of numbers ``values[x]`` (of the project's facts, if given)."""
    if facts is None:
        return add_numeric(b, numeric_values(x, values))
    return add_numeric(b, numeric_values(x, values, keep_all=True), facts.numeric)


def _on_thin(values: Callable[[Any], np.ndarray]) -> Callable[[MixedColumns], np.ndarray]:
    return lambda own: values(own.thin)


def _undefined(s: np.ndarray) -> np.ndarray:
    return np.full(s.shape[0], np.nan)


def value_plan(x: np.ndarray, scale: Scale, facts: ProjectFacts | None = None) -> Plan:
    """Percent agreement and alpha of a numeric or multi-select variable; for numbers also the
    intraclass correlations and Lin's coefficient (:mod:`coderel.stats.numeric_plan`)."""
    b = _Builder(x.shape[0])
    f = {"percent_agreement": add_percent(b, x), "krippendorff_alpha": add_alpha(b, x, scale)}
    if scale.kind == "numeric":
        f.update(_numeric(b, x, np.asarray(scale.values, dtype=float), facts))
    return Plan(b.contributions(), f)


def build_plan(
    x: np.ndarray, scale: Scale, *, icc_ordinal: bool = False, facts: ProjectFacts | None = None
) -> Plan:
    """The plan of every coefficient that applies to a variable of this scale (``facts``: the
    whole project's, when ``x`` holds only some of its units)."""
    if scale.kind == "categorical":
        return categorical_plan(x, scale, icc_ordinal=icc_ordinal, facts=facts)
    return value_plan(x, scale, facts)


def alpha_point(x: np.ndarray, scale: Scale) -> float:
    """Krippendorff's alpha on the full sample (``nan`` when undefined).

    ``x`` is units x coders of value indices into the scale's domain, ``-1`` for no value.
    """
    b = _Builder(x.shape[0])
    formula = add_alpha(b, x, scale)
    return float(formula(column_sums(b.contributions())[None, :])[0])
