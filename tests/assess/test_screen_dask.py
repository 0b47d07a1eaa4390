"""Screening as Dask tasks: threads, a LocalCluster by address and one worker give one result.

The reference is the plain loop on one worker (no Dask at all); the DEM is a ridge with
fractal roughness (random, seeded) so that it has many basin pairs. Equality of the
ranked segments is the check: scheduling must not change any verdict (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest

from divides import Dem
from divides.assess.screen import screen
from divides.terrain.cluster import cluster_client

OPTIONS = dict(theta=0.45, channel_area_m2=1e5, min_basin_area_m2=5e5, max_segment_m=900.0)


@pytest.fixture(scope="module")
def dem():
    # spectral synthesis of a fractal surface (power spectrum ~ k^-3.2, seeded) on a ridge
    n = 120
    rng = np.random.default_rng(0)
    k = np.hypot(np.fft.rfftfreq(n)[None, :], np.fft.fftfreq(n)[:, None])
    k[0, 0] = 1.0
    spectrum = (rng.standard_normal(k.shape) + 1j * rng.standard_normal(k.shape)) * k ** -1.6
    spectrum[0, 0] = 0.0
    z = np.fft.irfft2(spectrum, s=(n, n))
    z = (z - z.min()) / np.ptp(z) * 300.0 + 600.0 * (1.0 - np.abs(np.linspace(-1.0, 1.0, n)))[None, :]
    return Dem.from_array(z.astype(np.float32), cell_size=30.0)


def _key(result):
    return [(s["rank"], tuple(s["basins"]), s["verdict"],
             None if s["instability"] is None else round(s["instability"], 12), s["n_points"])
            for s in result.segments]


def test_threads_and_a_local_cluster_equal_one_worker(dem):
    one = screen(dem, workers=1, **OPTIONS)
    assert len(one.segments) > 3
    threads = screen(dem, workers=2, **OPTIONS)
    assert _key(threads) == _key(one)
    with cluster_client(workers=2, processes=False) as client:
        address = client.scheduler.address
        remote = screen(dem, scheduler=address, **OPTIONS)
    assert _key(remote) == _key(one)
    assert remote.parameters["workers"] == "cluster"


def test_an_unreachable_scheduler_is_one_clear_error(monkeypatch):
    import divides.terrain.cluster as cluster
    from divides.errors import ParameterError

    monkeypatch.setattr(cluster, "_CONNECT_TIMEOUT_S", 1)
    with pytest.raises(ParameterError, match="no Dask scheduler answers"):
        with cluster_client("tcp://127.0.0.1:9"):  # port 9 (discard) has no scheduler
            pass
