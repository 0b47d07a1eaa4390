"""A model of DEM error: Gaussian, stationary, exponentially correlated in space.

Real DEM error is spatially correlated: stereo matching windows, interferometric phase
filtering, interpolation and resampling spread one error over neighbouring cells
(Hugonnet et al. 2022, Remote Sensing of Environment; Rodriguez et al. 2006 for SRTM). Treating
it as white noise makes every along-profile or along-divide sample look independent and
turns noise into "significant" knickpoints and contrasts. This module holds the one error
model every test of significance in the package uses:

    e(x) ~ N(0, σ²),   corr(e(x), e(x')) = exp(−|x − x'| / L)

the exponential (Ornstein–Uhlenbeck) covariance. Along a profile sampled at steps Δ it is an
AR(1) process with φ = exp(−Δ / L), which lets a generalised least-squares fit be done in
O(n) by prewhitening (Cochrane & Orcutt 1949; Prais & Winsten 1954 for the first point).

The default correlation length is three cells (φ ≈ 0.72 between neighbouring cells): DEM
error is shared over a few cells because every production step (matching window, filter,
resampling kernel) spans a few cells. Global studies report short correlation ranges of
one to several cells for most modern DEMs (Hugonnet et al. 2022), with a longer, weaker
component that a single divide does not resolve. Users with a measured range give it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["DemError", "DEFAULT_LENGTH_CELLS", "prewhiten"]

#: Default correlation length of DEM error, in cells (see the module docstring).
DEFAULT_LENGTH_CELLS = 3.0


def prewhiten(values: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """Prais–Winsten transform of the rows of ``values`` for AR(1) coefficients ``phi`` (φ_0 unused).

    ``w_0 = v_0``, ``w_i = (v_i − φ_i v_{i−1}) / sqrt(1 − φ_i²)`` (Prais & Winsten 1954); ``phi``
    must stay below 1.
    """
    v = np.asarray(values, dtype=float)
    shape = (-1,) + (1,) * (v.ndim - 1)
    out = v.copy()
    if v.shape[0] > 1:
        out[1:] = (v[1:] - phi[1:].reshape(shape) * v[:-1]) / np.sqrt(1.0 - phi[1:] ** 2).reshape(shape)
    return out


@dataclass(frozen=True)
class DemError:
    """Gaussian DEM error with exponential spatial correlation.

    Parameters
    ----------
    sigma_m : float
        Standard deviation of the elevation error (m); 0 means an exact DEM.
    length_m : float
        Correlation length L (m) of ``exp(−distance / L)``; 0 means white error.
    """

    sigma_m: float
    length_m: float

    def __post_init__(self) -> None:
        if not (np.isfinite(self.sigma_m) and self.sigma_m >= 0):
            raise ValueError(f"DEM error σ must be a finite number ≥ 0 m; got {self.sigma_m}")
        if not (np.isfinite(self.length_m) and self.length_m >= 0):
            raise ValueError(f"DEM error correlation length must be a finite number ≥ 0 m; got {self.length_m}")

    @classmethod
    def for_cell_size(cls, sigma_m: float, cell_size_m: float, length_m: float | None = None) -> DemError:
        """The error model with the default length (:data:`DEFAULT_LENGTH_CELLS` cells) unless given."""
        return cls(float(sigma_m), float(DEFAULT_LENGTH_CELLS * cell_size_m if length_m is None else length_m))

    def correlation(self, lag_m: np.ndarray | float) -> np.ndarray:
        """Correlation of the error at two places ``lag_m`` apart."""
        lag = np.abs(np.asarray(lag_m, dtype=float))
        if self.length_m == 0:
            return (lag == 0).astype(float)
        return np.exp(-lag / self.length_m)

    def step_correlation(self, distance_m: np.ndarray) -> np.ndarray:
        """AR(1) coefficient φ_i = corr(e_i, e_{i−1}) between successive samples of a profile.

        ``distance_m`` is the position of each sample along the profile (monotonic);
        the first entry of the result is 0.
        """
        d = np.asarray(distance_m, dtype=float)
        phi = np.zeros(d.shape)
        if d.size > 1:
            phi[1:] = self.correlation(np.diff(d))
        return phi

    def whiten(self, values: np.ndarray, distance_m: np.ndarray) -> np.ndarray:
        """Prewhiten columns of ``values`` sampled along a profile (generalised least squares).

        Applying the same transform to the response and the design matrix of a linear
        fit turns ordinary least squares into GLS under this error model (Prais &
        Winsten 1954): ``w_0 = v_0``, ``w_i = (v_i − φ_i v_{i−1}) / sqrt(1 − φ_i²)``.
        The whitened residuals of a correct model are independent with variance σ².
        """
        phi = np.minimum(self.step_correlation(distance_m), 1.0 - 1e-9)  # coincident samples: keep it finite
        return prewhiten(values, phi)

    def effective_sample_size(self, positions_m: np.ndarray) -> float:
        """Number of independent samples that ``n`` correlated samples are worth.

        n_eff = n² / Σ_ij ρ(|x_i − x_j|) — the variance of a mean of correlated samples
        equals σ² / n_eff (Bretherton et al. 1999, J. Climate). ``positions_m`` is an
        array of shape (n,) (distances along a line) or (n, 2) (map coordinates).
        """
        x = np.asarray(positions_m, dtype=float)
        n = x.shape[0]
        if n == 0:
            return 0.0
        if self.length_m == 0 or n == 1:
            return float(n)
        if x.ndim == 1:
            x = x[:, None]
        total = 0.0
        chunk = max(1, 4_000_000 // n)  # bounded memory for long divides
        for start in range(0, n, chunk):
            diff = x[start:start + chunk, None, :] - x[None, :, :]
            total += float(self.correlation(np.sqrt((diff ** 2).sum(axis=-1))).sum())
        return float(n * n / total)

    def sample_profile(self, distance_m: np.ndarray, rng: np.random.Generator, size: int | None = None) -> np.ndarray:
        """Draw error along a profile (AR(1) with the step correlations); shape (size, n) or (n,)."""
        phi = self.step_correlation(distance_m)
        n = phi.size
        shape = (1 if size is None else size, n)
        white = rng.standard_normal(shape)
        out = np.empty(shape)
        if n:
            out[:, 0] = white[:, 0]
            innov = np.sqrt(1.0 - phi ** 2)
            for i in range(1, n):
                out[:, i] = phi[i] * out[:, i - 1] + innov[i] * white[:, i]
        out *= self.sigma_m
        return out[0] if size is None else out

    def sample_grid(self, shape: tuple[int, int], cell_size_m: tuple[float, float] | float,
                    rng: np.random.Generator, dtype=np.float64) -> np.ndarray:
        """Draw a field of error on a grid (spectral synthesis of the exponential covariance).

        ``cell_size_m`` is (dy, dx) or one size. The circulant embedding is padded by
        eight correlation lengths (the covariance there is e⁻⁸ ≈ 3·10⁻⁴), so memory
        grows with the grid, not with its square.
        """
        rows, cols = shape
        dy, dx = (cell_size_m, cell_size_m) if np.isscalar(cell_size_m) else cell_size_m
        if self.sigma_m == 0:
            return np.zeros(shape, dtype=dtype)
        if self.length_m == 0:
            return (self.sigma_m * rng.standard_normal(shape)).astype(dtype)
        pad_r = int(np.ceil(8 * self.length_m / dy))
        pad_c = int(np.ceil(8 * self.length_m / dx))
        big_r, big_c = rows + pad_r, cols + pad_c
        lag_r = np.minimum(np.arange(big_r), big_r - np.arange(big_r)) * dy
        lag_c = np.minimum(np.arange(big_c), big_c - np.arange(big_c)) * dx
        cov = self.correlation(np.hypot(lag_r[:, None], lag_c[None, :]))
        spectrum = np.maximum(np.fft.rfft2(cov).real, 0.0)  # clip the small negative lobes of the embedding
        del cov
        noise = np.fft.rfft2(rng.standard_normal((big_r, big_c)))
        field = np.fft.irfft2(noise * np.sqrt(spectrum), s=(big_r, big_c))[:rows, :cols]
        return (self.sigma_m * field).astype(dtype)
