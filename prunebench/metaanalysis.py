"""Random-effects meta-analysis: DerSimonian-Laird, Hartung-Knapp and prediction intervals.

The mathematics that combines per-data-set estimates across data sets
(:func:`random_effects`, :func:`random_effects_many`), the filling of zero
variances and :func:`combine`, which applies them to one contrast's per-data-set
frame. :mod:`prunebench.effects` and :mod:`prunebench.recommend` use them.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats as sps

from .exceptions import EffectsError, parameter_error

__all__ = ["combine", "fill_zero_variances", "random_effects", "random_effects_many"]


def random_effects(y, v, alpha: float = 0.05) -> dict:
    """DerSimonian-Laird random-effects mean with the Hartung-Knapp interval.

    ``w = 1/v``, ``mu_FE = sum(w y)/sum(w)``, ``Q = sum(w (y - mu_FE)^2)``,
    ``c = sum(w) - sum(w^2)/sum(w)``, ``tau2 = max(0, (Q - (k-1))/c)``,
    ``I2 = max(0, (Q - (k-1))/Q)``; ``w* = 1/(v + tau2)``, ``mu = sum(w* y)/sum(w*)``;
    ``q = sum(w* (y - mu)^2)/(k-1)``, ``SE_HK = sqrt(q/sum(w*))`` and the interval
    ``mu ± t_{k-1} SE_HK`` (no truncation of q). Prediction interval for a new data
    set: ``mu ± t_{k-2} sqrt(tau2 + 1/sum(w*))``. When every variance is zero the
    limit v -> 0 is used: equal weights, ``tau2`` = the sample variance of y.

    Parameters
    ----------
    y, v : array-like of shape (k,)
        Per-data-set estimates and their variances (finite, v >= 0, all positive or
        all zero).
    alpha : float, default=0.05
        The intervals are ``1 - alpha`` (two-sided).

    Returns
    -------
    dict
        ``estimate``, ``se`` (Hartung-Knapp), ``se_plain`` (sqrt(1/sum w*), the usual
        DerSimonian-Laird standard error), ``df`` (k - 1), ``ci_low``, ``ci_high``,
        ``p_value`` (Hartung-Knapp t test of mu = 0), ``tau2``, ``i2``, ``q`` (Cochran's
        Q), ``pi_low``, ``pi_high`` (NaN for k < 3), ``k``.
    """
    y, v = np.asarray(y, dtype=float), np.asarray(v, dtype=float)
    if y.ndim != 1 or y.shape != v.shape:
        raise parameter_error("v", "random_effects", "a 1-d array shaped like y", v.tolist())
    many = random_effects_many(y[:, None], v[:, None], alpha)
    out = {key: float(value[0]) for key, value in many.items() if key not in ("df", "k")}
    out.update(df=many["df"], k=many["k"])
    return out


def random_effects_many(y, v, alpha: float = 0.05) -> dict:
    """:func:`random_effects` for many contrasts at once, one per column.

    Parameters
    ----------
    y, v : array-like of shape (k, m)
        Estimates and variances of m contrasts over the same k data sets; each
        column's variances all positive or all zero.
    alpha : float, default=0.05

    Returns
    -------
    dict
        As :func:`random_effects`, each value an array of shape (m,) (``df`` and ``k``
        ints).
    """
    y, v = np.asarray(y, dtype=float), np.asarray(v, dtype=float)
    if y.ndim != 2 or y.shape != v.shape:
        raise parameter_error("v", "random_effects_many", "a 2-d array shaped like y", v.shape)
    k = y.shape[0]
    if k < 2:
        raise parameter_error("y", "random_effects", "two or more estimates", y.tolist())
    if not (np.all(np.isfinite(y)) and np.all(np.isfinite(v))) or np.any(v < 0):
        raise parameter_error("v", "random_effects", "finite, y finite and v >= 0", v.tolist())
    zero = v == 0
    exact = zero.all(axis=0)
    if np.any(zero.any(axis=0) & ~exact):
        raise parameter_error("v", "random_effects", "all positive or all zero", v.tolist())
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(exact, 1.0, 1 / np.where(zero, 1.0, v))
        sum_w = w.sum(axis=0)
        mu_fe = (w * y).sum(axis=0) / sum_w
        q_stat = (w * (y - mu_fe) ** 2).sum(axis=0)
        c = sum_w - (w**2).sum(axis=0) / sum_w
        tau2 = np.maximum(0.0, (q_stat - (k - 1)) / c)
        i2 = np.where(q_stat > 0, np.maximum(0.0, (q_stat - (k - 1)) / q_stat), 0.0)
        ws = 1 / (v + tau2)
        ws = np.where(exact, 1.0, ws)
        sum_ws = ws.sum(axis=0)
        mu = (ws * y).sum(axis=0) / sum_ws
        hk = (ws * (y - mu) ** 2).sum(axis=0) / (k - 1) / sum_ws
        # every variance zero: the limit v -> 0 (equal weights, tau2 = var(y))
        spread = y.var(axis=0, ddof=1)
        tau2 = np.where(exact, spread, tau2)
        i2 = np.where(exact, (spread > 0).astype(float), i2)
        q_stat = np.where(exact, np.where(spread > 0, np.inf, 0.0), q_stat)
        hk = np.where(exact, spread / k, hk)
        plain = np.where(exact, spread / k, 1 / sum_ws)
        se = np.sqrt(hk)
        crit = sps.t.ppf(1 - alpha / 2, k - 1)
        p = np.where(se > 0, 2 * sps.t.sf(np.abs(mu) / se, k - 1), np.where(mu == 0, 1.0, 0.0))
        if k >= 3:
            half = sps.t.ppf(1 - alpha / 2, k - 2) * np.sqrt(tau2 + plain)
        else:
            half = np.full(mu.shape, np.nan)
    return {
        "estimate": mu,
        "se": se,
        "se_plain": np.sqrt(plain),
        "df": k - 1,
        "ci_low": mu - crit * se,
        "ci_high": mu + crit * se,
        "p_value": p,
        "tau2": tau2,
        "i2": i2,
        "q": q_stat,
        "pi_low": mu - half,
        "pi_high": mu + half,
        "k": k,
    }


def fill_zero_variances(v) -> np.ndarray:
    """Zero variances take the smallest positive one of their column (all zero stays zero).

    A data set whose contrasts agree on every fold (s^2 = 0, e.g. two levels that grow
    the same trees) would otherwise get infinite weight and pin the estimate.

    Parameters
    ----------
    v : array-like of shape (k,) or (k, m)

    Returns
    -------
    ndarray
    """
    v = np.array(v, dtype=float)
    flat = v.ndim == 1
    v = v[:, None] if flat else v
    smallest = np.where(v > 0, v, np.inf).min(axis=0)
    v = np.where((v == 0) & np.isfinite(smallest), smallest, v)
    return v[:, 0] if flat else v


def combine(per_dataset: pd.DataFrame, alpha: float = 0.05) -> dict:
    """Combine per-data-set paired means across data sets.

    Parameters
    ----------
    per_dataset : DataFrame
        One row per data set with ``y`` (mean contrast), ``v`` (Nadeau-Bengio
        variance) and ``j`` (outer folds).
    alpha : float, default=0.05

    Returns
    -------
    dict
        :func:`random_effects`' keys plus ``ci90_low``/``ci90_high`` (the 1 - 2 alpha
        interval the equivalence verdict uses) and ``note``. With one data set: its
        own corrected t interval on J - 1 df, NaN heterogeneity and prediction
        interval, and a note that nothing generalises beyond it.
    """
    y = per_dataset["y"].to_numpy(float)
    if not np.all(np.isfinite(per_dataset["v"].to_numpy(float))):
        raise EffectsError("a data set has fewer than two outer folds: no variance")
    v = fill_zero_variances(per_dataset["v"].to_numpy(float))
    if y.size == 1:
        se, df = float(np.sqrt(v[0])), int(per_dataset["j"].iloc[0]) - 1
        mu = float(y[0])
        out = {
            "estimate": mu,
            "se": se,
            "se_plain": se,
            "df": df,
            "tau2": np.nan,
            "i2": np.nan,
            "q": np.nan,
            "pi_low": np.nan,
            "pi_high": np.nan,
            "k": 1,
            "note": "one data set: the interval is that data set's; nothing generalises beyond it",
        }
    else:
        out = random_effects(y, v, alpha)
        mu, se, df = out["estimate"], out["se"], out["df"]
        out["note"] = "two data sets: no prediction interval" if y.size == 2 else ""
    for name, level in (("", alpha), ("90", 2 * alpha)):
        if se > 0:
            half = sps.t.ppf(1 - level / 2, df) if df >= 1 else np.nan
            out[f"ci{name}_low"], out[f"ci{name}_high"] = mu - half * se, mu + half * se
        else:
            out[f"ci{name}_low"] = out[f"ci{name}_high"] = mu
    if y.size == 1:
        if se > 0:
            out["p_value"] = float(2 * sps.t.sf(abs(mu) / se, df)) if df >= 1 else np.nan
        else:
            out["p_value"] = 1.0 if mu == 0 else 0.0
    return out
