"""Cells without data: holes of nodata inside a DEM's data, counted against a graph library.

A hole that does not reach the grid's edge is filled, or, told so, read like the sea (its rim drains into it;
docs/methods.md §1); either way the tool counts its cells and says so. The reference: networkx's connected
components of the 8-neighbour graph of the nodata cells (a general-purpose library), keeping those with no cell on
the grid's edge.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from divides.assess.missing_data import interior_nodata_note
from divides.terrain.voids import VoidFill, interior_holes


def interior_nodata_cells(valid: np.ndarray) -> int:
    """The tool's count of nodata cells in holes that do not reach the grid's edge (as fill_voids counts them)."""
    _, interior, counts = interior_holes(valid)
    return int(counts[interior].sum())


def _reference(valid: np.ndarray) -> int:
    rows, cols = valid.shape
    g = nx.Graph()
    nodata = list(zip(*np.nonzero(~valid)))
    g.add_nodes_from(nodata)
    for r, c in nodata:
        for dr in (-1, 0, 1):
            for dc in (-1, 0, 1):
                if (dr or dc) and 0 <= r + dr < rows and 0 <= c + dc < cols and not valid[r + dr, c + dc]:
                    g.add_edge((r, c), (r + dr, c + dc))
    on_edge = lambda cell: cell[0] in (0, rows - 1) or cell[1] in (0, cols - 1)  # noqa: E731
    return sum(len(comp) for comp in nx.connected_components(g) if not any(on_edge(cell) for cell in comp))


@settings(max_examples=60, deadline=None)
@given(arrays(bool, st.tuples(st.integers(1, 14), st.integers(1, 14)), elements=st.booleans()))
def test_interior_nodata_is_counted_as_the_graph_library_counts_it(nodata):
    valid = ~nodata
    assert interior_nodata_cells(valid) == _reference(valid)


def test_a_collar_is_not_a_hole_and_a_lake_is():
    valid = np.ones((20, 30), dtype=bool)
    valid[:3] = False  # a collar along the north edge: the DEM ends there
    assert interior_nodata_cells(valid) == 0 and interior_nodata_note(VoidFill(), valid.sum()) is None
    valid[10:13, 10:15] = False  # a lake of 15 cells inside the data
    valid[3, 4] = False  # next to the collar: part of it
    assert interior_nodata_cells(valid) == 15
    lake = VoidFill("outlets", holes=1, cells=15, largest_cells=15)
    assert "15 nodata cells inside its data" in interior_nodata_note(lake, int(valid.sum()))
    assert "drains into them" in interior_nodata_note(lake, int(valid.sum()))
