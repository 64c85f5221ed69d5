"""A permutation test of no change in alpha between two rounds.

Under the hypothesis that two rounds' codings come from one process, which round a unit belongs to
is exchangeable: the units of both rounds are pooled and shuffled between the rounds (keeping each
round's number of units) many times, and alpha's change (later minus earlier) under each shuffle
is set against the change observed (Good 2005, ch. 3; the two-sample permutation test). Each
shuffle's alphas come from the same per-unit contributions as the point estimate (a 0/1 weight
per unit and round, as the bootstrap weights units), so a shuffle costs one weighted sum, not a
new computation of alpha.

The shuffles depend on the seed, the two round names and the number of units only (units are in
natural order), never on the order of files or rows. The p-value is two-sided,
``(1 + #{|change*| >= |change|}) / (1 + shuffles)`` (Phipson & Smyth 2010), over the shuffles in
which both alphas are defined.

References
----------
Good, P. (2005). *Permutation, Parametric and Bootstrap Tests of Hypotheses* (3rd ed.). Springer.
Phipson, B., & Smyth, G. K. (2010). Permutation p-values should never be zero. *Statistical
Applications in Genetics and Molecular Biology*, 9(1), Article 39.
"""

from __future__ import annotations

import hashlib

import numpy as np
from scipy import sparse

from coderel.stats.plan import Scale, build_plan

ALPHA = "krippendorff_alpha"
#: Units per shuffle block (bounds the 0/1 weight matrices held at once).
_BLOCK = 500


def shuffle_seed(seed: int, earlier: str, later: str) -> int:
    """The seed of the shuffles between two rounds (BLAKE2b of the seed and both names)."""
    text = f"{int(seed)}\x1fpermutation\x1f{earlier}\x1f{later}".encode()
    return int.from_bytes(hashlib.blake2b(text, digest_size=8).digest(), "little") >> 1


def shuffled_groups(n_units: int, n_earlier: int, shuffles: int, seed: int) -> np.ndarray:
    """``shuffles`` x ``n_units`` booleans: True where a unit goes to the earlier round."""
    rng = np.random.Generator(np.random.PCG64(seed))
    out = np.zeros((shuffles, n_units), dtype=bool)
    for s in range(shuffles):
        out[s, rng.permutation(n_units)[:n_earlier]] = True
    return out


def change_under_shuffles(
    x: np.ndarray, scale: Scale, earlier: np.ndarray, shuffles: int, seed: int
) -> tuple[float, np.ndarray]:
    """Alpha's observed change and its change under each shuffle.

    Parameters
    ----------
    x
        Units x coders value indices of both rounds pooled (``-1``: no value), one scale.
    scale
        The variable's scale over the pooled values.
    earlier
        One boolean per unit: True for the units of the earlier round.
    shuffles, seed
        How many shuffles, and their seed (:func:`shuffle_seed`).

    Returns
    -------
    observed, changes
        Alpha of the later round minus alpha of the earlier one, and the same difference under
        each shuffle (``nan`` where an alpha is undefined).
    """
    plan = build_plan(x, scale)
    contributions, formula = plan.contributions, plan.formulas[ALPHA]

    def alphas(w: np.ndarray) -> np.ndarray:
        """Alpha of each row's units (``w``: rows x units of 0/1)."""
        if sparse.issparse(contributions):
            sums = (contributions.T.tocsr() @ np.ascontiguousarray(w.T)).T
        else:
            sums = w @ contributions
        with np.errstate(invalid="ignore", divide="ignore"):
            return np.asarray(formula(sums), dtype=float)

    earlier = np.asarray(earlier, dtype=bool)
    observed = alphas(np.vstack([earlier, ~earlier]).astype(float))
    groups = shuffled_groups(len(earlier), int(earlier.sum()), shuffles, seed)
    changes = []
    for start in range(0, shuffles, _BLOCK):
        g = groups[start : start + _BLOCK]
        a = alphas(np.vstack([g, ~g]).astype(float))
        changes.append(a[len(g) :] - a[: len(g)])
    out = np.concatenate(changes) if changes else np.empty(0)
    return float(observed[1] - observed[0]), out


def permutation_p(observed: float, changes: np.ndarray) -> float | None:
    """Two-sided permutation p-value (Phipson & Smyth 2010); ``None`` without usable shuffles."""
    ok = changes[np.isfinite(changes)]
    if not np.isfinite(observed) or ok.size == 0:
        return None
    hits = int(np.sum(np.abs(ok) >= abs(observed) - 1e-12))
    return (1 + hits) / (1 + ok.size)
