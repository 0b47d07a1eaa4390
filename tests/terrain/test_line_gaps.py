"""line_gaps against brute-force distances (scipy.spatial.distance.cdist, a general-purpose reference) and geometry."""

from types import SimpleNamespace

import numpy as np
import pytest
from scipy.spatial.distance import cdist

from divides.terrain import line_gaps as module
from divides.terrain.line_gaps import line_gaps


def _line(row, col):
    return SimpleNamespace(row=np.asarray(row, float), col=np.asarray(col, float))


def test_parallel_lines_are_their_spacing_apart():
    # Two straight lines 3.5 cells apart (analytic: their distance is the spacing), a third 20 cells away.
    rows = np.arange(0.0, 30.0)
    lines = [_line(rows, np.zeros(30)), _line(rows + 0.5, np.full(30, 3.5)), _line(rows, np.full(30, 23.5))]
    i, j, gap = line_gaps(lines, 5.0)
    assert i.tolist() == [0] and j.tolist() == [1]
    assert gap[0] == pytest.approx(np.hypot(0.5, 3.5))  # the vertices are offset by half a cell along the lines
    assert line_gaps(lines, 3.0)[0].size == 0


@pytest.mark.parametrize("chunk", [7, 200_000])
def test_matches_every_pairwise_distance(monkeypatch, chunk):
    # Random walks on a small grid: every pair within the radius, with its smallest vertex distance, as cdist finds
    # them; in chunks of 7 vertices too (the chunking must not lose or duplicate pairs).
    monkeypatch.setattr(module, "_CHUNK_VERTICES", chunk)
    rng = np.random.default_rng(3)
    lines = []
    for _ in range(12):
        n = int(rng.integers(1, 15))
        start = rng.uniform(0, 40, 2)
        steps = rng.normal(0, 1, (n, 2)).cumsum(axis=0)
        lines.append(_line(start[0] + steps[:, 0], start[1] + steps[:, 1]))
    radius = 6.0
    expected = {}
    for p in range(len(lines)):
        for q in range(p + 1, len(lines)):
            d = cdist(np.column_stack([lines[p].row, lines[p].col]), np.column_stack([lines[q].row, lines[q].col]))
            if d.min() <= radius:
                expected[(p, q)] = d.min()
    i, j, gap = line_gaps(lines, radius)
    assert list(zip(i.tolist(), j.tolist())) == sorted(expected)
    assert gap == pytest.approx([expected[k] for k in sorted(expected)])
    assert 0 < len(expected) < len(lines) * (len(lines) - 1) // 2  # some pairs near, some not


def test_fewer_than_two_lines_have_no_pairs():
    assert all(a.size == 0 for a in line_gaps([], 5.0))
    assert all(a.size == 0 for a in line_gaps([_line([0, 1], [0, 0])], 5.0))
