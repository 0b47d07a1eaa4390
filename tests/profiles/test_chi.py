"""χ against closed forms and scipy quadrature; weighted χ; χ carried up hillslopes."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate

from divides import Dem, route
from divides.errors import ParameterError
from divides.profiles.chi import chi_at_first_channel, chi_weights, integrate_chi


def _hack_channel(length_m=5000.0, dx=10.0, c=0.5, extra=300.0, h=0.5):
    """One channel, outlet first, whose area follows a power of distance from its top:
    A(x) = c (L + extra - x)^(1/h) (Hack's law L ~ A^h inverted; Hack 1957)."""
    x = np.arange(0.0, length_m + dx / 2, dx)
    area = c * (length_m + extra - x) ** (1.0 / h)
    down = np.arange(-1, x.size - 1)
    step = np.r_[0.0, np.diff(x)]
    return x, area, down, step, (lambda s: c * (length_m + extra - s) ** (1.0 / h))


@pytest.mark.parametrize("theta", [0.3, 0.45, 0.6])
def test_chi_matches_quadrature(theta):
    # Reference: scipy.integrate.quad of (A0/A)^θ along the channel (Perron & Royden 2013 definition).
    x, area, down, step, area_fn = _hack_channel()
    chi = integrate_chi(down, step, area, theta=theta)
    for i in (1, 50, 250, 499, x.size - 1):
        expected, _ = integrate.quad(lambda s: (1.0 / area_fn(s)) ** theta, 0.0, x[i], limit=200)
        assert chi[i] == pytest.approx(expected, rel=1e-3)


def test_chi_closed_form_for_constant_area_and_reference_area():
    # With constant A, χ = (A0/A)^θ · x exactly (closed form).
    down = np.arange(-1, 99)
    step = np.r_[0.0, np.full(99, 30.0)]
    chi = integrate_chi(down, step, np.full(100, 2.5e6), theta=0.45, a0=1e6)
    np.testing.assert_allclose(chi, (1e6 / 2.5e6) ** 0.45 * np.arange(100) * 30.0)


def test_keep_makes_base_level_nodes():
    # Nodes below the base level are excluded: χ restarts at 0 on the first kept node (by definition).
    down = np.arange(-1, 9)
    step = np.r_[0.0, np.ones(9)]
    keep = np.arange(10) >= 4
    chi = integrate_chi(down, step, np.ones(10), theta=0.5, keep=keep)
    assert np.all(np.isnan(chi[:4]))
    np.testing.assert_allclose(chi[4:], np.arange(6.0))


def test_bad_theta_and_a0():
    down = np.array([-1, 0])
    for bad in (-0.1, 3.0, float("nan")):
        with pytest.raises(ParameterError, match="theta"):
            integrate_chi(down, np.array([0.0, 1.0]), np.ones(2), theta=bad)
    with pytest.raises(ParameterError, match="a0"):
        integrate_chi(down, np.array([0.0, 1.0]), np.ones(2), theta=0.5, a0=0.0)


def test_weights_uniform_fields_change_nothing_and_runoff_scales_area():
    # Uniform runoff/erodibility/uplift normalised by their means/medians leave χ as plain χ
    # (Gelwick et al. 2024 generalised χ reduces to Perron & Royden 2013 in that case).
    rng = np.random.default_rng(2)
    dem = Dem.from_array(np.add.outer(np.arange(30.0), np.zeros(20)) + rng.random((30, 20)), cell_size=30.0)
    flow = route(dem)
    w = chi_weights(flow, runoff=np.full(dem.shape, 3.0), erodibility=np.full(dem.shape, 2e-6),
                    uplift=np.full(dem.shape, 1e-3), n=1.5)
    np.testing.assert_allclose(w.discharge, flow.area)
    np.testing.assert_allclose(w.factor, 1.0)
    # doubling runoff in the east half weights its cells double: discharge = Σ r·a over upstream cells
    r = np.ones(dem.shape)
    r[:, 10:] = 2.0
    w2 = chi_weights(flow, runoff=r)
    expected = flow.accumulate(r / r.mean() * dem.cell_area_grid())
    np.testing.assert_allclose(w2.discharge, expected)
    # K twice as high in one cell: factor (K0/K)^(1/n) = 0.5^(1/n) there (median K0)
    k = np.full(dem.shape, 1e-6)
    k[5, 5] = 2e-6
    w3 = chi_weights(flow, erodibility=k, n=2.0)
    assert w3.factor[5, 5] == pytest.approx(0.5**0.5)
    with pytest.raises(ParameterError, match="positive"):
        chi_weights(flow, erodibility=np.zeros(dem.shape))


def test_chi_carried_to_hillslopes_is_that_of_the_first_channel_cell():
    # Reference: walk each cell's receivers in plain Python until a channel cell.
    rng = np.random.default_rng(4)
    dem = Dem.from_array(np.add.outer(np.arange(25.0), np.zeros(25)) * 2 + rng.random((25, 25)) * 3, cell_size=30.0)
    flow = route(dem)
    channel = np.flatnonzero(flow.area.ravel() >= 10 * 900.0)
    chi = rng.random(channel.size)
    out = chi_at_first_channel(flow, channel, chi).ravel()
    lookup = dict(zip(channel.tolist(), chi.tolist()))
    for i in range(out.size):
        j = i
        while j not in lookup and flow.receivers[j] != j:
            j = int(flow.receivers[j])
        expected = lookup.get(j, np.nan)
        assert (np.isnan(out[i]) and np.isnan(expected)) or out[i] == expected
