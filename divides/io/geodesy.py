"""Cell sizes in metres for geographic (longitude/latitude) grids.

On a grid in degrees a cell is narrower toward the poles, so the width,
height and area of cells are computed per row on the CRS ellipsoid. The
formulas are the classical ones for an ellipsoid of revolution: the prime
vertical radius for parallel arcs, the meridian radius of curvature for
meridian arcs, and the closed-form area of an ellipsoidal quadrangle
(via the integral of the authalic-latitude function).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np

__all__ = ["Ellipsoid", "WGS84", "ellipsoid_from_wkt", "row_cell_sizes"]


@dataclass(frozen=True)
class Ellipsoid:
    """An ellipsoid of revolution.

    Parameters
    ----------
    a : float
        Semi-major axis in metres.
    inverse_flattening : float
        1/f; 0 (or infinity) for a sphere.
    name : str
        Label used in reports.
    """

    a: float
    inverse_flattening: float
    name: str = "unnamed"

    @property
    def f(self) -> float:
        """Flattening (0 for a sphere)."""
        if self.inverse_flattening == 0 or math.isinf(self.inverse_flattening):
            return 0.0
        return 1.0 / self.inverse_flattening

    @property
    def e2(self) -> float:
        """First eccentricity squared."""
        return self.f * (2.0 - self.f)

    @property
    def b(self) -> float:
        """Semi-minor axis in metres."""
        return self.a * (1.0 - self.f)


WGS84 = Ellipsoid(6378137.0, 298.257223563, "WGS 84")

# WKT1 says SPHEROID[...], WKT2 says ELLIPSOID[...]; both put the name, a and 1/f first.
_ELLIPSOID_RE = re.compile(
    r'(?:SPHEROID|ELLIPSOID)\s*\[\s*"([^"]*)"\s*,\s*([0-9.eE+-]+)\s*,\s*([0-9.eE+-]+)',
    re.IGNORECASE,
)


def ellipsoid_from_wkt(wkt: str) -> Ellipsoid:
    """Read the ellipsoid of a CRS from its WKT (version 1 or 2).

    Parameters
    ----------
    wkt : str
        Well-known text of a geographic or projected CRS.

    Returns
    -------
    Ellipsoid
        The ellipsoid named in the WKT, or WGS 84 when none is named.

    Examples
    --------
    >>> ellipsoid_from_wkt('GEOGCS["x",DATUM["d",SPHEROID["GRS 1980",6378137,298.257222101]]]').name
    'GRS 1980'
    """
    match = _ELLIPSOID_RE.search(wkt or "")
    if match is None:
        return WGS84
    name, a, inv_f = match.group(1), float(match.group(2)), float(match.group(3))
    if not (6.0e6 < a < 7.0e6):
        # Not an Earth ellipsoid in metres; fall back rather than produce nonsense.
        return WGS84
    return Ellipsoid(a, inv_f, name)


def _area_function(phi: np.ndarray, e: float) -> np.ndarray:
    """Integral of cos(phi)/(1 - e² sin² phi)² d phi, up to a constant."""
    s = np.sin(phi)
    if e == 0.0:
        return s
    es = e * s
    return s / (2.0 * (1.0 - es * es)) + np.log((1.0 + es) / (1.0 - es)) / (4.0 * e)


def _meridian_arc(phi1: np.ndarray, phi2: np.ndarray, ell: Ellipsoid) -> np.ndarray:
    """Meridian arc length between two latitudes (radians), 5-point Gauss-Legendre."""
    nodes, weights = np.polynomial.legendre.leggauss(5)
    half = 0.5 * (phi2 - phi1)
    mid = 0.5 * (phi2 + phi1)
    total = np.zeros(np.broadcast(phi1, phi2).shape)
    for x, w in zip(nodes, weights):
        s = np.sin(mid + half * x)
        total += w * ell.a * (1.0 - ell.e2) / (1.0 - ell.e2 * s * s) ** 1.5
    return np.abs(total * half)


def row_cell_sizes(
    lat_top: np.ndarray, lat_bottom: np.ndarray, dlon_deg: float, ellipsoid: Ellipsoid = WGS84
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Width, height and area in metres of the cells of each grid row.

    Parameters
    ----------
    lat_top, lat_bottom : ndarray
        Latitudes (degrees) of the top and bottom edges of each row.
    dlon_deg : float
        Cell width in degrees of longitude.
    ellipsoid : Ellipsoid
        The CRS ellipsoid.

    Returns
    -------
    dx, dy, area : ndarray
        East-west width at the row's central latitude (m), north-south height
        (meridian arc, m) and exact ellipsoidal area (m²) of one cell per row.
    """
    p1 = np.radians(np.asarray(lat_top, dtype=np.float64))
    p2 = np.radians(np.asarray(lat_bottom, dtype=np.float64))
    dlon = math.radians(abs(dlon_deg))
    e2 = ellipsoid.e2
    mid = 0.5 * (p1 + p2)
    prime_vertical = ellipsoid.a / np.sqrt(1.0 - e2 * np.sin(mid) ** 2)
    dx = dlon * prime_vertical * np.cos(mid)
    dy = _meridian_arc(p1, p2, ellipsoid)
    e = math.sqrt(e2)
    area = dlon * ellipsoid.b**2 * np.abs(_area_function(p1, e) - _area_function(p2, e))
    return dx, dy, area
