"""One small assessment of the demo landscape, built once and written once for the report tests."""

from __future__ import annotations

from pathlib import Path

import pytest
from affine import Affine

import divides

DEMO = Path(__file__).resolve().parents[2] / "demo" / "uplands.tif"


@pytest.fixture(scope="session")
def demo_result():
    """The demo divide, without robustness re-runs (speed); an erosion rate so knickpoints get arrival times."""
    dem = divides.read_dem(DEMO)
    return divides.assess(dem, "west", "east", robustness=False, n_bootstrap=100, erosion_rate_a_mm_yr=0.2)


@pytest.fixture(scope="session")
def written(demo_result, tmp_path_factory):
    """The demo written once: (result, output folder, stages reported to progress)."""
    stages: list[str] = []
    out = demo_result.write(tmp_path_factory.mktemp("written") / "out", progress=stages.append)
    return demo_result, Path(out), stages


@pytest.fixture(scope="session")
def geographic_result():
    """The demo surface laid on a longitude/latitude grid (0.0004° × 0.0003°, about 30 × 33 m at 47° N)."""
    z = divides.read_dem(DEMO).elevation
    dem = divides.Dem.from_array(z, transform=Affine(0.0004, 0, 10.0, 0, -0.0003, 47.0), crs="EPSG:4326")
    return divides.assess(dem, "west", "east", robustness=False, n_bootstrap=100)
