"""The DEM error model against textbook properties of AR(1) / exponential covariance."""

import numpy as np
import pytest

from divides.terrain.dem_error import DEFAULT_LENGTH_CELLS, DemError


def test_profile_samples_have_the_stated_variance_and_lag_correlation():
    # AR(1) with φ: var σ², lag-k correlation φ^k (Box & Jenkins, time-series analysis).
    err = DemError(2.0, 30.0)
    d = np.arange(400) * 10.0  # φ = exp(-1/3)
    x = err.sample_profile(d, np.random.default_rng(1), size=400)
    phi = np.exp(-10.0 / 30.0)
    assert x.std() == pytest.approx(2.0, rel=0.02)
    for k in (1, 3, 6):
        r = np.mean(x[:, k:] * x[:, :-k]) / x.var()
        assert r == pytest.approx(phi ** k, abs=0.02)


def test_whitening_makes_ar1_error_independent_with_variance_sigma2():
    # Prais & Winsten (1954): the transformed series is white with the innovation scaled to σ.
    err = DemError(1.5, 25.0)
    d = np.cumsum(np.random.default_rng(2).choice([10.0, 14.142], size=300))
    x = err.sample_profile(d, np.random.default_rng(3), size=300)
    w = err.whiten(x.T, d).T
    assert w.std() == pytest.approx(1.5, rel=0.02)
    r1 = np.mean(w[:, 1:] * w[:, :-1]) / w.var()
    assert abs(r1) < 0.02


def test_effective_sample_size_matches_the_ar1_closed_form():
    # For n equally spaced AR(1) samples, var(mean) = σ²/n² [n + 2 Σ_k (n−k) φ^k]
    # (Bretherton et al. 1999); for large n, n_eff → n (1 − φ)/(1 + φ).
    phi = np.exp(-1.0 / 3.0)
    n = 500
    k = np.arange(1, n)
    closed = n * n / (n + 2 * np.sum((n - k) * phi ** k))
    err = DemError(1.0, 3.0)
    assert err.effective_sample_size(np.arange(n, dtype=float)) == pytest.approx(closed, rel=1e-9)
    assert closed == pytest.approx(n * (1 - phi) / (1 + phi), rel=0.02)
    # 2-D positions on a line give the same number; white error counts every sample.
    pts = np.c_[np.arange(n, dtype=float), np.zeros(n)]
    assert err.effective_sample_size(pts) == pytest.approx(closed, rel=1e-9)
    assert DemError(1.0, 0.0).effective_sample_size(np.arange(7.0)) == 7.0


def test_grid_samples_have_exponential_covariance():
    # The field's variance is σ² and its correlation at lag h along rows and columns is exp(−h/L).
    err = DemError(1.0, 40.0)
    rng = np.random.default_rng(4)
    f = np.stack([err.sample_grid((128, 96), (10.0, 20.0), rng) for _ in range(30)])
    assert f.std() == pytest.approx(1.0, rel=0.05)
    for lag in (1, 2, 4):
        r_rows = np.mean(f[:, lag:, :] * f[:, :-lag, :]) / f.var()
        r_cols = np.mean(f[:, :, lag:] * f[:, :, :-lag]) / f.var()
        assert r_rows == pytest.approx(np.exp(-lag * 10.0 / 40.0), abs=0.04)
        assert r_cols == pytest.approx(np.exp(-lag * 20.0 / 40.0), abs=0.04)


def test_default_length_and_bad_values():
    assert DemError.for_cell_size(1.0, 30.0).length_m == DEFAULT_LENGTH_CELLS * 30.0
    assert DemError.for_cell_size(1.0, 30.0, 50.0).length_m == 50.0
    with pytest.raises(ValueError):
        DemError(-1.0, 10.0)
    with pytest.raises(ValueError):
        DemError(1.0, float("nan"))
