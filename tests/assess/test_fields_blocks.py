"""The near-divide fields computed in row blocks equal the whole-grid computation.

References: numpy.gradient (central differences) and scipy.ndimage maximum/minimum filters on
the whole grid, as a general-purpose library computes them; prefix-sum means against a plain
mean over networkx's ancestors of each cell in the flow graph.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from scipy import ndimage

import divides
from divides.assess import points as P
from divides.errors import InternalError
from divides.terrain.routing import route


@pytest.mark.parametrize("shape", [(3, 7), (513, 11), (1100, 9), (1025, 6)])
def test_blocked_fields_equal_whole_grid(shape):
    rng = np.random.default_rng(shape[0])
    z = rng.normal(size=shape).cumsum(axis=0).astype(np.float32)
    z[1, 2] = np.nan  # nodata inside
    dem = divides.Dem.from_array(z, cell_size=30.0)
    flow = route(dem)
    whole = np.where(dem.valid, dem.elevation, np.nan).astype(np.float64)
    gy, gx = np.gradient(whole)
    assert np.array_equal(P.gradient_magnitude(flow), np.hypot(gx / dem.dx[:, None], gy / dem.dy[:, None]),
                          equal_nan=True)
    k = 3  # 100 m / 30 m cells
    zz = dem.elevation.astype(np.float64)
    hi = ndimage.maximum_filter(np.where(dem.valid, zz, -np.inf), size=2 * k + 1, mode="nearest")
    lo = ndimage.minimum_filter(np.where(dem.valid, zz, np.inf), size=2 * k + 1, mode="nearest")
    ref = hi - lo
    ref[~dem.valid | ~np.isfinite(ref)] = np.nan
    assert np.array_equal(P.local_relief(flow, 100.0), ref, equal_nan=True)


@pytest.mark.parametrize("holes", [False, True])
@pytest.mark.parametrize("min_area", [None, 500.0])
def test_upstream_mean_against_graph_ancestors(holes, min_area, monkeypatch):
    monkeypatch.setattr(P.UpstreamMean, "_BLOCK", 7)  # many blocks on a small grid
    rng = np.random.default_rng(7)
    dem = divides.Dem.from_array(rng.normal(size=(12, 10)).cumsum(axis=1).astype(np.float32), cell_size=10.0)
    flow = route(dem)
    field = rng.normal(size=dem.shape)
    if holes:
        field[rng.random(dem.shape) < 0.2] = np.nan
    graph = nx.DiGraph()
    rec = flow.receivers
    cells = np.flatnonzero(dem.valid.ravel())
    graph.add_nodes_from(cells)
    graph.add_edges_from((int(i), int(rec[i])) for i in cells if rec[i] >= 0 and rec[i] != i)
    if min_area is not None:  # only cells draining at least min_area can be asked about
        cells = cells[flow.area.ravel()[cells] >= min_area]
        with pytest.raises(InternalError):
            P.UpstreamMean(flow, field, min_area_m2=min_area)(np.flatnonzero(flow.area.ravel() < min_area)[:1])
    got = P.UpstreamMean(flow, field, min_area_m2=min_area)(cells)
    assert np.array_equal(got, P.UpstreamMean(flow, field)(cells), equal_nan=True)  # the same sums, bit for bit
    flat = field.ravel()
    for i, value in zip(cells, got):
        up = flat[list(nx.ancestors(graph, int(i)) | {int(i)})]
        up = up[np.isfinite(up)]
        if up.size:
            assert value == pytest.approx(up.mean(), rel=1e-12, abs=1e-12)
        else:
            assert np.isnan(value)
