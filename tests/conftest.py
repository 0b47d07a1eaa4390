"""Shared fixtures: small rasters written with rasterio itself (not with divides)."""

from __future__ import annotations

import warnings
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
import rasterio
import rasterio.errors


@pytest.fixture
def write_geotiff(tmp_path: Path) -> Callable[..., Path]:
    """Factory writing a GeoTIFF in ``tmp_path`` with plain rasterio.

    ``data`` is 2-D (one band) or 3-D (bands, rows, cols). Extra keyword
    arguments go to the rasterio profile (``compress``, ``tiled``, ...).
    """

    def _write(name: str, data: np.ndarray, *, crs=None, transform=None, nodata=None, **options) -> Path:
        data = np.asarray(data)
        bands = data[None] if data.ndim == 2 else data
        profile = {
            "driver": "GTiff",
            "count": bands.shape[0],
            "height": bands.shape[1],
            "width": bands.shape[2],
            "dtype": bands.dtype.name,
            "crs": crs,
            "nodata": nodata,
        }
        if transform is not None:
            profile["transform"] = transform
        profile.update(options)
        path = tmp_path / name
        with warnings.catch_warnings():
            # Writing a plain image (no transform) is the point of some tests.
            warnings.simplefilter("ignore", rasterio.errors.NotGeoreferencedWarning)
            with rasterio.open(path, "w", **profile) as dst:
                dst.write(bands)
        return path

    return _write
