"""Segmented χ–z regression and knickpoints on profiles with known breaks."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate

from divides.profiles.chi import integrate_chi
from divides.profiles.knickpoints import KNICKPOINT_ALPHA, breaks_of
from divides.profiles.segments import segment_profile

DX = 30.0
THETA = 0.45


def _channel(n=400):
    """A single channel on a 30 m grid with A = 0.5 (L + 600 - x)^2 (a Hack-type growth; Hack 1957)."""
    x = np.arange(n) * DX
    length = x[-1]
    area = 0.5 * (length + 600.0 - x) ** 2
    chi = integrate_chi(np.arange(-1, n - 1), np.r_[0.0, np.full(n - 1, DX)], area, theta=THETA)
    return x, area, chi


def test_chi_z_of_a_steady_profile_gives_ksn_within_one_percent():
    # z = ks χ at steady state (Whipple & Tucker 1999; Perron & Royden 2013) with ks = (U/K)^(1/n).
    u, k, n = 1e-3, 2e-6, 1.0
    ks = (u / k) ** (1 / n)
    x, area, chi = _channel()
    # elevations from the analytic profile S = ks A^-θ integrated with scipy (independent of χ code)
    z = np.array([integrate.quad(lambda s: ks * (0.5 * (x[-1] + 600.0 - s) ** 2) ** -THETA, 0, xi)[0] for xi in x])
    seg = segment_profile(chi, z)
    assert seg.n_segments == 1
    assert seg.slope[0] == pytest.approx(ks, rel=0.01)


def _break_profile(kind: str, rng=None, noise=0.0):
    x, area, chi = _channel()
    i_break = 230
    chi_b = chi[i_break]
    if kind == "slope":
        z = np.where(chi < chi_b, 60.0 * chi, 60.0 * chi_b + 95.0 * (chi - chi_b))
    else:
        z = 60.0 * chi + np.where(np.arange(chi.size) >= i_break, 25.0, 0.0)
    if noise:
        z = z + rng.normal(0.0, noise, z.size)
    return chi, z, i_break


@pytest.mark.parametrize("noise", [0.0, 1.0])
def test_slope_break_found_within_two_cells(noise):
    # Acceptance of the profiles issue: knickpoint within 2 cells, ksn each side within 5 %.
    chi, z, i_break = _break_profile("slope", np.random.default_rng(1), noise)
    seg = segment_profile(chi, z)
    found = [b for b in breaks_of(seg, chi, z, min_nodes=8) if b["p_value"] < KNICKPOINT_ALPHA]
    assert len(found) == 1
    kp = found[0]
    assert abs(kp["node"] - i_break) <= 2
    assert kp["kind"] == "slope-break"
    assert kp["ksn_below"] == pytest.approx(60.0, rel=0.05)
    assert kp["ksn_above"] == pytest.approx(95.0, rel=0.05)


@pytest.mark.parametrize("noise", [0.0, 1.0])
def test_step_found_within_two_cells(noise):
    chi, z, i_break = _break_profile("step", np.random.default_rng(2), noise)
    seg = segment_profile(chi, z)
    found = [b for b in breaks_of(seg, chi, z, min_nodes=8) if b["p_value"] < KNICKPOINT_ALPHA]
    assert len(found) == 1
    kp = found[0]
    assert abs(kp["node"] - i_break) <= 2
    assert kp["kind"] == "step"
    assert kp["step_m"] == pytest.approx(25.0, abs=2.0)
    assert kp["ksn_below"] == pytest.approx(60.0, rel=0.05)
    assert kp["ksn_above"] == pytest.approx(60.0, rel=0.05)


@pytest.mark.parametrize("seed", range(6))
def test_noise_gives_ksn_within_five_percent_and_no_knickpoint(seed):
    # Gaussian elevation noise of 1 m on a 30 m grid (the acceptance case).
    rng = np.random.default_rng(seed)
    x, area, chi = _channel(int(rng.integers(150, 600)))
    z = 70.0 * chi + rng.normal(0.0, 1.0, chi.size)
    seg = segment_profile(chi, z)
    assert np.all(np.abs(seg.slope / 70.0 - 1) <= 0.05)
    assert not [b for b in breaks_of(seg, chi, z, min_nodes=8) if b["p_value"] < KNICKPOINT_ALPHA]


def test_pure_noise_profiles_stay_whole():
    # The doubled-BIC penalty keeps pure Gaussian noise in one segment (see segments._criterion):
    # 300 simulated profiles of 30-800 nodes, irregular χ spacing.
    splits = 0
    for seed in range(300):
        rng = np.random.default_rng(10_000 + seed)
        n = int(rng.integers(30, 800))
        chi = np.sort(rng.uniform(0.0, 50.0, n))
        splits += segment_profile(chi, 80.0 * chi + rng.normal(0.0, 1.0, n)).n_segments > 1
    assert splits == 0
