"""Outlooks at several horizons: the probability of reaching each level within 1, 2 ... H days.

Two families of model give them, and a calibration map makes their probabilities mean what they
say:

- :class:`OrdinalOutlook`: the transparent proportional-odds model of :mod:`cyanorisk.model`,
  one per fitted horizon (:data:`STACKED_HORIZONS`: 1, 3, 7 and 14 days), each with the sign
  constraints of the driver glossary (:func:`fit_signed`), the log-odds interpolated between
  them. Coherent across levels by construction.
- :class:`BoostedOutlook`: scikit-learn's histogram gradient boosting, one binary classifier per
  level fitted on the issue days of every horizon stacked, with the horizon as an input.
  Monotonic constraints hold it to the directions of the glossary (a driver that raises the risk
  never lowers a probability) and make the probability rise with the horizon, so that its
  explanations read the same way as the ordinal model's. Its trees are kept as plain numbers
  (:meth:`BoostedOutlook.to_dict`) and evaluated by :func:`tree_raw`, never pickled.
- :class:`Calibration`: an isotonic or a sigmoid map per level, fitted on out-of-season
  forecasts, pooled over the horizons (``train`` compares none, sigmoid and, with enough
  forecasts, isotonic by season-blocked Brier score). A monotone map keeps the order of the
  horizons.

:func:`coherent` then makes the whole table coherent: a higher level is never more likely than a
lower one, and a longer horizon never less likely than a shorter one (reaching a level within
7 days implies reaching it within 14). It takes the running minimum over the levels, then the
running maximum over the horizons; the second keeps the first (a maximum of smaller numbers is
smaller).

References
----------
.. [1] Zadrozny, B. & Elkan, C. (2002). Transforming classifier scores into accurate multiclass
   probability estimates. KDD '02, 694-699 (isotonic calibration).
.. [2] Platt, J. (1999). Probabilistic outputs for support vector machines. In Advances in Large
   Margin Classifiers, 61-74 (sigmoid calibration).
.. [3] Niculescu-Mizil, A. & Caruana, R. (2005). Predicting good probabilities with supervised
   learning. ICML '05 (isotonic needs about a thousand forecasts; sigmoid does with fewer).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from cyanorisk.drivers import Effect, lookup
from cyanorisk.model import RiskModel, expit

FAMILIES = ("ordinal", "boosted")
"""The model families ``train`` chooses between."""
CALIBRATIONS = ("auto", "isotonic", "sigmoid", "none")
MIN_ISOTONIC_FORECASTS = 1000
"""Out-of-season forecasts a level needs before an isotonic map is tried; with fewer it
overfits (Niculescu-Mizil & Caruana 2005)."""
MIN_ISOTONIC_EVENTS = 50
"""... and exceedances among them."""
HORIZON_FEATURE = "horizon_days"
STACKED_HORIZONS = (1, 3, 7, 14)
"""Horizons [d] the families are fitted at (about doubling each time): the boosted
family learns the horizon's effect from their issue days stacked; the ordinal family fits one
model at each and interpolates the log-odds between them."""
BOOSTING = {"max_iter": 60, "learning_rate": 0.12, "max_leaf_nodes": 8,
            "min_samples_leaf": 40, "l2_regularization": 1.0, "early_stopping": False,
            "random_state": 0}
"""Settings of the boosted family (moderate trees, strong leaves: common practice, no source)."""


def coherent(p: np.ndarray) -> np.ndarray:
    """Probabilities of shape (days, levels, horizons) made coherent: non-increasing over the
    levels, then non-decreasing over the horizons (module notes). NaN stays NaN."""
    p = np.asarray(p, dtype=float)
    nan = np.isnan(p)
    filled = np.where(nan, 1.0, p)
    filled = np.minimum.accumulate(filled, axis=1)
    filled = np.where(nan, -1.0, filled)
    filled = np.maximum.accumulate(filled, axis=2)
    return np.where(nan, np.nan, np.clip(filled, 0.0, 1.0))


def direction(driver: str) -> int:
    """+1 when the glossary says a driver raises the risk, -1 when it lowers it, else 0."""
    info = lookup(driver)
    return int(info.effect) if info is not None else 0


# ---------------------------------------------------------------------------------------------
# the ordinal family
# ---------------------------------------------------------------------------------------------

def fit_signed(drivers: list[str], levels: list[str], horizon_days: int, X: pd.DataFrame,
               y: np.ndarray) -> RiskModel:
    """The risk model fitted with the directions of the driver glossary.

    A driver whose fitted effect runs against the direction the literature gives it (warmth,
    light and calm raise the risk, wind mixing and flushing lower it; :mod:`cyanorisk.drivers`)
    is left out, not reversed, and the model is fitted again without it, until no driver is
    against its direction. The most confidently reversed driver goes first, so that of two
    overlapping drivers (water temperature and degree-days rise together) the one that carries
    the signal stays. What was left out, and why, is kept in ``left_out_``.
    """
    drivers = list(drivers)
    left_out: list[dict[str, Any]] = []
    while True:
        risk = RiskModel(drivers, levels, horizon_days).fit(X, y)
        coef = dict(zip(risk.feature_names_in_, risk.coef_, strict=True))
        se = dict(zip(risk.feature_names_in_, risk.coef_se_, strict=True))
        wrong = [d for d in drivers if direction(d) != 0 and np.sign(coef[d]) == -direction(d)]
        if not wrong or len(drivers) == 1:
            risk.left_out_ = left_out
            return risk
        worst = max(wrong, key=lambda d: abs(coef[d]) / (se[d] if se[d] > 0 else 1.0))
        effect = "raise" if lookup(worst).effect == Effect.RAISES else "lower"
        left_out.append({"driver": worst, "per_sd": float(coef[worst]),
                         "reason": f"its fitted effect ran against the direction the literature "
                                   f"gives it (it should {effect} the risk); left out, not "
                                   "reversed"})
        drivers.remove(worst)


class OrdinalOutlook:
    """One signed proportional-odds model per horizon.

    A horizon whose issue days cannot be fitted (too few labelled days, one outcome only, or a
    fit that does not converge) borrows the model of the next longer horizon that could: a
    longer horizon's probability is never lower, so the borrowed one errs towards caution
    (``borrowed_``).
    """

    family = "ordinal"

    def __init__(self, drivers: Sequence[str], levels: Sequence[str], horizons: Sequence[int],
                 headline_days: int | None = None):
        self.drivers = list(drivers)
        self.levels = list(levels)
        self.horizons = [int(h) for h in horizons]
        self.headline_days = headline_days

    def fitting_horizons(self) -> list[int]:
        """The horizons fitted (:data:`STACKED_HORIZONS` the outlook has, its longest and the
        headline horizon); the others are interpolated (:meth:`predict_raw`)."""
        chosen = {h for h in self.horizons if h in STACKED_HORIZONS} | {self.horizons[-1]}
        if self.headline_days in self.horizons:
            chosen.add(self.headline_days)
        return sorted(chosen)

    def fit(self, X: pd.DataFrame, outcomes: dict[int, np.ndarray]) -> OrdinalOutlook:
        """Learn from drivers ``X`` and, per horizon, the ordinal outcomes (0 .. levels)."""
        fitted: dict[int, RiskModel] = {}
        problems: dict[int, str] = {}
        drivers = self.drivers
        # the longest horizon has the most labelled days: its choice of drivers is the starting
        # point of the others (each still leaves out a driver against its direction)
        for h in sorted(self.fitting_horizons(), reverse=True):
            try:
                fitted[h] = fit_signed(drivers, self.levels, h, X, outcomes[h])
            except (ValueError, RuntimeError) as exc:  # one outcome, or no convergence
                problems[h] = str(exc)
                continue
            if drivers is self.drivers:
                drivers = list(fitted[h].drivers)
                left = list(fitted[h].left_out_)
            else:
                fitted[h].left_out_ = left + fitted[h].left_out_
        if not fitted:
            raise ValueError(f"no horizon could be fitted: {problems[self.horizons[-1]]}")
        self.models_: dict[int, RiskModel] = {}
        self.borrowed_: dict[int, int] = {}
        for h in sorted(self.fitting_horizons(), reverse=True):
            if h in fitted:
                self.models_[h] = fitted[h]
            else:
                longer = min((g for g in fitted if g > h), default=max(fitted))
                self.models_[h] = fitted[longer]
                self.borrowed_[h] = longer
        return self

    def predict_raw(self, X: pd.DataFrame) -> np.ndarray:
        """Probabilities (days, levels, horizons) before calibration: those of the fitted
        horizons, and between them the log-odds interpolated linearly in the horizon."""
        fitted = sorted(self.models_)
        logit = np.empty((len(X), len(self.levels), len(fitted)))
        for j, h in enumerate(fitted):
            p = self.models_[h].proba_array(X)
            q = np.clip(p, 1e-12, 1 - 1e-12)
            logit[:, :, j] = np.log(q / (1 - q))
        out = np.empty((len(X), len(self.levels), len(self.horizons)))
        for j, h in enumerate(self.horizons):
            k = int(np.searchsorted(fitted, h))
            if k < len(fitted) and fitted[k] == h:
                value = logit[:, :, k]
            elif k == 0 or k == len(fitted):
                value = logit[:, :, min(k, len(fitted) - 1)]
            else:
                lo, hi = fitted[k - 1], fitted[k]
                w = (h - lo) / (hi - lo)
                value = (1 - w) * logit[:, :, k - 1] + w * logit[:, :, k]
            out[:, :, j] = expit(value)
        return out

    def to_dict(self) -> dict[str, Any]:
        own = {h: m for h, m in self.models_.items() if h not in self.borrowed_}
        return {"drivers": self.drivers, "levels": self.levels, "horizons": self.horizons,
                "headline_days": self.headline_days,
                "models": {str(h): m.to_dict() for h, m in own.items()},
                "borrowed": {str(h): g for h, g in self.borrowed_.items()}}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> OrdinalOutlook:
        m = cls(d["drivers"], d["levels"], d["horizons"], d["headline_days"])
        own = {int(h): RiskModel.from_dict(v) for h, v in d["models"].items()}
        m.borrowed_ = {int(h): int(g) for h, g in d["borrowed"].items()}
        m.models_ = {h: own[m.borrowed_.get(h, h)] for h in [*own, *m.borrowed_]}
        return m


# ---------------------------------------------------------------------------------------------
# the boosted family
# ---------------------------------------------------------------------------------------------

TREE_FIELDS = ("feature", "threshold", "missing_left", "left", "right", "value", "leaf")


def tree_arrays(nodes: np.ndarray) -> dict[str, list]:
    """The parts of one fitted scikit-learn tree that predicting needs, as plain lists."""
    return {"feature": nodes["feature_idx"].astype(int).tolist(),
            "threshold": nodes["num_threshold"].astype(float).tolist(),
            "missing_left": nodes["missing_go_to_left"].astype(int).tolist(),
            "left": nodes["left"].astype(int).tolist(), "right": nodes["right"].astype(int).tolist(),
            "value": nodes["value"].astype(float).tolist(),
            "leaf": nodes["is_leaf"].astype(int).tolist()}


def tree_raw(tree: dict[str, np.ndarray], X: np.ndarray) -> np.ndarray:
    """The leaf value each row of ``X`` reaches in one tree: at each split a value at or below
    the threshold goes left, a missing value the way the tree learned (scikit-learn's rule)."""
    node = np.zeros(len(X), dtype=np.int64)
    rows = np.arange(len(X))
    leaf = tree["leaf"].astype(bool)
    while True:
        going = ~leaf[node]
        if not going.any():
            return tree["value"][node]
        r, n = rows[going], node[going]
        x = X[r, tree["feature"][n]]
        left = np.where(np.isnan(x), tree["missing_left"][n] == 1, x <= tree["threshold"][n])
        node[r] = np.where(left, tree["left"][n], tree["right"][n])


def forest_raw(trees: list[dict[str, np.ndarray]], X: np.ndarray) -> np.ndarray:
    """The sum over ``trees`` of the leaf values each row of ``X`` reaches (:func:`tree_raw`
    for all trees at once: their nodes laid end to end, one step down every tree per pass)."""
    if not trees:
        return np.zeros(len(X))
    sizes = np.array([len(t["leaf"]) for t in trees])
    offset = np.concatenate(([0], np.cumsum(sizes)[:-1]))
    cat = {f: np.concatenate([t[f] for t in trees]) for f in TREE_FIELDS}
    left, right = cat["left"] + np.repeat(offset, sizes), cat["right"] + np.repeat(offset, sizes)
    leaf = cat["leaf"].astype(bool)
    node = np.broadcast_to(offset, (len(X), len(trees))).copy()
    rows = np.broadcast_to(np.arange(len(X))[:, None], node.shape)
    while True:
        going = ~leaf[node]
        if not going.any():
            return cat["value"][node].sum(axis=1)
        n = node[going]
        x = X[rows[going], cat["feature"][n]]
        go_left = np.where(np.isnan(x), cat["missing_left"][n] == 1, x <= cat["threshold"][n])
        node[going] = np.where(go_left, left[n], right[n])


class BoostedOutlook:
    """Histogram gradient boosting with monotonic constraints, one classifier per level on the
    issue days of every horizon stacked, the horizon an input constrained to raise the risk.

    Missing drivers need no imputation: the trees learn where a missing value goes. A level
    never reached in training gets probability 0 (no evidence it can be reached), as in the
    ordinal family.
    """

    family = "boosted"

    def __init__(self, drivers: Sequence[str], levels: Sequence[str], horizons: Sequence[int]):
        self.drivers = list(drivers)
        self.levels = list(levels)
        self.horizons = [int(h) for h in horizons]

    def fitting_horizons(self) -> list[int]:
        """The horizons whose issue days are stacked for fitting (:data:`STACKED_HORIZONS` that
        the outlook has, and its longest): the trees learn the horizon's effect from these and
        forecast every horizon."""
        chosen = [h for h in self.horizons if h in STACKED_HORIZONS]
        return sorted(set(chosen) | {self.horizons[-1]})

    def _stacked(self, X: pd.DataFrame, horizons: Sequence[int]) -> np.ndarray:
        base = X[self.drivers].to_numpy(dtype=float)
        return np.vstack([np.column_stack((base, np.full(len(base), h, float))) for h in horizons])

    def fit(self, X: pd.DataFrame, outcomes: dict[int, np.ndarray]) -> BoostedOutlook:
        from sklearn.ensemble import HistGradientBoostingClassifier

        stacked = self.fitting_horizons()
        Z = self._stacked(X, stacked)
        y = np.concatenate([np.asarray(outcomes[h], dtype=float) for h in stacked])
        known = ~np.isnan(y)
        constraints = [direction(d) for d in self.drivers] + [1]
        self.trees_: list[list[dict[str, np.ndarray]]] = []
        self.baseline_: list[float | None] = []
        self.n_train_ = int(known.sum())
        for k in range(1, len(self.levels) + 1):
            target = (y[known] >= k).astype(int)
            if target.sum() == 0:
                self.trees_.append([])
                self.baseline_.append(None)
                continue
            if target.sum() == len(target):
                raise ValueError(f"every labelled issue day reached {self.levels[k - 1]}: a "
                                 "model needs days with different outcomes to learn from")
            clf = HistGradientBoostingClassifier(monotonic_cst=constraints, **BOOSTING)
            clf.fit(Z[known], target)
            self.trees_.append([_as_arrays(tree_arrays(p[0].nodes)) for p in clf._predictors])
            self.baseline_.append(float(np.ravel(clf._baseline_prediction)[0]))
        return self

    def _horizon_classes(self) -> tuple[list[int], np.ndarray]:
        """Horizons that every tree treats alike: those on the same side of every split on the
        horizon (a tree only asks ``horizon <= threshold``). Returns one horizon per class and,
        for each horizon of the outlook, the index of its class: predicting once per class gives
        exactly the same numbers as predicting every horizon."""
        column = len(self.drivers)
        cuts = np.unique(np.concatenate([t["threshold"][(t["feature"] == column) & (t["leaf"] == 0)]
                                         for trees in self.trees_ for t in trees] or [np.empty(0)]))
        side = np.searchsorted(cuts, np.asarray(self.horizons, float), side="left")
        keys, first, which = np.unique(side, return_index=True, return_inverse=True)
        return [self.horizons[i] for i in first], which

    def predict_raw(self, X: pd.DataFrame) -> np.ndarray:
        n = len(X)
        classes, which = self._horizon_classes()
        Z = self._stacked(X, classes)
        out = np.zeros((n, len(self.levels), len(self.horizons)))
        for k, (trees, base) in enumerate(zip(self.trees_, self.baseline_, strict=True)):
            if base is None:
                continue
            raw = expit(base + forest_raw(trees, Z)).reshape(len(classes), n).T
            out[:, k, :] = raw[:, which]
        return out

    def to_dict(self) -> dict[str, Any]:
        return {"drivers": self.drivers, "levels": self.levels, "horizons": self.horizons,
                "baseline": self.baseline_, "n_train": self.n_train_,
                "trees": [[{f: t[f].tolist() for f in TREE_FIELDS} for t in trees]
                          for trees in self.trees_]}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> BoostedOutlook:
        m = cls(d["drivers"], d["levels"], d["horizons"])
        m.baseline_ = [None if b is None else float(b) for b in d["baseline"]]
        m.n_train_ = int(d["n_train"])
        m.trees_ = [[_as_arrays(t) for t in trees] for trees in d["trees"]]
        return m


def _as_arrays(tree: dict[str, list]) -> dict[str, np.ndarray]:
    kinds = {"threshold": float, "value": float}
    return {f: np.asarray(tree[f], dtype=kinds.get(f, np.int64)) for f in TREE_FIELDS}


# ---------------------------------------------------------------------------------------------
# calibration
# ---------------------------------------------------------------------------------------------

@dataclass
class Calibration:
    """A monotone map per level from a family's probability to a calibrated one.

    ``maps[k]`` is ``{"method": "isotonic", "x": [...], "y": [...]}`` (the step function of
    scikit-learn's ``IsotonicRegression``, evaluated by linear interpolation and clipped at the
    ends, as its ``predict`` does), ``{"method": "sigmoid", "a": .., "b": ..}`` (p' = 1 / (1 +
    exp(-(a logit(p) + b))), Platt 1999, a >= 0), or ``{"method": "none"}``.
    """

    maps: list[dict[str, Any]] = field(default_factory=list)

    @classmethod
    def fit(cls, p: np.ndarray, o: np.ndarray, method: str = "auto") -> Calibration:
        """Fit one map per level on out-of-season probabilities ``p`` and outcomes ``o``, both
        of shape (days, levels, horizons) (NaN where unknown), pooled over the horizons."""
        maps = []
        for k in range(p.shape[1]):
            pk, ok = p[:, k, :].ravel(), o[:, k, :].ravel()
            keep = ~np.isnan(pk) & ~np.isnan(ok)
            maps.append(_fit_map(pk[keep], ok[keep], method))
        return cls(maps)

    def apply(self, p: np.ndarray) -> np.ndarray:
        """Calibrated probabilities of the same shape (days, levels, horizons)."""
        out = np.array(p, dtype=float)
        for k, m in enumerate(self.maps):
            out[:, k, :] = apply_map(m, out[:, k, :])
        return out

    def methods(self) -> list[str]:
        return [m["method"] for m in self.maps]

    def to_dict(self) -> dict[str, Any]:
        return {"maps": self.maps}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Calibration:
        return cls([dict(m) for m in d["maps"]])


def _logit(p: np.ndarray) -> np.ndarray:
    q = np.clip(p, 1e-6, 1 - 1e-6)
    return np.log(q / (1 - q))


def _fit_map(p: np.ndarray, o: np.ndarray, method: str) -> dict[str, Any]:
    if method == "none" or len(p) == 0 or o.min() == o.max():
        return {"method": "none"}
    if method == "isotonic":
        from sklearn.isotonic import IsotonicRegression

        iso = IsotonicRegression(y_min=0.0, y_max=1.0, out_of_bounds="clip").fit(p, o)
        return {"method": "isotonic", "x": iso.X_thresholds_.tolist(),
                "y": iso.y_thresholds_.tolist()}
    a, b = _platt(_logit(p), o)
    return {"method": "sigmoid", "a": max(a, 0.0), "b": b}  # a falling map would reverse ranks


def _platt(x: np.ndarray, o: np.ndarray, iterations: int = 50) -> tuple[float, float]:
    """Maximum-likelihood a, b of P(o = 1) = 1 / (1 + exp(-(a x + b))) by Newton's method
    (Platt 1999, with plain 0/1 targets), started from the identity map (a = 1, b = 0)."""
    beta = np.array([1.0, 0.0])
    Z = np.column_stack((x, np.ones(len(x))))
    for _ in range(iterations):
        q = expit(Z @ beta)
        w = q * (1 - q) + 1e-9
        step = np.linalg.solve((Z * w[:, None]).T @ Z + 1e-9 * np.eye(2), Z.T @ (q - o))
        beta -= step
        if np.max(np.abs(step)) < 1e-8:
            break
    return float(beta[0]), float(beta[1])


def apply_map(m: dict[str, Any], p: np.ndarray) -> np.ndarray:
    """One calibration map applied to probabilities of any shape (NaN stays NaN)."""
    p = np.asarray(p, dtype=float)
    if m["method"] == "isotonic":
        return np.where(np.isnan(p), np.nan, np.interp(p, m["x"], m["y"]))
    if m["method"] == "sigmoid":
        return np.where(np.isnan(p), np.nan, expit(m["a"] * _logit(p) + m["b"]))
    return p


# ---------------------------------------------------------------------------------------------
# the outlook a site keeps
# ---------------------------------------------------------------------------------------------

@dataclass
class Outlook:
    """The chosen family, its calibration, and the horizons: what a site forecasts with."""

    model: OrdinalOutlook | BoostedOutlook
    calibration: Calibration

    @property
    def family(self) -> str:
        return self.model.family

    @property
    def horizons(self) -> list[int]:
        return list(self.model.horizons)

    @property
    def levels(self) -> list[str]:
        return list(self.model.levels)

    def predict(self, X: pd.DataFrame) -> np.ndarray:
        """Calibrated, coherent probabilities of shape (days, levels, horizons)."""
        return coherent(self.calibration.apply(self.model.predict_raw(X)))

    def at(self, X: pd.DataFrame, horizon_days: int) -> pd.DataFrame:
        """Probabilities at one horizon (columns: level names)."""
        j = self.horizons.index(int(horizon_days))
        return pd.DataFrame(self.predict(X)[:, :, j], columns=self.levels, index=X.index)

    def to_dict(self) -> dict[str, Any]:
        return {"family": self.family, "model": self.model.to_dict(),
                "calibration": self.calibration.to_dict()}

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> Outlook:
        kind = {"ordinal": OrdinalOutlook, "boosted": BoostedOutlook}[d["family"]]
        return cls(kind.from_dict(d["model"]), Calibration.from_dict(d["calibration"]))


def family_model(family: str, drivers: Sequence[str], levels: Sequence[str],
                 horizons: Sequence[int], headline_days: int | None = None
                 ) -> OrdinalOutlook | BoostedOutlook:
    """An unfitted model of a family (the ordinal family always fits ``headline_days``)."""
    if family == "ordinal":
        return OrdinalOutlook(drivers, levels, horizons, headline_days)
    if family == "boosted":
        return BoostedOutlook(drivers, levels, horizons)
    raise ValueError(f"unknown model family {family!r}: expected one of {', '.join(FAMILIES)}")
