"""Statistics of a tolerance study: the spread of each output and a sensitivity ranking.

Pure functions of arrays. The sensitivity measures (Saltelli et al., *Global Sensitivity
Analysis: The Primer*, Wiley, 2008, sec. 1.2.5-1.2.6, recalled from memory):

- standardized regression coefficients (SRC): the least-squares coefficients of the output on
  the inputs, both scaled to zero mean and unit standard deviation; with the fit's R^2 near 1
  the squared SRCs are the shares of the output's variance;
- Spearman's rank correlation coefficient of each input with each output (Spearman, "The proof
  and measurement of association between two things", Am. J. Psychol. 15, 1904), which needs
  only monotonicity; computed by :func:`scipy.stats.spearmanr`.

The ranking orders the inputs by ``|SRC|`` when the linear fit explains the output
(R^2 >= 0.7, the rule of thumb of the same book), else by ``|Spearman rho|``.
"""

from __future__ import annotations

import math

import numpy as np

#: the linear fit explains the output when R^2 is at least this (Saltelli et al. 2008, from memory)
SRC_R2_MIN = 0.7
PERCENTILES = (5.0, 50.0, 95.0)


def spread(values) -> dict:
    """Count, mean, standard deviation (n-1) and the 5/50/95 percentiles of the finite values."""
    v = np.asarray(values, float)
    f = v[np.isfinite(v)]
    out = {"count": int(f.size), "non_finite": int(v.size - f.size)}
    if f.size == 0:
        out.update(mean=None, std=None, min=None, max=None, **{f"p{int(p)}": None for p in PERCENTILES})
        return out
    out.update(mean=float(f.mean()), std=float(f.std(ddof=1)) if f.size > 1 else 0.0, min=float(f.min()),
               max=float(f.max()), **{f"p{int(p)}": float(np.percentile(f, p)) for p in PERCENTILES})
    return out


def sensitivity(X: np.ndarray, y: np.ndarray, names: list[str]) -> dict:
    """SRC (with R^2), Spearman rho and the ranking of the inputs ``X`` (n, d) for one output ``y`` (n,).

    Rows with a non-finite output are left out; an output without spread has no ranking."""
    from scipy.stats import spearmanr

    X = np.asarray(X, float)
    y = np.asarray(y, float)
    ok = np.isfinite(y) & np.all(np.isfinite(X), axis=1)
    X, y = X[ok], y[ok]
    n, d = X.shape
    empty = {"samples": int(n), "r2": None, "method": None, "src": {}, "spearman": {}, "ranking": []}
    if d == 0 or n < d + 2 or float(np.std(y)) == 0.0:
        return empty
    sx = X.std(axis=0, ddof=1)
    use = sx > 0
    Z = (X[:, use] - X[:, use].mean(axis=0)) / sx[use]
    zy = (y - y.mean()) / y.std(ddof=1)
    beta, *_ = np.linalg.lstsq(np.column_stack([np.ones(n), Z]), zy, rcond=None)
    resid = zy - np.column_stack([np.ones(n), Z]) @ beta
    r2 = float(1.0 - resid @ resid / (zy @ zy))
    src = dict.fromkeys(names, 0.0)
    for name, b in zip([nm for nm, u in zip(names, use) if u], beta[1:]):
        src[name] = float(b)
    rho = {}
    for j, name in enumerate(names):
        if not use[j]:
            rho[name] = 0.0
            continue
        r = spearmanr(X[:, j], y).statistic
        rho[name] = float(r) if math.isfinite(r) else 0.0
    method = "src" if r2 >= SRC_R2_MIN else "spearman"
    key = src if method == "src" else rho
    ranking = sorted(names, key=lambda nm: -abs(key[nm]))
    return {"samples": int(n), "r2": r2, "method": method, "src": src, "spearman": rho, "ranking": ranking}
