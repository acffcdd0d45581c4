"""Risk models: the probability of reaching each alert level within the horizon, and the
expected cell count at the horizon.

- :class:`RiskModel`: an ordinal (proportional-odds) logistic model of the highest level reached
  within the horizon, fitted by maximum likelihood (damped Newton's method on the analytic
  gradient; standard errors from the Hessian); it agrees with statsmodels' ``OrderedModel``
  (tested). One set of driver coefficients and one cut point per level make the probabilities
  coherent by construction: a higher level is never more likely than a lower one.
- :class:`CountModel`: ordinary least squares on log10 of the largest count in the window, with
  an 80% prediction interval.
- :class:`ClimatologyModel` and :class:`PersistenceModel`: baselines with the same interface.

All follow the scikit-learn estimator contract: ``__init__`` stores settings, ``fit`` learns and
returns self, attributes learned end in ``_``, predicting before fitting or with other driver
names fails with a clear message. Models are saved as JSON (never pickle) with their version and
a checksum; a file from another version, or altered by hand, is refused.

Missing drivers: a value missing at fit or predict time is replaced by the training median, and a
0/1 indicator ``<driver>__missing`` is added for drivers missing on at least
``MIN_MISSING_FOR_INDICATOR`` training rows (drivers missing on exactly the same rows share one
indicator, named after the first), so that rows are never dropped silently (documented imputation
plus indicator). Rarer gaps are imputed only: an indicator seen a handful of times cannot be
estimated.

References
----------
.. [1] McCullagh, P. (1980). Regression models for ordinal data. Journal of the Royal
   Statistical Society B 42(2): 109-142.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.drivers import DEFAULT_DRIVERS
from cyanorisk.errors import ModelFileError
from cyanorisk.version import __version__

FORMAT = "cyanorisk-model"
FORMAT_VERSION = 4
"""Version 2: driver names of the glossary (``calm_h_7d``); version 4: the outlook at every
horizon, its family and calibration, and persistence as a probability. Files of other versions
are refused with the advice to retrain."""

Z_975 = 1.959963984540054
"""The 97.5% quantile of the standard normal distribution (for 95% intervals)."""


MIN_MISSING_FOR_INDICATOR = 20
"""Training rows a driver must be missing on before it gets its own missingness indicator."""


class NotFittedError(RuntimeError):
    """The model was used before ``fit``."""


def expit(x: np.ndarray) -> np.ndarray:
    """The logistic function 1 / (1 + exp(-x)), computed without overflow for any x."""
    x = np.asarray(x, dtype=float)
    out = np.empty_like(x)
    pos = x >= 0
    out[pos] = 1.0 / (1.0 + np.exp(-x[pos]))
    e = np.exp(x[~pos])
    out[~pos] = e / (1.0 + e)
    return out


def prepare(table: pd.DataFrame) -> pd.DataFrame:
    """Derived drivers from a training table (or a table of issue days to forecast).

    - ``last_count_log10`` = log10(count + 1) of the last known total [log10 cells mL-1]; a
      count censored below ('<100') enters as half its limit, a common substitution (common
      practice, no source), with ``last_count_censored`` = 1 so the model can tell;
    - ``count_growth_per_d``: the net specific growth rate between the last two known results,
      r = ln((N2 + 1) / (N1 + 1)) / (t2 - t1) [d-1] (exponential growth between two counts,
      the usual definition of a specific growth rate: Reynolds 2006, The Ecology of
      Phytoplankton, ch. 5, from memory), with the same substitution for censored counts; NaN
      when there are not two results, or they were taken less than half a day apart;
    - ``growth_pair_age_days``: days from the older sample of that pair to the issue time [d];
    - ``days_since_level_met_d``: days from the first sample of the season known to meet the
      lowest level to the issue time [d]; 0 while no sample of the season has;
    - ``season_sin``, ``season_cos``: day of year on the unit circle (annual cycle).
    """
    out = table.copy()
    count = _substituted(out["last_count_cells_per_ml"], out["last_count_censor"])
    out["last_count_log10"] = np.log10(count + 1.0)
    out["last_count_censored"] = (out["last_count_censor"] == "<").to_numpy().astype(float)
    if "prev_count_cells_per_ml" in out:
        issue, last, prev_at, first = (_days(out[c]) for c in (
            "issue_time_utc", "last_sampled_at", "prev_sampled_at", "season_first_level_at"))
        prev = _substituted(out["prev_count_cells_per_ml"], out["prev_count_censor"])
        span = last - prev_at
        with np.errstate(invalid="ignore", divide="ignore"):
            rate = (np.log(count + 1.0) - np.log(prev + 1.0)) / span
        out["count_growth_per_d"] = np.where(span >= 0.5, rate, np.nan)
        out["growth_pair_age_days"] = issue - prev_at
        since = issue - first
        out["days_since_level_met_d"] = np.where(np.isnan(since), 0.0, since)
    doy = pd.DatetimeIndex(pd.to_datetime(out["issue_date"])).day_of_year.to_numpy()
    out["season_sin"] = np.sin(2 * np.pi * doy / 365.25)
    out["season_cos"] = np.cos(2 * np.pi * doy / 365.25)
    return out


def _days(instants: pd.Series) -> np.ndarray:
    """UTC instants as days since 1970 [d] (NaN for NaT), for differences in days."""
    ns = pd.DatetimeIndex(pd.to_datetime(instants, utc=True)).asi8.astype(float)
    return np.where(pd.isna(instants).to_numpy(), np.nan, ns / 86_400e9)


def _substituted(count: pd.Series, censor: pd.Series) -> np.ndarray:
    """Counts [cells mL-1] with a count censored below ('<100') as half its limit."""
    value = count.to_numpy(dtype=float)
    return np.where((censor == "<").to_numpy(), value / 2.0, value)


def ordinal_outcome(table: pd.DataFrame, level_columns: Sequence[str]) -> np.ndarray:
    """Highest level reached in the window (0 = none), NaN where a label is missing."""
    labels = table[list(level_columns)].to_numpy(dtype=float)
    known = ~np.isnan(labels).any(axis=1)
    return np.where(known, np.nansum(labels, axis=1), np.nan)


@dataclass
class _OrdinalFit:
    """Maximum-likelihood fit of the proportional-odds model."""

    coef: np.ndarray
    cuts: np.ndarray
    cov: np.ndarray
    loglike: float


def _ordinal_nll(params: np.ndarray, Z: np.ndarray, y: np.ndarray,
                 n_cuts: int) -> tuple[float, np.ndarray]:
    """Negative log-likelihood of the proportional-odds model and its gradient.

    P(Y < k) = F(theta_k - eta), eta = Z.beta, F the logistic CDF; the cuts are parametrised as
    theta_1 and log increments so that they stay ordered (McCullagh 1980).
    """
    p = Z.shape[1]
    beta, raw = params[:p], params[p:]
    theta = np.cumsum(np.concatenate(([raw[0]], np.exp(raw[1:]))))
    eta = Z @ beta
    big = np.concatenate(([-np.inf], theta, [np.inf]))
    upper = big[y + 1] - eta  # F(theta_{y+1} - eta) = P(Y <= y)
    lower = big[y] - eta
    Fu, Fl = expit(upper), expit(lower)
    fu, fl = Fu * (1 - Fu), Fl * (1 - Fl)
    prob = np.clip(Fu - Fl, 1e-300, None)
    nll = -float(np.sum(np.log(prob)))
    d_eta = (fu - fl) / prob  # d(-ll)/d(eta)
    g_beta = Z.T @ d_eta
    g_theta = np.zeros(n_cuts)
    for k in range(n_cuts):  # theta_k is the upper cut of class k and the lower cut of class k+1
        g_theta[k] = -np.sum(np.where(y == k, fu / prob, 0.0)) + np.sum(np.where(y == k + 1, fl / prob, 0.0))
    # chain rule to the raw parameters: theta_k = raw_0 + sum_{j<=k, j>0} exp(raw_j)
    g_raw = np.array([g_theta[k:].sum() * (1.0 if k == 0 else np.exp(raw[k])) for k in range(n_cuts)])
    return nll, np.concatenate((g_beta, g_raw))


def _natural_hessian(beta: np.ndarray, theta: np.ndarray, Z: np.ndarray,
                     y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Hessian of the negative log-likelihood in (beta, theta), analytic, and the gradient in
    theta.

    With P = F(u) - F(l) for an observation of class y (u = theta_y - eta, l = theta_{y-1} - eta),
    f = F(1 - F) and f' = f(1 - 2F), the second derivatives of log P are
    d2/deta2 = (f'(u) - f'(l))/P - A^2 with A = (f(u) - f(l))/P;
    d2/dtheta_u2 = f'(u)/P - (f(u)/P)^2; d2/dtheta_l2 = -f'(l)/P - (f(l)/P)^2;
    d2/dtheta_u dtheta_l = f(u)f(l)/P^2; d2/deta dtheta_u = -f'(u)/P + f(u)A/P and
    d2/deta dtheta_l = f'(l)/P - f(l)A/P (chain rule on the logistic CDF; McCullagh 1980).
    """
    n_cuts, p = len(theta), len(beta)
    eta = Z @ beta
    big = np.concatenate(([-np.inf], theta, [np.inf]))
    Fu, Fl = expit(big[y + 1] - eta), expit(big[y] - eta)
    fu, fl = Fu * (1 - Fu), Fl * (1 - Fl)
    dfu, dfl = fu * (1 - 2 * Fu), fl * (1 - 2 * Fl)
    P = np.clip(Fu - Fl, 1e-300, None)
    A = (fu - fl) / P
    h_ee = (dfu - dfl) / P - A ** 2
    h_eu = -dfu / P + fu * A / P
    h_el = dfl / P - fl * A / P
    h = np.zeros((p + n_cuts, p + n_cuts))
    h[:p, :p] = -(Z.T * h_ee) @ Z
    g_theta = np.zeros(n_cuts)
    for k in range(n_cuts):  # cut k is the upper cut of class k and the lower of class k+1
        up, lo = y == k, y == k + 1
        h[:p, p + k] = h[p + k, :p] = -(Z[up].T @ h_eu[up] + Z[lo].T @ h_el[lo])
        h[p + k, p + k] = -(np.sum(dfu[up] / P[up] - (fu[up] / P[up]) ** 2)
                            + np.sum(-dfl[lo] / P[lo] - (fl[lo] / P[lo]) ** 2))
        if k + 1 < n_cuts:
            both = y == k + 1  # upper cut k+1, lower cut k
            h[p + k, p + k + 1] = h[p + k + 1, p + k] = -np.sum(fu[both] * fl[both] / P[both] ** 2)
        g_theta[k] = -np.sum(fu[up] / P[up]) + np.sum(fl[lo] / P[lo])
    return h, g_theta


def _raw_hessian(params: np.ndarray, Z: np.ndarray, y: np.ndarray, n_cuts: int) -> np.ndarray:
    """Hessian of the negative log-likelihood in the fitted parameters (beta, theta_1 and the
    log increments of the cuts): the natural Hessian through the Jacobian J of the cuts, plus
    the term of their curvature, exp(raw_j) x (the gradient summed over the cuts above j)."""
    p = Z.shape[1]
    beta, raw = params[:p], params[p:]
    theta = np.cumsum(np.concatenate(([raw[0]], np.exp(raw[1:]))))
    h, g_theta = _natural_hessian(beta, theta, Z, y)
    J = np.tril(np.ones((n_cuts, n_cuts))) * np.concatenate(([1.0], np.exp(raw[1:])))[None, :]
    out = np.empty_like(h)
    out[:p, :p] = h[:p, :p]
    out[:p, p:] = h[:p, p:] @ J
    out[p:, :p] = out[:p, p:].T
    curvature = np.concatenate(([0.0], np.exp(raw[1:]) * np.cumsum(g_theta[::-1])[::-1][1:]))
    out[p:, p:] = J.T @ h[p:, p:] @ J + np.diag(curvature)
    return out


def _newton(fun, hess, x: np.ndarray, tol: float, max_iter: int = 100) -> tuple[np.ndarray, bool]:
    """Damped Newton's method on a smooth convex-near-the-optimum objective ``fun -> (f, g)``
    with its Hessian ``hess``."""
    f, g = fun(x)
    for _ in range(max_iter):
        if np.max(np.abs(g)) < tol:
            return x, True
        try:
            step = -np.linalg.solve(hess(x) + 1e-10 * np.eye(len(x)), g)
        except np.linalg.LinAlgError:
            return x, False
        if g @ step >= 0:  # not a descent direction: fall back to the gradient
            step = -g / max(1.0, np.max(np.abs(g)))
        elif -(g @ step) / 2 < 1e-13 * max(1.0, abs(f)):
            # the Newton decrement is below the rounding of f: a line search cannot see any
            # progress, and the full step lands on the optimum (Boyd & Vandenberghe 2004, 9.5)
            return x + step, True
        t = 1.0
        while t > 1e-10:
            f_new, g_new = fun(x + t * step)
            if np.isfinite(f_new) and f_new <= f + 1e-4 * t * (g @ step):
                break
            t /= 2
        else:
            return x, False
        x, f, g = x + t * step, f_new, g_new
    return x, np.max(np.abs(g)) < tol


def _fit_ordinal(Z: np.ndarray, y: np.ndarray, n_cuts: int) -> _OrdinalFit:
    """Fit by damped Newton's method (analytic gradient and Hessian), with L-BFGS as a
    fallback; the covariance of (beta, theta) is the inverse Hessian of the negative
    log-likelihood at the optimum."""
    p = Z.shape[1]

    def fun(v: np.ndarray) -> tuple[float, np.ndarray]:
        return _ordinal_nll(v, Z, y, n_cuts)

    start = np.concatenate((np.zeros(p), [-1.0], np.zeros(n_cuts - 1)))
    x, ok = _newton(fun, lambda v: _raw_hessian(v, Z, y, n_cuts), start, tol=1e-8)
    if not ok:
        from scipy import optimize  # the fallback only

        res = optimize.minimize(fun, start, jac=True, method="L-BFGS-B",
                                options={"maxiter": 10_000, "gtol": 1e-9, "ftol": 1e-15})
        x, ok = res.x, res.success or np.max(np.abs(res.jac)) < 1e-4
    if not ok:
        raise RuntimeError("the ordinal model did not converge; the drivers may separate the "
                           "outcomes perfectly, or be collinear")
    beta, raw = x[:p], x[p:]
    theta = np.cumsum(np.concatenate(([raw[0]], np.exp(raw[1:]))))
    try:
        cov = np.linalg.inv(_natural_hessian(beta, theta, Z, y)[0])
    except np.linalg.LinAlgError:
        cov = np.full((p + n_cuts, p + n_cuts), np.nan)
    return _OrdinalFit(beta, theta, cov, -float(fun(x)[0]))


def _indicator_groups(X: pd.DataFrame) -> dict[str, list[str]]:
    """Missingness indicators: one per distinct pattern of missing rows, for drivers missing on
    at least :data:`MIN_MISSING_FOR_INDICATOR` rows."""
    groups: dict[bytes, list[str]] = {}
    for c in X.columns:
        miss = X[c].isna().to_numpy()
        if miss.sum() >= MIN_MISSING_FOR_INDICATOR:
            groups.setdefault(np.packbits(miss).tobytes(), []).append(c)
    return {f"{members[0]}__missing": members for members in groups.values()}


def _check_columns(X: pd.DataFrame, expected: list[str]) -> None:
    """Refuse a frame whose driver names differ from the fitted ones, showing the difference."""
    got = list(X.columns)
    missing = [c for c in expected if c not in got]
    if missing:
        raise ValueError(f"the drivers differ from those the model was fitted with: missing "
                         f"{', '.join(missing)}")


@dataclass
class _Scaling:
    median: np.ndarray
    mean: np.ndarray
    scale: np.ndarray
    indicators: dict[str, list[str]]
    """Indicator column -> the drivers whose missingness it marks."""


class RiskModel:
    """Ordinal logistic model of the highest alert level reached within the horizon.

    Parameters
    ----------
    drivers : sequence of str
        Driver columns to use.
    levels : sequence of str
        Level names, lowest first.
    horizon_days : int
        The forecast horizon [d].
    """

    def __init__(self, drivers: Sequence[str] = DEFAULT_DRIVERS, levels: Sequence[str] = ("level 1",),
                 horizon_days: int = 7) -> None:
        self.drivers = drivers
        self.levels = levels
        self.horizon_days = horizon_days

    def _outcome_words(self, k: int) -> str:
        """Outcome k in words: 0 stays below the first level, k reaches level k at most."""
        if k == 0:
            return f"'stays below {self.levels[0]}'"
        return f"'reaches {self.levels[k - 1]}'" + (" at most" if k < len(self.levels) else "")

    # fitting -------------------------------------------------------------------------------------

    def fit(self, X: pd.DataFrame, y: np.ndarray) -> RiskModel:
        """Learn from drivers ``X`` and ordinal outcomes ``y`` (0 .. number of levels).

        Rows with a missing outcome cannot teach anything and are left out (counted in
        ``n_unlabelled_``); missing drivers are imputed with an indicator (module notes).
        """
        drivers = list(self.drivers)
        _check_columns(X, drivers)
        y = np.asarray(y, dtype=float)
        if len(y) != len(X):
            raise ValueError(f"X has {len(X)} rows but y has {len(y)}")
        labelled = ~np.isnan(y)
        self.n_unlabelled_ = int((~labelled).sum())
        self.left_out_: list[dict[str, Any]] = []
        """Drivers left out of the fit, with the reason (see training.fit_signed)."""
        Xl = X.loc[labelled, drivers].astype(float)
        yl = y[labelled].astype(int)
        present = np.unique(yl)
        if len(present) < 2:
            raise ValueError(f"all {len(yl)} labelled issue days have the same outcome "
                             f"({self._outcome_words(int(present[0]))}); a model needs days "
                             "with different outcomes to learn from")
        median = np.nanmedian(Xl.to_numpy(), axis=0)
        median = np.where(np.isnan(median), 0.0, median)
        indicators = _indicator_groups(Xl)
        Z = self._impute(Xl, median, indicators)
        mean, scale = Z.mean(axis=0).to_numpy(), Z.std(axis=0, ddof=0).to_numpy()
        scale = np.where(scale > 0, scale, 1.0)
        Zs = (Z - mean) / scale
        self.classes_ = np.arange(int(present.max()) + 1)
        missing_classes = sorted(set(self.classes_) - set(present))
        if missing_classes:
            words = " or ".join(self._outcome_words(int(c)) for c in missing_classes)
            raise ValueError(f"no labelled issue day has the outcome {words} while higher "
                             "levels occur, so the levels cannot be ordered from these data")
        result = _fit_ordinal(Zs.to_numpy(), yl, len(self.classes_) - 1)
        k = Zs.shape[1]
        self.feature_names_in_ = list(Zs.columns)
        self.coef_ = result.coef
        var = np.diag(result.cov)[:k]
        self.coef_se_ = np.sqrt(np.where(var >= 0, var, np.nan))  # NaN if the Hessian is singular
        self.cuts_ = result.cuts
        self.scaling_ = _Scaling(median, mean, scale, indicators)
        self.loglike_ = result.loglike
        self.n_train_ = int(len(yl))
        self.class_counts_ = {int(c): int((yl == c).sum()) for c in self.classes_}
        return self

    def _imputed(self, X: pd.DataFrame, median: np.ndarray,
                 indicators: dict[str, list[str]]) -> np.ndarray:
        """The drivers with missing values replaced by ``median``, then the indicators (1 where
        any of their members is missing), as columns of one array."""
        drivers = list(self.drivers)
        V = X[drivers].to_numpy(dtype=float)
        missing = np.isnan(V)
        where = {d: i for i, d in enumerate(drivers)}
        flags = [missing[:, [where[m] for m in members]].any(axis=1).astype(float)
                 for members in indicators.values()]
        return np.column_stack([np.where(missing, median, V), *flags]) if flags else \
            np.where(missing, median, V)

    def _impute(self, X: pd.DataFrame, median: np.ndarray,
                indicators: dict[str, list[str]]) -> pd.DataFrame:
        return pd.DataFrame(self._imputed(X, median, indicators), index=X.index,
                            columns=[*self.drivers, *indicators])

    def _standardised(self, X: pd.DataFrame) -> pd.DataFrame:
        if not hasattr(self, "coef_"):
            raise NotFittedError("this RiskModel is not fitted yet: call fit() or load a saved "
                                 "model first")
        _check_columns(X, list(self.drivers))
        s = self.scaling_
        Z = self._impute(X, s.median, s.indicators)
        return (Z - s.mean) / s.scale

    # predicting ----------------------------------------------------------------------------------

    def predict_proba(self, X: pd.DataFrame) -> pd.DataFrame:
        """Probability of reaching each level within the horizon (columns: level names).

        P(reach level k) = P(Y >= k) = 1 - F(cut_k - x.beta), F the logistic CDF; decreasing in k.
        """
        if not hasattr(self, "coef_"):
            raise NotFittedError("this RiskModel is not fitted yet: call fit() or load a saved "
                                 "model first")
        return pd.DataFrame(self.proba_array(X), columns=list(self.levels), index=X.index)

    def proba_array(self, X: pd.DataFrame) -> np.ndarray:
        """:meth:`predict_proba` as an array (days, levels)."""
        _check_columns(X, list(self.drivers))
        s = self.scaling_
        eta = ((self._imputed(X, s.median, s.indicators) - s.mean) / s.scale) @ self.coef_
        out = np.zeros((len(eta), len(self.levels)))  # a level never reached in training: 0
        for k in range(min(len(self.levels), len(self.cuts_))):
            out[:, k] = 1.0 - expit(self.cuts_[k] - eta)
        return out

    def explain(self, X: pd.DataFrame, top: int = 5) -> list[list[dict[str, Any]]]:
        """For each row, the drivers that push the forecast most: contribution to the log-odds
        relative to an average training day (coefficient x standardised value), largest first.

        ``value`` is the value the model used: for a missing driver, the training median it was
        replaced by (and ``imputed`` is true); for a missingness indicator, 0 or 1.
        """
        Z = self._standardised(X)
        used = self._impute(X, self.scaling_.median, self.scaling_.indicators)
        missing = X[list(self.drivers)].isna()
        contrib = Z.to_numpy() * self.coef_
        out = []
        for r in range(len(Z)):
            order = np.argsort(-np.abs(contrib[r]))[:top]
            out.append([{"driver": self.feature_names_in_[j],
                         "value": float(used.iloc[r][self.feature_names_in_[j]]),
                         "imputed": bool(self.feature_names_in_[j] in missing
                                         and missing.iloc[r][self.feature_names_in_[j]]),
                         "log_odds": float(contrib[r, j]),
                         "direction": "raises" if contrib[r, j] > 0 else "lowers"}
                        for j in order])
        return out

    def coefficients(self) -> pd.DataFrame:
        """Coefficients per driver on the original scale [per driver unit] with 95% intervals,
        and per standard deviation of the driver."""
        z = Z_975
        scale = self.scaling_.scale
        return pd.DataFrame({
            "per_unit": self.coef_ / scale,
            "per_unit_low": (self.coef_ - z * self.coef_se_) / scale,
            "per_unit_high": (self.coef_ + z * self.coef_se_) / scale,
            "per_sd": self.coef_, "se_per_sd": self.coef_se_,
        }, index=self.feature_names_in_)

    def intercept_original_scale(self) -> np.ndarray:
        """Cut points on the original driver scale (the logit intercepts are their negatives)."""
        return self.cuts_ + float(np.sum(self.coef_ * self.scaling_.mean / self.scaling_.scale))

    # persistence ---------------------------------------------------------------------------------

    def to_dict(self) -> dict[str, Any]:
        s = self.scaling_
        return {"drivers": list(self.drivers), "levels": list(self.levels),
                "horizon_days": self.horizon_days, "feature_names": self.feature_names_in_,
                "coef": self.coef_.tolist(), "coef_se": self.coef_se_.tolist(),
                "cuts": self.cuts_.tolist(), "classes": self.classes_.tolist(),
                "median": s.median.tolist(), "mean": s.mean.tolist(), "scale": s.scale.tolist(),
                "indicators": s.indicators, "loglike": self.loglike_, "n_train": self.n_train_,
                "n_unlabelled": self.n_unlabelled_,
                "class_counts": {str(k): v for k, v in self.class_counts_.items()},
                "left_out": list(self.left_out_)}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> RiskModel:
        m = cls(tuple(d["drivers"]), tuple(d["levels"]), int(d["horizon_days"]))
        m.feature_names_in_ = list(d["feature_names"])
        m.coef_, m.coef_se_ = np.array(d["coef"]), np.array(d["coef_se"])
        m.cuts_, m.classes_ = np.array(d["cuts"]), np.array(d["classes"])
        m.scaling_ = _Scaling(np.array(d["median"]), np.array(d["mean"]), np.array(d["scale"]),
                              {k: list(v) for k, v in d["indicators"].items()})
        m.loglike_, m.n_train_ = float(d["loglike"]), int(d["n_train"])
        m.n_unlabelled_ = int(d["n_unlabelled"])
        m.class_counts_ = {int(k): int(v) for k, v in d["class_counts"].items()}
        m.left_out_ = list(d["left_out"])
        return m


class CountModel:
    """Expected cell count at the horizon: OLS on log10(largest count in the window + 1).

    Fitted with statsmodels' OLS; prediction intervals are those of the normal linear model (t
    distribution, the parameter covariance and the residual variance), back-transformed to cells
    per mL. The t quantile is kept with the fit, so predicting needs numpy only.
    """

    def __init__(self, drivers: Sequence[str] = DEFAULT_DRIVERS, coverage: float = 0.8) -> None:
        self.drivers = drivers
        self.coverage = coverage

    def fit(self, X: pd.DataFrame, log10_count: np.ndarray) -> CountModel:
        from scipy import stats
        from statsmodels.regression.linear_model import OLS  # not statsmodels.api (six times the import time)
        from statsmodels.tools.tools import add_constant

        drivers = list(self.drivers)
        _check_columns(X, drivers)
        y = np.asarray(log10_count, dtype=float)
        keep = ~np.isnan(y)
        Xl = X.loc[keep, drivers].astype(float)
        self.median_ = np.nan_to_num(np.nanmedian(Xl.to_numpy(), axis=0))
        A = add_constant(Xl.fillna(pd.Series(self.median_, index=drivers)).to_numpy(),
                         has_constant="add")
        result = OLS(y[keep], A).fit()
        self.params_ = np.asarray(result.params)
        self.cov_ = np.asarray(result.cov_params())
        self.resid_var_ = float(result.scale)
        self.df_resid_ = float(result.df_resid)
        self.t_quantile_ = float(stats.t.ppf(0.5 + self.coverage / 2, self.df_resid_))
        self.feature_names_in_ = drivers
        self.n_train_ = int(keep.sum())
        return self

    def predict(self, X: pd.DataFrame) -> pd.DataFrame:
        """Median count and the interval [cells mL-1] at the horizon."""
        if not hasattr(self, "params_"):
            raise NotFittedError("this CountModel is not fitted yet: call fit() first")
        _check_columns(X, self.feature_names_in_)
        values = X[self.feature_names_in_].astype(float).fillna(
            pd.Series(self.median_, index=self.feature_names_in_)).to_numpy()
        A = np.column_stack((np.ones(len(values)), values))
        mean = A @ self.params_
        se = np.sqrt(np.einsum("ij,jk,ik->i", A, self.cov_, A) + self.resid_var_)
        t = self.t_quantile_
        to_cells = lambda v: np.maximum(10 ** v - 1.0, 0.0)  # noqa: E731
        return pd.DataFrame({"expected_cells_per_ml": to_cells(mean),
                             "low_cells_per_ml": to_cells(mean - t * se),
                             "high_cells_per_ml": to_cells(mean + t * se)}, index=X.index)

    def to_dict(self) -> dict[str, Any]:
        return {"drivers": list(self.drivers), "coverage": self.coverage,
                "median": self.median_.tolist(), "params": self.params_.tolist(),
                "cov": self.cov_.tolist(), "resid_var": self.resid_var_,
                "df_resid": self.df_resid_, "t_quantile": self.t_quantile_,
                "n_train": self.n_train_}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> CountModel:
        m = cls(tuple(d["drivers"]), float(d["coverage"]))
        m.feature_names_in_ = list(d["drivers"])
        m.median_, m.params_ = np.array(d["median"], dtype=float), np.array(d["params"], dtype=float)
        m.cov_, m.resid_var_ = np.array(d["cov"], dtype=float), float(d["resid_var"])
        m.df_resid_, m.n_train_ = float(d["df_resid"]), int(d["n_train"])
        m.t_quantile_ = float(d["t_quantile"])
        return m


class ClimatologyModel:
    """Base rate of reaching each level for the time of year: the share of labelled issue days
    within ``window_days`` of the same day of year that reached the level (a standard reference
    forecast in verification)."""

    def __init__(self, levels: Sequence[str] = ("level 1",), window_days: int = 15) -> None:
        self.levels = levels
        self.window_days = window_days

    def fit(self, dates: Sequence, y: np.ndarray) -> ClimatologyModel:
        doy = pd.DatetimeIndex(pd.to_datetime(dates)).day_of_year.to_numpy()
        y = np.asarray(y, dtype=float)
        keep = ~np.isnan(y)
        rates = np.zeros((366, len(self.levels)))
        for d in range(1, 367):
            dist = np.abs(doy[keep] - d)
            near = np.minimum(dist, 366 - dist) <= self.window_days
            for k in range(len(self.levels)):
                rates[d - 1, k] = float(np.mean(y[keep][near] >= k + 1)) if near.any() else np.nan
        overall = [float(np.mean(y[keep] >= k + 1)) if keep.any() else np.nan
                   for k in range(len(self.levels))]
        self.rates_ = np.where(np.isnan(rates), overall, rates)
        return self

    def predict_proba(self, dates: Sequence) -> pd.DataFrame:
        if not hasattr(self, "rates_"):
            raise NotFittedError("this ClimatologyModel is not fitted yet")
        doy = pd.DatetimeIndex(pd.to_datetime(dates)).day_of_year.to_numpy()
        return pd.DataFrame(self.rates_[doy - 1], columns=list(self.levels))

    def to_dict(self) -> dict[str, Any]:
        return {"levels": list(self.levels), "window_days": self.window_days,
                "rates": self.rates_.tolist()}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> ClimatologyModel:
        m = cls(tuple(d["levels"]), int(d["window_days"]))
        m.rates_ = np.array(d["rates"])
        return m


class PersistenceModel:
    """Persistence as a probability: how often, in the training seasons, a day whose last known
    result stood at level j went on to reach level k within the horizon.

    Fitted (:meth:`fit` with the last levels and the outcomes), it gives for each last level j,
    level k and horizon h the share of labelled training days with last level j that reached k
    within h: the fair probabilistic reference of a forecast that only knows the last result
    (a Markov-chain climatology of the levels; common practice in forecast verification, no
    source). A last level never seen in training, or an unfitted model, falls back to the plain
    rule: probability 1 for every level up to the last one, 0 above. With no known sample the
    forecast is missing (NaN), never an all-clear.
    """

    def __init__(self, levels: Sequence[str] = ("level 1",),
                 horizons: Sequence[int] = (7,)) -> None:
        self.levels = levels
        self.horizons = horizons

    def fit(self, last_level: np.ndarray | None = None,
            outcomes: np.ndarray | None = None) -> PersistenceModel:
        """Learn the shares from ``last_level`` (0 .. levels, NaN unknown) and ``outcomes`` of
        shape (days, levels, horizons) (1, 0 or NaN); with neither, keep the plain rule."""
        L, H = len(self.levels), len(self.horizons)
        rates = np.full((L + 1, L, H), np.nan)
        if last_level is not None and outcomes is not None:
            last = np.asarray(last_level, dtype=float)
            o = np.asarray(outcomes, dtype=float)
            for j in range(L + 1):
                rows = o[last == j]
                if len(rows):
                    with np.errstate(invalid="ignore", divide="ignore"):
                        rates[j] = np.nansum(rows, axis=0) / (~np.isnan(rows)).sum(axis=0)
        rule = (np.arange(L + 1)[:, None] >= np.arange(1, L + 1)[None, :]).astype(float)
        self.rates_ = np.where(np.isnan(rates), rule[:, :, None], rates)
        return self

    def predict(self, last_level: np.ndarray) -> np.ndarray:
        """Probabilities of shape (days, levels, horizons)."""
        if not hasattr(self, "rates_"):
            self.fit()
        last = np.asarray(last_level, dtype=float)
        known = ~np.isnan(last)
        out = np.full((len(last), len(self.levels), len(self.horizons)), np.nan)
        out[known] = self.rates_[np.clip(last[known].astype(int), 0, len(self.levels))]
        return out

    def predict_proba(self, last_level: np.ndarray, horizon_days: int | None = None) -> pd.DataFrame:
        """Probabilities at one horizon (default: the first) as a table of levels."""
        j = 0 if horizon_days is None else list(self.horizons).index(int(horizon_days))
        return pd.DataFrame(self.predict(last_level)[:, :, j], columns=list(self.levels))

    def to_dict(self) -> dict[str, Any]:
        return {"levels": list(self.levels), "horizons": [int(h) for h in self.horizons],
                "rates": self.rates_.tolist()}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> PersistenceModel:
        m = cls(tuple(d["levels"]), tuple(int(h) for h in d["horizons"]))
        m.rates_ = np.array(d["rates"], dtype=float)
        return m


@dataclass
class SiteModels:
    """A site's fitted models and its model card, as trained and as saved under models/."""

    site_id: str
    risk: RiskModel
    count: CountModel
    climatology: ClimatologyModel
    card: dict[str, Any]
    """What ``cyanorisk train`` prints: training window, counts, coefficients, skill."""
    normals: dict[str, list[float | None]] = field(default_factory=dict)
    """The usual value of each driver per dekad of the year (36 values; see
    :func:`cyanorisk.training.driver_normals`)."""
    outlook: Any = None
    """The outlook at every horizon (:class:`cyanorisk.outlook.Outlook`): the family ``train``
    chose, calibrated. ``risk`` is the ordinal model at the headline horizon, kept for the
    coefficients and the explanations (read the same way whichever family gives the
    probabilities)."""
    persistence: PersistenceModel | None = None
    """Persistence as a probability, learnt from the training seasons."""

    @property
    def drivers(self) -> list[str]:
        """The drivers the outlook reads (the explanations' model may have left some out)."""
        return list(dict.fromkeys([*self.outlook.model.drivers, *self.risk.drivers]))

    def to_dict(self) -> dict[str, Any]:
        """The JSON-ready body of the model file."""
        return {"site_id": self.site_id, "card": self.card, "risk": self.risk.to_dict(),
                "count": self.count.to_dict(), "climatology": self.climatology.to_dict(),
                "normals": self.normals, "outlook": self.outlook.to_dict(),
                "persistence": self.persistence.to_dict()}

    @classmethod
    def from_dict(cls, body: dict[str, Any]) -> SiteModels:
        from cyanorisk.outlook import Outlook

        normals = {str(k): [None if v is None else float(v) for v in vs]
                   for k, vs in body["normals"].items()}
        return cls(str(body["site_id"]), RiskModel.from_dict(body["risk"]),
                   CountModel.from_dict(body["count"]),
                   ClimatologyModel.from_dict(body["climatology"]), dict(body["card"]), normals,
                   Outlook.from_dict(body["outlook"]),
                   PersistenceModel.from_dict(body["persistence"]))


# ---------------------------------------------------------------------------------------------
# JSON persistence
# ---------------------------------------------------------------------------------------------

def fingerprint(table: pd.DataFrame) -> str:
    """SHA-256 of a table's values (column names, then values as text), for the model card."""
    h = hashlib.sha256()
    h.update("\x1f".join(map(str, table.columns)).encode())
    h.update(pd.util.hash_pandas_object(table, index=True).to_numpy().tobytes())
    return h.hexdigest()


def _signed_text(body: dict[str, Any], version: str) -> bytes:
    return json.dumps(body | {"_version": version}, sort_keys=True, allow_nan=True).encode()


def bundle_text(models: SiteModels, key: bytes) -> str:
    """The JSON text of a model file: format, version, the models and their signature
    (HMAC-SHA256 under the installation's ``key``, see :mod:`cyanorisk.integrity`)."""
    from cyanorisk.integrity import signature

    body = models.to_dict()
    payload = {"format": FORMAT, "format_version": FORMAT_VERSION,
               "cyanorisk_version": __version__, "body": body,
               "signature": signature(key, _signed_text(body, __version__))}
    return json.dumps(payload, indent=1, allow_nan=True)


_NUMBERS = "numbers"
_BODY_SCHEMA: dict[str, Any] = {
    "site_id": str, "card": dict, "normals": dict,
    "risk": {"drivers": [str], "levels": [str], "horizon_days": int, "feature_names": [str],
             "coef": _NUMBERS, "coef_se": _NUMBERS, "cuts": _NUMBERS, "classes": _NUMBERS,
             "median": _NUMBERS, "mean": _NUMBERS, "scale": _NUMBERS, "indicators": dict,
             "loglike": float, "n_train": int, "n_unlabelled": int, "class_counts": dict,
             "left_out": list},
    "count": {"drivers": [str], "coverage": float, "median": _NUMBERS, "params": _NUMBERS,
              "cov": list, "resid_var": float, "df_resid": float, "t_quantile": float,
              "n_train": int},
    "climatology": {"levels": [str], "window_days": int, "rates": list},
    "outlook": {"family": str, "model": dict, "calibration": {"maps": list}},
    "persistence": {"levels": [str], "horizons": _NUMBERS, "rates": list},
}
"""The parts of a model file's body and their kinds (checked before any is used)."""


def _is_number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def _body_problem(value: Any, schema: Any, where: str) -> str | None:
    """The first place where ``value`` does not have the shape of ``schema``, or None."""
    if isinstance(schema, dict):
        if not isinstance(value, dict):
            return f"'{where}' is not a table"
        for key, inner in schema.items():
            if key not in value:
                return f"'{where}.{key}' is missing".replace("'.", "'")
            problem = _body_problem(value[key], inner, f"{where}.{key}")
            if problem:
                return problem
        return None
    if schema == _NUMBERS:
        ok = isinstance(value, list) and all(_is_number(v) or v is None for v in value)
        return None if ok else f"'{where}' is not a list of numbers"
    if isinstance(schema, list):
        ok = isinstance(value, list) and all(isinstance(v, schema[0]) for v in value)
        return None if ok else f"'{where}' is not a list of {schema[0].__name__}"
    if schema is float:
        return None if _is_number(value) or value is None else f"'{where}' is not a number"
    if schema is int:
        ok = isinstance(value, int) and not isinstance(value, bool)
        return None if ok else f"'{where}' is not a whole number"
    return None if isinstance(value, schema) else f"'{where}' is not a {schema.__name__}"


def read_bundle(path: Path, key: bytes | None) -> SiteModels:
    """Read a model file, refusing another version, an altered or foreign file (its signature
    does not verify under this installation's ``key``), a malformed one, or a file of another
    kind.

    Raises
    ------
    ModelFileError
        With one sentence naming the file and the problem.
    """
    from cyanorisk.integrity import verify

    retrain = "retrain with `cyanorisk train`"
    try:
        payload = json.loads(Path(path).read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise ModelFileError(f"{path}: not a cyanorisk model file (not text; a model file is "
                             f"JSON): {retrain}") from None
    except (OSError, json.JSONDecodeError) as exc:
        raise ModelFileError(f"{path}: not a readable model file ({exc}): {retrain}") from None
    if not isinstance(payload, dict) or payload.get("format") != FORMAT:
        raise ModelFileError(f"{path}: not a cyanorisk model file")
    if payload.get("format_version") != FORMAT_VERSION or \
            payload.get("cyanorisk_version") != __version__:
        raise ModelFileError(f"{path}: written by cyanorisk {payload.get('cyanorisk_version')} "
                             f"(format {payload.get('format_version')}); this is cyanorisk "
                             f"{__version__} (format {FORMAT_VERSION}): {retrain}")
    body = payload.get("body")
    if key is None:
        raise ModelFileError(f"{path}: this installation has no model-signing key (it is kept "
                             f"in the data folder), so the file cannot be verified: {retrain}")
    if not isinstance(body, dict) or not verify(key, _signed_text(body, __version__),
                                                payload.get("signature")):
        raise ModelFileError(f"{path}: the signature does not match: the file was altered after "
                             f"it was saved, or made by another installation: {retrain}")
    problem = _body_problem(body, _BODY_SCHEMA, "body")
    if problem is not None:
        raise ModelFileError(f"{path}: the model file is malformed ({problem}): {retrain}")
    try:
        return SiteModels.from_dict(body)
    except (KeyError, TypeError, ValueError) as exc:
        raise ModelFileError(f"{path}: the model file lacks a part or holds a wrong value "
                             f"({type(exc).__name__}: {exc}): retrain with `cyanorisk train`") from None
