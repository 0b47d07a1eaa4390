"""The equilibrium divide: where χ (or steady-state elevation) balances across the divide."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from divides.assess.points import DividePoints
from divides.io.dem import Dem

__all__ = ["EquilibriumDivide", "equilibrium_divide"]


@dataclass(frozen=True, eq=False)
class EquilibriumDivide:
    """Where each divide point would sit at equilibrium.

    Attributes
    ----------
    shift_m : ndarray
        Signed horizontal distance per point, positive into side b.
    x, y : ndarray
        Shifted positions (DEM CRS).
    line : ndarray
        Divide line of each point.
    """

    shift_m: np.ndarray
    x: np.ndarray
    y: np.ndarray
    line: np.ndarray

    def summary(self) -> dict:
        """Median distance still to travel and its direction."""
        s = self.shift_m[np.isfinite(self.shift_m)]
        if s.size == 0:
            return {"median_shift_m": None, "median_distance_m": None, "toward": None}
        med = float(np.median(s))
        return {"median_shift_m": med, "median_distance_m": float(np.median(np.abs(s))),
                "toward": "b" if med > 0 else "a" if med < 0 else "none"}


def equilibrium_divide(
    dem: Dem,
    points: DividePoints,
    *,
    theta: float,
    reference_area_m2: float,
    a0_m2: float = 1.0,
    steady_ksn: tuple[float, float] | None = None,
) -> EquilibriumDivide:
    """First-order position of the equilibrium divide.

    At steady state both sides' channel heads stand at ``z_b + ksn · χ``; the
    divide drifts toward the side where that is higher (Willett et al. 2014).
    Moving the divide by Δ into side b lengthens side a's channels and
    shortens side b's by Δ, each changing χ near the divide by about
    Δ·(A0/A_h)^θ, with A_h the reference area. Balancing
    ``k_a (χ_a + Δ g) = k_b (χ_b − Δ g)`` gives
    ``Δ = (k_b χ_b − k_a χ_a) / (g (k_a + k_b))`` with ``g = (A0/A_h)^θ``;
    with equal steady-state steepness (uniform uplift and erodibility) that is
    ``(χ_b − χ_a) / (2 g)``. A linearisation: trust its direction and order
    of magnitude, not metres.

    Parameters
    ----------
    steady_ksn : (float, float), optional
        Steady-state ksn = (U/K)^(1/n) of each side when uplift or erodibility
        differ; default equal.
    """
    chi_a, chi_b = points.values["chi"]
    ka, kb = steady_ksn if steady_ksn is not None else (1.0, 1.0)
    g = (a0_m2 / reference_area_m2) ** theta
    shift = (kb * chi_b - ka * chi_a) / (g * (ka + kb))
    cell = np.clip(np.round(dem.rowcol(points.x, points.y)[0]).astype(int), 0, dem.shape[0] - 1)
    east = np.where(np.isfinite(shift), shift, 0.0) * points.normal[:, 0]
    north = np.where(np.isfinite(shift), shift, 0.0) * points.normal[:, 1]
    # move in grid units (metric cell sizes per row), then back to CRS coordinates
    frac_r = (points.y - dem.transform.f) / dem.transform.e - 0.5
    frac_c = (points.x - dem.transform.c) / dem.transform.a - 0.5
    new_c = frac_c + east / dem.dx[cell]
    new_r = frac_r - north / dem.dy[cell]
    x, y = dem.xy(new_r, new_c)
    return EquilibriumDivide(shift, np.asarray(x), np.asarray(y), points.line)
