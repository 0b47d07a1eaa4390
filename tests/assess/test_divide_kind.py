"""Which way each basin drains (divides.assess.divide_kind) and where each label drains to (pooling.label_outlets),
read in pieces so that a DEM of 10^8 cells needs no grid-sized index arrays."""

from __future__ import annotations

import numpy as np

import divides
from divides.assess import pooling
from divides.assess.divide_kind import drainage_directions
from divides.terrain.routing import route


def test_the_directions_are_outlet_minus_centroid_over_many_row_blocks():
    # The centroid of a basin is the mean (row, col) of its cells (definition); brute force over a random label
    # grid taller than the rows read at a time (256) gives the same vectors, since sums of whole
    # row and column numbers are exact in float64 (to 1e-9 here).
    rng = np.random.default_rng(5)
    labels = rng.integers(0, 7, size=(600, 45))
    outlet_basin = np.array([0, 1, 1, 2, 3, 3, 4])  # labels 1-2 and 4-5 are tributaries of one trunk each
    outlets = rng.uniform(0, 600, size=(7, 2))
    outlets[0] = np.nan
    got = drainage_directions(labels, outlet_basin, outlets)
    rows, cols = np.indices(labels.shape)
    basin = outlet_basin[labels]
    for label in range(1, 7):
        mine = basin == outlet_basin[label]
        expected = outlets[label] - np.array([rows[mine].mean(), cols[mine].mean()])
        np.testing.assert_allclose(got[label], expected, rtol=0, atol=1e-9)


def test_each_label_drains_to_its_routed_outlet_read_in_pieces(monkeypatch):
    # label_outlets gives every label the (row, col) of the outlet its cells drain to: on a routed random surface,
    # labelled by its own basins, that is the one outlet cell of each basin (definition), whether the labels are
    # read whole or a few cells at a time.
    rng = np.random.default_rng(8)
    flow = route(divides.Dem.from_array(rng.uniform(0, 10, size=(30, 40)), cell_size=10.0))
    labels = flow.basins()
    whole = pooling.label_outlets(flow, labels)
    monkeypatch.setattr(pooling, "_CELLS", 97)
    pieces = pooling.label_outlets(flow, labels)
    np.testing.assert_array_equal(pieces, whole)
    for cell in flow.outlets:
        r, c = divmod(int(cell), 40)
        assert whole[labels[r, c]].tolist() == [r, c]
    assert np.isnan(whole[0]).all()


def test_a_label_of_many_outlets_drains_to_their_area_weighted_mean(monkeypatch):
    # A label holding several outlets (at the "edges" level, every basin draining off one edge) is read at the mean
    # of their (row, col), each weighted by the area draining to it (definition; brute force over the routed outlets),
    # whether read whole or a few cells at a time; a label of one basin keeps its outlet.
    rng = np.random.default_rng(11)
    flow = route(divides.Dem.from_array(rng.uniform(0, 10, size=(30, 40)), cell_size=10.0))
    basins = flow.basins()
    labels = np.where(basins > 0, 1 + (basins % 2), 0)  # odd and even basins: two labels of many outlets each
    labels[basins == 1] = 3  # basin 1 alone
    whole = pooling.label_outlets(flow, labels)
    monkeypatch.setattr(pooling, "_CELLS", 97)
    np.testing.assert_allclose(pooling.label_outlets(flow, labels), whole, rtol=0, atol=1e-9)
    area = flow.area.ravel()
    for label in (1, 2, 3):
        mouths = [int(c) for c in flow.outlets if labels.ravel()[c] == label]
        assert mouths
        w = area[mouths]
        rows, cols = np.divmod(np.asarray(mouths), 40)
        expected = [np.sum(w * rows) / np.sum(w), np.sum(w * cols) / np.sum(w)]
        np.testing.assert_allclose(whole[label], expected, rtol=0, atol=1e-9)
    assert len([c for c in flow.outlets if labels.ravel()[c] == 3]) == 1
