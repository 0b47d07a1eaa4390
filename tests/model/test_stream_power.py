"""Implicit stream-power erosion against analytic steady states, knickpoint celerity and scipy root finding."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from divides import Dem, route
from divides.errors import ParameterError
from divides.model import open_edge, simulate, stream_power_step
from divides.model._stream_power_kernels import _solve_drop


def _fit_slope_area(z: np.ndarray, *, cell_size: float, min_area: float) -> tuple[float, float, int]:
    """Least-squares fit log S = log ks - theta log A on interior cells above ``min_area``.

    S is the drop to the D8 receiver over the distance to it, A the drainage
    area, both from the project's routing of the final surface.
    """
    flow = route(Dem.from_array(z, cell_size=cell_size))
    zf = z.ravel()
    rec = flow.receivers
    dist = flow.distance
    interior = np.zeros(z.shape, dtype=bool)
    interior[1:-1, 1:-1] = True
    area = flow.area.ravel()
    sel = interior.ravel() & (area >= min_area) & (dist > 0)
    slope = (zf[sel] - zf[rec[sel]]) / dist[sel]
    assert np.all(slope > 0)
    p = np.polyfit(np.log(area[sel]), np.log(slope), 1)
    return -p[0], float(np.exp(p[1])), int(sel.sum())


@pytest.mark.parametrize(
    ("m", "n", "k"),
    [
        (0.5, 1.0, 2e-5),  # linear case
        (1.0, 2.0, 2e-8),  # n > 1: convex Newton problem
        (0.35, 0.7, 1e-4),  # n < 1: concave Newton problem
    ],
)
def test_steady_state_slope_area_matches_analytic(m, n, k):
    # Whipple & Tucker 1999 (JGR 104(B8)): at steady state under uniform U and K,
    # S = (U/K)^(1/n) A^(-m/n): log-log slope -m/n, steepness (U/K)^(1/n).
    # n != 1 exercises the Newton solver (Braun & Deal 2023).
    uplift = 1e-3
    z0 = np.random.default_rng(1).random((40, 40))
    result = simulate(z0, cell_size=100.0, duration=2e7, dt=2e4, uplift=uplift, erodibility=k, m=m, n=n)
    theta, ks, count = _fit_slope_area(result.final.elevation, cell_size=100.0, min_area=1e5)
    assert count > 100
    assert abs(theta - m / n) < 0.01
    assert ks == pytest.approx((uplift / k) ** (1.0 / n), rel=0.02)
    # measured: |theta - m/n| ~ 1e-15 and ks within ~1e-14 relative (the discrete steady state is exact)


def _channel(cells: int, dx: float, uplift: float, k: float, m: float) -> np.ndarray:
    """A 3-row grid whose middle row is the analytic steady channel (west outlet, east wall).

    Each cell stands above its downstream neighbour by dx (U/K) A^(-m) with A
    the area of the cells from it to the head (Whipple & Tucker 1999, n = 1).
    """
    z = np.zeros(cells)
    for c in range(1, cells - 1):
        area = dx * dx * (cells - 1 - c)
        z[c] = z[c - 1] + dx * (uplift / k) * area ** (-m)
    z[-1] = z[-2]
    return np.vstack([z, z, z])


def test_knickpoint_moves_at_k_a0_m_in_chi():
    # Royden & Perron 2013 (JGR Earth Surface 118): for n = 1 a base-level fall travels
    # upstream at constant speed K A0^m in chi, chi = ∫ (A0/A)^(m/n) dx.
    cells, dx, uplift, k, m, drop, a0 = 100, 100.0, 1e-4, 1e-4, 0.5, 10.0, 1.0
    z_ss = _channel(cells, dx, uplift, k, m)
    flow = route(Dem.from_array(z_ss, cell_size=dx))
    chi = flow.integrate_upstream((a0 / flow.area) ** m)[1, : cells - 1]  # project's upstream integral
    times = [2e4, 5e4, 1e5]
    edges = {"north": "closed", "south": "closed", "east": "closed", "west": open_edge(elevation=-drop)}
    result = simulate(
        z_ss, cell_size=dx, duration=times[-1], dt=1000.0, uplift=uplift, erodibility=k, m=m,
        edges=edges, snapshot_times=times,
    )
    for t in times:
        lowered = result.snapshot(t).elevation[1, : cells - 1] - z_ss[1, : cells - 1]
        # knickpoint = where the profile is half-way between the lowered and the old steady state
        c = int(np.argmax(lowered[1:] > -drop / 2)) + 1
        f = (-drop / 2 - lowered[c - 1]) / (lowered[c] - lowered[c - 1])
        chi_knick = chi[c - 1] + f * (chi[c] - chi[c - 1])
        expected = k * a0**m * t
        assert abs(chi_knick - expected) <= 2 * (chi[c] - chi[c - 1])  # within 2 cells
        # measured: +0.02, +0.04, +0.07 cell (dt = 1000 yr)
        if t <= 5e4:
            # The chi-length of the lowered reach, sum of dchi * (lowered / -drop), is advected
            # exactly by the linear kinematic wave while the front is far from the head
            # (from the conservation form of dz/dt = -K A0^m dz/dchi; derived).
            dchi = np.diff(chi)
            assert np.sum(dchi * lowered[1:]) / -drop == pytest.approx(expected, rel=1e-5)


def _random_case(seed: int, shape=(25, 30)):
    rng = np.random.default_rng(seed)
    z = np.add.outer(np.linspace(0, 30, shape[0]), np.zeros(shape[1])) + 20 * rng.random(shape)
    dem = Dem.from_array(z, cell_size=(30.0, 40.0))
    return z, route(dem), rng


@pytest.mark.parametrize("n", [0.5, 1.0, 1.5, 3.0])
def test_step_solves_the_implicit_equation(n):
    # Braun & Willett 2013: each cell satisfies h - (h0 + U dt) + K A^m dt ((h - h_r)/L)^n = 0
    # with its receiver's NEW elevation, and h_r <= h <= h0 + U dt; cells not above their
    # receiver do not erode. Checked cell by cell, and each root against scipy's brentq.
    z, flow, rng = _random_case(int(n * 10))
    shape = z.shape
    m, dt = 0.45, 500.0
    k = 1e-4 * (0.5 + rng.random(shape))
    u = 1e-3 * rng.random(shape)
    runoff = 0.5 + rng.random(shape)
    area = flow.weighted_area(runoff)
    step = stream_power_step(z, flow, dt=dt, erodibility=k, m=m, n=n, uplift=u, drainage_area=area)
    h = step.elevation.ravel()
    h0 = z.ravel()
    rec = flow.receivers
    moving = np.flatnonzero(rec != np.arange(h.size))
    h_star = h0[moving] + u.ravel()[moving] * dt
    h_r = h[rec[moving]]
    coef = k.ravel()[moving] * area.ravel()[moving] ** m * dt / flow.distance[moving] ** n
    drop = np.clip(h[moving] - h_r, 0.0, None)
    residual = h[moving] - h_star + coef * drop**n
    assert np.max(np.abs(residual)) < 1e-9 * np.max(np.abs(h0))
    eroding = h_star > h_r
    assert np.all(h[moving][eroding] >= h_r[eroding])
    assert np.all(h[moving][eroding] <= h_star[eroding])
    assert np.array_equal(h[moving][~eroding], h_star[~eroding])
    assert 50 < np.count_nonzero(eroding) and np.count_nonzero(~eroding) > 0  # both branches exercised
    for i in np.flatnonzero(eroding)[:200]:
        x_star = h_star[i] - h_r[i]
        root = brentq(lambda x, i=i, xs=x_star: x - xs + coef[i] * x**n, 0.0, x_star, xtol=1e-14, rtol=1e-14)
        assert h[moving[i]] - h_r[i] == pytest.approx(root, rel=1e-9, abs=1e-11)
    # fixed cells (outlets) did not move; the volumes add up over the other cells
    assert np.array_equal(h[flow.outlets], h0[flow.outlets])
    cell = 30.0 * 40.0
    assert step.uplift_m3 == pytest.approx(np.sum(u.ravel()[moving]) * dt * cell, rel=1e-12)
    assert step.eroded_m3 == pytest.approx(np.sum(h_star - h[moving]) * cell, rel=1e-9)


@pytest.mark.parametrize("n", [0.5, 0.7, 1.5, 2.0, 3.0])
def test_newton_root_matches_brentq_over_a_wide_range(n):
    # Reference: scipy.optimize.brentq on x - x* + f x^n = 0 (Braun & Deal 2023's implicit
    # equation in the drop to the receiver), from gentle (f = 1e-8) to very strong erosion
    # (f = 1e8, roots down to ~1e-16 of x*).
    for f in np.logspace(-8, 8, 17):
        root = brentq(lambda x, f=f: x - 1.0 + f * x**n, 0.0, 1.0, xtol=1e-300, rtol=1e-15)
        assert _solve_drop(1.0, f, n) == pytest.approx(root, rel=1e-12)


def test_zero_erodibility_only_uplifts_and_zero_dt_is_refused():
    z, flow, _ = _random_case(3)
    step = stream_power_step(z, flow, dt=100.0, erodibility=0.0, uplift=2e-3)
    moving = flow.receivers != np.arange(z.size)
    np.testing.assert_allclose(step.elevation.ravel()[moving], z.ravel()[moving] + 0.2, rtol=0, atol=1e-12)
    assert step.eroded_m3 == 0.0
    with pytest.raises(ParameterError, match="`dt` must be a positive number \\(years\\); got 0"):
        stream_power_step(z, flow, dt=0.0, erodibility=1e-5)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"m": -0.1}, r"`m` \(area exponent\) must be a finite number >= 0; got -0.1"),
        ({"n": 0.0}, r"`n` \(slope exponent\) must be a finite number > 0; got 0.0"),
        ({"erodibility": -1.0}, r"`erodibility` must be a finite number >= 0"),
        ({"erodibility": np.ones((2, 2))}, r"`erodibility` must be a number or a raster of the DEM's shape"),
        ({"uplift": float("nan")}, r"`uplift` must be a finite number"),
    ],
)
def test_bad_parameters_are_named(kwargs, message):
    z, flow, _ = _random_case(4)
    options = {"dt": 10.0, "erodibility": 1e-5} | kwargs
    with pytest.raises(ParameterError, match=message):
        stream_power_step(z, flow, **options)
