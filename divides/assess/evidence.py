"""Evidence features: an assessment's contrasts as a fixed vector for the calibrated decision.

Every signed feature is oriented so that a positive value points toward side b
(the divide moving into b) and a negative one toward side a; mirroring a
landscape (swapping a and b) negates the signed features and leaves the
unsigned ones. A contrast without enough independent samples contributes 0
(no evidence either way).

Per near-divide metric (channel elevation, hillslope gradient, local relief,
hillslope relief; Forte & Whipple 2018):

* ``z_<metric>``: the standardised contrast, mean difference over its standard
  error (half the 95 % interval / 1.96), signed by the metric's rule and
  compressed as sign(z) log(1 + |z|) so one very precise metric cannot swamp
  the others;
* ``cons_<metric>``: its consistency along the divide (|mean| / spread,
  capped at :data:`CONSISTENCY_CAP`), with the same sign.

Then ``z_chi`` (χ's standardised contrast, the long-run tendency; never a
direction on its own, see :func:`divides.assess.verdict.decide`),
``log_n_eff`` (log of the fewest effective samples among the near-divide
metrics), ``balanced`` (share of near-divide metrics whose interval lies
within the practical threshold: the equivalence test of stability), and two
unsigned magnitudes of the near-divide evidence, ``abs_net`` (|Σ z|, evidence
that agrees on a direction) and ``abs_mean`` (mean |z|, any asymmetry at all):
a linear model needs them to tell "no difference" (stable) from "a difference
of unknown sign".

The forward run (:func:`divides.model.forward_run.forward_shift`: the divide's
shift in cells over 0.3 response times of a model run from the DEM, K unknown) adds
``fwd_shift`` (signed) and ``abs_fwd``, both log(1 + |shift| / 0.3 cell): 0.3 cell is
the shift of a divide moving at the benchmark's stability threshold, one cell per
response time, over the same 0.3 τ, so the compression starts where motion starts to
count. ``near_missing`` is 1 when no near-divide metric has enough independent
samples (its features are then 0 and the forward run speaks alone).
"""

from __future__ import annotations

import math
from collections.abc import Iterable

import numpy as np

from divides.assess.contrasts import NEAR_DIVIDE, Contrast

__all__ = ["CONSISTENCY_CAP", "FEATURES", "FORWARD_FEATURES", "FORWARD_SCALE_CELLS", "NEAR_DIVIDE", "features",
           "forward_features", "orientation", "sufficient"]

#: Consistency beyond this adds nothing (a difference 5 × its spread holds along the whole divide).
CONSISTENCY_CAP = 5.0

#: Names of the features, in the order of :func:`features`' vector.
FEATURES: tuple[str, ...] = (
    *(f"z_{m}" for m in NEAR_DIVIDE), *(f"cons_{m}" for m in NEAR_DIVIDE), "z_chi", "log_n_eff", "balanced",
    "abs_net", "abs_mean",
)

#: Names of the forward-run features (:func:`forward_features`).
FORWARD_FEATURES: tuple[str, ...] = ("fwd_shift", "abs_fwd", "near_missing")

#: The forward run's shift at the stability threshold: 1 cell per response time over 0.3 τ.
FORWARD_SCALE_CELLS = 0.3


def orientation(contrast: Contrast) -> float:
    """+1 when a positive difference (a − b) points toward b, −1 when toward a.

    A "higher ..." rule moves the divide toward the side with the higher value
    (a positive a − b points toward a); a "lower ..." rule toward the lower one.
    """
    return -1.0 if contrast.rule.startswith("higher") else 1.0


def _usable(c: Contrast | None) -> bool:
    return c is not None and c.sufficient and bool(np.all(np.isfinite(c.ci95))) and c.ci95[1] > c.ci95[0]


def _z(c: Contrast | None) -> float:
    if not _usable(c):
        return 0.0
    se = (c.ci95[1] - c.ci95[0]) / (2.0 * 1.959964)
    z = orientation(c) * c.difference / se
    return float(math.copysign(math.log1p(abs(z)), z))


def _cons(c: Contrast | None) -> float:
    if not _usable(c) or np.isnan(c.consistency):
        return 0.0
    return float(orientation(c) * np.sign(c.difference) * min(float(c.consistency), CONSISTENCY_CAP))


def sufficient(contrasts: Iterable[Contrast]) -> bool:
    """True when at least one near-divide contrast has enough independent samples for an interval."""
    return any(_usable(c) for c in contrasts if c.metric in NEAR_DIVIDE)


def features(contrasts: Iterable[Contrast]) -> dict[str, float]:
    """The evidence features of one assessment (see the module docstring), by name.

    Parameters
    ----------
    contrasts : iterable of Contrast
        The assessment's contrasts (χ and the near-divide metrics).

    Returns
    -------
    dict
        Feature name -> value, every name of :data:`FEATURES`.

    Examples
    --------
    >>> c = Contrast("hillslope_gradient", "m/m", 0.3, 0.2, 0.1, (0.05, 0.15), "b", 20, "lower hillslope gradient",
    ...              consistency=2.0, n_samples=20, n_effective=20.0)
    >>> f = features([c])  # z = 0.1 / (0.1 / (2 x 1.96)) = 3.92; log(1 + 3.92) = 1.593
    >>> round(f["z_hillslope_gradient"], 3), f["cons_hillslope_gradient"], f["z_chi"]
    (1.593, 2.0, 0.0)
    """
    by = {c.metric: c for c in contrasts}
    out: dict[str, float] = {}
    for m in NEAR_DIVIDE:
        out[f"z_{m}"] = _z(by.get(m))
    for m in NEAR_DIVIDE:
        out[f"cons_{m}"] = _cons(by.get(m))
    out["z_chi"] = _z(by.get("chi"))
    near = [by[m] for m in NEAR_DIVIDE if _usable(by.get(m))]
    out["log_n_eff"] = float(math.log(max(min(c.n_effective for c in near), 1.0))) if near else 0.0
    out["balanced"] = float(sum(c.balanced for c in near) / len(NEAR_DIVIDE))
    signed = [out[f"z_{m}"] for m in NEAR_DIVIDE]
    out["abs_net"] = float(abs(sum(signed)))
    out["abs_mean"] = float(np.mean(np.abs(signed)))
    return out


def forward_features(shift_cells: float, near_sufficient: bool) -> dict[str, float]:
    """The forward run's features (see the module docstring), by name.

    Parameters
    ----------
    shift_cells : float
        The divide's shift over the forward run's horizon, in model cells, positive into b.
    near_sufficient : bool
        Whether any near-divide metric has enough independent samples (:func:`sufficient`).

    Returns
    -------
    dict
        ``fwd_shift``, ``abs_fwd`` and ``near_missing``.

    Examples
    --------
    >>> f = forward_features(-0.3, True)  # at the threshold toward a: -log(2)
    >>> round(f["fwd_shift"], 4), round(f["abs_fwd"], 4), f["near_missing"]
    (-0.6931, 0.6931, 0.0)
    """
    v = float(shift_cells)
    if not math.isfinite(v):
        raise ValueError(f"the forward run's shift must be finite; got {shift_cells!r}")
    mag = math.log1p(abs(v) / FORWARD_SCALE_CELLS)
    return {"fwd_shift": math.copysign(mag, v), "abs_fwd": mag, "near_missing": 0.0 if near_sufficient else 1.0}
