"""Erosion rates from steepness, and the horizontal migration rate of the divide."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Calibration", "calibrate", "migration_rate", "PLAUSIBLE_MM_PER_YR", "step_celerity"]

#: Measured divide migration rates span about 0.001-10 mm/yr (He et al. 2024).
PLAUSIBLE_MM_PER_YR = (0.001, 10.0)


def step_celerity(k_below: np.ndarray, k_above: np.ndarray, n: float) -> np.ndarray:
    """Upstream speed in χ (m/yr per unit K) of a step from steepness k_below to k_above.

    For E = K A^m S^n a sharp change of slope travels at
    K A^m (S1^n − S2^n)/(S1 − S2); in χ (A0 = 1 m²) the area factor cancels,
    leaving (k1^n − k2^n)/(k1 − k2), which is n k^(n−1) as the step vanishes
    and 1 for n = 1 (Royden & Perron 2013).
    """
    k1 = np.asarray(k_below, dtype=np.float64)
    k2 = np.asarray(k_above, dtype=np.float64)
    if n == 1.0:
        return np.ones(np.broadcast(k1, k2).shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = (k1**n - k2**n) / (k1 - k2)
    close = np.abs(k1 - k2) <= 1e-9 * np.maximum(np.abs(k1), 1.0)
    return np.where(close, n * np.maximum(k1, 1e-300) ** (n - 1), ratio)


@dataclass(frozen=True)
class Calibration:
    """Erosion rate per side as Monte Carlo samples (m/yr), and the K behind them.

    Attributes
    ----------
    source : str
        How E was obtained: "erosion rates of both sides", "erosion rate of side a",
        "erodibility K", "dated knickpoint", or "none".
    erosion_a, erosion_b : ndarray or None
        Samples of each side's erosion rate (m/yr).
    k : ndarray or None
        Samples of K (SI units for E = K ksn^n with A0 = 1 m²).
    """

    source: str
    erosion_a: np.ndarray | None = None
    erosion_b: np.ndarray | None = None
    k: np.ndarray | None = None
    notes: list = field(default_factory=list)

    @property
    def available(self) -> bool:
        """True when erosion rates are known."""
        return self.erosion_a is not None


def calibrate(
    *,
    ksn_a: np.ndarray,
    ksn_b: np.ndarray,
    n: float,
    erosion_rate_a_mm_yr: float | None = None,
    erosion_rate_b_mm_yr: float | None = None,
    erodibility: float | None = None,
    knickpoint: dict | None = None,
    knickpoint_age_years: float | None = None,
) -> Calibration:
    """Erosion rates E = K ksn^n of both sides from whichever calibration is given.

    Parameters
    ----------
    ksn_a, ksn_b : ndarray
        Samples of each side's typical ksn (e.g. a bootstrap of the median).
    n : float
        Slope exponent.
    erosion_rate_a_mm_yr, erosion_rate_b_mm_yr : float, optional
        Measured rates (e.g. basin-averaged cosmogenic). One calibrates K, both are used directly.
    erodibility : float, optional
        K itself.
    knickpoint, knickpoint_age_years : dict and float, optional
        A knickpoint (``chi``, ``ksn_below``, ``ksn_above``) that formed at the
        common base level ``knickpoint_age_years`` ago: K = χ / (age · celerity).
    """
    ka, kb = np.asarray(ksn_a, dtype=np.float64), np.asarray(ksn_b, dtype=np.float64)
    if erosion_rate_a_mm_yr is not None and erosion_rate_b_mm_yr is not None:
        ea = np.full(ka.shape, erosion_rate_a_mm_yr * 1e-3)
        eb = np.full(kb.shape, erosion_rate_b_mm_yr * 1e-3)
        return Calibration("erosion rates of both sides", ea, eb, None)
    if erosion_rate_a_mm_yr is not None or erosion_rate_b_mm_yr is not None:
        side = "a" if erosion_rate_a_mm_yr is not None else "b"
        e = (erosion_rate_a_mm_yr if side == "a" else erosion_rate_b_mm_yr) * 1e-3
        k = e / (ka if side == "a" else kb) ** n
        return Calibration(f"erosion rate of side {side}", k * ka**n, k * kb**n, k)
    if erodibility is not None:
        k = np.full(ka.shape, float(erodibility))
        return Calibration("erodibility K", k * ka**n, k * kb**n, k)
    if knickpoint is not None and knickpoint_age_years is not None:
        c = float(step_celerity(knickpoint["ksn_below"], knickpoint["ksn_above"], n))
        k = np.full(ka.shape, knickpoint["chi"] / (knickpoint_age_years * c))
        return Calibration("dated knickpoint", k * ka**n, k * kb**n, k,
                           ["assumes the knickpoint left the common base level when it formed"])
    return Calibration("none")


def migration_rate(
    erosion_a: np.ndarray, erosion_b: np.ndarray, tan_a: np.ndarray, tan_b: np.ndarray
) -> np.ndarray:
    """Horizontal speed of a sharp crest between two planar slopes (m/yr, positive toward b).

    With side a lowered at E_a on a slope tan α_a and side b at E_b on tan α_b,
    the crest moves toward b at V = (E_a − E_b) / (tan α_a + tan α_b)
    (kinematics of two intersecting planes).
    """
    return (np.asarray(erosion_a) - np.asarray(erosion_b)) / (np.asarray(tan_a) + np.asarray(tan_b))
