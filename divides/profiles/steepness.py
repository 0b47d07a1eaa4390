"""Channel steepness: ksn from segmented χ–z fits and from smoothed slope–area."""

from __future__ import annotations

import numpy as np

__all__ = ["stream_slopes"]


def stream_slopes(distance: np.ndarray, z: np.ndarray, *, half_window_m: float) -> np.ndarray:
    """Channel gradient along one stream by a centred finite difference over a window.

    Parameters
    ----------
    distance : ndarray
        Distance (m) along the stream from its downstream end, increasing.
    z : ndarray
        Elevation (m) of the nodes.
    half_window_m : float
        Half-length of the window (m); shorter near the ends.

    Returns
    -------
    ndarray
        dz/dx (m/m) per node, positive where the stream rises upstream.

    Examples
    --------
    >>> stream_slopes(np.arange(0.0, 50.0, 10.0), np.arange(0.0, 5.0), half_window_m=10.0).tolist()
    [0.1, 0.1, 0.1, 0.1, 0.1]
    """
    d = np.asarray(distance, dtype=np.float64)
    zz = np.asarray(z, dtype=np.float64)
    lo = np.searchsorted(d, d - half_window_m, side="left")
    hi = np.searchsorted(d, d + half_window_m, side="right") - 1
    span = d[hi] - d[lo]
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(span > 0, (zz[hi] - zz[lo]) / span, np.nan)
