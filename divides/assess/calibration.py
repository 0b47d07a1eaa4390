"""A small calibrated decision model: P(moves toward a), P(toward b), P(stable) from evidence features.

Multinomial logistic regression (softmax over the three outcomes), fitted by
penalised maximum likelihood with :func:`scipy.optimize.minimize`; the
penalty is an L2 (Gaussian prior) on the coefficients of standardised
features, never on the intercepts. The model is a handful of numbers: they
are written to and read from a small JSON document (:meth:`DecisionModel.to_json`)
so they can be printed in the docs and shipped with the package.

The decision rule returns an outcome only when its probability reaches a
threshold (default 0.8), otherwise ``"undetermined"``. Calibration is judged
by the expected calibration error and a reliability diagram (Naeini, Cooper
& Hauskrecht 2015, AAAI; Guo et al. 2017, ICML; Niculescu-Mizil & Caruana
2005, ICML), always on data held out from the fit.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import minimize
from scipy.special import logsumexp, softmax

from divides.errors import ParameterError

__all__ = [
    "CLASSES",
    "DEFAULT_THRESHOLD",
    "SCHEMA",
    "Decision",
    "DecisionModel",
    "ReliabilityBin",
    "Scorecard",
    "TARGETS",
    "decide",
    "expected_calibration_error",
    "fit",
    "reliability",
    "score",
    "top_label",
]

#: The outcomes, in the order of the probability columns.
CLASSES: tuple[str, ...] = ("a", "b", "stable")
#: Probability an outcome needs before it is returned.
DEFAULT_THRESHOLD = 0.8
#: Name and version of the JSON document of a fitted model.
SCHEMA = "divides.decision-model/1"


def _matrix(x: Any, n_features: int | None = None, name: str = "features") -> np.ndarray:
    try:
        arr = np.asarray(x, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ParameterError(f"`{name}` must be a numeric matrix (rows = cases, columns = features)") from exc
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[0] == 0:
        raise ParameterError(f"`{name}` must be a 2-D matrix with at least one row; got shape {arr.shape}")
    if n_features is not None and arr.shape[1] != n_features:
        raise ParameterError(f"`{name}` has {arr.shape[1]} column(s); the model takes {n_features}")
    if not np.all(np.isfinite(arr)):
        raise ParameterError(f"`{name}` holds NaN or infinite values; give a finite value for every feature")
    return arr


def _labels(y: Any, n: int) -> np.ndarray:
    """Outcomes as indices into :data:`CLASSES` (names or integers accepted)."""
    arr = np.asarray(y)
    if arr.shape != (n,):
        raise ParameterError(f"outcomes must be one per case ({n}); got shape {arr.shape}")
    if arr.dtype.kind in "iu":
        idx = arr.astype(np.int64)
    else:
        lookup = {c: i for i, c in enumerate(CLASSES)}
        bad = sorted({str(v) for v in arr if str(v) not in lookup})
        if bad:
            raise ParameterError(f"unknown outcome(s) {bad}; outcomes are {', '.join(CLASSES)}")
        idx = np.array([lookup[str(v)] for v in arr], dtype=np.int64)
    if idx.size and (idx.min() < 0 or idx.max() >= len(CLASSES)):
        raise ParameterError(f"outcome indices must lie in 0..{len(CLASSES) - 1}")
    return idx


@dataclass(frozen=True)
class Decision:
    """One decision.

    Attributes
    ----------
    outcome : str
        ``"a"``, ``"b"``, ``"stable"`` or ``"undetermined"``.
    probability : float
        Probability of the outcome returned; for ``"undetermined"`` the
        largest class probability (below the threshold).
    probabilities : dict
        P(a), P(b), P(stable).
    """

    outcome: str
    probability: float
    probabilities: dict


@dataclass(frozen=True, eq=False)
class DecisionModel:
    """A fitted multinomial logistic model.

    P(class k | x) = softmax_k(intercept + coef @ z), z = (x - mean) / scale.

    Attributes
    ----------
    features : tuple of str
        Names of the feature columns, in order.
    coef : ndarray, shape (3, n_features)
        Coefficients per class (rows in :data:`CLASSES` order), on standardised features.
    intercept : ndarray, shape (3,)
    mean, scale : ndarray, shape (n_features,)
        Standardisation learnt from the training data.
    l2 : float
        Penalty the model was fitted with.
    n_train : int
        Cases it was fitted on.
    """

    features: tuple[str, ...]
    coef: np.ndarray
    intercept: np.ndarray
    mean: np.ndarray
    scale: np.ndarray
    l2: float
    n_train: int

    def _design(self, x: Any) -> np.ndarray:
        if isinstance(x, Mapping):
            missing = [f for f in self.features if f not in x]
            if missing:
                raise ParameterError(f"missing feature(s) {missing}; the model takes {list(self.features)}")
            x = np.column_stack([np.atleast_1d(np.asarray(x[f], dtype=np.float64)) for f in self.features])
        return (_matrix(x, len(self.features)) - self.mean) / self.scale

    def probabilities(self, x: Any) -> np.ndarray:
        """Class probabilities, shape (cases, 3), columns in :data:`CLASSES` order.

        Parameters
        ----------
        x : array_like (cases, features) or mapping of feature name to values
        """
        return softmax(self._design(x) @ self.coef.T + self.intercept, axis=1)

    def decide(self, x: Any, *, threshold: float = DEFAULT_THRESHOLD) -> list[Decision]:
        """Decisions for each case (see :func:`decide`)."""
        return decide(self.probabilities(x), threshold=threshold)

    def to_dict(self) -> dict:
        """The model as a JSON-ready dict (schema :data:`SCHEMA`)."""
        return {
            "schema": SCHEMA,
            "classes": list(CLASSES),
            "features": list(self.features),
            "coefficients": {c: dict(zip(self.features, map(float, row))) for c, row in zip(CLASSES, self.coef)},
            "intercepts": dict(zip(CLASSES, map(float, self.intercept))),
            "standardisation": {"mean": dict(zip(self.features, map(float, self.mean))),
                                "scale": dict(zip(self.features, map(float, self.scale)))},
            "l2": float(self.l2),
            "n_train": int(self.n_train),
        }

    def to_json(self) -> str:
        """The model as a small JSON document; :meth:`from_json` reads it back exactly."""
        return json.dumps(self.to_dict(), indent=1, allow_nan=False)

    @classmethod
    def from_dict(cls, doc: Mapping[str, Any]) -> DecisionModel:
        """Read a model from :meth:`to_dict`'s form."""
        if doc.get("schema") != SCHEMA or list(doc.get("classes", [])) != list(CLASSES):
            raise ParameterError(f"not a decision model of schema {SCHEMA!r} with classes {list(CLASSES)}")
        try:
            features = tuple(doc["features"])
            coef = np.array([[doc["coefficients"][c][f] for f in features] for c in CLASSES], dtype=np.float64)
            intercept = np.array([doc["intercepts"][c] for c in CLASSES], dtype=np.float64)
            mean = np.array([doc["standardisation"]["mean"][f] for f in features], dtype=np.float64)
            scale = np.array([doc["standardisation"]["scale"][f] for f in features], dtype=np.float64)
            return cls(features, coef, intercept, mean, scale, float(doc["l2"]), int(doc["n_train"]))
        except (KeyError, TypeError, ValueError) as exc:
            raise ParameterError(f"decision model document is incomplete or malformed: {exc}") from exc

    @classmethod
    def from_json(cls, text: str) -> DecisionModel:
        """Read a model written by :meth:`to_json`."""
        try:
            doc = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ParameterError(f"decision model is not valid JSON: {exc}") from exc
        return cls.from_dict(doc)


def fit(
    x: Any,
    y: Any,
    *,
    features: Sequence[str] | None = None,
    l2: float = 1.0,
    weights: Any = None,
) -> DecisionModel:
    """Fit the three-outcome logistic model by penalised maximum likelihood.

    Minimises  -Σ w_i log P(y_i | x_i) + (l2 / 2) ||coef||²  over the
    coefficients and intercepts (L-BFGS with the exact gradient). Features
    are standardised first (mean 0, standard deviation 1 on the training
    data), so one penalty suits every feature.

    Parameters
    ----------
    x : array_like, shape (cases, features)
    y : sequence of str or int
        Outcomes, names from :data:`CLASSES` or their indices.
    features : sequence of str, optional
        Column names (default ``x0, x1, ...``).
    l2 : float
        Penalty (>= 0): the precision of a Gaussian prior on each standardised coefficient.
    weights : array_like, optional
        Weight of each case (default 1), e.g. to balance families.

    Returns
    -------
    DecisionModel

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> x = rng.normal(size=(400, 1))
    >>> y = np.where(x[:, 0] > 0.5, "b", np.where(x[:, 0] < -0.5, "a", "stable"))
    >>> model = fit(x, y, l2=0.1)
    >>> [d.outcome for d in model.decide([[-3.0], [0.0], [3.0]])]
    ['a', 'stable', 'b']
    """
    xm = _matrix(x)
    n_cases, n_feat = xm.shape
    idx = _labels(y, n_cases)
    if features is None:
        features = tuple(f"x{j}" for j in range(n_feat))
    features = tuple(str(f) for f in features)
    if len(features) != n_feat or len(set(features)) != n_feat:
        raise ParameterError(f"`features` must name the {n_feat} column(s) once each; got {list(features)}")
    if not (math.isfinite(float(l2)) and float(l2) >= 0):
        raise ParameterError(f"`l2` must be a penalty >= 0; got {l2!r}")
    w = np.ones(n_cases) if weights is None else np.asarray(weights, dtype=np.float64)
    if w.shape != (n_cases,) or not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ParameterError(f"`weights` must be one finite weight >= 0 per case ({n_cases})")
    mean = xm.mean(axis=0)
    scale = xm.std(axis=0)
    scale = np.where(scale > 0, scale, 1.0)  # a constant column keeps scale 1 (its coefficient is pulled to 0)
    z = (xm - mean) / scale
    k = len(CLASSES)
    onehot = np.zeros((n_cases, k))
    onehot[np.arange(n_cases), idx] = 1.0
    penalty = float(l2)

    def objective(theta: np.ndarray) -> tuple[float, np.ndarray]:
        coef = theta[: k * n_feat].reshape(k, n_feat)
        icpt = theta[k * n_feat:]
        logits = z @ coef.T + icpt
        log_p = logits - logsumexp(logits, axis=1, keepdims=True)
        loss = -float(np.sum(w * np.sum(onehot * log_p, axis=1))) + 0.5 * penalty * float(np.sum(coef * coef))
        resid = (np.exp(log_p) - onehot) * w[:, None]
        g_coef = resid.T @ z + penalty * coef
        g_icpt = resid.sum(axis=0)
        return loss, np.concatenate([g_coef.ravel(), g_icpt])

    start = np.zeros(k * n_feat + k)
    result = minimize(objective, start, jac=True, method="L-BFGS-B", options={"maxiter": 2000, "gtol": 1e-8})
    if not np.all(np.isfinite(result.x)):
        raise ParameterError("the decision model did not converge (separable data?); raise `l2`")
    coef = result.x[: k * n_feat].reshape(k, n_feat)
    icpt = result.x[k * n_feat:]
    return DecisionModel(features, coef, icpt, mean, scale, penalty, n_cases)


def decide(probabilities: Any, *, threshold: float = DEFAULT_THRESHOLD) -> list[Decision]:
    """Outcome per case: the most probable class if its probability reaches ``threshold``, else undetermined.

    Parameters
    ----------
    probabilities : array_like, shape (cases, 3)
        P(a), P(b), P(stable) per case (rows summing to 1).
    threshold : float
        In (1/3, 1]: at most one class can reach a threshold above 1/2, and
        none can miss being most probable.

    Returns
    -------
    list of Decision

    Examples
    --------
    >>> [d.outcome for d in decide([[0.85, 0.05, 0.10], [0.5, 0.1, 0.4], [0.0, 0.1, 0.9]])]
    ['a', 'undetermined', 'stable']
    """
    p = _matrix(probabilities, len(CLASSES), "probabilities")
    if np.any(p < 0) or not np.allclose(p.sum(axis=1), 1.0, atol=1e-6):
        raise ParameterError("`probabilities` must be non-negative rows summing to 1 (P(a), P(b), P(stable))")
    t = float(threshold)
    if not (1.0 / 3.0 < t <= 1.0):
        raise ParameterError(f"the decision threshold must lie in (1/3, 1]; got {threshold!r}")
    best = np.argmax(p, axis=1)
    out = []
    for row, k in zip(p, best):
        probs = dict(zip(CLASSES, map(float, row)))
        outcome = CLASSES[k] if row[k] >= t else "undetermined"
        out.append(Decision(outcome, float(row[k]), probs))
    return out


def top_label(probabilities: Any, outcomes: Any) -> tuple[np.ndarray, np.ndarray]:
    """Confidence (largest probability) and whether that class was the outcome, per case."""
    p = _matrix(probabilities, len(CLASSES), "probabilities")
    idx = _labels(outcomes, p.shape[0])
    best = np.argmax(p, axis=1)
    return p[np.arange(p.shape[0]), best], best == idx


@dataclass(frozen=True)
class ReliabilityBin:
    """One bin of a reliability diagram: cases whose confidence falls in [lower, upper)."""

    lower: float
    upper: float
    count: int
    mean_confidence: float
    accuracy: float


def _binned(confidence: Any, correct: Any, bins: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    conf = np.asarray(confidence, dtype=np.float64).ravel()
    ok = np.asarray(correct, dtype=bool).ravel()
    if conf.size == 0 or conf.shape != ok.shape:
        raise ParameterError("confidences and correctness must be two non-empty sequences of the same length")
    if not np.all((conf >= 0) & (conf <= 1)):
        raise ParameterError("confidences must lie in [0, 1]")
    if int(bins) < 1:
        raise ParameterError(f"`bins` must be >= 1; got {bins!r}")
    which = np.minimum((conf * int(bins)).astype(np.int64), int(bins) - 1)  # equal widths; 1.0 in the last bin
    return conf, ok, which


def reliability(confidence: Any, correct: Any, *, bins: int = 10) -> list[ReliabilityBin]:
    """Reliability diagram: per equal-width confidence bin, the count, mean confidence and accuracy.

    Empty bins have NaN confidence and accuracy.
    """
    conf, ok, which = _binned(confidence, correct, bins)
    out = []
    for b in range(int(bins)):
        sel = which == b
        count = int(np.count_nonzero(sel))
        out.append(ReliabilityBin(b / bins, (b + 1) / bins, count,
                                  float(conf[sel].mean()) if count else math.nan,
                                  float(ok[sel].mean()) if count else math.nan))
    return out


def expected_calibration_error(confidence: Any, correct: Any, *, bins: int = 10) -> float:
    """ECE = Σ_b (n_b / N) |accuracy_b − mean confidence_b| over equal-width bins.

    Parameters
    ----------
    confidence : array_like
        Probability given to the outcome returned, per case.
    correct : array_like of bool
        Whether that outcome was right.
    bins : int
        Number of equal-width bins on [0, 1] (10 as in Guo et al. 2017).

    Examples
    --------
    >>> expected_calibration_error([0.9] * 10, [True] * 7 + [False] * 3)
    0.2
    """
    conf, ok, which = _binned(confidence, correct, bins)
    n = conf.size
    total = 0.0
    for b in np.unique(which):
        sel = which == b
        total += np.count_nonzero(sel) / n * abs(ok[sel].mean() - conf[sel].mean())
    return round(float(total), 12)


#: Targets on held-out landscapes: figure -> (bound, "min" or "max"), the verdict issue's acceptance rules.
TARGETS: dict[str, tuple[float, str]] = {
    "right_direction_among_moving": (0.90, "min"),
    "wrong_direction_among_all": (0.02, "max"),
    "stable_called_stable": (0.90, "min"),
    "stable_given_a_direction": (0.02, "max"),
    "wrong_direction_at_high_confidence": (0.0, "max"),
}


@dataclass(frozen=True)
class Scorecard:
    """How decisions fared against measured truths.

    Attributes
    ----------
    counts : dict
        ``(truth, decision) -> count``; truths a/b/stable, decisions a/b/stable/undetermined.
    shares : dict
        The figures of :data:`TARGETS` (NaN when their denominator is empty).
    n : int
        Cases scored.
    """

    counts: dict
    shares: dict
    n: int

    def met(self) -> dict:
        """Whether each target of :data:`TARGETS` is met (None when it cannot be judged)."""
        out = {}
        for name, (bound, kind) in TARGETS.items():
            v = self.shares[name]
            out[name] = None if math.isnan(v) else (v >= bound if kind == "min" else v <= bound)
        return out


def score(truth: Sequence[str], decided: Sequence[str], confidence: Sequence[float], *,
          high: float = 0.9) -> Scorecard:
    """Score decisions against truths with the figures the targets are stated in.

    Parameters
    ----------
    truth : sequence of {"a", "b", "stable"}
        Measured outcome per case.
    decided : sequence of {"a", "b", "stable", "undetermined"}
        Decision per case.
    confidence : sequence of float
        Probability of each decision.
    high : float
        Confidence from which no wrong direction is allowed.

    Examples
    --------
    >>> card = score(["a", "b", "stable", "stable"], ["a", "undetermined", "stable", "b"], [0.9, 0.6, 0.85, 0.81])
    >>> card.shares["right_direction_among_moving"], card.shares["stable_given_a_direction"]
    (0.5, 0.5)
    """
    t, d = [str(v) for v in truth], [str(v) for v in decided]
    c = np.asarray(confidence, dtype=np.float64)
    if not (len(t) == len(d) == c.size) or not t:
        raise ParameterError("truth, decisions and confidences must be non-empty and of the same length")
    if set(t) - set(CLASSES) or set(d) - {*CLASSES, "undetermined"}:
        raise ParameterError(f"truths must be among {list(CLASSES)} and decisions also 'undetermined'")
    counts: dict = {}
    for ti, di in zip(t, d):
        counts[(ti, di)] = counts.get((ti, di), 0) + 1
    moving = [i for i, ti in enumerate(t) if ti != "stable"]
    stable = [i for i, ti in enumerate(t) if ti == "stable"]
    directed = {"a", "b"}
    wrong = [i for i in range(len(t)) if d[i] in directed and d[i] != t[i]]

    def share(k: int, of: int) -> float:
        return k / of if of else math.nan

    shares = {
        "right_direction_among_moving": share(sum(d[i] == t[i] for i in moving), len(moving)),
        "wrong_direction_among_all": share(len(wrong), len(t)),
        "stable_called_stable": share(sum(d[i] == "stable" for i in stable), len(stable)),
        "stable_given_a_direction": share(sum(d[i] in directed for i in stable), len(stable)),
        "wrong_direction_at_high_confidence": share(sum(c[i] >= high for i in wrong), len(t)),
    }
    return Scorecard(counts, shares, len(t))
