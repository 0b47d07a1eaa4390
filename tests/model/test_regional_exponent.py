"""Regional cases grown with a slope exponent n other than 1 (``build(..., n=)``): the steady steepness law."""

from __future__ import annotations

import numpy as np
import pytest

from divides import route
from divides.model.regional_benchmark import FAMILIES, build, exponent_variant


def _steepness(case) -> float:
    """Median S A^θ of the channel cells draining at least 50 cells (D8 slope to the receiver)."""
    dem = case.dem()
    flow = route(dem, closed_edges=case.closed_edges)
    area = np.asarray(flow.area, float).ravel()
    z = np.asarray(dem.elevation, float).ravel()
    to = np.asarray(flow.receivers).ravel()
    length = np.asarray(flow.distance, float).ravel()
    draining = (to >= 0) & (to != np.arange(to.size)) & (length > 0) & (area >= 50 * case.cell_size ** 2)
    slope = (z[draining] - z[to[draining]]) / length[draining]
    return float(np.median(slope * area[draining] ** case.parameters["theta"]))


def test_the_steady_steepness_follows_the_stream_power_law_for_n():
    # At steady state E = U, so K A^m S^n = U gives S A^θ = (U / K)^(1/n) with θ = m / n (Howard 1994,
    # Water Resour. Res. 30; Whipple & Tucker 1999, J. Geophys. Res. 104). The cases set K = U / ks^n, so
    # the same draws grown with n = 1 and n = 1.5 have the same steady steepness; the n = 1 case is the
    # reference, which cancels what hillslope diffusion and the grown relief add to both alike.
    index = FAMILIES.index("steady_symmetric")
    one, steep = (build(85, index, shape=(60, 48), n=n) for n in (1.0, 1.5))
    assert steep.parameters["n"] == 1.5 and steep.parameters["m"] == pytest.approx(1.5 * steep.parameters["theta"])
    assert steep.parameters["theta"] == one.parameters["theta"]  # the draws are the same
    law = [(c.parameters["U_m_per_yr"] / c.parameters["K"]) ** (1.0 / c.parameters["n"]) for c in (one, steep)]
    assert law[1] == pytest.approx(law[0], rel=1e-9)
    ratio = _steepness(steep) / _steepness(one)
    # K = U / ks (the n = 1 rule) at n = 1.5 would give (U / K)^(1/1.5), a third of the steepness here
    assert ratio == pytest.approx(1.0, abs=0.25)


def test_cases_of_another_exponent_are_cached_apart():
    assert exponent_variant(1.0) == "" and exponent_variant(1.5) == "-n1.5" and exponent_variant(2) == "-n2"
