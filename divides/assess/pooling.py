"""Judging short divide segments on the samples of the segments that continue them.

A divide between the two sides of a range is cut, by every pair of basins facing each
other across it, into pieces too short for enough independent samples. Screening
(:mod:`divides.assess.screen`) judges such a piece on its own samples pooled with those
of the pieces that continue the same divide: a neighbour that keeps one of its basins on
the same side while the basin it brings in drains the same way as the one it replaces
(docs/methods.md §7b).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np

from divides.assess.points import DividePoints
from divides.terrain.divide_lines import DivideLine, DivideSegment
from divides.terrain.routing import FlowGraph

__all__ = ["label_outlets", "pool_short"]


def _end_tangent(line: DivideLine, last: bool, reach_cells: float = 4.0) -> np.ndarray:
    """Unit vector (row, col) from an end of a line into it, over about ``reach_cells``."""
    rows, cols = (line.row[::-1], line.col[::-1]) if last else (line.row, line.col)
    step = np.hypot(rows - rows[0], cols - cols[0])
    k = int(min(np.searchsorted(step, reach_cells), rows.size - 1))
    v = np.array([rows[k] - rows[0], cols[k] - cols[0]])
    size = float(np.hypot(*v))
    return v / size if size > 0 else v


#: Cells :func:`label_outlets` reads at a time.
_CELLS = 1 << 22


def label_outlets(flow: FlowGraph, labels: np.ndarray) -> np.ndarray:
    """(row, col) of where every label drains to (index = label; NaN for 0).

    A label that holds outlets of its own (an outlet basin; at the ``"edges"`` level a whole DEM edge's basins)
    gets their mean, each weighted by the area draining to it; a label without one (a tributary) the outlet that
    its cells finally drain to. One outlet per label gives that outlet either way; an edge's region read at one of
    its outlets could point anywhere along the edge (docs/validation.md, *Frame invariance*).
    """
    lab = labels.ravel()
    n = int(lab.max()) + 1
    out = np.full((n, 2), np.nan)
    receivers, area = flow.receivers.ravel(), flow.area.ravel()
    some_cell = np.full(n, -1, dtype=np.int64)
    sums = np.zeros((3, n))  # each label's outlets: their drainage area, and its products with row and column
    for i0 in range(0, lab.size, _CELLS):  # no index array the size of the grid
        part = lab[i0:i0 + _CELLS]
        cells = np.flatnonzero(part)
        some_cell[part[cells]] = cells + i0  # any cell of the label (what a label without outlets drains to)
        mouths = cells[receivers[i0 + cells] == i0 + cells]  # the label's own outlets in this piece
        weight = area[i0 + mouths].astype(np.float64)
        r, c = np.divmod(i0 + mouths, flow.shape[1])
        for k, w in enumerate((weight, weight * r, weight * c)):
            sums[k] += np.bincount(part[mouths], w, n)
    holds = sums[0] > 0
    out[holds] = (sums[1:, holds] / sums[0, holds]).T
    has = (some_cell >= 0) & ~holds
    has[0] = False
    # down the receivers from one cell of each other label to the outlet (its own receiver), all labels at once:
    # no grid of basin numbers is built
    cell = some_cell[has]
    for _ in range(receivers.size):  # a path visits each cell once at most
        below = receivers[cell]
        if np.array_equal(below, cell):
            break
        cell = below
    r, c = np.divmod(cell, flow.shape[1])
    out[has] = np.column_stack([r, c])
    return out


def _drains_like(outlets: np.ndarray, at: np.ndarray, old: int, new: int) -> bool:
    """True when basins ``old`` and ``new`` drain the same way from point ``at`` (outlets within 90°)."""
    u, v = outlets[old] - at, outlets[new] - at
    return bool(np.all(np.isfinite(u)) and np.all(np.isfinite(v)) and float(u @ v) > 0)


def _continues(mine: DivideSegment, theirs: DivideSegment, swapped: bool, at: np.ndarray,
               outlets: np.ndarray) -> bool:
    """A neighbour continues a divide when it keeps one of its basins on the same side and the
    basin it brings in on the other side drains the same way as the one it replaces (so a
    lateral divide between two basins of one side is never a continuation of the divide they
    share with the other side)."""
    a, b = (theirs.label_b, theirs.label_a) if swapped else (theirs.label_a, theirs.label_b)
    if a == mine.label_a and b != mine.label_b:
        return _drains_like(outlets, at, mine.label_b, b)
    if b == mine.label_b and a != mine.label_a:
        return _drains_like(outlets, at, mine.label_a, a)
    return False


def _neighbours(rows: list[dict], outlets: np.ndarray, reach_cells: float = 5.0) -> list[list[tuple[int, bool]]]:
    """The segment that continues each judged segment at either end: ``(index, swapped)`` pairs.

    At each end, the candidates are the segments with an end within ``reach_cells`` (traced
    pieces of one divide overlap or stop short by a few cells at junctions) that continue it
    (:func:`_continues`); of those, the one whose end runs on most nearly straight (end
    tangents more than 90° apart: overlapping ends of traced pieces bend a little).
    ``swapped`` when the two meet end to end or start to
    start: the neighbour's side a is then this one's side b (side a is left of a line's
    direction).
    """
    from scipy.spatial import cKDTree

    lines = [r["seg"].line for r in rows]
    ends = np.array([(ln.row[k], ln.col[k]) for ln in lines for k in (0, -1)]).reshape(-1, 2)
    tangents = np.array([_end_tangent(ln, last) for ln in lines for last in (False, True)]).reshape(-1, 2)
    tree = cKDTree(ends)
    out: list[list[tuple[int, bool]]] = [[] for _ in rows]
    for e, hits in enumerate(tree.query_ball_point(ends, reach_cells)):
        k = e // 2
        best, best_cos = None, 0.0
        for h in hits:
            if h // 2 == k:
                continue
            cos = float(tangents[e] @ tangents[h])
            swapped = (e % 2) == (h % 2)
            if cos < best_cos and _continues(rows[k]["seg"], rows[h // 2]["seg"], swapped, ends[e], outlets):
                best, best_cos = h, cos
        if best is not None and all(best // 2 != j for j, _ in out[k]):
            out[k].append((best // 2, (e % 2) == (best % 2)))
    return out


def _swap_sides(pts: DividePoints) -> DividePoints:
    """The same divide points seen from the other side (a and b exchanged)."""
    return dataclasses.replace(
        pts, cell_a=pts.cell_b, cell_b=pts.cell_a, head_a=pts.head_b, head_b=pts.head_a, ref_a=pts.ref_b,
        ref_b=pts.ref_a, normal=-pts.normal, values={k: (v[1], v[0]) for k, v in pts.values.items()})


def _pooled_points(parts: list[DividePoints]) -> DividePoints:
    """One DividePoints from several, in order; χ dropped (each pair's χ has its own base level)."""
    first = parts[0]
    cat = {f: np.concatenate([getattr(p, f) for p in parts])
           for f in ("x", "y", "distance_m", "elevation_m", "cell_a", "cell_b", "head_a", "head_b", "ref_a", "ref_b",
                     "facing", "east_m", "north_m")}
    cat["line"] = np.concatenate([np.full(p.size, k) for k, p in enumerate(parts)])
    cat["normal"] = np.concatenate([p.normal.reshape(-1, 2) for p in parts])
    values = {k: tuple(np.concatenate([p.values[k][s] for p in parts]) for s in (0, 1)) for k in first.values}
    if "chi" in values:
        values["chi"] = tuple(np.full(v.size, np.nan) for v in values["chi"])
    return dataclasses.replace(first, values=values, **cat)


def pool_short(rows: list[dict], *, outlets: np.ndarray, min_length_m: float,
               judge: Callable[[DividePoints, dict], dict]) -> list[dict]:
    """Judge every segment shorter than ``min_length_m`` on its pooled neighbourhood.

    The segment's samples are pooled with those of the segments that continue it along
    the divide (:func:`_neighbours`), nearest first along the chain, until the pooled
    stretch is at least ``min_length_m`` long or the chain ends; ``judge(points, row)``
    then gives the fields of the row judged on the pooled samples (χ left out: pairs of
    basins have their own base levels). A short segment alone has few independent
    samples, and the decision model was fitted on whole divides; the pooled verdict is
    about the stretch of divide around the segment, and ``judged_length_m`` says how long
    it was.

    Parameters
    ----------
    rows : list of dict
        Judged segments: ``seg`` (a DivideSegment) and, when it was sampled, ``pts``.
    outlets : ndarray
        :func:`label_outlets` of the basin labels.
    min_length_m : float
    judge : callable

    Returns
    -------
    list of dict
        The rows, each with ``judged_length_m``, ``judged_lines`` (the lines of the stretch it
        was judged on, its own first) and ``judged_pairs`` (their pairs of basins, each as
        (label on the segment's side a, label on its side b)); pooled ones updated by ``judge``.
    """
    judged = [i for i, r in enumerate(rows) if "pts" in r]
    sub = [rows[i] for i in judged]
    near = _neighbours(sub, outlets) if sub else []
    out = list(rows)
    for k, i in enumerate(judged):
        r = rows[i]
        length = r["seg"].line.length_m
        chain = _chain(k, sub, near, min_length_m) if length < min_length_m else [(k, False)]
        length = sum(sub[n]["seg"].line.length_m for n, _ in chain)
        segs = [(sub[n]["seg"], flip) for n, flip in chain]
        stretch = {"judged_length_m": length, "judged_lines": [s.line for s, _ in segs],
                   "judged_pairs": [(s.label_b, s.label_a) if flip else (s.label_a, s.label_b) for s, flip in segs]}
        if len(chain) == 1:
            out[i] = r | stretch
            continue
        pts = _pooled_points([_swap_sides(sub[n]["pts"]) if flip else sub[n]["pts"] for n, flip in chain])
        out[i] = r | judge(pts, r) | stretch
    return out


def _chain(k: int, rows: list[dict], near: list, min_length_m: float) -> list[tuple[int, bool]]:
    """Segment ``k`` and the segments continuing it, nearest first (longest first at equal
    distance), until their lengths reach ``min_length_m``; ``(index, swapped)`` pairs."""
    length = rows[k]["seg"].line.length_m
    chain, seen, frontier = [(k, False)], {k}, [(k, False)]
    while frontier and length < min_length_m:
        nxt = []
        for j, flip in frontier:
            for n, swap in near[j]:
                if n not in seen:
                    seen.add(n)
                    nxt.append((n, flip ^ swap))
        nxt.sort(key=lambda t: rows[t[0]]["seg"].line.length_m, reverse=True)
        for n, flip in nxt:
            if length >= min_length_m:
                break
            chain.append((n, flip))
            length += rows[n]["seg"].line.length_m
        frontier = nxt
    return chain
