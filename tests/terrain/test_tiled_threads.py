"""Routing on all threads gives the serial result bit for bit.

The reference is the same program on one thread (``numba.set_num_threads(1)`` runs every
parallel loop in order), and the plain serial sweep ``accumulate_down`` for drainage
areas. Random DEMs of few elevation levels are mostly flats and depressions, the cases
where order of work could leak into the result (common practice for routing tests).
"""

from __future__ import annotations

import numba
import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from divides import Dem, route
from divides.errors import DividesError
from divides.terrain import _routing_kernels as _k
from divides.terrain import routing


@st.composite
def rough_dems(draw):
    rows = draw(st.integers(3, 24))
    cols = draw(st.integers(3, 24))
    seed = draw(st.integers(0, 2**31 - 1))
    levels = draw(st.integers(1, 5))
    rng = np.random.default_rng(seed)
    z = rng.integers(0, levels, size=(rows, cols)).astype(np.float32) * 10.0
    if draw(st.booleans()):
        z[rng.random((rows, cols)) < 0.08] = np.nan
    geographic = draw(st.booleans())
    closed = draw(st.sampled_from([(), ("north",), ("east", "west"), ("north", "south", "east")]))
    return z, geographic, closed


def _route(z, geographic, closed, threads):
    before = numba.get_num_threads()
    numba.set_num_threads(threads)
    smallest = routing.PARALLEL_ROUTING_MIN_CELLS
    routing.PARALLEL_ROUTING_MIN_CELLS = 0  # these small grids would otherwise be routed on one thread
    try:
        if geographic:  # per-row cell sizes: drainage areas sum unequal floats, order matters
            from affine import Affine

            dem = Dem.from_array(z, transform=Affine(0.01, 0, 10.0, 0, -0.01, 60.0), crs="EPSG:4326")
        else:
            dem = Dem.from_array(z, cell_size=30.0)
        return route(dem, closed_edges=closed)
    finally:
        routing.PARALLEL_ROUTING_MIN_CELLS = smallest
        numba.set_num_threads(before)


def _routed_once(case):
    """The case routed on one thread, or None when it is too small to route (fewer than a 3 x 3 block)."""
    z, geographic, closed = case
    if np.count_nonzero(np.isfinite(z)) < 9:
        return None
    try:
        return _route(z, geographic, closed, 1)
    except DividesError:
        return None


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rough_dems())
def test_all_threads_equal_one_thread(case):
    z, geographic, closed = case
    if (one := _routed_once(case)) is None:
        return
    both = _route(z, geographic, closed, numba.config.NUMBA_NUM_THREADS)
    assert np.array_equal(one.receivers, both.receivers)
    assert np.array_equal(one.direction, both.direction)
    assert np.array_equal(one.order, both.order)
    assert one.n_flat_cells == both.n_flat_cells
    assert np.array_equal(one.area.view(np.uint64), both.area.view(np.uint64))  # bit for bit


@settings(max_examples=40, deadline=None)
@given(rough_dems(), st.integers(0, 2**31 - 1))
def test_basin_accumulation_equals_the_serial_sweep(case, seed):
    if (flow := _routed_once(case)) is None:
        return
    rows, cols = flow.shape
    rng = np.random.default_rng(seed)
    row_area = rng.random(rows) * 1e3  # irrational-looking floats: any reordering of a sum shows
    values = np.where(flow.dem.valid, row_area[:, None], 0.0).ravel()
    serial = np.zeros_like(values)
    _k.accumulate_down(flow.order, flow.receivers, values, serial)
    _, starts = routing.flow_order(flow.direction, flow.dem.valid.ravel(), rows, cols, flow.order.size)
    for threads in (1, 2, 3):  # more tasks than basins, or fewer: the same sums
        parallel = np.zeros_like(values)
        _k.accumulate_area(flow.order, flow.receivers, starts, cols, row_area, threads, parallel)
        assert np.array_equal(serial.view(np.uint64), parallel.view(np.uint64))
    # and the sum over the outlets is the total (conservation of water; common practice)
    outlets = flow.outlets
    assert np.isclose(parallel[outlets].sum(), values[flow.order].sum())


@settings(max_examples=40, deadline=None)
@given(rough_dems())
def test_order_on_threads_equals_the_receiver_list_order(case):
    # The order read from the codes, on one thread and on groups of outlets on threads, equals the
    # depth-first order over receiver lists (Braun & Willett 2013), cell for cell.
    if (flow := _routed_once(case)) is None:
        return
    rows, cols = flow.shape
    valid = flow.dem.valid.ravel()
    n_valid = int(np.count_nonzero(valid))
    reference = _k.topological_order(flow.receivers, valid, n_valid)
    outlets = np.flatnonzero(valid & (flow.receivers == np.arange(valid.size)))
    before = numba.get_num_threads()
    try:
        for threads in sorted({1, numba.config.NUMBA_NUM_THREADS}):
            numba.set_num_threads(threads)
            order, starts = routing.flow_order(flow.direction, valid, rows, cols, n_valid)
            assert np.array_equal(order, reference)
            assert order.dtype == np.int32
            # each basin is the run between two starts, led by its outlet
            assert starts[-1] == n_valid and np.array_equal(order[starts[:-1]], outlets)
    finally:
        numba.set_num_threads(before)


def test_order_stops_short_on_a_cycle():
    # two cells draining into each other are reached from no outlet: the order is short, which
    # route() reports as a cycle (common practice: a topological order exists only without cycles)
    code = np.full(9, 8, dtype=np.uint8)
    code[4] = 0  # centre drains east...
    code[5] = 4  # ...and its east neighbour back west
    order, starts = routing.flow_order(code, np.ones(9, dtype=bool), 3, 3, 9)
    assert order.size == 7 and 4 not in order and 5 not in order and starts[-1] == 7


def test_small_grids_leave_the_thread_count_as_it_was():
    # routing a grid below the parallel size runs on one thread and restores the caller's setting
    # (common practice: a library must not change global state it does not own)
    before = numba.get_num_threads()
    z = np.add.outer(np.arange(20.0), np.arange(20.0)).astype(np.float32)
    route(Dem.from_array(z, cell_size=30.0))
    assert numba.get_num_threads() == before
