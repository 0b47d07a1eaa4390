"""Implicit hillslope diffusion against analytic solutions, a scipy sparse solve and conservation."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse
import scipy.sparse.linalg

from divides.errors import ParameterError
from divides.model import diffusion_step, simulate


def test_steady_ridge_under_uplift():
    # Standard result (common practice; e.g. hillslope textbooks): with dz/dt = U + D z'' and
    # z(±L) = 0, the steady ridge is z = U (L² - x²) / (2D). Channels off (K = 0); the
    # strip is three rows with closed north and south edges, so the problem is 1-D.
    cells, dx, uplift, diffusivity = 101, 10.0, 1e-4, 0.01
    half = (cells - 1) / 2 * dx
    z0 = np.zeros((3, cells))
    edges = {"north": "closed", "south": "closed", "west": 0.0, "east": 0.0}
    result = simulate(
        z0, cell_size=dx, duration=4e8, dt=1e7, uplift=uplift, erodibility=0.0,
        diffusivity=diffusivity, edges=edges,
    )
    x = (np.arange(cells) - (cells - 1) / 2) * dx
    expected = uplift * (half**2 - x**2) / (2 * diffusivity)
    got = result.final.elevation[1]
    assert np.max(np.abs(got - expected)) < 0.01 * expected.max()
    # measured: ~1e-12 relative (the 3-point Laplacian is exact for a parabola)
    assert np.max(np.abs(got - expected)) < 1e-6 * expected.max()


def test_gaussian_spreads_like_the_heat_kernel():
    # Analytic heat kernel (common practice): a 2-D Gaussian of variance s0² under
    # diffusivity D has variance s0² + 2Dt and peak scaled by s0² / (s0² + 2Dt).
    size, dx, diffusivity, s0, amplitude = 81, 10.0, 1.0, 50.0, 10.0
    x = (np.arange(size) - size // 2) * dx
    r2 = np.add.outer(x**2, x**2)
    z = amplitude * np.exp(-r2 / (2 * s0**2))
    total, dt = 1250.0, 5.0  # variance doubles
    for _ in range(int(total / dt)):
        z = diffusion_step(z, dt=dt, diffusivity=diffusivity, dx=dx).elevation
    s2 = s0**2 + 2 * diffusivity * total
    expected = amplitude * s0**2 / s2 * np.exp(-r2 / (2 * s2))
    assert np.max(np.abs(z - expected)) < 0.01 * expected.max()


def _reference_steady(uplift, dx, dy, diffusivity, north_level, west_level):
    """Steady state of D ∇²z + U = 0 by scipy's sparse direct solver (independent assembly).

    Layout of simulate's conventions for edges = {north: open at north_level, west: open at
    west_level, south and east: closed}: the last row and column are walls (no flux), the
    first row and column are fixed, the corner (0, 0) takes the lower level, and the
    active cells are rows 1..R-2, columns 1..C-2 (5-point finite differences).
    """
    rows, cols = uplift.shape
    fixed = np.full((rows, cols), np.nan)
    fixed[0, :] = north_level
    fixed[:, 0] = west_level
    fixed[0, 0] = min(north_level, west_level)
    act = [(r, c) for r in range(1, rows - 1) for c in range(1, cols - 1)]
    index = {rc: k for k, rc in enumerate(act)}
    a = scipy.sparse.lil_matrix((len(act), len(act)))
    b = np.zeros(len(act))
    for (r, c), k in index.items():
        b[k] = -uplift[r, c] / diffusivity
        for dr, dc, h in ((0, 1, dx), (0, -1, dx), (1, 0, dy), (-1, 0, dy)):
            rr, cc = r + dr, c + dc
            if rr == rows - 1 or cc == cols - 1:
                continue  # wall: zero flux
            a[k, k] -= 1 / h**2
            if (rr, cc) in index:
                a[k, index[(rr, cc)]] += 1 / h**2
            else:
                b[k] -= fixed[rr, cc] / h**2
    sol = scipy.sparse.linalg.spsolve(a.tocsr(), b)
    out = np.zeros((rows, cols))
    for (r, c), k in index.items():
        out[r, c] = sol[k]
    return out


def test_mixed_edges_steady_state_matches_scipy():
    # Reference: scipy.sparse.linalg.spsolve on the same finite-difference problem assembled
    # here independently (rectangular cells, two open edges at different levels, two walls,
    # uplift varying in space). Large implicit steps converge to the discrete steady state.
    rows, cols, dx, dy, diffusivity = 12, 17, 10.0, 15.0, 0.05
    rng = np.random.default_rng(5)
    uplift = 1e-4 * (0.5 + rng.random((rows, cols)))
    edges = {"north": 2.0, "west": 0.0, "south": "closed", "east": "closed"}
    result = simulate(
        np.zeros((rows, cols)), cell_size=(dx, dy), duration=2e8, dt=1e6, uplift=uplift,
        erodibility=0.0, diffusivity=diffusivity, edges=edges,
    )
    expected = _reference_steady(uplift, dx, dy, diffusivity, 2.0, 0.0)
    got = result.final.elevation
    inner = (slice(1, rows - 1), slice(1, cols - 1))
    np.testing.assert_allclose(got[inner], expected[inner], rtol=1e-8)
    # walls copy their inner neighbour (zero gradient)
    np.testing.assert_array_equal(got[-1, 1:-1], got[-2, 1:-1])
    np.testing.assert_array_equal(got[1:-1, -1], got[1:-1, -2])


def test_closed_box_conserves_volume_and_tends_to_the_mean():
    # Conservation (common practice): with no open face the volume sum A z is invariant,
    # and the steady state of diffusion in a closed box is the uniform mean.
    # Cell widths vary by row, as on a geographic grid, so the north-south faces differ
    # from row to row and any asymmetry between a face's two sides would show.
    rng = np.random.default_rng(2)
    z = rng.random((20, 25)) * 100
    dx = np.linspace(2.0, 4.0, 20)
    area = (dx * 7.0)[:, None] * np.ones(25)
    fixed = np.zeros(z.shape, dtype=bool)
    fixed[0, 0] = True  # one fixed corner touching no active cell: nothing can leave
    inner = (slice(1, -1), slice(1, -1))
    volume = np.sum(area[inner] * z[inner])
    out = z
    for dt in (0.1, 10.0, 1e4, 1e8, 1e8, 1e8):
        step = diffusion_step(out, dt=dt, diffusivity=1.0, dx=dx, dy=7.0, fixed=fixed)
        out = step.elevation
        assert step.outflow_m3 == 0.0
        # to round-off, which grows with D dt / dx² (up to ~1e7 here) through the conditioning
        assert np.sum(area[inner] * out[inner]) == pytest.approx(volume, rel=1e-12 if dt <= 1e4 else 1e-8)
    np.testing.assert_allclose(out[inner], volume / area[inner].sum(), rtol=1e-8)
    assert out[0, 3] == z[0, 3]  # walls are not updated by the step itself


def test_open_box_outflow_matches_volume_loss():
    # Conservation: what leaves the active cells through fixed faces is the volume they lose.
    rng = np.random.default_rng(3)
    z = rng.random((15, 18)) * 10
    z[3, 4] = np.nan  # an invalid cell: no flux across its faces
    step = diffusion_step(z, dt=50.0, diffusivity=0.3, dx=[2.0] * 15, dy=2.5)
    active = np.ones(z.shape, dtype=bool)
    active[0, :] = active[-1, :] = active[:, 0] = active[:, -1] = False
    active &= np.isfinite(z)
    loss = (z[active] - step.elevation[active]).sum() * 2.0 * 2.5
    assert step.outflow_m3 == pytest.approx(loss, rel=1e-10)  # solver tolerance
    assert step.outflow_m3 > 0
    assert np.isnan(step.elevation[3, 4])
    assert np.all(np.isfinite(step.elevation[active]))


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"dt": -1.0}, r"`dt` must be a positive number \(years\); got -1.0"),
        ({"diffusivity": -0.1}, r"`diffusivity` must be a finite number of m²/yr >= 0; got -0.1"),
        ({"dx": 0.0}, r"`dx` must be a positive cell size in metres"),
        ({"fixed": np.zeros((2, 2), bool)}, r"`fixed` must have the grid's shape \(5, 6\)"),
    ],
)
def test_bad_parameters_are_named(kwargs, message):
    options = {"dt": 1.0, "diffusivity": 1.0, "dx": 1.0} | kwargs
    with pytest.raises(ParameterError, match=message):
        diffusion_step(np.zeros((5, 6)), **options)
