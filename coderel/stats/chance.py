"""Chance-corrected coefficients other than Cohen's: Scott, Brennan-Prediger, Gwet, PABAK.

All share the form (p_o - p_e) / (1 - p_e) and differ in chance agreement p_e. With ``pi_k`` the
mean of the coders' proportions of category k and q the number of categories in the codebook:

* Scott (1955): p_e = sum pi_k^2. coderel uses Gwet's (2014, ch. 2) raw-data form for any
  number of coders (pi_k from every coded value, also a unit's only value), which is Scott's pi
  with two coders and no missing value and Fleiss' kappa when every coder codes every unit.
* Bennett, Alpert & Goldstein (1954); Brennan & Prediger (1981): p_e = 1 / q (weighted: T_w / q^2).
* Gwet (2008) AC1: p_e = sum pi_k (1 - pi_k) / (q - 1); AC2 (Gwet 2014) with weights w:
  p_e = T_w / (q (q - 1)) * sum pi_k (1 - pi_k), T_w the sum of all weights.
* Byrt, Bishop & Carlin (1993), PABAK for two categories: 2 p_o - 1.

Functions take arrays over replicates ``R`` and return ``nan`` where undefined.

References
----------
Scott, W. A. (1955). Reliability of content analysis: The case of nominal scale coding. *Public
Opinion Quarterly*, 19(3), 321-325.
Brennan, R. L., & Prediger, D. J. (1981). Coefficient kappa: Some uses, misuses, and alternatives.
*Educational and Psychological Measurement*, 41(3), 687-699.
Gwet, K. L. (2008). Computing inter-rater reliability and its variance in the presence of high
agreement. *British Journal of Mathematical and Statistical Psychology*, 61(1), 29-48.
Gwet, K. L. (2014). *Handbook of Inter-Rater Reliability* (4th ed.). Advanced Analytics.
Byrt, T., Bishop, J., & Carlin, J. B. (1993). Bias, prevalence and kappa. *Journal of Clinical
Epidemiology*, 46(5), 423-429.
"""

from __future__ import annotations

import numpy as np

from coderel.stats.kappa import chance_corrected


def scott_pi(p_o: np.ndarray, pi: np.ndarray) -> np.ndarray:
    """Scott's pi (or its multi-coder form) from agreement and mean proportions pi (R x K)."""
    return chance_corrected(p_o, (pi**2).sum(axis=1))


def brennan_prediger(p_o: np.ndarray, q: int, weights: np.ndarray | None = None) -> np.ndarray:
    """Brennan & Prediger's coefficient with q = the codebook's number of categories."""
    if q < 2:
        return np.full(np.shape(p_o), np.nan)
    p_e = 1.0 / q if weights is None else float(weights.sum()) / q**2
    return chance_corrected(p_o, np.full(np.shape(p_o), p_e))


def gwet_ac(p_o: np.ndarray, pi: np.ndarray, weights: np.ndarray | None = None) -> np.ndarray:
    """Gwet's AC1 (no weights) or AC2 (with agreement weights) from agreement and pi (R x K)."""
    q = pi.shape[1]
    if q < 2:
        return np.full(np.shape(p_o), np.nan)
    t_w = float(q if weights is None else weights.sum())
    p_e = t_w / (q * (q - 1)) * (pi * (1.0 - pi)).sum(axis=1)
    return chance_corrected(p_o, p_e)


def pabak(p_o: np.ndarray) -> np.ndarray:
    """Prevalence- and bias-adjusted kappa, 2 p_o - 1 (two categories only)."""
    return 2.0 * np.asarray(p_o, dtype=float) - 1.0
